"""Tests of soilwave.wavelet_change: main-lobe check, wavelet phase, change-point test.

Traces are built here (Ricker wavelets and their Hilbert transforms from
scipy.signal.hilbert), independent of soilwave.synthetic.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import signal

import soilwave.wavelet_change as wc

F = 500.0  # MHz
T = 1000.0 / F  # ns
DT = 0.1  # ns


def ricker(t, f_mhz=F):
    u = (np.pi * f_mhz * 1e-3 * t) ** 2
    return (1.0 - 2.0 * u) * np.exp(-u)


def test_phase_of_rotated_wavelets():
    # d = cos(phi) w + sin(phi) H[w] has the analytic signal exp(-i phi)(w + i H[w])
    # (derived), so its phase against the near-offset template is -phi plus the
    # template's own phase, whatever the time shift of the pick (the main lobe
    # of a rotated wavelet moves; picks misplaced by different amounts also
    # blur the template and give it a phase of its own).
    t = np.arange(0.0, 40.0, DT)
    rotation = np.deg2rad([0, 0, 0, 0, 0, 15, 30, 45, 60, 90])
    true_time = 20.0 + np.linspace(0.0, 1.0, rotation.size)
    traces = []
    for phi, tt in zip(rotation, true_time, strict=True):
        w = ricker(t - tt)
        traces.append(np.cos(phi) * w + np.sin(phi) * np.imag(signal.hilbert(w)))
    traces = np.array(traces)
    analytic = signal.hilbert(traces, axis=-1)
    # picks off the true times by up to a quarter period (as main lobes move)
    centres = true_time + np.linspace(-0.25, 0.25, rotation.size) * T
    phases, kappa, _, _ = wc._wavelet_phases(
        traces, analytic, np.zeros(rotation.size), DT, centres, 1, T, 5
    )
    relative = np.angle(np.exp(1j * (phases - np.mean(phases[:5]))))
    assert np.allclose(relative, -rotation, atol=np.deg2rad(2.0))
    # delay-phase coupling of a windowed Ricker: above 1, below the 3.3 of the
    # whole wavelet (1 / sqrt(1 - 64 / (22.5 pi)), derived from its spectrum)
    assert 1.2 < kappa < 1.0 / np.sqrt(1.0 - 64.0 / (22.5 * np.pi))


def test_side_lobe_is_recognised():
    # A Ricker's side lobes lie at -+ sqrt(3/2) / (pi f) from the main lobe
    # (w'(t) = 0, derived), 0.39 periods, with value -2 exp(-3/2) = -0.446.
    t = np.arange(0.0, 40.0, DT)
    tt = 20.0 + np.arange(5) * 0.37
    traces = np.array([ricker(t - x) for x in tt])
    lobe = np.sqrt(1.5) / (np.pi * F * 1e-3)
    shift = wc._side_lobe_shift(traces, 0.0, DT, tt + lobe, -1, T)
    assert shift == pytest.approx(-lobe, abs=DT)
    assert wc._side_lobe_shift(traces, 0.0, DT, tt, 1, T) == 0.0


def test_change_point_false_alarms_and_detection():
    # Self-starting CUSUM (Hawkins 1987; Page 1954): on Gaussian phases of known
    # sigma the design rate of stopping an unchanged 40-pick event is about 5 %
    # (measured 4 to 6 %); tolerance: at most 8 % of 1500 sequences (binomial sd
    # 0.6 %). A lasting step of 2 sigma at pick 20 is found in >= 97 % of 800
    # sequences and placed within two picks of 20 in >= 80 % (measured 88 %).
    rng = np.random.default_rng(11)
    alarms = 0
    for _ in range(1500):
        sig = rng.uniform(0.1, 0.5, 40)
        alarms += wc._change_point(rng.normal(0.3, sig), sig) < 40
    assert alarms / 1500 < 0.08
    found = []
    for _ in range(800):
        sig = np.full(40, 0.2)
        ph = rng.normal(0.0, sig)
        ph[20:] += 0.4
        found.append(wc._change_point(ph, sig))
    found = np.array(found)
    assert np.mean(found < 40) >= 0.97
    assert np.mean(np.abs(found - 20) <= 2) >= 0.80
