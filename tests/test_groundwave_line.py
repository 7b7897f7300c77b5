"""Water content along lines from fixed-offset air and ground waves (soilwave.groundwave_line).

Independent forward model written here: air wave t0 + x/c, ground wave
t0 + x sqrt(eps)/c (references.md, "Travel times"); water content through the
Topp et al. (1980) forward cubic, inverted for the synthetic truth with brentq.
"""

import warnings

import numpy as np
import pytest
from scipy import constants
from scipy.optimize import brentq

import soilwave as sw
from soilwave.errors import InputError, RangeWarning

C = constants.c * 1e-9  # m/ns, CODATA


def topp_theta(eps):
    # Topp, Davis & Annan (1980) forward cubic
    return -5.3e-2 + 2.92e-2 * eps - 5.5e-4 * eps**2 + 4.3e-6 * eps**3


def topp_eps(theta):
    return brentq(lambda e: topp_theta(e) - theta, 1.0, 45.0, xtol=1e-13)


def line(eps, *, x=1.5, sigma=0.2, rng=None, t0=2.0, freq=250.0, survey_time=None):
    eps = np.asarray(eps, float)
    n = eps.size
    pos = np.arange(n, dtype=float) * 0.5
    ta = t0 + x / C + np.zeros(n)
    tg = t0 + x * np.sqrt(eps) / C
    if rng is not None:
        ta = ta + sigma * rng.standard_normal(n)
        tg = tg + sigma * rng.standard_normal(n)
    kw = {}
    if survey_time is not None:
        kw["survey_time"] = np.full(2 * n, survey_time)
    return sw.make_picks(
        np.full(2 * n, x),
        np.r_[ta, tg],
        ["air"] * n + ["ground"] * n,
        sigma=sigma,
        position=np.r_[pos, pos],
        frequency_mhz=freq,
        **kw,
    )


def test_derived_travel_time_check():
    # references.md (derived): x 1 m, air 3.3356 ns, ground (e 9) 10.0069 ns.
    p = sw.make_picks(
        [1.0, 1.0], [3.3356, 10.0069], ["air", "ground"], sigma=1e-3, position=[0.0, 0.0]
    )
    wc = sw.groundwave_water_content(p, frequency_mhz=250.0, seed=0)
    assert wc["permittivity"].sel(quantile=0.5).item() == pytest.approx(9.0, abs=2e-3)
    assert wc["velocity"].sel(quantile=0.5).item() == pytest.approx(0.0999, abs=1e-4)
    # Topp (1980) derived check value: e 10 -> theta 0.1883 (references.md)
    assert topp_theta(10.0) == pytest.approx(0.1883, abs=1e-4)


def test_recovery_and_coverage_along_a_line():
    # 200 positions, water content 0.10-0.35; truth inside the 90 % interval in at
    # least 85 % of positions (a calibrated interval misses 10 %; with n = 200 the
    # binomial sd is 2.1 %, so 85 % is 2.4 sd below 90 %), fixed seed.
    rng = np.random.default_rng(11)
    theta = np.linspace(0.10, 0.35, 200)
    eps = np.array([topp_eps(t) for t in theta])
    wc = sw.groundwave_water_content(line(eps, rng=rng), seed=3, n_draws=4000)
    q = wc["water_content"]
    inside = (q.sel(quantile=0.05).values <= theta) & (theta <= q.sel(quantile=0.95).values)
    assert inside.mean() >= 0.85
    err = q.sel(quantile=0.5).values - theta
    assert abs(err.mean()) < 0.005
    assert (
        wc["water_content"].attrs["standard_name"] == "volume_fraction_of_condensed_water_in_soil"
    )
    assert wc["water_content"].attrs["units"] == "1"
    assert wc["velocity"].attrs["units"] == "m/ns"
    assert "groundwave_water_content" in wc.attrs["history"]
    assert "time" not in wc.dims


def test_monte_carlo_spread_matches_linear_propagation():
    # eps = (1 + c dt / x)^2, so sd(eps) ~ 2 (1 + c dt/x) (c/x) sqrt(sg^2 + sa^2)
    # for small errors (first-order propagation, derived).
    x, s, eps = 2.0, 0.05, 16.0
    wc = sw.groundwave_water_content(line([eps], x=x, sigma=s), seed=5, n_draws=20000)
    q = wc["permittivity"].isel(position=0)
    sd_mc = float(q.sel(quantile=0.84) - q.sel(quantile=0.16)) / 2
    sd_lin = 2 * np.sqrt(eps) * (C / x) * np.hypot(s, s)
    assert sd_mc == pytest.approx(sd_lin, rel=0.05)


