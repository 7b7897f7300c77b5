"""Wetting-front tracking (soilwave.track_front) on synthetic repeat surveys.

Independent forward model written here (references.md, "Travel times"): air wave
x/c, ground wave x sqrt(eps_top)/c, reflection from the front
sqrt(x^2 + 4 L^2) sqrt(eps_wet)/c, head wave along the front
x/v2 + 2 L sqrt(1/v1^2 - 1/v2^2); plus a per-survey time zero and Gaussian pick
noise. Water content -> permittivity through the Topp, Davis & Annan (1980)
forward cubic, inverted with brentq (the retrieval uses the same cubic; its
published inverse differs by about 0.01 m3/m3). Front depths from Green & Ampt
(1911) solved with brentq for the sandy loam of Rawls, Brakensiek & Miller
(1983): psi 11.01 cm, K 1.09 cm/h (checked values, references.md).
"""

import math
import warnings

import numpy as np
import pytest
import xarray as xr
from scipy import constants
from scipy.optimize import brentq

import soilwave as sw
from soilwave.errors import InputError

C = constants.c * 1e-9  # m/ns
OFFSETS = np.linspace(0.4, 3.0, 8)
SIGMA = 0.4  # ns: 1/10 of the 250 MHz period (common practice: 1/10 to 1/4)
TIMES = (2.0, 4.0, 8.0, 12.0)
SANDY_LOAM = {"K": 1.09, "psi": 11.01}
THETA_I, THETA_S = 0.10, 0.40  # dtheta 0.30


def topp_theta(eps):
    return -5.3e-2 + 2.92e-2 * eps - 5.5e-4 * eps**2 + 4.3e-6 * eps**3


def topp_eps(theta):
    return brentq(lambda e: topp_theta(e) - theta, 1.0, 45.0, xtol=1e-13)


def ga_F_cm(t, K, psi, dtheta):
    a = psi * dtheta
    return brentq(lambda F: F - a * math.log1p(F / a) - K * t, 1e-12, K * t + 10 * a + 10)


def survey(eps_top, depth, rng, *, eps_below=None, refraction=False):
    x = OFFSETS
    t0 = rng.normal(1.0, 0.5)
    times = [x / C, x * math.sqrt(eps_top) / C]
    phase = ["air"] * x.size + ["ground"] * x.size
    offs = [x, x]
    if depth is not None:
        times.append(np.sqrt(x**2 + 4 * depth**2) * math.sqrt(eps_top) / C)
        phase += ["reflection"] * x.size
        offs.append(x)
    if refraction:
        v1, v2 = C / math.sqrt(eps_top), C / math.sqrt(eps_below)
        xr_ = x[x > 2 * depth * math.tan(math.asin(v1 / v2)) + 0.5]
        times.append(xr_ / v2 + 2 * depth * math.sqrt(1 / v1**2 - 1 / v2**2))
        phase += ["refraction"] * xr_.size
        offs.append(xr_)
    t = np.concatenate(times) + t0 + SIGMA * rng.standard_normal(len(phase))
    itf = [1 if p in ("reflection", "refraction") else 0 for p in phase]
    return sw.make_picks(np.concatenate(offs), t, phase, interface=itf, sigma=SIGMA)


def series(seed, *, K=SANDY_LOAM["K"], psi=SANDY_LOAM["psi"], times=TIMES):
    rng = np.random.default_rng(seed)
    dth = THETA_S - THETA_I
    depth = np.array([ga_F_cm(t, K, psi, dth) / dth / 100 for t in times])
    surveys = {-0.5: survey(topp_eps(THETA_I), None, rng)}
    for t, d in zip(times, depth, strict=True):
        surveys[float(t)] = survey(topp_eps(THETA_S), d, rng)
    applied = {t: 10 * ga_F_cm(t, K, psi, dth) for t in times}
    return surveys, depth, applied


@pytest.fixture(scope="module")
def acceptance():
    surveys, depth, applied = series(2024)
    front = sw.track_front(surveys, seed=7, applied_water_mm=applied)
    fit = sw.fit_green_ampt(front, seed=8)
    return front, depth, applied, fit


def _inside(q, truth):
    return (q.sel(quantile=0.05).values <= truth) & (truth <= q.sel(quantile=0.95).values)


def test_acceptance_sandy_loam(acceptance):
    # Issue acceptance: medians within 10 % of the true depth, truth inside the 90 %
    # band at least 3 times of 4; fitted K within a factor 2 of the truth.
    front, depth, _, fit = acceptance
    fd = front["front_depth"].sel(time=list(TIMES))
    med = fd.sel(quantile=0.5).values
    assert np.all(np.abs(med - depth) <= 0.10 * depth), (med, depth)
    assert _inside(fd, depth).sum() >= 3
    k = fit.samples["saturated_conductivity"].values
    assert 1.09 / 2 <= np.median(k) <= 1.09 * 2
    assert np.quantile(k, 0.05) <= 1.09 <= np.quantile(k, 0.95)
    assert front.attrs["sampler_converged"] == 1


