"""Tests of trace processing (soilwave.processing).

References: filter responses from scipy.signal (independent implementation);
analytic identities of the Hilbert transform (envelope of A cos = A, phase of
cos(w t + phi) = w t + phi); running-mean response derived from its
definition (Dirichlet kernel).
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import signal

import soilwave as sw
from soilwave.errors import InputError
from soilwave.gather import sample_interval
from soilwave.wave import SPEED_OF_LIGHT

DT = 0.1  # ns


def _trace_gather(values, *, dt=DT, t0=0.0, freq=250.0):
    values = np.atleast_2d(values)
    return sw.gather_from_array(
        values,
        offsets=np.arange(1, values.shape[0] + 1, dtype=float),
        dt_ns=dt,
        t0_ns=t0,
        frequency_mhz=freq,
    )


def _profile(values):
    values = np.atleast_2d(values)
    return sw.gather_from_array(
        values,
        positions=np.arange(values.shape[0]) * 0.05,
        dt_ns=DT,
        frequency_mhz=250.0,
        antenna_separation_m=0.2,
    )


# --- dewow ---------------------------------------------------------------------------------


def test_dewow_removes_offset_and_linear_wow_exactly():
    # the window (41 samples = 4.1 ns) spans exactly one period of the sine, whose
    # running mean is then zero; the running mean of a linear trend is the trend
    t = np.arange(2000) * DT
    period = 41 * DT
    sine = np.sin(2 * np.pi * t / period)
    g = _trace_gather(sine + 5.0 + 0.3 * t)
    out = sw.dewow(g, window_ns=period)
    interior = slice(30, -30)
    np.testing.assert_allclose(out.values[0, interior], sine[interior], atol=1e-10)


@pytest.mark.parametrize("freq_mhz", [50.0, 120.0, 400.0])
def test_dewow_response_matches_running_mean_definition(freq_mhz):
    # derived: y = x - mean_N(x); for a sinusoid of frequency f the N-sample mean is
    # D(f) = sin(pi f N dt) / (N sin(pi f dt)) times the input (Dirichlet kernel)
    t = np.arange(4000) * DT
    x = np.cos(2 * np.pi * freq_mhz * 1e-3 * t)
    g = _trace_gather(x)
    out = sw.dewow(g)  # default window: 2 periods at 250 MHz = 8 ns -> 81 samples
    n = 81
    u = np.pi * freq_mhz * 1e-3 * DT
    gain = 1 - np.sin(u * n) / (n * np.sin(u))
    np.testing.assert_allclose(out.values[0, 200:-200], gain * x[200:-200], atol=1e-9)
    assert "window_ns=8.0" in out.attrs["history"]


def test_dewow_bad_window():
    g = _trace_gather(np.zeros(100))
    with pytest.raises(InputError, match="shorter than 3 samples"):
        sw.dewow(g, window_ns=0.15)
    with pytest.raises(InputError, match="longer than the trace"):
        sw.dewow(g, window_ns=50.0)
    with pytest.raises(InputError, match="window_ns must be > 0 ns; got -1"):
        sw.dewow(g, window_ns=-1)


# --- band-pass ------------------------------------------------------------------------------


@pytest.mark.parametrize("f_mhz", [150.0, 250.0, 400.0])
def test_bandpass_passband_follows_scipy_response(f_mhz):
    # reference: |H(f)|^2 of the same Butterworth design (forward-backward filtering)
    fs = 1000.0 / DT
    t = np.arange(6000) * DT
    x = np.sin(2 * np.pi * f_mhz * 1e-3 * t)
    out = sw.bandpass(_trace_gather(x), low_mhz=100.0, high_mhz=500.0, order=4)
    sos = signal.butter(4, [100.0, 500.0], btype="bandpass", fs=fs, output="sos")
    _, h = signal.sosfreqz(sos, worN=[f_mhz], fs=fs)
    expected = np.abs(h[0]) ** 2
    y = out.values[0, 1000:-1000]
    amp = np.sqrt(2 * np.mean(y**2))
    assert amp == pytest.approx(expected, rel=2e-3)
    assert expected > 0.9  # well inside the pass band
    # zero phase: the output is in phase with the input
    np.testing.assert_allclose(y, expected * x[1000:-1000], atol=5e-3)


@pytest.mark.parametrize("f_mhz", [10.0, 1500.0])
def test_bandpass_kills_out_of_band(f_mhz):
    t = np.arange(6000) * DT
    x = np.sin(2 * np.pi * f_mhz * 1e-3 * t)
    out = sw.bandpass(_trace_gather(x), low_mhz=100.0, high_mhz=500.0)
    assert np.max(np.abs(out.values[0, 1500:-1500])) < 2e-3


def test_bandpass_is_zero_phase_for_a_wavelet():
    t = np.arange(1000) * DT
    x = sw.ricker(t - 50.03, 250.0)
    out = sw.bandpass(_trace_gather(x), low_mhz=120.0, high_mhz=450.0).values[0]
    k = int(np.argmax(out))
    # parabolic peak position (sub-sample) is unchanged by a zero-phase filter
    a, b, c = out[k - 1 : k + 2]
    peak = t[k] + 0.5 * (a - c) / (a - 2 * b + c) * DT
    assert peak == pytest.approx(50.03, abs=0.01 * DT)


def test_lowpass_and_highpass_variants():
    t = np.arange(4000) * DT
    slow, fast = np.sin(2 * np.pi * 0.02 * t), np.sin(2 * np.pi * 0.8 * t)
    g = _trace_gather(slow + fast)
    lo = sw.bandpass(g, low_mhz=None, high_mhz=100.0).values[0, 500:-500]
    hi = sw.bandpass(g, low_mhz=300.0, high_mhz=None).values[0, 500:-500]
    np.testing.assert_allclose(lo, slow[500:-500], atol=5e-3)
    np.testing.assert_allclose(hi, fast[500:-500], atol=5e-3)


@pytest.mark.parametrize(
    ("kwargs", "match"),
    [
        ({"low_mhz": 500.0, "high_mhz": 100.0}, r"low_mhz \(500.0\) must be below high_mhz"),
        ({"low_mhz": 100.0, "high_mhz": 6000.0}, "high_mhz must be < 5000 MHz"),
        ({"low_mhz": -1.0, "high_mhz": 100.0}, "low_mhz must be > 0"),
        ({"low_mhz": None, "high_mhz": None}, "give low_mhz, high_mhz or both"),
        ({"low_mhz": 100.0, "high_mhz": 500.0, "order": 0}, "order must be an integer"),
    ],
)
def test_bandpass_argument_errors(kwargs, match):
    with pytest.raises(InputError, match=match):
        sw.bandpass(_trace_gather(np.zeros(500)), **kwargs)


def test_bandpass_too_short_trace():
    with pytest.raises(InputError, match="too short"):
        sw.bandpass(_trace_gather(np.zeros(10)), low_mhz=100.0, high_mhz=500.0)


# --- time zero -----------------------------------------------------------------------------


@pytest.mark.parametrize("shift", [3.37, -1.52])
def test_time_zero_correction_recovers_known_shift(shift):
    # synthetic CMP, air wave at x / c; the recorder's clock is off by `shift`
    model = sw.LayeredEarth(permittivity=[9.0, 25.0], thickness=[1.0])
    offsets = np.arange(0.6, 4.01, 0.2)
    g = sw.synthetic_gather(
        model, offsets=offsets, dt_ns=0.2, n_samples=400, frequency_mhz=250.0, noise=0.01, rng=3
    )
    late = g.assign_coords(time=g.time + shift)
    fixed = sw.time_zero_correction(late)
    est = fixed.attrs["time_zero_shift_ns"]
    assert abs(est - shift) < 0.5 * 0.2  # within half a sample
    np.testing.assert_allclose(fixed.time.values, g.time.values, atol=0.5 * 0.2)
    np.testing.assert_array_equal(fixed.values, late.values)  # samples untouched


def test_time_zero_correction_on_profile_and_onset():
    model = sw.LayeredEarth(permittivity=[16.0], thickness=[])
    p = sw.synthetic_profile(
        model,
        positions=np.arange(0, 2, 0.1),
        antenna_separation_m=0.5,
        dt_ns=0.1,
        n_samples=300,
        frequency_mhz=500.0,
        include=("air",),
    )
    late = p.assign_coords(time=p.time + 2.0)
    est = sw.time_zero_correction(late).attrs["time_zero_shift_ns"]
    assert est == pytest.approx(2.0, abs=0.05)
    # the onset (first break) comes before the peak of a zero-phase wavelet
    onset = sw.first_arrival_times(late, reference="onset")
    peak = sw.first_arrival_times(late, reference="peak")
    assert np.all(onset < peak)
    assert np.allclose(peak, 2.0 + 0.5 / SPEED_OF_LIGHT, atol=0.05)


def test_time_zero_manual_shift_accumulates():
    g = _trace_gather(np.ones((2, 50)))
    a = sw.time_zero_correction(g, method="shift", shift_ns=1.0)
    b = sw.time_zero_correction(a, method="shift", shift_ns=0.5)
    assert b.attrs["time_zero_shift_ns"] == 1.5
    np.testing.assert_allclose(b.time.values, g.time.values - 1.5, atol=1e-12)
    assert sample_interval(b) == pytest.approx(DT)


def test_time_zero_errors():
    g = _trace_gather(np.zeros((2, 50)))
    with pytest.raises(InputError, match="every trace is zero"):
        sw.time_zero_correction(g)
    with pytest.raises(InputError, match="needs shift_ns"):
        sw.time_zero_correction(g, method="shift")
    with pytest.raises(InputError, match="method must be 'air_wave' or 'shift'"):
        sw.time_zero_correction(g, method="first")
    with pytest.raises(InputError, match="threshold must be < 1"):
        sw.first_arrival_times(g, threshold=1.5)
    with pytest.raises(InputError, match="reference must be 'peak' or 'onset'"):
        sw.first_arrival_times(g, reference="middle")


# --- gains and normalisation ----------------------------------------------------------------


def test_gain_spreading_exponential_undoes_spherical_decay():
    # amplitude exp(-alpha r) / r with r = v t; alpha (Np/m) = a (dB/m) ln(10) / 20 (derived)
    v, a_db = 0.1, 3.0
    alpha = a_db * np.log(10) / 20
    t = 1.0 + np.arange(500) * DT
    r = v * t
    g = _trace_gather(np.exp(-alpha * r) / r, t0=1.0)
    out = sw.gain_spreading_exponential(g, velocity=v, attenuation_db_per_m=a_db)
    np.testing.assert_allclose(out.values, 1.0, rtol=1e-12)
    assert out.attrs["units"] == "m"
    with pytest.raises(InputError, match="velocity must be <= c"):
        sw.gain_spreading_exponential(g, velocity=0.31)
    with pytest.raises(InputError, match="attenuation_db_per_m must be >= 0"):
        sw.gain_spreading_exponential(g, velocity=0.1, attenuation_db_per_m=-1)


def test_agc_equalises_and_is_scale_invariant():
    t = np.arange(3000) * DT
    x = np.cos(2 * np.pi * 0.25 * t) * np.where(t < 150, 1.0, 100.0)
    g = _trace_gather(np.vstack([x, 7 * x, np.zeros_like(x)]))
    out = sw.agc(g, window_ns=20.0).values
    # the RMS of a cosine is 1/sqrt(2), so the gained trace has RMS close to 1
    for seg in (slice(200, 1200), slice(1800, 2800)):
        assert np.sqrt(np.mean(out[0, seg] ** 2)) == pytest.approx(1.0, rel=0.01)
    np.testing.assert_allclose(out[1], out[0], rtol=1e-12)
    assert np.all(out[2] == 0)


def test_normalize_traces():
    rng = np.random.default_rng(0)
    x = rng.normal(size=(3, 200)) * np.array([[1.0], [50.0], [0.0]])
    g = _trace_gather(x)
    m = sw.normalize_traces(g, method="max").values
    r = sw.normalize_traces(g, method="rms").values
    np.testing.assert_allclose(np.abs(m[:2]).max(axis=1), 1.0)
    np.testing.assert_allclose(np.sqrt(np.mean(r[:2] ** 2, axis=1)), 1.0)
    assert np.all(m[2] == 0) and np.all(r[2] == 0)
    with pytest.raises(InputError, match="method must be 'max' or 'rms'"):
        sw.normalize_traces(g, method="l1")


def test_remove_background():
    t = np.arange(200) * DT
    flat = sw.ricker(t - 3.0, 250.0)
    x = np.tile(flat, (9, 1))
    x[4] += sw.ricker(t - 12.0, 250.0)  # a local event on one trace
    out = sw.remove_background(_profile(x)).values
    # the common wavelet disappears; the local event keeps 8/9 of its amplitude
    local = sw.ricker(t - 12.0, 250.0)
    np.testing.assert_allclose(out[4], local * 8 / 9, atol=1e-12)
    np.testing.assert_allclose(out[0], -local / 9, atol=1e-12)
    run = sw.remove_background(_profile(x), window_traces=3).values
    np.testing.assert_allclose(run[0], 0.0, atol=1e-12)
    with pytest.raises(InputError, match="fixed-offset profiles"):
        sw.remove_background(_trace_gather(x))
    with pytest.raises(InputError, match="window_traces must be an odd integer"):
        sw.remove_background(_profile(x), window_traces=4)


# --- analytic signal ---------------------------------------------------------------------------


def test_envelope_of_cosine_is_its_amplitude():
    # Hilbert identity: H[A cos(w t + phi)] = A sin(w t + phi), |analytic| = A
    t = np.arange(1000) * DT  # 100 ns: 25 whole periods at 250 MHz
    x = 3.5 * np.cos(2 * np.pi * 0.25 * t + 0.4)
    env = sw.envelope(_trace_gather(x)).values[0]
    np.testing.assert_allclose(env, 3.5, rtol=1e-10)


def test_envelope_of_modulated_wave_interior():
    t = np.arange(4000) * DT
    a = 1.0 + 0.5 * np.cos(2 * np.pi * 0.005 * t)
    x = a * np.cos(2 * np.pi * 0.3 * t)
    env = sw.envelope(_trace_gather(x)).values[0]
    np.testing.assert_allclose(env[500:-500], a[500:-500], atol=2e-3)


def test_instantaneous_phase_of_cosine():
    t = np.arange(1000) * DT
    phase = 2 * np.pi * 0.25 * t + 0.4
    out = sw.instantaneous_phase(_trace_gather(np.cos(phase)), unwrap=True)
    np.testing.assert_allclose(out.values[0], phase, atol=1e-9)
    assert out.attrs["units"] == "rad"
    wrapped = sw.instantaneous_phase(_trace_gather(np.cos(phase))).values[0]
    assert wrapped.min() >= -np.pi and wrapped.max() <= np.pi


# --- purity and history --------------------------------------------------------------------------

STEPS = [
    ("time_zero_correction", {"method": "shift", "shift_ns": 1.0}),
    ("dewow", {}),
    ("bandpass", {"low_mhz": 100.0, "high_mhz": 500.0}),
    ("agc", {"window_ns": 10.0}),
    ("gain_spreading_exponential", {"velocity": 0.1, "attenuation_db_per_m": 1.0}),
    ("normalize_traces", {}),
    ("remove_background", {}),
    ("envelope", {}),
    ("instantaneous_phase", {}),
]


@pytest.mark.parametrize(("name", "kwargs"), STEPS)
def test_steps_are_pure_and_append_history(name, kwargs):
    rng = np.random.default_rng(1)
    g = _profile(rng.normal(size=(4, 300)))
    g.attrs["history"] = "earlier step"
    before = g.copy(deep=True)
    out = getattr(sw, name)(g, **kwargs)
    assert g.identical(before)  # input untouched, attrs included
    lines = out.attrs["history"].split("\n")
    assert lines[0] == "earlier step"
    assert len(lines) == 2 and f" {name}(" in lines[1]
    sw.validate_gather(out)
    assert out.dims == g.dims


def test_steps_reject_non_gathers():
    with pytest.raises(InputError, match=r"must be an xarray\.DataArray"):
        sw.dewow(np.zeros((2, 10)))
