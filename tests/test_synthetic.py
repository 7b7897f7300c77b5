"""Tests of the wavelet, earth model and synthetic gathers and profiles.

Outside references: derived travel times and reflection coefficients listed in
shared/references.md (each "derived" from the formulas named there); the
Ricker wavelet's analytic properties (Ricker 1953, value from memory for the
citation, properties derived from the formula); scipy.signal.hilbert and
scipy.optimize root finding as independent implementations.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import optimize, signal

import soilwave as sw
from soilwave.errors import InputError, ValidRangeError
from soilwave.wave import SPEED_OF_LIGHT
from soilwave.wavelets import ricker_hilbert, shifted_wavelet_sum

C = SPEED_OF_LIGHT


# --- Ricker wavelet --------------------------------------------------------------------------


@pytest.mark.parametrize("f", [100.0, 250.0, 900.0])
def test_ricker_analytic_properties(f):
    fg = f * 1e-3  # 1/ns
    assert sw.ricker(0.0, f) == 1.0
    # zero crossings of (1 - 2 pi^2 f^2 t^2) exp(-pi^2 f^2 t^2): t = +-1 / (sqrt(2) pi f)
    tz = 1.0 / (np.sqrt(2.0) * np.pi * fg)
    np.testing.assert_allclose(sw.ricker([-tz, tz], f), 0.0, atol=1e-14)
    # side-lobe minima at t = +-sqrt(3/2) / (pi f), value -2 exp(-3/2)
    tm = np.sqrt(1.5) / (np.pi * fg)
    res = optimize.minimize_scalar(lambda t: sw.ricker(t, f), bounds=(0.5 * tm, 1.5 * tm))
    assert res.x == pytest.approx(tm, rel=1e-5)
    assert res.fun == pytest.approx(-2 * np.exp(-1.5), rel=1e-10)
    # symmetric (zero phase)
    t = np.linspace(-5, 5, 101) / fg
    np.testing.assert_allclose(sw.ricker(t, f), sw.ricker(-t, f), rtol=0, atol=1e-15)


def test_ricker_is_negative_second_derivative_of_gaussian():
    # independent construction: -(1 / (2 a)) d^2/dt^2 exp(-a t^2), a = pi^2 f^2,
    # by central finite differences
    f = 0.25
    a = (np.pi * f) ** 2
    t = np.linspace(-6, 6, 241)
    h = 1e-4
    gauss = lambda s: np.exp(-a * s**2)  # noqa: E731
    d2 = (gauss(t + h) - 2 * gauss(t) + gauss(t - h)) / h**2
    np.testing.assert_allclose(sw.ricker(t, 250.0), -d2 / (2 * a), atol=1e-6)


def test_ricker_spectrum_peaks_at_its_frequency():
    f = 250.0
    dt = 0.01
    t = (np.arange(2**16) - 2**15) * dt
    spec = np.abs(np.fft.rfft(sw.ricker(t, f)))
    freq = np.fft.rfftfreq(t.size, dt) * 1e3
    assert freq[np.argmax(spec)] == pytest.approx(f, abs=freq[1])


def test_ricker_hilbert_matches_scipy():
    t = np.arange(-4000, 4000) * 0.01
    numeric = np.imag(signal.hilbert(sw.ricker(t, 250.0)))
    np.testing.assert_allclose(ricker_hilbert(t, 250.0)[2000:6000], numeric[2000:6000], atol=1e-4)


def test_sampled_wavelet_path_matches_analytic_path():
    # frequency-domain delays of a sampled Ricker versus direct evaluation
    t = np.arange(1000) * 0.1
    tau = np.array([[20.03, 55.57, 71.111], [3.3, 99.0, 40.0]])
    amp = np.array([[1.0, -0.6, 0.3 * np.exp(0.7j)], [0.5, 2.0, -1.0j]])
    w = sw.ricker(np.arange(-150, 151) * 0.1, 250.0)
    direct = shifted_wavelet_sum(t, tau, amp, frequency_mhz=250.0)
    fourier = shifted_wavelet_sum(t, tau, amp, wavelet=w)
    np.testing.assert_allclose(fourier, direct, atol=1e-6)


def test_ricker_rejects_bad_frequency():
    with pytest.raises(InputError, match="frequency_mhz must be finite and > 0"):
        sw.ricker(0.0, 0.0)


# --- LayeredEarth -----------------------------------------------------------------------------


def test_layered_earth():
    m = sw.LayeredEarth([9.0, 25.0, 4.0], [0.5, 0.7], conductivity=[1.0, 10.0, 0.0])
    assert (m.n_layers, m.n_interfaces) == (3, 2)
    np.testing.assert_allclose(m.interface_depth, [0.5, 1.2])
    # velocities from references.md (derived): e 9 -> 0.0999, e 25 -> 0.0600 m/ns
    np.testing.assert_allclose(m.velocity[:2], [0.0999, 0.0600], atol=5e-5)
    with pytest.raises(ValueError, match="read-only"):
        m.permittivity[0] = 3.0
    assert m == sw.LayeredEarth([9.0, 25.0, 4.0], [0.5, 0.7], conductivity=[1.0, 10.0, 0.0])
    # attenuation, references.md (derived): e 9, 1 mS/m, 100 MHz -> 0.06279 Np/m
    m1 = sw.LayeredEarth([9.0], [], conductivity=[1.0])
    assert m1.attenuation_np_per_m(100.0)[0] == pytest.approx(0.06279, abs=5e-6)


@pytest.mark.parametrize(
    ("kwargs", "error", "match"),
    [
        ({"permittivity": [0.5, 9.0], "thickness": [1.0]}, ValidRangeError, "below 1"),
        ({"permittivity": [4.0, 9.0], "thickness": []}, InputError, "one thickness per layer"),
        ({"permittivity": [4.0, 9.0], "thickness": [-1.0]}, InputError, r"thickness\[0\]"),
        ({"permittivity": [4.0, np.nan], "thickness": [1.0]}, InputError, "finite"),
        (
            {"permittivity": [4.0, 9.0], "thickness": [1.0], "conductivity": [1.0]},
            InputError,
            "one per layer",
        ),
        (
            {"permittivity": [4.0, 9.0], "thickness": [1.0], "conductivity": [1.0, -2.0]},
            InputError,
            r"conductivity\[1\] = -2.0",
        ),
    ],
)
def test_layered_earth_errors(kwargs, error, match):
    with pytest.raises(error, match=match):
        sw.LayeredEarth(**kwargs)


# --- synthetic gathers: kinematics ------------------------------------------------------------

ONE_LAYER = sw.LayeredEarth(permittivity=[9.0, 25.0], thickness=[1.0])


def _peak_time(trace, time):
    k = int(np.argmax(np.abs(trace)))
    a, b, c = trace[k - 1 : k + 2]
    return time[k] + 0.5 * (a - c) / (a - 2 * b + c) * (time[1] - time[0])


@pytest.mark.parametrize(
    ("phase", "expected"),
    [
        # references.md, derived: x 0.5, 1, 2, 4 m
        ("air", [1.6678, 3.3356, 6.6713, 13.3426]),
        ("ground", [5.0035, 10.0069, 20.0138, 40.0277]),
        ("reflection", [20.6298, 22.3762, 28.3039, 44.7523]),
    ],
)
def test_arrival_times_and_trace_peaks(phase, expected):
    x = [0.5, 1.0, 2.0, 4.0]
    g, arr = sw.synthetic_gather(
        ONE_LAYER,
        offsets=x,
        dt_ns=0.1,
        t0_ns=-5.0,
        n_samples=600,
        frequency_mhz=250.0,
        include=(phase,),
        return_arrivals=True,
    )
    np.testing.assert_allclose(arr.time.values, expected, atol=1e-4)
    assert list(arr.offset.values) == x
    for i in range(4):
        # the wavelet peak on the trace sits at the predicted time (well within a sample)
        assert _peak_time(g.values[i], g.time.values) == pytest.approx(expected[i], abs=0.01)


def test_two_layer_reflection_times():
    # references.md, derived: 0.5 m e 9 over 0.5 m e 25, exact 29.6052 ns at 1 m, 36.6584 at 2 m
    m = sw.LayeredEarth([9.0, 25.0, 4.0], [0.5, 0.5])
    _, arr = sw.synthetic_gather(
        m,
        offsets=[1.0, 2.0],
        dt_ns=0.1,
        n_samples=500,
        frequency_mhz=250.0,
        include=("reflection",),
        return_arrivals=True,
    )
    second = arr.where(arr.interface == 2, drop=True)
    np.testing.assert_allclose(second.time.values, [29.6052, 36.6584], atol=1.5e-3)


def test_head_wave_time():
    # traveltime docstring check, derived: 0.5 m at 0.06 m/ns over 0.1 m/ns -> 33.3333 ns at 2 m
    eps = (C / np.array([0.06, 0.1])) ** 2
    m = sw.LayeredEarth(eps, [0.5])
    _, arr = sw.synthetic_gather(
        m,
        offsets=[0.5, 2.0],
        dt_ns=0.1,
        n_samples=500,
        frequency_mhz=250.0,
        include=("refraction",),
        return_arrivals=True,
    )
    assert arr.sizes["pick"] == 1  # none before the critical distance (0.75 m)
    assert float(arr.time[0]) == pytest.approx(33.3333, abs=1e-4)
    assert float(arr.offset[0]) == 2.0


# --- synthetic gathers: amplitudes --------------------------------------------------------------


def _reflection_amplitudes(model, x, **kw):
    _, arr = sw.synthetic_gather(
        model,
        offsets=x,
        dt_ns=0.05,
        n_samples=4000,
        frequency_mhz=250.0,
        include=("reflection",),
        return_arrivals=True,
        **kw,
    )
    return arr


def test_normal_incidence_polarity_follows_reflection_coefficient():
    x = [1e-4]
    wet_below = _reflection_amplitudes(ONE_LAYER, x, spreading=False)
    dry_below = _reflection_amplitudes(sw.LayeredEarth([25.0, 9.0], [1.0]), x, spreading=False)
    # references.md: R(9 -> 25) = -0.25 at normal incidence
    assert float(wet_below.amplitude[0]) == pytest.approx(-0.25, abs=1e-5)
    assert float(dry_below.amplitude[0]) == pytest.approx(0.25, abs=1e-5)
    # the trace shows the polarity flip: negative peak over the wetter layer
    g = sw.synthetic_gather(ONE_LAYER, offsets=x, dt_ns=0.1, n_samples=400, frequency_mhz=250.0)
    t_refl = 2.0 / ONE_LAYER.velocity[0]
    k = int(np.argmin(np.abs(g.time.values - t_refl)))
    window = g.values[0, k - 5 : k + 6]
    assert window[np.argmax(np.abs(window))] < 0


def test_oblique_reflection_coefficient_and_spreading():
    # air (e 1) over e 9 with h = 1 m: at x = 2 h tan(30 deg) the ray meets the interface
    # at 30 deg; references.md (derived): r_TE(1 -> 9, 30 deg) = -0.5471
    m = sw.LayeredEarth([1.0, 9.0], [1.0])
    x = 2.0 * np.tan(np.deg2rad(30.0))
    arr = _reflection_amplitudes(m, [x], spreading=False)
    assert float(arr.amplitude[0]) == pytest.approx(-0.5471, abs=5e-5)
    # with spreading: divided by the path length sqrt(x^2 + 4 h^2) (straight rays)
    arr_s = _reflection_amplitudes(m, [x])
    assert float(arr_s.amplitude[0]) == pytest.approx(-0.5471 / np.hypot(x, 2.0), abs=5e-5)


def test_transmission_through_upper_interface():
    # derived: normal incidence, second reflection = T_down T_up R2 = (1 - R1^2) R2
    m = sw.LayeredEarth([4.0, 9.0, 25.0], [0.5, 0.5])
    arr = _reflection_amplitudes(m, [1e-3], spreading=False)
    r1 = sw.reflection_coefficient(4.0, 9.0)
    r2 = sw.reflection_coefficient(9.0, 25.0)
    amp = arr.where(arr.interface == 2, drop=True).amplitude.values
    assert amp[0] == pytest.approx((1 - r1**2) * r2, abs=1e-6)


def test_attenuation_factor():
    # references.md (derived): e 9, 1 mS/m at 100 MHz -> alpha = 0.06279 Np/m;
    # the reflection at zero offset travels 2 m
    lossless = sw.LayeredEarth([9.0, 25.0], [1.0])
    lossy = sw.LayeredEarth([9.0, 25.0], [1.0], conductivity=[1.0, 1.0])
    kw = {"offsets": [1e-6], "dt_ns": 0.1, "n_samples": 400, "frequency_mhz": 100.0}
    a0 = sw.synthetic_gather(lossless, return_arrivals=True, include=("reflection",), **kw)[1]
    a1 = sw.synthetic_gather(lossy, return_arrivals=True, include=("reflection",), **kw)[1]
    ratio = float(a1.amplitude[0] / a0.amplitude[0])
    assert ratio == pytest.approx(np.exp(-0.06279 * 2.0), rel=1e-4)
    off = sw.synthetic_gather(
        lossy, return_arrivals=True, include=("reflection",), attenuation=False, **kw
    )[1]
    assert float(off.amplitude[0]) == float(a0.amplitude[0])


def test_post_critical_reflection_is_total_and_phase_shifted():
    # e 25 over e 9: critical angle asin(3/5) = 36.87 deg, critical distance 2 h tan = 1.5 m
    m = sw.LayeredEarth([25.0, 9.0], [1.0])
    arr = _reflection_amplitudes(m, [1.0, 3.0], spreading=False)
    pre, post = arr.isel(pick=0), arr.isel(pick=1)
    assert float(pre.amplitude_quadrature) == 0.0
    assert np.hypot(float(post.amplitude), float(post.amplitude_quadrature)) == pytest.approx(1.0)
    assert abs(float(post.amplitude_quadrature)) > 0.1


def test_post_critical_phase_convention_with_a_narrow_band_wavelet():
    # physics: a field Re(E exp(-i w t)) reflected with complex r becomes Re(r E exp(-i w t)),
    # i.e. |r| cos(w t - arg r): a monochromatic wave is delayed in phase by arg(r)
    m = sw.LayeredEarth([25.0, 9.0], [1.0])
    f = 0.25  # GHz
    dt = 0.05
    tw = np.arange(-1200, 1201) * dt
    burst = np.cos(2 * np.pi * f * tw) * np.exp(-((tw / 25.0) ** 2))
    x = 3.0
    g, arr = sw.synthetic_gather(
        m,
        offsets=[x],
        dt_ns=dt,
        n_samples=6000,
        frequency_mhz=250.0,
        wavelet=burst,
        include=("reflection",),
        spreading=False,
        return_arrivals=True,
    )
    tau = float(arr.time[0])
    # the independent expectation, from the Fresnel coefficient at the ray's angle
    p_angle = np.rad2deg(np.arcsin(x / np.hypot(x, 2.0)))
    r, _ = sw.fresnel_coefficients(25.0, 9.0, p_angle)
    r = complex(r)
    t = g.time.values
    near = np.abs(t - tau) < 5.0
    envelope = np.exp(-(((t - tau) / 25.0) ** 2))
    expected = abs(r) * np.cos(2 * np.pi * f * (t - tau) - np.angle(r)) * envelope
    np.testing.assert_allclose(g.values[0, near], expected[near], atol=2e-3)


def test_surface_wave_spreading_and_scales():
    x = np.array([1.0, 2.0, 4.0])
    _, arr = sw.synthetic_gather(
        ONE_LAYER,
        offsets=x,
        dt_ns=0.1,
        n_samples=600,
        frequency_mhz=250.0,
        include=("air", "ground"),
        phase_scale={"air": 0.5},
        return_arrivals=True,
    )
    air = arr.where(arr.phase == "air", drop=True).amplitude.values
    ground = arr.where(arr.phase == "ground", drop=True).amplitude.values
    x_near = 0.5 * ONE_LAYER.velocity[0] * 1e3 / 250.0
    np.testing.assert_allclose(ground, 1.0 / (x**2 + x_near**2), rtol=1e-12)
    np.testing.assert_allclose(air, 0.5 * ground, rtol=1e-12)


def test_trace_equals_sum_of_listed_arrivals():
    m = sw.LayeredEarth([9.0, 25.0, 4.0], [0.6, 0.5], conductivity=[2.0, 5.0, 1.0])
    g, arr = sw.synthetic_gather(
        m,
        offsets=np.arange(0.2, 5.0, 0.4),
        dt_ns=0.2,
        t0_ns=-20.0,
        n_samples=800,
        frequency_mhz=200.0,
        return_arrivals=True,
    )
    assert set(arr.phase.values.tolist()) == {"air", "ground", "reflection", "refraction"}
    rebuilt = np.zeros(g.shape)
    for i, x in enumerate(g.offset.values):
        sel = arr.where(arr.offset == x, drop=True)
        for tau, a, q in zip(
            sel.time.values, sel.amplitude.values, sel.amplitude_quadrature.values, strict=True
        ):
            rebuilt[i] += a * sw.ricker(g.time.values - tau, 200.0)
            rebuilt[i] -= q * ricker_hilbert(g.time.values - tau, 200.0)
    np.testing.assert_allclose(g.values, rebuilt, atol=1e-12)


# --- noise and validity --------------------------------------------------------------------------


def test_noise_is_seeded_and_has_the_requested_level():
    kw = {"offsets": np.arange(0.5, 5.0, 0.1), "dt_ns": 0.1, "n_samples": 1000}
    kw["frequency_mhz"] = 250.0
    clean = sw.synthetic_gather(ONE_LAYER, **kw)
    a = sw.synthetic_gather(ONE_LAYER, noise=0.05, rng=42, **kw)
    b = sw.synthetic_gather(ONE_LAYER, noise=0.05, rng=np.random.default_rng(42), **kw)
    c = sw.synthetic_gather(ONE_LAYER, noise=0.05, rng=43, **kw)
    np.testing.assert_array_equal(a.values, b.values)
    assert not np.array_equal(a.values, c.values)
    resid = (a - clean).values.ravel()
    # 45 000 Gaussian draws: the sample sd is within 2 % of sigma with probability
    # far above 0.999 (relative sd of the estimate ~ 1/sqrt(2 n) = 0.33 %)
    sigma = 0.05 * np.abs(clean.values).max()
    assert resid.std() == pytest.approx(sigma, rel=0.02)
    assert abs(resid.mean()) < 4 * sigma / np.sqrt(resid.size)


def test_synthetic_gather_is_a_valid_gather_with_history():
    g = sw.synthetic_gather(
        ONE_LAYER,
        offsets=[0.5, 1.0],
        dt_ns=0.1,
        n_samples=100,
        frequency_mhz=250.0,
        geometry="WARR",
    )
    sw.validate_gather(g)
    assert g.attrs["geometry"] == "WARR"
    assert "synthetic_gather(permittivity=[9.0, 25.0]" in g.attrs["history"]


@pytest.mark.parametrize(
    ("kwargs", "match"),
    [
        ({"include": ("air", "direct")}, r"unknown phase\(s\) \['direct'\]"),
        ({"phase_scale": {"airwave": 1.0}}, "unknown phase 'airwave'"),
        ({"n_samples": 1}, "n_samples must be an integer >= 2"),
        ({"wavelet": "gabor"}, "wavelet must be 'ricker'"),
        ({"noise": -0.1}, "noise must be >= 0"),
        ({"offsets": [-1.0, 1.0]}, "offsets must be a non-empty 1-D array"),
        ({"geometry": "fixed-offset"}, "geometry must be 'CMP' or 'WARR'"),
        ({"rng": "seed"}, "rng must be None, an integer seed"),
    ],
)
def test_synthetic_gather_errors(kwargs, match):
    args = {"offsets": [0.5, 1.0], "dt_ns": 0.1, "n_samples": 100, "frequency_mhz": 250.0}
    args.update(kwargs)
    with pytest.raises(InputError, match=match):
        sw.synthetic_gather(ONE_LAYER, **args)


# --- fixed-offset profiles -----------------------------------------------------------------------


def test_diffraction_hyperbola_with_finite_separation():
    # t = (sqrt((x_s - x0)^2 + z^2) + sqrt((x_r - x0)^2 + z^2)) / v, point in layer 1
    pos = np.arange(0.0, 4.0, 0.05)
    s, x0, z = 0.4, 2.0, 0.6
    g, arr = sw.synthetic_profile(
        ONE_LAYER,
        positions=pos,
        antenna_separation_m=s,
        dt_ns=0.1,
        n_samples=500,
        frequency_mhz=250.0,
        include=("diffraction",),
        diffractors=[(x0, z, -0.3)],
        return_arrivals=True,
    )
    v = ONE_LAYER.velocity[0]
    expected = (np.hypot(pos - s / 2 - x0, z) + np.hypot(pos + s / 2 - x0, z)) / v
    inside = expected <= g.time.values[-1]
    np.testing.assert_allclose(arr.time.values, expected[inside], rtol=1e-9)
    assert np.all(arr.offset.values == s)
    apex = int(np.argmin(np.abs(pos - x0)))
    assert _peak_time(g.values[apex], g.time.values) == pytest.approx(expected[apex], abs=0.02)
    # negative strength: negative polarity at the apex
    assert g.values[apex, np.argmin(np.abs(g.time.values - expected[apex]))] < 0


def test_diffractor_below_an_interface_matches_snell_root_finding():
    # independent one-way ray: solve x = h1 tan(a1) + h2 tan(a2), sin(a2) = sin(a1) v2 / v1
    m = sw.LayeredEarth([4.0, 16.0], [0.5])
    v1, v2 = m.velocity
    x0, z = 1.0, 0.9
    pos = np.array([0.0, 0.4, 1.0, 1.7])
    _, arr = sw.synthetic_profile(
        m,
        positions=pos,
        antenna_separation_m=0.0,
        dt_ns=0.1,
        n_samples=600,
        frequency_mhz=250.0,
        include=("diffraction",),
        diffractors=[(x0, z)],
        return_arrivals=True,
    )

    def one_way(d):
        if d == 0:
            return 0.5 / v1 + 0.4 / v2
        g = lambda a: 0.5 * np.tan(a) + 0.4 * np.tan(np.arcsin(np.sin(a) * v2 / v1)) - d  # noqa: E731
        a1 = optimize.brentq(g, 0.0, np.pi / 2 - 1e-9, xtol=1e-14)
        a2 = np.arcsin(np.sin(a1) * v2 / v1)
        return 0.5 / (v1 * np.cos(a1)) + 0.4 / (v2 * np.cos(a2))

    expected = [2 * one_way(abs(p - x0)) for p in pos]
    np.testing.assert_allclose(arr.time.values, expected, rtol=1e-8)


def test_flat_callable_interface_matches_layered_ray_tracing():
    # exact 2-D Fermat search against the layered ray tracer for a flat interface
    pos = np.arange(0.0, 3.0, 0.25)
    kw = {
        "positions": pos,
        "antenna_separation_m": 0.6,
        "dt_ns": 0.1,
        "n_samples": 400,
        "frequency_mhz": 250.0,
        "include": ("reflection",),
        "return_arrivals": True,
    }
    _, flat = sw.synthetic_profile(ONE_LAYER, **kw)
    _, curved = sw.synthetic_profile(
        ONE_LAYER, interface_depth=lambda x: np.full_like(x, 1.0), **kw
    )
    np.testing.assert_allclose(curved.time.values, flat.time.values, atol=1e-6)
    np.testing.assert_allclose(curved.amplitude.values, flat.amplitude.values, rtol=1e-5)


def test_bowl_interface_branches_are_stationary_paths():
    depth = sw.bowl_depth(center_m=2.0, half_width_m=1.2, base_depth_m=0.8, extra_depth_m=0.5)
    pos = np.array([0.0, 1.5, 2.0])
    s = 0.2
    _, arr = sw.synthetic_profile(
        ONE_LAYER.__class__([9.0, 25.0], [1.5]),
        positions=pos,
        antenna_separation_m=s,
        dt_ns=0.1,
        n_samples=500,
        frequency_mhz=250.0,
        include=("reflection",),
        interface_depth=depth,
        return_arrivals=True,
    )
    v = ONE_LAYER.velocity[0]
    # far from the bowl: the flat 0.8 m reflector
    far = arr.where(arr.position == 0.0, drop=True).time.values
    assert far[0] == pytest.approx(2 * np.hypot(s / 2, 0.8) / v, rel=1e-9)
    # at the centre the vertical path to the bottom (1.3 m) is one stationary branch
    centre = arr.where(arr.position == 2.0, drop=True).time.values
    assert np.min(np.abs(centre - 2 * np.hypot(s / 2, 1.3) / v)) < 1e-6
    assert centre.size >= 2  # the syncline focuses below the surface: several branches
    # every branch is a stationary path: brute-force check by scalar minimisation /
    # maximisation of the two-leg path length near each branch
    for p in pos:
        xs, xr = p - s / 2, p + s / 2

        def length(xi, xs=xs, xr=xr):
            z = depth(np.array([xi]))[0]
            return np.hypot(xi - xs, z) + np.hypot(xi - xr, z)

        grid = np.linspace(-3, 7, 20001)
        vals = np.array([length(q) for q in grid])
        d = np.diff(vals)
        idx = np.flatnonzero(np.sign(d[:-1]) != np.sign(d[1:])) + 1
        brute = []
        for i in idx:
            sign = 1 if vals[i] < vals[i - 1] else -1
            res = optimize.minimize_scalar(
                lambda q, sign=sign: sign * length(q),
                bounds=(grid[i - 1], grid[i + 1]),
                method="bounded",
                options={"xatol": 1e-10},
            )
            brute.append(sign * res.fun / v)
        got = np.sort(arr.where(arr.position == p, drop=True).time.values)
        np.testing.assert_allclose(got, np.sort(brute), atol=1e-6)


def test_profile_air_ground_and_background_removal():
    g, arr = sw.synthetic_profile(
        ONE_LAYER,
        positions=np.arange(0.0, 2.0, 0.1),
        antenna_separation_m=0.5,
        dt_ns=0.1,
        n_samples=400,
        frequency_mhz=250.0,
        include=("air", "ground", "reflection"),
        return_arrivals=True,
    )
    # all traces identical over flat layers: background removal leaves nothing
    np.testing.assert_allclose(sw.remove_background(g).values, 0.0, atol=1e-12)
    assert g.attrs["antenna_separation_m"] == 0.5
    first = arr.where(arr.position == 0.0, drop=True)
    assert first.phase.values.tolist() == ["air", "ground", "reflection"]
    v1 = ONE_LAYER.velocity[0]
    np.testing.assert_allclose(
        first.time.values, [0.5 / C, 0.5 / v1, 2 * np.hypot(0.25, 1.0) / v1], rtol=1e-9
    )


def test_profile_errors():
    kw = {
        "positions": [0.0, 1.0],
        "antenna_separation_m": 0.3,
        "dt_ns": 0.1,
        "n_samples": 100,
        "frequency_mhz": 250.0,
    }
    with pytest.raises(InputError, match=r"diffractors\[0\] must be \(x_m, depth_m"):
        sw.synthetic_profile(ONE_LAYER, diffractors=[(1.0,)], **kw)
    with pytest.raises(InputError, match=r"diffractors\[0\] depth must be > 0"):
        sw.synthetic_profile(ONE_LAYER, diffractors=[(1.0, -0.5)], **kw)
    with pytest.raises(InputError, match="names interface 3"):
        sw.synthetic_profile(ONE_LAYER, interface_depth={3: lambda x: x}, **kw)
    with pytest.raises(InputError, match="not below the surface"):
        sw.synthetic_profile(ONE_LAYER, interface_depth=lambda x: np.zeros_like(x), **kw)
    with pytest.raises(InputError, match="antenna_separation_m must be finite and >= 0"):
        sw.synthetic_profile(ONE_LAYER, **{**kw, "antenna_separation_m": -1.0})
    with pytest.raises(InputError, match="half_width_m > 0"):
        sw.bowl_depth(center_m=0.0, half_width_m=0.0, base_depth_m=1.0, extra_depth_m=0.2)
