"""Tests of soilwave.firstbreaks: air and ground waves on gathers, pick uncertainty.

Gathers are built here with their own formulas (Ricker wavelets at travel
times x/c and x/v), independent of soilwave.synthetic.
"""

from __future__ import annotations

import numpy as np
import pytest
from simple_gathers import C, F, T, X, _phase, gather

import soilwave as sw
from soilwave.errors import InputError
from soilwave.firstbreaks import _pick_sigma
from soilwave.gather import gather_from_array

# --- first breaks ---------------------------------------------------------------------


@pytest.mark.parametrize("method", ["energy_ratio", "sta_lta"])
@pytest.mark.parametrize("v1", [0.1, 0.06])
def test_first_breaks_within_half_a_sample_on_clean_data(method, v1):
    dt = 0.1
    g = gather(X, v1=v1, dt=dt)
    p = sw.first_breaks(g, method=method)
    xa, ta, _ = _phase(p, "air")
    xg, tg, _ = _phase(p, "ground")
    assert np.all(np.abs(ta - xa / C) < dt / 2)
    assert np.all(np.abs(tg - xg / v1) < dt / 2)
    # picks are left out only where the two arrivals are within one period
    separated = X * (1 / v1 - 1 / C) >= T * 1.0001
    assert set(xg.tolist()) == set(X[separated].tolist())
    assert set(xa.tolist()) == set(X[separated].tolist())
    assert p.attrs["ground_velocity"] == pytest.approx(v1, rel=1e-3)


def test_first_breaks_recover_time_zero_shift():
    # The record starts 4 ns before the transmitter fires (time zero unknown to
    # the picker): the air wave is held to x/c and its intercept removed.
    dt = 0.1
    g = gather(X, dt=dt)
    shifted = g.assign_coords(time=g["time"].values + 4.0)
    p = sw.first_breaks(shifted)
    assert p.attrs["time_shift_ns"] == pytest.approx(4.0, abs=dt / 2)
    xa, ta, _ = _phase(p, "air")
    assert np.all(np.abs(ta - xa / C) < dt / 2)
    q = sw.first_breaks(shifted, align_air=False)
    xa, ta, _ = _phase(q, "air")
    assert np.all(np.abs(ta - xa / C - 4.0) < dt / 2)


def test_first_breaks_in_noise_hold_linear_moveout():
    # With noise the picks scatter but stay within a quarter period of the lines
    # (the moveout gate), and the fitted ground velocity is within 1 %.
    g = gather(X, noise=0.05, seed=3)
    p = sw.first_breaks(g)
    xg, tg, sg = _phase(p, "ground")
    assert xg.size >= 20
    assert np.all(np.abs(tg - xg / 0.1) < T / 4)
    assert p.attrs["ground_velocity"] == pytest.approx(0.1, rel=0.01)
    assert np.all(sg >= T / 10 - 1e-12)


def test_no_air_wave_is_an_error():
    rng = np.random.default_rng(1)
    g = gather_from_array(
        rng.standard_normal((20, 500)), offsets=np.linspace(0.5, 4, 20), dt_ns=0.1, frequency_mhz=F
    )
    with pytest.raises(InputError, match="no air wave"):
        sw.first_breaks(g)
    with pytest.raises(InputError, match="no air wave"):
        sw.auto_pick(g)


# --- pick uncertainty -------------------------------------------------------------------


def test_pick_sigma_formula():
    # sigma = max(T / (2 pi A / sigma_n), T / 10) (common practice; derived values)
    got = _pick_sigma(np.array([0.05, 0.2, 10.0]), 0.1, 5.0)
    assert got[0] == pytest.approx(5.0 * 0.1 / (2 * np.pi * 0.05))  # 1.5915 ns
    assert got[1] == pytest.approx(0.5)  # floored: 0.398 < T/10
    assert got[2] == pytest.approx(0.5)
