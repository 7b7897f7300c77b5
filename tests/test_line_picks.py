"""Tests of soilwave.pick_line_arrivals: air and ground waves on fixed-offset profiles.

Most profiles are built here with their own formulas (Ricker wavelets at the
air-wave time a/c and the ground-wave time a sqrt(eps)/c, Huisman et al. 2003,
Vadose Zone J. 2:476-491), independent of soilwave.synthetic; one test uses
soilwave.synthetic_gather per position, as the demo line does.
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from scipy import constants

import soilwave as sw
from soilwave.errors import InputError, RangeWarning
from soilwave.gather import gather_from_array

C = constants.c * 1e-9  # m/ns, CODATA
F = 500.0  # MHz
T = 1000.0 / F  # ns
DT = 0.1  # ns


def ricker(t, f_mhz=F):
    """Ricker wavelet (peak frequency f) centred at t = 0; t in ns."""
    u = (np.pi * f_mhz * 1e-3 * t) ** 2
    return (1.0 - 2.0 * u) * np.exp(-u)


def line_eps(pos):
    """A wet patch between 12 and 16 m (sharp edges) on a slowly wetter line: eps 6 to 20."""
    base = 6.0 + 0.15 * pos
    patch = 0.5 * (np.tanh((pos - 12.0) / 0.3) - np.tanh((pos - 16.0) / 0.3))
    return base + patch * (20.0 - base)


def profile(
    eps,
    *,
    pos=None,
    sep=1.0,
    noise=0.0,
    seed=0,
    t_first=-5.0,
    n=400,
    shift=0.0,
    ground=0.6,
):
    """Air wave at sep/c, ground wave at sep sqrt(eps)/c (+ shift per trace), white noise."""
    eps = np.asarray(eps, dtype=float)
    pos = np.arange(eps.size) * 0.25 if pos is None else pos
    t = t_first + DT * np.arange(n)
    shift = np.broadcast_to(np.asarray(shift, dtype=float), eps.shape)
    t_air = sep / C + shift
    t_ground = sep * np.sqrt(eps) / C + shift
    data = ricker(t[None, :] - t_air[:, None]) + ground * ricker(t[None, :] - t_ground[:, None])
    data = data + noise * np.random.default_rng(seed).standard_normal(data.shape)
    prof = gather_from_array(
        data, positions=pos, dt_ns=DT, t0_ns=t_first, frequency_mhz=F, antenna_separation_m=sep
    )
    return prof, t_air, t_ground


def split(p):
    ph = p.phase.values
    out = {}
    for name in ("air", "ground"):
        sel = ph == name
        out[name] = (p.position.values[sel], p.time.values[sel], p.sigma.values[sel])
    return out


POS = np.arange(0.0, 30.0 + 1e-9, 0.25)


@pytest.mark.parametrize("method", ["energy_ratio", "sta_lta"])
def test_clean_picks_within_half_a_sample(method):
    # Ground-wave times from 8.2 to 14.9 ns along the line (sharp wet patch).
    eps = line_eps(POS)
    prof, t_air, t_ground = profile(eps, pos=POS)
    assert t_ground.min() < 8.5 and t_ground.max() > 14.5
    p = sw.pick_line_arrivals(prof, method=method)
    s = split(p)
    np.testing.assert_array_equal(s["air"][0], POS)
    np.testing.assert_array_equal(s["ground"][0], POS)
    assert np.all(np.abs(s["air"][1] - t_air) < DT / 2)
    assert np.all(np.abs(s["ground"][1] - t_ground) < DT / 2)
    assert np.all(p.offset.values == 1.0)
    assert set(p.interface.values.tolist()) == {0}
    assert p.attrs["skipped_positions"].size == 0


def test_unknown_time_zero_is_removed_line_wide():
    # The record's time axis is 1.7 ns late (time zero unknown to the picker):
    # the line-wide air-wave misfit is subtracted, the air wave then sits at a/c.
    eps = line_eps(POS)
    prof, t_air, t_ground = profile(eps, pos=POS, shift=1.7)
    p = sw.pick_line_arrivals(prof)
    assert p.attrs["time_shift_ns"] == pytest.approx(1.7, abs=DT / 2)
    s = split(p)
    assert np.all(np.abs(s["air"][1] - (t_air - 1.7)) < DT / 2)
    assert np.all(np.abs(s["ground"][1] - (t_ground - 1.7)) < DT / 2)
    q = sw.pick_line_arrivals(prof, time_zero="none")
    assert np.all(np.abs(split(q)["ground"][1] - t_ground) < DT / 2)


def test_time_zero_per_trace_follows_drift():
    # Time zero drifts by up to 0.8 ns along the line (a slow drift plus
    # jitter): with time_zero="trace" every air pick is a/c and every ground
    # pick is a sqrt(eps)/c, within half a sample.
    eps = line_eps(POS)
    rng = np.random.default_rng(11)
    drift = 0.6 * np.sin(POS / 5.0) + rng.uniform(-0.2, 0.2, POS.size)
    prof, _, _ = profile(eps, pos=POS, shift=drift)
    p = sw.pick_line_arrivals(prof, time_zero="trace")
    s = split(p)
    assert np.allclose(s["air"][1], 1.0 / C)
    assert np.all(np.abs(s["ground"][1] - np.sqrt(eps) / C) < DT)
    assert np.all(s["air"][2] > 0)  # the air picks keep their uncertainty


def test_noisy_picks_within_two_sigma():
    # White noise of 5 % of the air-wave peak. The picks' sigma (Cramer-Rao
    # style, floored at T/10; common practice) must cover the error: at least
    # 90 % of the picks within 2 sigma (95 % expected for Gaussian errors),
    # every pick within 4 sigma, mean error below 0.05 ns.
    eps = line_eps(POS)
    prof, t_air, t_ground = profile(eps, pos=POS, noise=0.05, seed=3)
    p = sw.pick_line_arrivals(prof)
    s = split(p)
    assert s["ground"][0].size == POS.size
    for name, truth in (("air", t_air), ("ground", t_ground)):
        _, tp, sp = s[name]
        err = tp - truth
        assert np.mean(np.abs(err) < 2 * sp) >= 0.9
        assert np.all(np.abs(err) < 4 * sp)
        assert abs(np.mean(err)) < 0.05
    # noise level from the pre-air samples: within 20 % of the true 0.05
    assert p.attrs["noise_level"] == pytest.approx(0.05, rel=0.2)


def test_synthetic_gather_per_position():
    # soilwave.synthetic forward model (layered ray theory, attenuation,
    # spreading), one single-offset gather per position as a moving antenna
    # pair would record; picks against the arrivals synthetic_gather reports.
    pos = np.arange(0.0, 20.0, 0.5)
    eps = 6.0 + 14.0 * np.exp(-0.5 * ((pos - 10.0) / 3.0) ** 2)
    rng = np.random.default_rng(5)
    traces, truth = [], {"air": [], "ground": []}
    for e in eps:
        earth = sw.LayeredEarth(permittivity=[float(e)], thickness=[], conductivity=[8.0])
        g, arr = sw.synthetic_gather(
            earth,
            offsets=[1.0],
            dt_ns=DT,
            n_samples=400,
            frequency_mhz=F,
            t0_ns=-5.0,
            noise=0.02,
            rng=rng,
            include=("air", "ground"),
            return_arrivals=True,
        )
        traces.append(g.values[0])
        for ph in ("air", "ground"):
            truth[ph].append(float(arr.time.values[arr.phase.values == ph][0]))
    prof = gather_from_array(
        np.asarray(traces),
        positions=pos,
        dt_ns=DT,
        t0_ns=-5.0,
        frequency_mhz=F,
        antenna_separation_m=1.0,
    )
    p = sw.pick_line_arrivals(prof)
    s = split(p)
    assert s["ground"][0].size == pos.size
    for ph in ("air", "ground"):
        _, tp, sp = s[ph]
        err = tp - np.asarray(truth[ph])
        assert np.mean(np.abs(err) < 2 * sp) >= 0.9
        assert np.all(np.abs(err) < 4 * sp)


def test_overlapping_arrivals_are_skipped_with_a_warning():
    # 0.5 m separation over eps 2 to 16: the ground wave trails the air wave by
    # dt = a (sqrt(eps) - 1) / c = 0.69 to 5.0 ns (T = 2 ns). Traces with
    # dt < 0.75 T must be skipped (no pick at all), traces with dt > 1.25 T
    # kept, and every kept pick must be right (no garbage near the boundary).
    pos = np.arange(0.0, 15.0, 0.25)
    eps = np.linspace(2.0, 16.0, pos.size)
    sep = 0.5
    prof, t_air, t_ground = profile(eps, pos=pos, sep=sep, noise=0.01, seed=2)
    lag = t_ground - t_air
    with pytest.warns(RangeWarning, match="skipped"):
        p = sw.pick_line_arrivals(prof)
    s = split(p)
    kept = np.isin(pos, s["ground"][0])
    np.testing.assert_array_equal(s["air"][0], s["ground"][0])
    assert not np.any(kept & (lag < 0.75 * T))
    assert np.all(kept[lag > 1.25 * T])
    np.testing.assert_array_equal(np.sort(p.attrs["skipped_positions"]), pos[~kept])
    assert np.all(np.abs(s["ground"][1] - t_ground[kept]) < 2 * s["ground"][2])
    assert np.all(np.abs(s["air"][1] - t_air[kept]) < 2 * s["air"][2])


def test_missing_ground_wave_skips_the_trace():
    # A stretch of traces without a ground wave (e.g. a road crossing): those
    # positions get no picks and a warning; the others are unaffected.
    eps = line_eps(POS)
    prof, _, t_ground = profile(eps, pos=POS, noise=0.01, seed=4)
    gap = (POS > 5.0) & (POS < 7.0)
    t = prof["time"].values
    vals = prof.values.copy()
    vals[gap] -= 0.6 * ricker(t[None, :] - t_ground[gap][:, None])
    prof = prof.copy(data=vals)
    with pytest.warns(RangeWarning, match="no ground wave"):
        p = sw.pick_line_arrivals(prof)
    s = split(p)
    np.testing.assert_array_equal(s["ground"][0], POS[~gap])


def test_water_content_along_the_line():
    # End to end: picks -> groundwave_water_content with the CRIM model
    # (Roth et al. 1990) that made the permittivities; the median water
    # content within 0.01 m3/m3 of the truth at every position.
    crim = sw.CRIM(porosity=0.43, eps_solid=5.0, temperature=15.0)
    theta = 0.10 + 0.2 * np.exp(-0.5 * ((POS - 15.0) / 4.0) ** 2)
    eps = np.asarray(crim.permittivity(theta))
    prof, _, _ = profile(eps, pos=POS, noise=0.02, seed=8)
    p = sw.pick_line_arrivals(prof)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", sw.SoilwaveWarning)
        wc = sw.groundwave_water_content(p, model=crim, seed=0, n_draws=500)
    med = wc["water_content"].sel(quantile=0.5).values
    assert np.all(np.abs(med - theta) < 0.01)


def test_survey_time_and_history():
    eps = line_eps(POS[:40])
    prof, _, _ = profile(eps, pos=POS[:40])
    before = prof.copy(deep=True)
    p = sw.pick_line_arrivals(prof, survey_time=4.0)
    assert prof.identical(before)
    assert np.all(p.survey_time.values == 4.0)
    assert "pick_line_arrivals(" in p.attrs["history"].splitlines()[-1]
    assert p.attrs["frequency_mhz"] == F


def test_bad_input():
    x = np.arange(0.5, 3.0, 0.1)
    cmp_gather = gather_from_array(np.zeros((x.size, 100)), offsets=x, dt_ns=DT, frequency_mhz=F)
    with pytest.raises(InputError, match="fixed-offset profile"):
        sw.pick_line_arrivals(cmp_gather)
    prof, _, _ = profile(line_eps(POS[:20]), pos=POS[:20])
    no_sep = prof.copy()
    no_sep.attrs = {k: v for k, v in prof.attrs.items() if k != "antenna_separation_m"}
    with pytest.raises(InputError, match="antenna_separation"):
        sw.pick_line_arrivals(no_sep)
    with pytest.raises(InputError, match="antenna separation must be > 0"):
        sw.pick_line_arrivals(prof, antenna_separation=0.0)
    with pytest.raises(InputError, match="time_zero must be"):
        sw.pick_line_arrivals(prof, time_zero="first")
    with pytest.raises(InputError, match="method must be"):
        sw.pick_line_arrivals(prof, method="guess")
    with pytest.raises(InputError, match="min_snr"):
        sw.pick_line_arrivals(prof, min_snr=-1.0)
    noise = gather_from_array(
        np.random.default_rng(1).standard_normal((20, 400)),
        positions=np.arange(20.0),
        dt_ns=DT,
        frequency_mhz=F,
        antenna_separation_m=1.0,
    )
    with pytest.raises(InputError, match="no air wave"):
        sw.pick_line_arrivals(noise)
