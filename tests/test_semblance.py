"""Tests of soilwave.semblance: spectra, maxima, Dix intervals.

Synthetic gathers here are built in the tests with their own formulas (Ricker
wavelets at hyperbolic times), not with soilwave's synthetic module.
"""

from __future__ import annotations

import numpy as np
import pytest
import xarray as xr
from scipy import constants

import soilwave as sw
from soilwave.errors import InputError
from soilwave.gather import gather_from_array
from soilwave.semblance import _semblance_sums, _window_ratio

C = constants.c * 1e-9  # m/ns, CODATA


def ricker(t, f_mhz):
    """Ricker wavelet (peak frequency f) centred at t = 0; t in ns."""
    u = (np.pi * f_mhz * 1e-3 * t) ** 2
    return (1.0 - 2.0 * u) * np.exp(-u)


def hyperbola_gather(events, *, x, dt=0.2, n=400, f=200.0, noise=0.0, seed=0):
    """Gather with Ricker reflections at sqrt(t0^2 + x^2/v^2) for (t0, v, amp) events."""
    t = np.arange(n) * dt
    data = np.zeros((x.size, n))
    for t0, v, amp in events:
        data += amp * ricker(t[None, :] - np.sqrt(t0**2 + (x[:, None] / v) ** 2), f)
    data += noise * np.random.default_rng(seed).standard_normal(data.shape)
    return gather_from_array(data, offsets=x, dt_ns=dt, frequency_mhz=f)


# --- semblance: definition (Neidell & Taner 1971) -------------------------------------


def test_identical_traces_have_semblance_one():
    # Neidell & Taner (1971): S = 1 for identical traces. With a very large
    # trial velocity the hyperbolic times equal t0 on every trace.
    rng = np.random.default_rng(3)
    trace = rng.standard_normal(200)
    g = gather_from_array(
        np.tile(trace, (12, 1)), offsets=np.arange(1.0, 13.0), dt_ns=0.5, frequency_mhz=100.0
    )
    s = sw.semblance(g, velocities=[1e9], window_ns=2.0)
    assert np.allclose(s.values[:, 0], 1.0, atol=1e-6)


def test_scaled_traces_semblance_formula():
    # Two traces a and 2a: per sample (a + 2a)^2 / (2 (a^2 + 4 a^2)) = 9/10
    # (derived from the Neidell & Taner 1971 definition).
    rng = np.random.default_rng(4)
    a = rng.standard_normal(100)
    g = gather_from_array(np.vstack([a, 2 * a]), offsets=[1.0, 2.0], dt_ns=1.0, frequency_mhz=100.0)
    s = sw.semblance(g, velocities=[1e9], window_ns=0.0)
    assert np.allclose(s.values[:, 0], 0.9, atol=1e-6)


@pytest.mark.parametrize("window_ns", [0.0, 1.25, 5.0])
def test_noise_semblance_is_about_one_over_m(window_ns):
    # Neidell & Taner (1971): uncorrelated noise gives S of about 1/M.
    # Tolerance 10 % on the mean over the spectrum (seeded).
    m = 24
    rng = np.random.default_rng(5)
    g = gather_from_array(
        rng.standard_normal((m, 600)),
        offsets=np.linspace(0.2, 4.8, m),
        dt_ns=0.2,
        frequency_mhz=200.0,
    )
    s = sw.semblance(
        g,
        velocities=np.linspace(0.05, 0.25, 21),
        t0=np.arange(5.0, 100.0, 0.2),
        window_ns=window_ns,
    )
    assert abs(float(s.mean()) * m - 1.0) < 0.10


def test_vectorised_matches_loop_reference():
    # Independent straightforward implementation: loops with np.interp per trace.
    x = np.linspace(0.3, 3.0, 7)
    g = hyperbola_gather([(20.0, 0.1, 1.0)], x=x, n=200, noise=0.1, seed=6)
    vel = np.array([0.08, 0.1, 0.13])
    t = g["time"].values
    t0 = t[::7]
    num, den = _semblance_sums(g.values, x, 0.0, 0.2, t0, vel)
    s_vec = _window_ratio(num, den, 0)
    ref = np.zeros_like(s_vec)
    for j, v in enumerate(vel):
        for k, tk in enumerate(t0):
            a = [
                np.interp(np.sqrt(tk**2 + (xi / v) ** 2), t, g.values[i], left=0, right=0)
                for i, xi in enumerate(x)
            ]
            e = x.size * np.sum(np.square(a))
            ref[k, j] = np.sum(a) ** 2 / e if e > 0 else 0.0
    assert np.allclose(s_vec, ref, atol=1e-4)  # the kernel interpolates in float32


