"""Layered velocity models: two-way times, depths, RMS velocity, NMO and Dix.

Layer-1 physics kernels (pure numpy, vectorised). A model is a stack of flat
layers, top first, described by

- ``thickness``: shape ``(..., n)``, m, ``> 0``;
- ``velocity``: shape ``(..., n)``, m/ns, ``> 0`` (interval velocity of each layer).

Leading dimensions ``...`` are broadcast, so many models (for example posterior
draws) are handled in one call. Interface ``k`` (1-based in the documentation,
index ``k - 1`` in the arrays) is the bottom of layer ``k``. Times are two-way
times in ns.

Relations used
--------------
- Vertical two-way time to interface ``k``: ``t_k = sum_{i<=k} 2 h_i / v_i``.
- RMS velocity (Dix 1955, eq. for the "root-mean-square velocity")::

      V_rms,k^2 = sum_{i<=k} v_i^2 dt_i / sum_{i<=k} dt_i,    dt_i = 2 h_i / v_i

- Dix (1955), Geophysics 20:68-86, interval velocity::

      V_int,k^2 = (V_rms,k^2 t_k - V_rms,k-1^2 t_k-1) / (t_k - t_k-1)

- Normal moveout (small-spread hyperbola): ``t(x) = sqrt(t0^2 + x^2 / V_rms^2)``.
"""

from __future__ import annotations

import numpy as np

from soilwave.errors import InputError
from soilwave.wave import _as_float, _check_min, _first_bad, _out

__all__ = [
    "depth_to_twt",
    "dix_interval_velocity",
    "interface_depths",
    "nmo_time",
    "rms_velocity",
    "twt_to_depth",
    "vertical_twt",
]


# --- input checks ------------------------------------------------------------------


def _layer_array(value, name: str, unit: str) -> np.ndarray:
    arr = _as_float(value, name)
    if arr.ndim == 0 or arr.shape[-1] == 0:
        msg = (
            f"{name} must have at least one layer along its last axis (shape (..., n)); "
            f"got shape {arr.shape}"
        )
        raise InputError(msg)
    return _check_min(arr, name, 0.0, strict=True, expected=f"{unit}, one value per layer")


def _model(thickness, velocity, *, allow_halfspace: bool = False):
    """Validate a layered model; return (h, v) broadcast over leading dims.

    If ``allow_halfspace``, ``velocity`` may have one more entry than
    ``thickness`` (the velocity of the half-space below the last interface).
    """
    h = _layer_array(thickness, "thickness", "layer thickness in m")
    v = _layer_array(velocity, "velocity", "interval velocity in m/ns")
    n, m = h.shape[-1], v.shape[-1]
    if not (m == n or (allow_halfspace and m == n + 1)):
        extra = f" or {n + 1} (with a half-space)" if allow_halfspace else ""
        msg = (
            f"velocity must have {n}{extra} layers along its last axis to match "
            f"thickness of shape {h.shape}; got shape {v.shape}"
        )
        raise InputError(msg)
    try:
        lead = np.broadcast_shapes(h.shape[:-1], v.shape[:-1])
    except ValueError:
        msg = (
            f"thickness {h.shape} and velocity {v.shape} have leading dimensions "
            "that do not broadcast"
        )
        raise InputError(msg) from None
    return np.broadcast_to(h, (*lead, n)), np.broadcast_to(v, (*lead, m))


# --- model geometry -------------------------------------------------------------------


def interface_depths(thickness):
    """Depths of the layer bottoms (interfaces), the cumulative thickness.

    Parameters
    ----------
    thickness : array_like, shape (..., n)
        Layer thicknesses in m (``> 0``).

    Returns
    -------
    ndarray, shape (..., n)
        Depth of interface k (bottom of layer k) in m.

    Examples
    --------
    >>> interface_depths([0.5, 0.5]).tolist()
    [0.5, 1.0]
    """
    h = _layer_array(thickness, "thickness", "layer thickness in m")
    return np.cumsum(h, axis=-1)


