"""An independent multi-offset gather simulator shared by the picking tests.

Ricker wavelets at straight-line air and ground moveout and at hyperbolic
reflection times, written here without soilwave's own forward models.
"""

import numpy as np
from scipy import constants

from soilwave.gather import gather_from_array

C = constants.c * 1e-9  # m/ns, CODATA
F = 200.0  # MHz
T = 1000.0 / F  # ns


C = constants.c * 1e-9  # m/ns, CODATA
F = 200.0  # MHz
T = 1000.0 / F  # ns


def ricker(t, f_mhz=F):
    u = (np.pi * f_mhz * 1e-3 * t) ** 2
    return (1.0 - 2.0 * u) * np.exp(-u)


def gather(
    x, *, v1=0.1, reflections=(), dt=0.1, n=900, noise=0.0, seed=0, t_first=0.0, air=1.0, ground=0.8
):
    """Air wave, ground wave and hyperbolic reflections (t0, v_rms, amplitude)."""
    t = t_first + np.arange(n) * dt
    tt = t[None, :]
    xx = x[:, None]
    data = air * ricker(tt - xx / C) + ground * ricker(tt - xx / v1)
    for t0, v, amp in reflections:
        data = data + amp * ricker(tt - np.sqrt(t0**2 + (xx / v) ** 2))
    data = data + noise * np.random.default_rng(seed).standard_normal(data.shape)
    return gather_from_array(data, offsets=x, dt_ns=dt, frequency_mhz=F, t0_ns=t_first)


X = np.round(np.arange(0.5, 4.001, 0.1), 6)


def _phase(p, phase, interface=None):
    sel = p.phase.values == phase
    if interface is not None:
        sel &= p.interface.values == interface
    return p.offset.values[sel], p.time.values[sel], p.sigma.values[sel]