@pytest.mark.parametrize(
    ("t0", "v", "xmax", "seed"),
    [(20.0, 0.1, 4.0, 0), (30.0, 0.08, 3.0, 1), (40.0, 0.12, 5.0, 2), (25.0, 0.06, 2.5, 3)],
)
def test_peak_at_true_t0_and_vrms(t0, v, xmax, seed):
    # Maximum of the spectrum at the hyperbola's (t0, V_rms); tolerance 0.6 ns
    # (3 samples, about 1/8 period) and 3 % in velocity, and inside 2 sigma of
    # the half-maximum width.
    x = np.linspace(0.2, xmax, 24)
    g = hyperbola_gather([(t0, v, 1.0)], x=x, n=500, noise=0.1, seed=seed)
    p = sw.pick_semblance(sw.semblance(g))
    assert p.sizes["interface"] == 1
    assert abs(float(p.t0[0]) - t0) < 0.6
    assert abs(float(p.v_rms[0]) - v) < 0.03 * v
    assert abs(float(p.t0[0]) - t0) < 2 * float(p.t0_sigma[0])
    assert abs(float(p.v_rms[0]) - v) < 2 * float(p.v_rms_sigma[0])
    assert not bool(p.width_truncated[0])


def test_two_events_ordered_in_time_with_sensible_widths():
    x = np.linspace(0.2, 4.0, 24)
    g = hyperbola_gather([(40.0, 0.08, 0.7), (18.0, 0.11, 1.0)], x=x, n=500, noise=0.05)
    s = sw.semblance(g)
    p = sw.pick_semblance(s)
    assert p.sizes["interface"] == 2
    assert np.all(np.diff(p.t0.values) > 0)
    assert np.allclose(p.t0.values, [18.0, 40.0], atol=0.6)
    assert np.allclose(p.v_rms.values, [0.11, 0.08], rtol=0.03)
    assert np.all(np.isfinite(p.v_rms_sigma.values) & (p.v_rms_sigma.values > 0))
    assert np.all(np.isfinite(p.t0_sigma.values) & (p.t0_sigma.values > 0))
    assert s.dims == ("time", "velocity")
    assert s.attrs["units"] == "1"
    assert float(s.min()) >= 0.0
    assert float(s.max()) <= 1.0


def test_half_maximum_sigma_definition():
    # A Gaussian peak of standard deviation 0.01 m/ns: FWHM / 2.3548 returns it.
    vel = np.round(np.arange(0.03, 0.3, 0.001), 6)
    t0 = np.arange(0.0, 60.0, 0.5)
    s = (
        0.8
        * np.exp(-0.5 * ((t0[:, None] - 30.0) / 2.0) ** 2)
        * np.exp(-0.5 * ((vel[None, :] - 0.12) / 0.01) ** 2)
    )
    spec = xr.DataArray(
        s,
        dims=("time", "velocity"),
        coords={"time": t0, "velocity": vel},
        attrs={"window_ns": 1.0, "period_ns": 5.0, "n_traces": 24},
    )
    p = sw.pick_semblance(spec)
    assert float(p.v_rms_sigma[0]) == pytest.approx(0.01, rel=0.01)
    assert float(p.t0_sigma[0]) == pytest.approx(2.0, rel=0.02)
    assert float(p.semblance[0]) == pytest.approx(0.8, rel=1e-3)


def test_air_and_ground_leakage_is_skipped():
    # Only an air wave (x/c) and a ground wave (x/0.1): no reflection maxima.
    x = np.linspace(0.4, 4.0, 24)
    t = np.arange(500) * 0.2
    data = ricker(t[None, :] - x[:, None] / C, 200.0) + ricker(t[None, :] - x[:, None] / 0.1, 200.0)
    data += 0.02 * np.random.default_rng(8).standard_normal(data.shape)
    g = gather_from_array(data, offsets=x, dt_ns=0.2, frequency_mhz=200.0)
    p = sw.pick_semblance(sw.semblance(g))
    assert p.sizes["interface"] == 0


def test_semblance_is_pure_and_records_history():
    x = np.linspace(0.2, 2.0, 8)
    g = hyperbola_gather([(20.0, 0.1, 1.0)], x=x, n=200)
    before = g.copy(deep=True)
    s = sw.semblance(g)
    xr.testing.assert_identical(g, before)
    assert "semblance(" in s.attrs["history"].splitlines()[-1]