def vertical_twt(thickness, velocity):
    """Vertical (zero-offset) two-way time to each interface.

    Parameters
    ----------
    thickness : array_like, shape (..., n)
        Layer thicknesses in m (``> 0``).
    velocity : array_like, shape (..., n)
        Interval velocities in m/ns (``> 0``).

    Returns
    -------
    ndarray, shape (..., n)
        Cumulative two-way time in ns to the bottom of each layer.

    Examples
    --------
    >>> vertical_twt([0.5, 0.5], [0.1, 0.06]).round(4).tolist()
    [10.0, 26.6667]
    """
    h, v = _model(thickness, velocity)
    return np.cumsum(2.0 * h / v, axis=-1)


def _nodes(h, v):
    """Depth and time at the top of each layer plus the half-space velocity."""
    m = h.shape[-1]
    if v.shape[-1] == m:  # the last layer continues below its bottom
        v_ext = np.concatenate([v, v[..., -1:]], axis=-1)
    else:
        v_ext = v
    zero = np.zeros((*h.shape[:-1], 1))
    z_top = np.concatenate([zero, np.cumsum(h, axis=-1)], axis=-1)
    t_top = np.concatenate([zero, np.cumsum(2.0 * h / v_ext[..., :m], axis=-1)], axis=-1)
    return z_top, t_top, v_ext


def _gather(nodes, idx):
    shape = (*idx.shape, nodes.shape[-1])
    full = np.broadcast_to(nodes, shape)
    return np.take_along_axis(full, idx[..., None], axis=-1)[..., 0]


def twt_to_depth(twt, thickness, velocity):
    """Depth reached at a given vertical two-way time in a layered model.

    Parameters
    ----------
    twt : float or array_like
        Two-way time in ns (``>= 0``). Broadcast against the model's leading
        dimensions (``thickness.shape[:-1]``); for a grid of times for every
        model, add an axis, e.g. ``twt[:, None]`` with models of shape ``(k, n)``.
    thickness : array_like, shape (..., n)
        Layer thicknesses in m (``> 0``).
    velocity : array_like, shape (..., n) or (..., n + 1)
        Interval velocities in m/ns (``> 0``). With ``n`` entries the last layer
        extends to infinity below its bottom interface; an ``(n + 1)``-th entry is
        the velocity of the half-space below the last interface.

    Returns
    -------
    float or ndarray
        Depth in m.

    Examples
    --------
    >>> float(twt_to_depth(18.0, [0.5, 0.5], [0.1, 0.06]))
    0.74
    """
    h, v = _model(thickness, velocity, allow_halfspace=True)
    t = _check_min(twt, "twt", 0.0, expected="two-way time in ns")
    z_top, t_top, v_ext = _nodes(h, v)
    t_b = np.broadcast_to(t, np.broadcast_shapes(t.shape, h.shape[:-1]))
    idx = np.sum(t_b[..., None] >= t_top[..., 1:], axis=-1)
    depth = _gather(z_top, idx) + (t_b - _gather(t_top, idx)) * _gather(v_ext, idx) / 2.0
    return _out(depth)


def depth_to_twt(depth, thickness, velocity):
    """Vertical two-way time to a given depth in a layered model.

    Parameters
    ----------
    depth : float or array_like
        Depth in m (``>= 0``), broadcast as ``twt`` in :func:`twt_to_depth`.
    thickness : array_like, shape (..., n)
        Layer thicknesses in m (``> 0``).
    velocity : array_like, shape (..., n) or (..., n + 1)
        Interval velocities in m/ns; see :func:`twt_to_depth`.

    Returns
    -------
    float or ndarray
        Two-way time in ns.

    Examples
    --------
    >>> float(depth_to_twt(0.74, [0.5, 0.5], [0.1, 0.06]))
    18.0
    """
    h, v = _model(thickness, velocity, allow_halfspace=True)
    d = _check_min(depth, "depth", 0.0, expected="depth in m")
    z_top, t_top, v_ext = _nodes(h, v)
    d_b = np.broadcast_to(d, np.broadcast_shapes(d.shape, h.shape[:-1]))
    idx = np.sum(d_b[..., None] >= z_top[..., 1:], axis=-1)
    twt = _gather(t_top, idx) + 2.0 * (d_b - _gather(z_top, idx)) / _gather(v_ext, idx)
    return _out(twt)


