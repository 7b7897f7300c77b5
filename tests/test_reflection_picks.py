"""Tests of soilwave.reflection_picks: post-critical reflections are not picked early.

The gathers come from soilwave.synthetic_gather, which models the complex
(total) reflection coefficient beyond the critical angle and the head wave
(kernels of the wavelet-change test: tests/test_wavelet_change.py).
Reflection times for checking come from the straight-ray geometry of a flat
reflector under a homogeneous layer, t = sqrt(4 z^2 + x^2) / v1, and the
critical distance from Snell's law, x_c = 2 z tan(asin(v1 / v2)) (both
derived).
"""

from __future__ import annotations

import warnings

import numpy as np
from scipy import constants

import soilwave as sw
import soilwave.reflection_picks as rp

C = constants.c * 1e-9  # m/ns, CODATA
F = 500.0  # MHz
DT = 0.1  # ns
OFFSETS = np.round(np.arange(0.20, 2.40 + 1e-9, 0.05), 3)


# --- post-critical reflections (soilwave.synthetic forward model) ------------------------
#
# Wet over dry soil (the layer below faster): 500 MHz CMP, offsets 0.2-2.4 m,
# noise 0.2 % of the gather's peak. Beyond x_c the synthetic reflection is
# total (complex coefficient) and a head wave runs along the interface.

FAST_BELOW = [
    ([19.0, 6.7], 0.6, [14.0, 6.0]),  # x_c 0.89 m
    ([25.0, 9.0], 0.5, [14.0, 6.0]),  # x_c 0.75 m
    ([16.0, 6.0], 0.8, [12.0, 4.0]),  # x_c 1.24 m, weak: picked on partial stacks
]


def cmp_picks(eps, z, cond, seed):
    model = {"permittivity": eps, "thickness": [z], "conductivity": cond}
    g = sw.synthetic_gather(
        model,
        offsets=OFFSETS,
        dt_ns=DT,
        n_samples=700,
        frequency_mhz=F,
        t0_ns=-5.0,
        noise=0.002,
        rng=seed,
    )
    return sw.auto_pick(g)


def reflection_z(p, eps, z):
    sel = (p.phase.values == "reflection") & (p.interface.values == 1)
    x, t, s = p.offset.values[sel], p.time.values[sel], p.sigma.values[sel]
    v1 = C / np.sqrt(eps[0])
    return x, (t - np.sqrt(4 * z**2 + x**2) / v1) / s


def critical_distance(eps, z):
    return 2 * z * np.tan(np.arcsin(np.sqrt(eps[1] / eps[0])))


def test_post_critical_picks_are_left_out():
    # Over 3 models x 4 seeds (about 130 picks): >= 95 % of the reflection picks
    # within 2 sigma of the ray time and none beyond 3 sigma (a Gaussian gives
    # 95.4 % and 0.3 %); events followed trace by trace stop within 0.6 m past
    # x_c (the test needs a few rotated picks to see the change).
    zs = []
    for eps, z, cond in FAST_BELOW:
        xc = critical_distance(eps, z)
        for seed in range(4):
            p = cmp_picks(eps, z, cond, seed)
            x, zz = reflection_z(p, eps, z)
            assert x.size >= 1
            zs.append(zz)
            if p.attrs["reflection_traces_per_pick"][0] == 1:
                assert x.max() <= xc + 0.6, (eps, seed)
                assert p.attrs["reflection_wavelet_change_offset_m"][0] <= xc + 0.65
    zs = np.concatenate(zs)
    assert zs.size >= 100
    assert np.mean(np.abs(zs) <= 2.0) >= 0.95
    assert np.all(np.abs(zs) <= 3.0)


def test_without_the_wavelet_test_post_critical_picks_are_early(monkeypatch):
    # Control: with the wavelet-change test switched off the same events are
    # followed past x_c and their main-lobe picks there come out early: on
    # average more than one sigma, the worst more than two (with the test: none
    # beyond 2 sigma, see above).
    eps, z, cond = FAST_BELOW[0]
    xc = critical_distance(eps, z)
    monkeypatch.setattr(rp, "_wavelet_change", lambda *args: len(args[4]))
    for seed in (0, 1):
        p = cmp_picks(eps, z, cond, seed)
        x, zz = reflection_z(p, eps, z)
        assert x.max() > xc + 0.5
        assert np.mean(zz[x > xc + 0.2]) < -1.0
        assert zz.min() < -2.0


def test_slower_layer_below_keeps_its_picks():
    # No critical angle under a slower layer (dry over wet): the wavelet does
    # not change, so at most 2 of 8 events stop early (false alarms of the
    # CUSUM plus the ground-wave tail at far offsets; 1 of 8 measured).
    eps, z = [6.7, 19.0], 0.5
    stopped = 0
    for seed in range(8):
        p = cmp_picks(eps, z, [6.0, 14.0], seed)
        _, zz = reflection_z(p, eps, z)
        stopped += bool(np.isfinite(p.attrs["reflection_wavelet_change_offset_m"][0]))
        assert np.all(np.abs(zz) <= 3.0)
    assert stopped <= 2


def test_front_depth_interval_contains_truth():
    # sw.invert of the picks (travel times; pick sigmas taken as stated, i.e.
    # noise scale fixed at 1): the 90 % interval of the interface depth holds
    # the true depth in >= 5 of 6 runs (3 models x 2 seeds). For exactly
    # calibrated intervals P(>= 5 of 6) = 0.89; the T/10 sigma floor makes them
    # conservative (24 of 24 in development runs).
    hits = 0
    for eps, z, cond in FAST_BELOW:
        for seed in (0, 1):
            p = cmp_picks(eps, z, cond, seed)
            with warnings.catch_warnings():
                warnings.simplefilter("ignore", sw.SoilwaveWarning)
                res = sw.invert(p, seed=0, amplitudes=False, priors=sw.Priors(noise_scale_sd=None))
            depth = res.samples["depth"].isel(layer=0).values
            lo, hi = np.quantile(depth, [0.05, 0.95])
            hits += lo <= z <= hi
    assert hits >= 5


def test_event_with_too_few_picks_gets_the_cautious_sigma():
    # An event left with fewer than three picks cannot be checked for a wavelet
    # change; its sigma is at least a quarter period (the cautious end of the
    # usual tenth to quarter, value from memory), the others' at least a tenth.
    eps, z, cond = FAST_BELOW[1]
    few = 0
    for seed in (4, 5):
        p = cmp_picks(eps, z, cond, seed)
        sel = (p.phase.values == "reflection") & (p.interface.values == 1)
        floor = (0.25 if sel.sum() < 3 else 0.1) * p.attrs["period_ns"]
        assert np.all(p.sigma.values[sel] >= floor - 1e-12)
        few += sel.sum() < 3
    assert few == 1