def test_semblance_bad_input():
    x = np.linspace(0.2, 2.0, 8)
    g = hyperbola_gather([(20.0, 0.1, 1.0)], x=x, n=200)
    with pytest.raises(InputError, match="velocities must be"):
        sw.semblance(g, velocities=[0.1, -0.2])
    with pytest.raises(InputError, match="window_ns must be"):
        sw.semblance(g, window_ns=-1.0)
    prof = gather_from_array(
        np.zeros((6, 50)),
        positions=np.arange(6.0),
        dt_ns=0.5,
        frequency_mhz=200.0,
        antenna_separation_m=0.3,
    )
    with pytest.raises(InputError, match="multi-offset gather"):
        sw.semblance(prof)
    with pytest.raises(InputError, match="dims"):
        sw.pick_semblance(g)
    with pytest.raises(InputError, match="min_semblance"):
        sw.pick_semblance(sw.semblance(g), min_semblance=1.5)


# --- Dix interval velocities ------------------------------------------------------------


def _picks(t0, v, st, sv):
    return xr.Dataset(
        {
            "t0": ("interface", t0),
            "v_rms": ("interface", v),
            "t0_sigma": ("interface", st),
            "v_rms_sigma": ("interface", sv),
        }
    )


def test_interval_velocities_recover_layered_model():
    # Dix (1955): V_rms from the layer model (RMS definition) back to interval
    # velocities; thicknesses and depths follow.
    h = np.array([0.6, 0.9, 0.5])
    v = np.array([0.12, 0.08, 0.1])
    t0 = np.cumsum(2 * h / v)
    vrms = np.sqrt(np.cumsum(v**2 * 2 * h / v) / t0)
    iv = sw.interval_velocities(_picks(t0, vrms, [0.3] * 3, [0.002] * 3))
    assert np.allclose(iv.velocity.values, v, rtol=1e-10)
    assert np.allclose(iv.thickness.values, h, rtol=1e-10)
    assert np.allclose(iv.depth.values, np.cumsum(h), rtol=1e-10)
    assert np.allclose(iv.permittivity.values, (C / v) ** 2, rtol=1e-10)


def test_dix_uncertainty_matches_monte_carlo():
    # First-order propagation against a Monte Carlo of the Dix equation written
    # here (independent of the package); sigmas small enough for linearity.
    # Tolerance 5 % on each standard deviation (40000 seeded draws: MC error ~0.4 %).
    t0 = np.array([15.0, 32.0])
    vrms = np.array([0.11, 0.095])
    st = np.array([0.25, 0.3])
    sv = np.array([0.0015, 0.0012])
    iv = sw.interval_velocities(_picks(t0, vrms, st, sv))
    rng = np.random.default_rng(11)
    n = 40000
    tt = t0 + st * rng.standard_normal((n, 2))
    vv = vrms + sv * rng.standard_normal((n, 2))
    v1 = vv[:, 0]
    v2 = np.sqrt((vv[:, 1] ** 2 * tt[:, 1] - vv[:, 0] ** 2 * tt[:, 0]) / (tt[:, 1] - tt[:, 0]))
    h1 = v1 * tt[:, 0] / 2
    h2 = v2 * (tt[:, 1] - tt[:, 0]) / 2
    z2 = h1 + h2
    eps2 = (C / v2) ** 2
    for got, draws in [
        (iv.velocity_sigma.values[1], v2),
        (iv.thickness_sigma.values[0], h1),
        (iv.thickness_sigma.values[1], h2),
        (iv.depth_sigma.values[1], z2),
        (iv.permittivity_sigma.values[1], eps2),
    ]:
        assert got == pytest.approx(np.std(draws), rel=0.05)
    # the depth covariance keeps the correlation between depths
    assert iv.depth_cov.values[0, 1] == pytest.approx(np.cov(h1, z2)[0, 1], rel=0.05)


def test_interval_velocities_inconsistent_picks():
    with pytest.raises(InputError, match="negative"):
        sw.interval_velocities(_picks([10.0, 20.0], [0.12, 0.05], [0.1, 0.1], [0.001, 0.001]))
    out = sw.interval_velocities(
        _picks([10.0, 20.0], [0.12, 0.05], [0.1, 0.1], [0.001, 0.001]), invalid="nan"
    )
    assert np.isnan(out.velocity.values[1])
    with pytest.raises(InputError, match="lack variable"):
        sw.interval_velocities(xr.Dataset({"t0": ("interface", [10.0])}))