# --- velocity analysis ----------------------------------------------------------------


def rms_velocity(thickness, velocity):
    """Root-mean-square velocity to each interface (Dix 1955 definition).

    ``V_rms,k^2 = sum v_i^2 dt_i / sum dt_i`` over the layers above interface
    ``k``, with ``dt_i = 2 h_i / v_i`` the two-way time in layer ``i``.

    Parameters
    ----------
    thickness : array_like, shape (..., n)
        Layer thicknesses in m (``> 0``).
    velocity : array_like, shape (..., n)
        Interval velocities in m/ns (``> 0``).

    Returns
    -------
    ndarray, shape (..., n)
        RMS velocity in m/ns at each interface.

    Examples
    --------
    >>> rms_velocity([0.5, 0.5], [0.1, 0.06]).round(5).tolist()
    [0.1, 0.07746]
    """
    h, v = _model(thickness, velocity)
    dt = 2.0 * h / v
    return np.sqrt(np.cumsum(v * v * dt, axis=-1) / np.cumsum(dt, axis=-1))


def dix_interval_velocity(t0, v_rms, *, t0_sigma=None, v_rms_sigma=None, invalid="raise"):
    """Interval velocities from RMS velocities by the Dix (1955) equation.

    ``V_int,k^2 = (V_k^2 t_k - V_{k-1}^2 t_{k-1}) / (t_k - t_{k-1})`` with
    ``t_0 = 0`` above the first interface, so ``V_int,1 = V_rms,1``.

    Parameters
    ----------
    t0 : array_like, shape (..., n)
        Zero-offset two-way times of the reflections in ns, strictly increasing
        along the last axis and ``> 0``.
    v_rms : array_like, shape (..., n)
        RMS (stacking) velocities of the same reflections in m/ns (``> 0``).
    t0_sigma, v_rms_sigma : array_like, optional
        Standard deviations of ``t0`` (ns) and ``v_rms`` (m/ns), broadcastable to
        the inputs. If either is given, the result includes the standard
        deviation of each interval velocity by first-order (linear) propagation,
        assuming independent errors in every ``t0`` and ``v_rms`` (an omitted
        one counts as exact). Adjacent interval velocities share inputs, so their
        errors are correlated; only the marginal standard deviations are returned.
    invalid : {"raise", "nan"}, optional
        What to do where the numerator is negative (inconsistent input, no real
        interval velocity): raise :class:`InputError` (default) or return NaN.

    Returns
    -------
    v_int : ndarray, shape (..., n)
        Interval velocities in m/ns.
    v_int_sigma : ndarray, shape (..., n)
        Only when a sigma is given: standard deviation of ``v_int`` in m/ns.

    Examples
    --------
    >>> dix_interval_velocity([10.0, 26.6667], [0.1, 0.07746]).round(3).tolist()
    [0.1, 0.06]
    """
    if invalid not in ("raise", "nan"):
        msg = f"invalid must be 'raise' or 'nan'; got {invalid!r}"
        raise InputError(msg)
    t, vr = _model(t0, v_rms)  # both > 0, same number of reflections
    dt = np.diff(t, axis=-1)
    ok = dt > 0
    if not np.all(ok):
        bad = tuple(int(i) for i in np.argwhere(~ok)[0])
        pos = (*bad[:-1], bad[-1] + 1)
        msg = (
            f"t0 must increase strictly along the last axis (one time per interface, "
            f"top first); t0 at index {pos} is {float(t[pos])!r}, not greater than the "
            f"previous {float(t[(*bad[:-1], bad[-1])])!r}"
        )
        raise InputError(msg)
    zero = np.zeros((*t.shape[:-1], 1))
    t_prev = np.concatenate([zero, t[..., :-1]], axis=-1)
    v_prev = np.concatenate([zero, vr[..., :-1]], axis=-1)
    width = t - t_prev
    u = (vr**2 * t - v_prev**2 * t_prev) / width  # V_int^2
    neg = u < 0
    if np.any(neg) and invalid == "raise":
        val, where = _first_bad(u, ~neg)
        msg = (
            f"Dix interval velocity squared is negative ({val:.6g} m2/ns2){where}: "
            "v_rms decreases too fast for its t0 (inconsistent picks); "
            "expected V_rms,k^2 t_k >= V_rms,k-1^2 t_k-1"
        )
        raise InputError(msg)
    with np.errstate(invalid="ignore"):
        v_int = np.where(neg, np.nan, np.sqrt(np.where(neg, 0.0, u)))
    if t0_sigma is None and v_rms_sigma is None:
        return v_int
    s_t = _check_min(0.0 if t0_sigma is None else t0_sigma, "t0_sigma", 0.0, expected="ns")
    s_v = _check_min(
        0.0 if v_rms_sigma is None else v_rms_sigma, "v_rms_sigma", 0.0, expected="m/ns"
    )
    s_t = np.broadcast_to(s_t, t.shape)
    s_v = np.broadcast_to(s_v, t.shape)
    s_t_prev = np.concatenate([zero, s_t[..., :-1]], axis=-1)
    s_v_prev = np.concatenate([zero, s_v[..., :-1]], axis=-1)
    # partial derivatives of u = V_int^2
    du_dv = 2.0 * vr * t / width
    du_dv_prev = -2.0 * v_prev * t_prev / width
    du_dt = (vr**2 - u) / width
    du_dt_prev = (u - v_prev**2) / width
    var_u = (
        (du_dv * s_v) ** 2
        + (du_dv_prev * s_v_prev) ** 2
        + (du_dt * s_t) ** 2
        + (du_dt_prev * s_t_prev) ** 2
    )
    with np.errstate(divide="ignore", invalid="ignore"):
        sigma = np.sqrt(var_u) / (2.0 * v_int)  # dV = du / (2 V)
    return v_int, sigma