def test_water_content_and_storage_change(acceptance):
    front, depth, applied, _ = acceptance
    wet_times = list(TIMES)
    # initial state: one shared value (Topp 1980 forward cubic, truth 0.10)
    assert _inside(front["water_content_below"], THETA_I)
    assert _inside(front["water_content_wet"].sel(time=wet_times), THETA_S).sum() >= 3
    # step front: dS = (theta_s - theta_i) L, mm
    ds_true = (THETA_S - THETA_I) * depth * 1000
    assert _inside(front["storage_change"].sel(time=wet_times), ds_true).sum() >= 3
    # mass balance: the applied water equals the Green-Ampt infiltration here
    rec = front["storage_recovery"].sel(time=wet_times, quantile=0.5).values
    np.testing.assert_allclose(rec, 1.0, atol=0.15)
    assert front["applied_water"].sel(time=wet_times).values.tolist() == [applied[t] for t in TIMES]
    np.testing.assert_allclose(
        front["storage_deficit"].sel(quantile=0.5).values,
        front["applied_water"].values - front["storage_change"].sel(quantile=0.5).values,
        atol=1e-9,
    )


def test_dataset_layout(acceptance):
    front = acceptance[0]
    assert front["front_depth"].dims == ("time", "quantile")
    assert front["quantile"].values.tolist() == [0.05, 0.16, 0.5, 0.84, 0.95]
    assert front["time"].values.tolist() == [-0.5, *TIMES]
    assert front["time"].attrs["units"] == "h"
    assert front["pre_wetting"].values.tolist() == [True, False, False, False, False]
    units = {
        "front_depth": "m",
        "water_content_wet": "1",
        "water_content_below": "1",
        "storage_change": "mm",
        "permittivity_wet": "1",
        "time_zero": "ns",
        "applied_water": "mm",
    }
    for name, u in units.items():
        assert front[name].attrs["units"] == u, name
        assert front[name].attrs["long_name"]
    for name in ("water_content_wet", "water_content_below"):
        assert front[name].attrs["standard_name"] == "volume_fraction_of_condensed_water_in_soil"
    # pre-wetting survey: no front, no wet layer, no storage change
    pre = front.sel(time=-0.5)
    assert float(pre["front_depth"].sel(quantile=0.5)) == 0.0
    assert np.isnan(pre["water_content_wet"].values).all()
    assert float(pre["storage_change"].sel(quantile=0.95)) == 0.0
    # draws
    n = front.sizes["sample"]
    assert 500 <= n <= 2000
    assert front["front_depth_samples"].dims == ("sample", "time")
    assert front["water_content_below_samples"].dims == ("sample",)
    q = np.quantile(front["front_depth_samples"].sel(time=4.0), 0.5)
    assert q == pytest.approx(float(front["front_depth"].sel(time=4.0, quantile=0.5)))
    assert "track_front" in front.attrs["history"]
    assert "Topp" in front.attrs["petrophysical_model"]
    assert front.attrs["sampler_rhat_max"] < 1.01
    assert "site calibration" in front.attrs["caution"]


def test_netcdf_round_trip(acceptance, tmp_path):
    front = acceptance[0]
    f = sw.write_timelapse(front, tmp_path / "front.nc")
    back = xr.open_dataset(f, engine="h5netcdf")
    np.testing.assert_allclose(back["front_depth"].values, front["front_depth"].values)
    assert back["storage_change"].attrs["units"] == "mm"
    assert back["water_content_wet"].attrs["standard_name"] == (
        "volume_fraction_of_condensed_water_in_soil"
    )
    assert back["pre_wetting"].values.astype(bool).tolist() == front["pre_wetting"].values.tolist()
    assert "write_timelapse" in back.attrs["history"]
    back.close()
    with pytest.raises(sw.OutputExistsError, match="pass overwrite=True"):
        sw.write_timelapse(front, f)
    assert [p.name for p in tmp_path.iterdir()] == ["front.nc"]


@pytest.mark.slow
def test_coverage_over_several_series(acceptance):
    # Five more series (20 surveys) plus the acceptance series (24 in all). A
    # calibrated 90 % band contains the truth with probability 0.9 per survey;
    # we require >= 19 of 24 (79 %): P(X <= 18 | n = 24, p = 0.9) = 2.8 %.
    # Fitted K: its 90 % interval contains the truth in >= 4 of 6 series
    # (P(X <= 3 | 6, 0.9) = 1.6 %).
    front0, depth0, _, fit0 = acceptance
    inside = list(_inside(front0["front_depth"].sel(time=list(TIMES)), depth0))
    k_hits = [np.quantile(fit0.samples["saturated_conductivity"], 0.05) <= 1.09]
    k_hits[-1] &= 1.09 <= np.quantile(fit0.samples["saturated_conductivity"], 0.95)
    for s in range(5):
        surveys, depth, _ = series(500 + s)
        front = sw.track_front(surveys, seed=s, keep_samples=True)
        inside += list(_inside(front["front_depth"].sel(time=list(TIMES)), depth))
        k = sw.fit_green_ampt(front, seed=s).samples["saturated_conductivity"].values
        k_hits.append(np.quantile(k, 0.05) <= 1.09 <= np.quantile(k, 0.95))
    assert sum(inside) >= 19, inside
    assert sum(k_hits) >= 4, k_hits