def test_separation_warning_and_minimum_separation():
    # 100 MHz: period 10 ns. eps 9 at x = 0.5 m: dt = x (sqrt(eps) - 1)/c = 3.34 ns < 10 ns.
    # x_min = T c / (sqrt(eps) - 1) = 10 * 0.29979 / 2 = 1.499 m (common practice: one period).
    with pytest.warns(RangeWarning, match=r"Minimum separation.*: 1\.5 m"):
        wc = sw.groundwave_water_content(line([9.0, 9.0], x=0.5, sigma=0.01, freq=100.0), seed=1)
    assert not wc["separable"].values.any()
    assert float(wc["min_separation"][0]) == pytest.approx(10 * C / 2, rel=1e-3)
    assert sw.groundwave_min_separation(9.0, 100.0) == pytest.approx(1.49896, rel=1e-4)
    # at x_min the arrival difference is exactly one period (derived)
    xm = sw.groundwave_min_separation(16.0, 250.0)
    assert xm * (4.0 - 1.0) / C == pytest.approx(1000 / 250.0)
    assert np.isinf(sw.groundwave_min_separation(1.0, 250.0))
    # at 2 m the waves are 13.3 ns apart: no warning
    with warnings.catch_warnings():
        warnings.simplefilter("error", RangeWarning)
        wc = sw.groundwave_water_content(line([9.0], x=2.0, sigma=0.01, freq=100.0), seed=1)
    assert wc["separable"].values.all()
    # a half-period criterion is looser
    with warnings.catch_warnings():
        warnings.simplefilter("error", RangeWarning)
        sw.groundwave_water_content(
            line([9.0], x=1.0, sigma=0.01, freq=100.0), seed=1, period_fraction=0.5
        )


def test_sampling_depth_is_half_a_wavelength():
    # compared with soilwave.wavelength (lossless: v / f), an independent module
    d = sw.groundwave_sampling_depth(np.array([4.0, 9.0, 25.0]), 250.0)
    np.testing.assert_allclose(d, 0.5 * np.array([sw.wavelength(e, 250.0) for e in (4, 9, 25)]))
    wc = sw.groundwave_water_content(line([9.0], x=1.5, sigma=0.01), seed=0)
    assert float(wc["sampling_depth"][0]) == pytest.approx(0.5 * C / 3 / 0.25, rel=1e-3)
    assert "half a wavelength" in wc.attrs["sampling_depth_note"]


def test_repeated_lines_give_position_time_grid():
    rng = np.random.default_rng(2)
    dry = np.array([topp_eps(0.12)] * 6)
    wet = np.array([topp_eps(0.30)] * 4)  # the later line is shorter
    lines = {0.0: line(dry, rng=rng), 5.0: line(wet, rng=rng)}
    wc = sw.groundwave_water_content(lines, seed=4, keep_samples=True, n_draws=1000)
    assert wc["water_content"].dims == ("position", "time", "quantile")
    assert wc["time"].values.tolist() == [0.0, 5.0]
    assert wc.sizes["position"] == 6
    med = wc["water_content"].sel(quantile=0.5)
    assert np.isnan(med.sel(time=5.0).values[4:]).all()
    np.testing.assert_allclose(med.sel(time=0.0).values, 0.12, atol=0.03)
    np.testing.assert_allclose(med.sel(time=5.0).values[:4], 0.30, atol=0.03)
    assert wc["water_content_samples"].shape == (1000, 6, 2)
    # the same from one table with survey_time, and from a survey set
    one = sw.merge_picks(line(dry, survey_time=0.0), line(wet, survey_time=5.0))
    wc2 = sw.groundwave_water_content(one, seed=4)
    assert wc2["time"].values.tolist() == [0.0, 5.0]
    ss = sw.survey_set_from_picks({0.0: line(dry), 5.0: line(wet)})
    wc3 = sw.groundwave_water_content(ss, seed=4)
    assert wc3.sizes["position"] == 6 and wc3.sizes["time"] == 2


def test_seed_reproducible_and_netcdf(tmp_path):
    p = line(np.full(5, 12.0), rng=np.random.default_rng(0))
    a = sw.groundwave_water_content(p, seed=9)
    b = sw.groundwave_water_content(p, seed=9)
    np.testing.assert_array_equal(a["water_content"].values, b["water_content"].values)
    f = sw.write_timelapse(a, tmp_path / "line.nc")
    import xarray as xr

    back = xr.open_dataset(f, engine="h5netcdf")
    np.testing.assert_allclose(back["water_content"].values, a["water_content"].values)
    assert back["water_content"].attrs["standard_name"] == (
        "volume_fraction_of_condensed_water_in_soil"
    )
    back.close()
    with pytest.raises(sw.OutputExistsError, match="output exists"):
        sw.write_timelapse(a, f)
    sw.write_timelapse(a, f, overwrite=True)
    assert sorted(p.name for p in tmp_path.iterdir()) == ["line.nc"]


def test_errors():
    p = line([9.0, 10.0])
    with pytest.raises(InputError, match="no 'position' variable"):
        sw.groundwave_water_content(p.drop_vars("position"), seed=0)
    with pytest.warns(sw.SoilwaveWarning, match="duplicate pick"):
        two_air = sw.merge_picks(p, p.isel(pick=[0]))
    with pytest.raises(InputError, match=r"position 0 m: expected one air and one ground pick"):
        sw.groundwave_water_content(two_air, seed=0)
    q = p.copy(deep=True)
    q["offset"].values[2] = 2.0
    with pytest.raises(InputError, match=r"position 0 m: air pick offset 1.5 m and ground"):
        sw.groundwave_water_content(q, seed=0)
    nof = p.copy()
    nof.attrs = {}
    with pytest.raises(InputError, match="frequency_mhz is needed"):
        sw.groundwave_water_content(nof, seed=0)
    with pytest.raises(InputError, match="n_draws must be an integer >= 10"):
        sw.groundwave_water_content(p, n_draws=3)
    with pytest.raises(InputError, match="lines must be a pick table"):
        sw.groundwave_water_content([1, 2])
