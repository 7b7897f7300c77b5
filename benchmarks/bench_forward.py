"""Benchmark: vectorised batch travel times vs a per-walker scalar loop.

A two-interface gather with 100 picks (air, ground and two reflections at 25
offsets each) is evaluated for an ensemble of 64 models (walkers):

* vectorised: one :class:`soilwave.TravelTimeOperator` call on arrays of shape
  (64, ...);
* reference: a plain loop over walkers and picks, each reflection solved for
  its ray parameter with scalar ``scipy.optimize.brentq`` (the unvectorised
  way of writing the same forward model).

Both must agree to 1e-6 ns. Goal: the vectorised call at least 50 times faster.
Run: ``python benchmarks/bench_forward.py``.
"""

from __future__ import annotations

import time

import numpy as np
from scipy import constants
from scipy.optimize import brentq

from soilwave import TravelTimeOperator

C = constants.c * 1e-9
N_WALKERS = 64
REPEATS = 7


def gather():
    x = np.linspace(0.2, 5.0, 25)
    offset = np.tile(x, 4)
    phase = ["air"] * 25 + ["ground"] * 25 + ["reflection"] * 50
    interface = [0] * 50 + [1] * 25 + [2] * 25
    return offset, np.array(phase), np.array(interface)


def scalar_time(x, phase, k, h, v, tz):
    """One pick, one model, scalar arithmetic and brentq."""
    if phase == "air":
        return x / C + tz
    if phase == "ground":
        return x / v[0] + tz
    hh, vv = h[:k], v[:k]
    if x == 0:
        return float(np.sum(2 * hh / vv)) + tz

    def f(p):
        return float(np.sum(2 * hh * p * vv / np.sqrt(1 - (p * vv) ** 2))) - x

    p = brentq(f, 0.0, (1 - 1e-15) / vv.max(), xtol=1e-300, rtol=4 * np.finfo(float).eps)
    return float(p * x + np.sum(2 * hh * np.sqrt(1 / vv**2 - p**2))) + tz


def loop(offset, phase, interface, h, v, tz):
    out = np.empty((h.shape[0], offset.size))
    for m in range(h.shape[0]):
        for i in range(offset.size):
            out[m, i] = scalar_time(offset[i], phase[i], interface[i], h[m], v[m], tz[m])
    return out


def best_of(fn, repeats):
    times = []
    for _ in range(repeats):
        t0 = time.perf_counter()
        result = fn()
        times.append(time.perf_counter() - t0)
    return min(times), float(np.median(times)), result


def main():
    rng = np.random.default_rng(2024)
    offset, phase, interface = gather()
    h = rng.uniform(0.2, 1.2, (N_WALKERS, 2))
    v = C / np.sqrt(rng.uniform(3.0, 30.0, (N_WALKERS, 3)))
    tz = rng.normal(0.0, 1.0, N_WALKERS)

    t_build = time.perf_counter()
    op = TravelTimeOperator(offset, phase, interface)
    t_build = time.perf_counter() - t_build
    op(h, v, tz)  # warm up

    vec_best, vec_median, pred = best_of(lambda: op(h, v, tz), 50)
    loop_best, loop_median, ref = best_of(lambda: loop(offset, phase, interface, h, v, tz), REPEATS)
    err = float(np.max(np.abs(pred - ref)))

    print(f"gather: {offset.size} picks (air, ground, 2 reflections), {N_WALKERS} walkers")
    print(f"operator construction            : {t_build * 1e3:9.3f} ms (once)")
    print(
        f"vectorised call (64 walkers)     : {vec_best * 1e3:9.3f} ms best, "
        f"{vec_median * 1e3:.3f} ms median of 50"
    )
    print(
        f"per-walker scalar brentq loop    : {loop_best * 1e3:9.3f} ms best, "
        f"{loop_median * 1e3:.3f} ms median of {REPEATS}"
    )
    print(f"speed-up (best / best)           : {loop_best / vec_best:9.1f} x   (goal >= 50 x)")
    print(f"max |vectorised - scalar|        : {err:9.2e} ns  (goal <= 1e-6 ns)")
    print(
        f"per walker: {vec_best / N_WALKERS * 1e6:.1f} us vectorised, "
        f"{loop_best / N_WALKERS * 1e3:.2f} ms scalar"
    )


if __name__ == "__main__":
    main()
