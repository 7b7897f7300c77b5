"""Starting layered model from a pick table (NMO regression and Dix).

The Bayesian inversion starts its optimiser and walkers near a model read off
the picks with the classical textbook recipe:

1. **time zero** from the air wave: ``t_air = t_zero + x / c``, so ``t_zero``
   is the weighted mean of ``t - x / c`` (weights ``1 / sigma^2``). Without air
   picks, the intercept of the ground-wave line (step 2) when it has two or
   more offsets, else 0 ns.
2. **v1** from the direct ground wave, ``t - t_zero = x / v1``: weighted least
   squares of the slowness through the origin.
3. **each interface** ``k`` from its reflection picks by the normal-moveout
   regression ``t^2 = t0^2 + x^2 / V_rms^2`` (Dix 1955; linear in ``x^2``), which
   gives the zero-offset time ``t0`` and the RMS velocity.
4. **interval velocities** from the Dix (1955) equation
   (:func:`soilwave.layered.dix_interval_velocity`) and thicknesses
   ``h_k = v_k (t0_k - t0_{k-1}) / 2``. Layers between two reflected
   interfaces with no picks of their own share the interval of the pair.
5. **head waves** (refractions) along interface ``k`` give ``v_{k+1}`` as the
   inverse slope of ``t`` against ``x``, and, where no reflection fixed that
   interface, its depth from the intercept time.

Whatever the picks leave undetermined falls back to a neutral value (the
velocity of the layer above, or of relative permittivity 9, a moist-soil
middle value, common practice; a thickness equal to the mean of the known
ones or 0.5 m), and everything is clipped into the physical bounds so the
result is a valid starting point for the priors of :mod:`soilwave.priors`.
"""

from __future__ import annotations

import numpy as np

from soilwave.errors import InputError
from soilwave.layered import dix_interval_velocity
from soilwave.picks import validate_picks
from soilwave.traveltime import C_M_PER_NS

__all__ = ["initial_model"]

_FALLBACK_EPS = 9.0
_FALLBACK_THICKNESS = 0.5
_MARGIN = 1e-3


def _weighted_line(x, y, w, *, through_origin: bool):
    """Weighted least squares ``y = a + b x``; returns ``(a, b)`` or None."""
    with np.errstate(over="ignore", invalid="ignore"):
        if through_origin:
            den = np.sum(w * x * x)
            b = np.sum(w * x * y) / den if den > 0 else np.nan
            return (0.0, float(b)) if np.isfinite(b) else None
        if np.unique(x).size < 2:
            return None
        A = np.stack([np.ones_like(x), x], axis=1) * np.sqrt(w)[:, None]
        rhs = y * np.sqrt(w)
    if not (np.all(np.isfinite(A)) and np.all(np.isfinite(rhs))):
        return None  # weights overflow (sigmas near zero): no usable line
    try:
        coef, *_ = np.linalg.lstsq(A, rhs, rcond=None)
    except np.linalg.LinAlgError:
        return None
    return float(coef[0]), float(coef[1])