def nmo_time(offset, t0, v_rms):
    """Hyperbolic (normal-moveout) reflection time ``sqrt(t0^2 + x^2 / V_rms^2)``.

    Exact for a single homogeneous layer over a flat reflector; for layered
    ground it is the small-spread approximation (Dix 1955).

    Parameters
    ----------
    offset : float or array_like
        Antenna separation in m (sign ignored).
    t0 : float or array_like
        Zero-offset two-way time in ns (``>= 0``).
    v_rms : float or array_like
        RMS velocity in m/ns (``> 0``).

    Returns
    -------
    float or ndarray
        Two-way reflection time in ns, broadcast over the inputs.

    Examples
    --------
    >>> round(float(nmo_time(1.0, 20.0, 0.1)), 4)
    22.3607
    """
    x = _as_float(offset, "offset")
    if not np.all(np.isfinite(x)):
        val, where = _first_bad(x, np.isfinite(x))
        msg = f"offset must be finite (antenna separation in m); got {val!r}{where}"
        raise InputError(msg)
    t = _check_min(t0, "t0", 0.0, expected="zero-offset two-way time in ns")
    v = _check_min(v_rms, "v_rms", 0.0, strict=True, expected="RMS velocity in m/ns")
    return _out(np.sqrt(t**2 + (x / v) ** 2))