def test_head_waves_constrain_the_soil_below_without_a_pre_wetting_survey():
    # No pre-wetting survey: the permittivity below the front comes from head waves
    # along the front (refraction, interface 1), shared by both surveys.
    rng = np.random.default_rng(5)
    eb, ew = topp_eps(0.08), topp_eps(0.35)
    surveys = {
        3.0: survey(ew, 0.25, rng, eps_below=eb, refraction=True),
        6.0: survey(ew, 0.35, rng, eps_below=eb, refraction=True),
    }
    with pytest.warns(sw.SoilwaveWarning, match="no pre-wetting survey"):
        front = sw.track_front(surveys, seed=3, keep_samples=False)
    q = front["permittivity_below"]
    assert float(q.sel(quantile=0.05)) <= eb <= float(q.sel(quantile=0.95))
    assert float(q.sel(quantile=0.95) - q.sel(quantile=0.05)) < 2.0
    assert "sample" not in front.dims


def test_survey_set_input_and_seed(tmp_path):
    rng = np.random.default_rng(9)
    sw.write_picks(survey(topp_eps(0.12), None, rng), tmp_path / "before.csv")
    sw.write_picks(survey(topp_eps(0.33), 0.3, rng), tmp_path / "after.csv")
    (tmp_path / "survey_set.toml").write_text(
        '[survey_set]\nreference_time = "2024-05-02T08:00:00"\n\n'
        '[[surveys]]\nfile = "before.csv"\ntimestamp = "2024-05-02T07:30:00"\npre_wetting = true\n'
        '\n[[surveys]]\nfile = "after.csv"\ntimestamp = "2024-05-02T11:00:00"\n'
        "applied_water_mm = 30\n"
    )
    ss = sw.read_survey_set(tmp_path)
    a = sw.track_front(ss, seed=4)
    # same seed, same draws (short chains: a convergence warning is expected)
    with pytest.warns(sw.ConvergenceWarning):
        b1 = sw.track_front(ss, seed=5, max_steps=100)
    with pytest.warns(sw.ConvergenceWarning):
        b2 = sw.track_front(ss, seed=5, max_steps=100)
    np.testing.assert_array_equal(
        b1["front_depth_samples"].values, b2["front_depth_samples"].values
    )
    np.testing.assert_array_equal(
        b1["water_content_below_samples"].values, b2["water_content_below_samples"].values
    )
    assert a["time"].values.tolist() == [-0.5, 3.0]
    assert str(a["timestamp"].values[1]).startswith("2024-05-02T11:00")
    assert a["applied_water"].values.tolist() == [0.0, 30.0]
    assert float(a["front_depth"].sel(time=3.0, quantile=0.5)) == pytest.approx(0.3, rel=0.1)
    assert "read_survey_set" in a.attrs["history"] and "track_front" in a.attrs["history"]


def test_input_errors():
    rng = np.random.default_rng(0)
    dry = survey(6.0, None, rng)
    wet = survey(20.0, 0.3, rng)
    with pytest.raises(InputError, match=r"survey at 2 h has no reflection picks"):
        sw.track_front({0.0: dry, 2.0: dry})
    with pytest.raises(
        InputError, match=r"survey at 0 h is flagged pre_wetting but has reflection"
    ):
        sw.track_front({0.0: wet, 2.0: wet})
    with pytest.raises(InputError, match="every survey is flagged pre_wetting"):
        sw.track_front({-1.0: dry, 0.0: dry})
    deep = wet.copy(deep=True)
    deep["interface"].values[-1] = 2
    with pytest.raises(InputError, match="from interface 2; the step-front model has one"):
        sw.track_front({0.0: dry, 2.0: deep})
    with pytest.raises(InputError, match=r"applied_water_mm gives times \[5.0\] h"):
        sw.track_front({0.0: dry, 2.0: wet}, applied_water_mm={5.0: 10.0})
    with pytest.raises(InputError, match="applied_water_mm must be >= 0"):
        sw.track_front({0.0: dry, 2.0: wet}, applied_water_mm=-4)
    with pytest.raises(InputError, match="not a survey set"):
        sw.track_front(xr.Dataset({"a": ("time", [1.0])}))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        with pytest.raises(InputError, match="non-empty mapping"):
            sw.track_front({})