def initial_model(
    picks,
    *,
    n_interfaces=None,
    permittivity_bounds=(1.0, 90.0),
    thickness_bounds=(0.02, 5.0),
) -> dict:
    """Starting values of a layered model from a pick table.

    Parameters
    ----------
    picks : xarray.Dataset
        Pick table (:func:`soilwave.read_picks`, :func:`soilwave.make_picks`).
    n_interfaces : int, optional
        Number of interfaces of the model; default the highest interface in
        the reflection and refraction picks (0 if none).
    permittivity_bounds : (float, float), optional
        Relative permittivity bounds (default 1 to 90); velocities are clipped
        just inside ``c / sqrt(bounds)``.
    thickness_bounds : (float, float), optional
        Thickness bounds, m (default 0.02 to 5 m, the default prior).

    Returns
    -------
    dict
        ``thickness`` (m, shape ``(n_interfaces,)``), ``velocity`` (m/ns, shape
        ``(n_interfaces + 1,)``), ``permittivity`` (``(c / velocity)^2``) and
        ``time_zero`` (ns, float).

    Examples
    --------
    >>> import numpy as np
    >>> from soilwave import make_picks, TravelTimeOperator
    >>> x = np.tile([0.5, 1.0, 1.5, 2.0], 2)
    >>> ph = ["ground"] * 4 + ["reflection"] * 4
    >>> itf = [0] * 4 + [1] * 4
    >>> t = TravelTimeOperator(x, ph, itf)([0.8], [0.1, 0.07], 2.0)
    >>> m = initial_model(make_picks(x, t, ph, interface=itf, sigma=0.2))
    >>> [round(float(m[k][0]), 3) for k in ("velocity", "thickness")], round(m["time_zero"], 2)
    ([0.1, 0.8], 2.0)
    """
    picks = validate_picks(picks)
    x = picks["offset"].values
    t = picks["time"].values
    w = 1.0 / picks["sigma"].values ** 2
    ph = picks["phase"].values
    itf = picks["interface"].values
    layered = np.isin(ph, ("reflection", "refraction"))
    highest = int(itf[layered].max()) if layered.any() else 0
    if n_interfaces is None:
        n = highest
    else:
        if isinstance(n_interfaces, bool) or not isinstance(n_interfaces, int | np.integer):
            msg = f"n_interfaces must be an integer >= 0; got {n_interfaces!r}"
            raise InputError(msg)
        n = int(n_interfaces)
        if n < highest:
            msg = (
                f"n_interfaces={n} is less than the highest interface in the picks "
                f"({highest}); expected n_interfaces >= {highest}"
            )
            raise InputError(msg)
    eps_lo, eps_hi = (float(b) for b in permittivity_bounds)
    h_lo, h_hi = (float(b) for b in thickness_bounds)
    if not (1.0 <= eps_lo < eps_hi and 0.0 < h_lo < h_hi):
        msg = (
            f"bounds permittivity {permittivity_bounds!r}, thickness {thickness_bounds!r} "
            "must be increasing pairs with permittivity >= 1 and thickness > 0"
        )
        raise InputError(msg)
    v_min = C_M_PER_NS / np.sqrt(eps_hi * (1.0 - _MARGIN))
    v_max = C_M_PER_NS / np.sqrt(eps_lo * (1.0 + _MARGIN))

    # 1-2: time zero and v1
    air = ph == "air"
    ground = ph == "ground"
    time_zero = None
    if air.any():
        time_zero = float(np.sum(w[air] * (t[air] - x[air] / C_M_PER_NS)) / np.sum(w[air]))
    v1 = None
    if ground.any():
        if time_zero is None:
            line = _weighted_line(x[ground], t[ground], w[ground], through_origin=False)
            if line is not None and line[1] > 0:
                time_zero, v1 = line[0], 1.0 / line[1]
        if v1 is None:
            tz = 0.0 if time_zero is None else time_zero
            line = _weighted_line(x[ground], t[ground] - tz, w[ground], through_origin=True)
            if line is not None and line[1] > 0:
                v1 = 1.0 / line[1]
    if time_zero is None:
        time_zero = 0.0

    # 3: NMO regression per reflected interface
    t0 = {}
    vrms = {}
    for k in range(1, n + 1):
        sel = (ph == "reflection") & (itf == k)
        if not sel.any():
            continue
        tc = t[sel] - time_zero
        if np.any(tc <= 0):
            continue
        # weights for t^2: sigma(t^2) = 2 t sigma(t)
        wk = w[sel] / (4.0 * tc**2)
        line = _weighted_line(x[sel] ** 2, tc**2, wk, through_origin=False)
        if line is not None and line[0] > 0 and line[1] > 0:
            t0[k], vrms[k] = float(np.sqrt(line[0])), float(1.0 / np.sqrt(line[1]))
        else:
            # one offset (or a degenerate fit): use the velocity above for the moveout
            v_guess = vrms[max(vrms)] if vrms else (v1 if v1 else C_M_PER_NS / 3.0)
            t0sq = tc**2 - x[sel] ** 2 / v_guess**2
            if np.all(t0sq > 0):
                t0[k], vrms[k] = float(np.sqrt(np.average(t0sq, weights=wk))), v_guess
    # keep a strictly increasing sequence of zero-offset times
    known = []
    for k in sorted(t0):
        if not known or t0[k] > t0[known[-1]]:
            known.append(k)

    velocity = np.full(n + 1, np.nan)
    thickness = np.full(n, np.nan)
    if v1 is not None:
        velocity[0] = v1
    # 4: Dix between consecutive reflected interfaces
    if known:
        tt = np.array([t0[k] for k in known])
        vv = np.array([vrms[k] for k in known])
        vint = dix_interval_velocity(tt, vv, invalid="nan")
        prev_k, prev_t = 0, 0.0
        for j, k in enumerate(known):
            vi = vint[j]
            if not np.isfinite(vi):
                vi = vv[j]
            layers = np.arange(prev_k, k)  # 0-based layers between the two interfaces
            dt = (tt[j] - prev_t) / layers.size
            for i in layers:
                if i > 0 or np.isnan(velocity[0]):
                    velocity[i] = vi
                thickness[i] = velocity[i] * dt / 2.0
            prev_k, prev_t = k, tt[j]

    # 5: head waves: velocity below each refracting interface, then missing depths
    refr_line = {}
    for k in range(1, n + 1):
        sel = (ph == "refraction") & (itf == k)
        if not sel.any():
            continue
        line = _weighted_line(x[sel], t[sel] - time_zero, w[sel], through_origin=False)
        if line is not None and line[1] > 0:
            refr_line[k] = line
            if np.isnan(velocity[k]):
                velocity[k] = 1.0 / line[1]

    # fallbacks for velocities, then clipping
    for i in range(n + 1):
        if np.isnan(velocity[i]):
            velocity[i] = velocity[i - 1] if i > 0 else C_M_PER_NS / np.sqrt(_FALLBACK_EPS)
    velocity = np.clip(velocity, v_min, v_max)

    for k, (intercept, _slope) in sorted(refr_line.items()):
        if np.isfinite(thickness[k - 1]) or not all(np.isfinite(thickness[: k - 1])):
            continue
        vb = velocity[k]
        va = velocity[:k]
        if np.any(va >= vb):
            continue
        q = np.sqrt(1.0 / va**2 - 1.0 / vb**2)
        rest = intercept - np.sum(2.0 * thickness[: k - 1] * q[: k - 1])
        if rest > 0:
            thickness[k - 1] = rest / (2.0 * q[k - 1])

    good = thickness[np.isfinite(thickness) & (thickness > 0)]
    fill = float(np.mean(good)) if good.size else _FALLBACK_THICKNESS
    thickness = np.where(np.isfinite(thickness) & (thickness > 0), thickness, fill)
    thickness = np.clip(thickness, h_lo * (1.0 + _MARGIN), h_hi * (1.0 - _MARGIN))
    return {
        "thickness": thickness,
        "velocity": velocity,
        "permittivity": (C_M_PER_NS / velocity) ** 2,
        "time_zero": float(time_zero),
    }
