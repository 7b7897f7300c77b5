"""Batch forward travel times of multi-offset GPR picks in a layered earth.

Pure numpy (layer 1). Every function evaluates many layered models at once:
model arrays carry any leading *batch* dimensions (for example a walker
ensemble of 64 models) and the layer axis last:

``thickness``
    shape ``(..., n_interfaces)``, m: thickness of layers 1..n_interfaces
    (layer 1 at the surface; interface ``k`` is the bottom of layer ``k``).
``velocity``
    shape ``(..., n_layers)``, m/ns, ``n_layers >= n_interfaces``; the layer
    below the deepest interface (a half-space) is only needed by head waves.
``offset``
    shape ``(n,)``, m, antenna separation. Results have shape ``(..., n)`` in ns.

Phases (transmitter and receiver on the surface, straight rays in each layer):

* air wave ``x / c`` (``c`` from :mod:`scipy.constants`, CODATA);
* direct ground wave ``x / v_1``;
* reflection from interface ``k`` (two-way), by exact ray tracing through
  layers ``1..k``: with ray parameter ``p`` (horizontal slowness, ns/m)

  ``x(p) = sum_i 2 h_i p v_i / sqrt(1 - p^2 v_i^2)``,
  ``t(p) = sum_i 2 h_i / (v_i sqrt(1 - p^2 v_i^2))``

  (standard layered-earth ray theory, e.g. Yilmaz 2001, *Seismic Data
  Analysis*, sect. 3.1), solved for ``x(p) = offset``;
* head wave (refraction) along the top of layer ``k + 1``, which exists when
  ``v_{k+1}`` exceeds every velocity above it and the offset exceeds the
  critical distance: ``t = x / v_{k+1} + sum_i 2 h_i sqrt(1/v_i^2 - 1/v_{k+1}^2)``.

Where a phase does not exist for a model (head wave before its critical
distance or under a slower layer) or a model is not physical (a thickness
below zero, a velocity not above zero, non-finite values) the time is NaN, so a
likelihood built on it can reject that model without an exception in the
middle of a batch.

Root finding
------------
The reflection solver works in ``w = tan(theta_m)``, the tangent of the ray
angle in the fastest layer crossed (``p = w / (v_m sqrt(1 + w^2))``). In that
variable ``x(w)`` is smooth, concave and grows linearly for large ``w`` instead
of having a pole at ``p = 1/v_m``, and since ``tan(theta_i) <= w v_i / v_m``
it is bracketed by ``2 h_m w <= x(w) <= w sum 2 h_i v_i / v_m`` (``h_m`` the
total thickness of the fastest layers). A safeguarded Newton
iteration (bisection whenever a Newton step leaves the bracket) runs on the
whole batch at once. The time is returned as ``p x + tau(p)`` with
``tau(p) = sum_i 2 h_i sqrt(1/v_i^2 - p^2)``, which is stationary in ``p``, so
the residual error in ``p`` enters the time only to second order; the
iteration stops when the bound on the time error is below ``1e-9`` ns.
"""

from __future__ import annotations

import numpy as np
from scipy import constants

from soilwave.errors import InputError

__all__ = [
    "PHASES_MODELLED",
    "TravelTimeOperator",
    "air_wave_time",
    "ground_wave_time",
    "head_wave_time",
    "reflection_rays",
    "reflection_time",
]

#: Speed of light in vacuum, m/ns (CODATA via scipy.constants).
C_M_PER_NS = constants.c * 1e-9

#: Phases the :class:`TravelTimeOperator` can predict.
PHASES_MODELLED = ("air", "ground", "reflection", "refraction")

_TIME_TOL_NS = 1e-9
_MAX_ITER = 100


# --- input checks ---------------------------------------------------------------


def _as_offset(offset) -> np.ndarray:
    x = np.asarray(offset, dtype=float)
    if x.ndim > 1:
        msg = f"offset must be a scalar or 1-D array of offsets in m; got shape {x.shape}"
        raise InputError(msg)
    return np.atleast_1d(x)


def _as_model(thickness, velocity, interface: int, *, needs_below: bool):
    h = np.asarray(thickness, dtype=float)
    v = np.asarray(velocity, dtype=float)
    if h.ndim == 0 or v.ndim == 0:
        msg = (
            "thickness and velocity need a layer axis (last); got shapes "
            f"{h.shape} and {v.shape}: pass e.g. thickness=[0.5], velocity=[0.1, 0.06]"
        )
        raise InputError(msg)
    if isinstance(interface, bool) or not isinstance(interface, int | np.integer):
        msg = f"interface must be an integer (1 = bottom of layer 1); got {interface!r}"
        raise InputError(msg)
    k = int(interface)
    if k < 1 or k > h.shape[-1]:
        msg = (
            f"interface={k} is outside 1..{h.shape[-1]}: thickness has "
            f"{h.shape[-1]} interface(s) on its last axis"
        )
        raise InputError(msg)
    need_v = k + 1 if needs_below else k
    if v.shape[-1] < need_v:
        msg = (
            f"velocity has {v.shape[-1]} layer(s) on its last axis; interface={k} needs "
            f"at least {need_v} (layers 1..{need_v})"
        )
        raise InputError(msg)
    try:
        np.broadcast_shapes(h.shape[:-1], v.shape[:-1])
    except ValueError:
        msg = (
            f"batch shapes of thickness {h.shape[:-1]} and velocity {v.shape[:-1]} do not broadcast"
        )
        raise InputError(msg) from None
    return h, v, k


# --- simple phases ----------------------------------------------------------------


def air_wave_time(offset) -> np.ndarray:
    """Travel time of the air wave (direct wave through air), ns.

    Parameters
    ----------
    offset : array_like
        Antenna separation, m, shape ``(n,)`` or scalar.

    Returns
    -------
    numpy.ndarray
        ``offset / c``, ns, shape ``(n,)``.

    Examples
    --------
    >>> round(float(air_wave_time(1.0)[0]), 4)
    3.3356
    """
    return _as_offset(offset) / C_M_PER_NS


def ground_wave_time(offset, velocity) -> np.ndarray:
    """Travel time of the direct ground wave, ``offset / velocity[..., 0]``, ns.

    Parameters
    ----------
    offset : array_like
        Antenna separation, m, shape ``(n,)``.
    velocity : array_like
        Layer velocities, m/ns, shape ``(..., n_layers)``; only layer 1 is used.

    Returns
    -------
    numpy.ndarray
        Shape ``(..., n)``, ns; NaN for a non-positive velocity.

    Examples
    --------
    >>> ground_wave_time([1.0, 2.0], [0.1, 0.06]).round(3).tolist()
    [10.0, 20.0]
    """
    x = _as_offset(offset)
    v = np.asarray(velocity, dtype=float)
    if v.ndim == 0:
        msg = f"velocity needs a layer axis (last); got a scalar {float(v)!r}: pass [v1, ...]"
        raise InputError(msg)
    v1 = v[..., 0]
    v1 = np.where((v1 > 0) & np.isfinite(v1), v1, np.nan)
    return x / v1[..., None]


# --- reflections -------------------------------------------------------------------


def _layer_geometry(h, v):
    """Per-model constants for ray tracing through the given layers (last axis)."""
    valid = np.all((h >= 0) & np.isfinite(h) & (v > 0) & np.isfinite(v), axis=-1)
    used = h > 0
    # fastest layer actually crossed (zero-thickness layers do not bend the ray)
    vmax = np.max(np.where(used, v, 0.0), axis=-1)
    vmax = np.where(vmax > 0, vmax, np.max(np.where(v > 0, v, 1.0), axis=-1))
    r = np.where(used, v / vmax[..., None], 0.0)
    r = np.minimum(r, 1.0)
    hh = np.where(used, h, 0.0)
    return valid, vmax, r, hh


def reflection_rays(offset, thickness, velocity, *, interface: int):
    """Exact two-way time and ray parameter of the reflection from an interface.

    Parameters
    ----------
    offset : array_like
        Antenna separation, m, shape ``(n,)``; must be >= 0.
    thickness : array_like
        Layer thicknesses, m, shape ``(..., n_interfaces)``.
    velocity : array_like
        Layer velocities, m/ns, shape ``(..., n_layers)``, ``n_layers >= interface``.
    interface : int
        Reflecting interface, 1-based (1 = bottom of layer 1). The ray
        crosses layers ``1..interface``.

    Returns
    -------
    time : numpy.ndarray
        Two-way travel time, ns, shape ``(..., n)``; converged to better than
        1e-6 ns. NaN for an unphysical model.
    p : numpy.ndarray
        Ray parameter (horizontal slowness), ns/m, shape ``(..., n)``, with
        ``0 <= p < 1 / max(v_1..v_k)`` (max over layers of non-zero thickness;
        equality can occur only by rounding for near-grazing rays).

    Examples
    --------
    Reflector at 1 m depth in a medium of relative permittivity 9:

    >>> v = 0.299792458 / 3
    >>> t, p = reflection_rays([0.0, 1.0], [1.0], [v], interface=1)
    >>> t.round(4).tolist()
    [20.0138, 22.3762]
    """
    x = _as_offset(offset)
    if np.any(x < 0) or not np.all(np.isfinite(x)):
        msg = f"offset must be finite and >= 0 m; got {x[~((x >= 0) & np.isfinite(x))][:3]}"
        raise InputError(msg)
    h, v, k = _as_model(thickness, velocity, interface, needs_below=False)
    batch = np.broadcast_shapes(h.shape[:-1], v.shape[:-1])
    h = np.broadcast_to(h[..., :k], (*batch, k))
    v = np.broadcast_to(v[..., :k], (*batch, k))
    valid, vmax, r, hh = _layer_geometry(h, v)
    # flatten the batch: models (m, k), rays (m, n)
    m = int(np.prod(batch, dtype=int))
    n = x.size
    r = r.reshape(m, k)
    two_h = 2.0 * hh.reshape(m, k)
    vf = v.reshape(m, k)
    vmax = vmax.reshape(m)
    valid = valid.reshape(m)
    # tan(theta_i) <= r_i w, with equality in the fastest layer(s) (r_i = 1), so
    # 2 h_fast w <= x(w) <= w sum 2 h_i r_i brackets the root
    a_lo = np.sum(two_h * r, axis=-1)
    a_fast = np.sum(np.where(r >= 1.0, two_h, 0.0), axis=-1)
    X = np.broadcast_to(x, (m, n))
    with np.errstate(divide="ignore", invalid="ignore"):
        w_lo = np.where(a_lo[:, None] > 0, X / a_lo[:, None], 0.0)
        # all layers of zero thickness: the ray runs along the surface (p -> 1/vmax)
        w_hi = np.where(a_fast[:, None] > 0, X / a_fast[:, None], np.where(X > 0, 1e12, 0.0))
    w_lo[~valid] = 0.0
    w_hi[~valid] = 0.0
    w_lo = w_lo.ravel()
    w_hi = w_hi.ravel()
    xr = X.ravel()
    # start at the lower bound; Newton steps that leave the bracket become bisections
    w = w_lo.copy()
    active = np.flatnonzero(w_hi > w_lo)
    for _ in range(_MAX_ITER):
        if active.size == 0:
            break
        mod = active // n
        wa = w[active]
        ra = r[mod]
        ha = two_h[mod]
        q = 1.0 / (1.0 + wa * wa)  # cos^2 in the fastest layer
        sq = np.sqrt(q)
        c2 = (1.0 - ra * ra) + ra * ra * q[:, None]  # cos^2 in each layer
        ci = np.sqrt(c2)
        sin_i = ra * (wa * sq)[:, None]
        f = np.sum(ha * sin_i / ci, axis=-1) - xr[active]
        dfdw = np.sum(ha * ra * (q * sq)[:, None] / (c2 * ci), axis=-1)
        lo = np.where(f <= 0, wa, w_lo[active])
        hi = np.where(f >= 0, wa, w_hi[active])
        # |time error| <= p |x residual| to first order (p <= 1/vmax), and the
        # stationary form p x + tau(p) makes it second order
        pa = wa * sq / vmax[mod]
        done = (np.abs(f) * pa <= _TIME_TOL_NS) | (hi - lo <= 4e-16 * np.maximum(hi, 1.0))
        with np.errstate(divide="ignore", invalid="ignore"):
            w_new = wa - f / dfdw
        out_of = ~np.isfinite(w_new) | (w_new <= lo) | (w_new >= hi)
        w_new = np.where(out_of, 0.5 * (lo + hi), w_new)
        w[active] = np.where(done, wa, w_new)
        w_lo[active] = lo
        w_hi[active] = hi
        active = active[~done]
    w = w.reshape(m, n)
    q = 1.0 / (1.0 + w * w)
    p = w * np.sqrt(q) / vmax[:, None]
    ci = np.sqrt((1.0 - r * r)[:, None, :] + (r * r)[:, None, :] * q[..., None])
    with np.errstate(divide="ignore", invalid="ignore"):
        layer_tau = np.where(two_h > 0, two_h / vf, 0.0)  # vertical two-way times
    tau = np.sum(layer_tau[:, None, :] * ci, axis=-1)  # sum 2 h_i cos_i / v_i
    t = p * X + tau
    t = np.where(valid[:, None], t, np.nan).reshape(*batch, n)
    p = np.where(valid[:, None], p, np.nan).reshape(*batch, n)
    return t, p


def reflection_time(offset, thickness, velocity, *, interface: int) -> np.ndarray:
    """Exact two-way travel time of the reflection from an interface, ns.

    Same as :func:`reflection_rays` without the ray parameter.

    Examples
    --------
    Two layers, 0.5 m at relative permittivity 9 over 0.5 m at 25:

    >>> c = 0.299792458
    >>> t = reflection_time([1.0, 2.0], [0.5, 0.5], [c / 3, c / 5], interface=2)
    >>> t.round(4).tolist()
    [29.6053, 36.6589]
    """
    return reflection_rays(offset, thickness, velocity, interface=interface)[0]


# --- head waves --------------------------------------------------------------------


def head_wave_time(offset, thickness, velocity, *, interface: int) -> np.ndarray:
    """Travel time of the head wave (refraction) along interface ``interface``, ns.

    The wave travels along the top of layer ``interface + 1`` at its velocity.

    Parameters
    ----------
    offset : array_like
        Antenna separation, m, shape ``(n,)``.
    thickness : array_like
        Layer thicknesses, m, shape ``(..., n_interfaces)``.
    velocity : array_like
        Layer velocities, m/ns, shape ``(..., n_layers)``, ``n_layers > interface``.
    interface : int
        Refracting interface, 1-based.

    Returns
    -------
    numpy.ndarray
        Shape ``(..., n)``, ns. NaN where the refracting layer is not faster
        than every layer above it, where the offset is shorter than the
        critical distance ``sum_i 2 h_i tan(theta_i)``, ``sin theta_i =
        v_i / v_{k+1}``, or for an unphysical model.

    Examples
    --------
    0.5 m at 0.06 m/ns over 0.1 m/ns; critical distance 0.75 m:

    >>> head_wave_time([0.5, 2.0], [0.5], [0.06, 0.1], interface=1).round(4).tolist()
    [nan, 33.3333]
    """
    x = _as_offset(offset)
    h, v, k = _as_model(thickness, velocity, interface, needs_below=True)
    batch = np.broadcast_shapes(h.shape[:-1], v.shape[:-1])
    h = np.broadcast_to(h[..., :k], (*batch, k))
    vr = np.broadcast_to(v[..., k], batch)
    va = np.broadcast_to(v[..., :k], (*batch, k))
    valid = (
        np.all((h >= 0) & np.isfinite(h) & (va > 0) & np.isfinite(va), axis=-1)
        & (vr > 0)
        & np.isfinite(vr)
    )
    used = h > 0
    faster = np.all(~used | (va < vr[..., None]), axis=-1)
    ok = valid & faster
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = np.where(used, va / vr[..., None], 0.0)
        cos_i = np.sqrt(np.clip(1.0 - ratio**2, 0.0, None))
        intercept = np.sum(np.where(used, 2.0 * h * cos_i / va, 0.0), axis=-1)
        x_crit = np.sum(np.where(used, 2.0 * h * ratio / cos_i, 0.0), axis=-1)
        t = x / vr[..., None] + intercept[..., None]
    exists = ok[..., None] & (x >= x_crit[..., None])
    return np.where(exists, t, np.nan)


# --- operator over a pick table ---------------------------------------------------


class TravelTimeOperator:
    """Predicted times of a fixed set of picks for a batch of layered models.

    Built once from the picks (offsets, phases, interfaces); each call
    evaluates every pick for every model of a batch in a few vectorised
    passes (one per phase and interface).

    Parameters
    ----------
    offset : array_like
        Pick offsets, m, shape ``(n_pick,)``.
    phase : array_like of str
        ``'air'``, ``'ground'``, ``'reflection'`` or ``'refraction'`` per pick.
    interface : array_like of int
        Interface per pick (1-based); ignored (use 0) for air and ground picks.

    Attributes
    ----------
    n_pick : int
        Number of picks.
    n_interfaces : int
        Highest interface referenced by a reflection or refraction pick (0 if none).
    n_layers : int
        ``n_interfaces + 1``: the model size the operator expects, the last
        layer being a half-space whose velocity matters only for refractions
        along the deepest interface.

    Examples
    --------
    >>> op = TravelTimeOperator([1.0, 1.0, 1.0], ["air", "ground", "reflection"], [0, 0, 1])
    >>> c = 0.299792458
    >>> op([1.0], [c / 3, c / 5], 0.0).round(4).tolist()
    [3.3356, 10.0069, 22.3762]
    """

    def __init__(self, offset, phase, interface):
        x = _as_offset(offset)
        ph = np.atleast_1d(np.asarray(phase, dtype=str))
        itf = np.atleast_1d(np.asarray(interface))
        if not (x.shape == ph.shape == itf.shape):
            msg = (
                "offset, phase and interface must have one entry per pick; got shapes "
                f"{x.shape}, {ph.shape}, {itf.shape}"
            )
            raise InputError(msg)
        if np.any(~np.isfinite(x) | (x < 0)):
            i = int(np.flatnonzero(~np.isfinite(x) | (x < 0))[0])
            msg = f"pick {i}: offset {x[i]!r} m is not finite and >= 0"
            raise InputError(msg)
        unknown = sorted(set(ph.tolist()) - set(PHASES_MODELLED))
        if unknown:
            msg = (
                f"phase(s) {unknown} cannot be predicted; expected one of "
                f"{list(PHASES_MODELLED)} (drop other picks before inverting)"
            )
            raise InputError(msg)
        try:
            itf_f = itf.astype(float)
        except (TypeError, ValueError):
            msg = f"interface must be integers; got {itf[:5].tolist()}"
            raise InputError(msg) from None
        layered = (ph == "reflection") | (ph == "refraction")
        bad = layered & ~((itf_f >= 1) & (itf_f == np.round(itf_f)))
        if np.any(bad):
            i = int(np.flatnonzero(bad)[0])
            msg = (
                f"pick {i}: {ph[i]} needs an interface >= 1 (1 = bottom of layer 1); got {itf[i]!r}"
            )
            raise InputError(msg)
        itf_i = np.where(layered, np.round(itf_f), 0).astype(int)
        self.offset = x.copy()
        self.phase = ph.copy()
        self.interface = itf_i
        self.n_pick = int(x.size)
        self.n_interfaces = int(itf_i.max()) if itf_i.size else 0
        self.n_layers = self.n_interfaces + 1
        groups = []
        for name in ("air", "ground"):
            idx = np.flatnonzero(ph == name)
            if idx.size:
                groups.append((name, 0, idx))
        for name in ("reflection", "refraction"):
            for k in np.unique(itf_i[ph == name]):
                idx = np.flatnonzero((ph == name) & (itf_i == k))
                groups.append((name, int(k), idx))
        self._groups = groups
        refr = itf_i[ph == "refraction"]
        refl = itf_i[ph == "reflection"]
        self._n_velocity_needed = max(
            int(refr.max()) + 1 if refr.size else 0,
            int(refl.max()) if refl.size else 0,
            1 if np.any(ph == "ground") else 0,
        )

    @classmethod
    def from_picks(cls, picks) -> TravelTimeOperator:
        """Build the operator from a pick table (``xarray.Dataset`` along ``pick``).

        Examples
        --------
        >>> import xarray as xr
        >>> ds = xr.Dataset({"offset": ("pick", [1.0]), "phase": ("pick", ["air"]),
        ...                  "interface": ("pick", [0])})
        >>> TravelTimeOperator.from_picks(ds).n_layers
        1
        """
        for name in ("offset", "phase", "interface"):
            if name not in picks:
                msg = f"pick table has no variable {name!r}; expected offset, phase, interface"
                raise InputError(msg)
        return cls(
            np.asarray(picks["offset"].values, dtype=float),
            np.asarray(picks["phase"].values).astype(str),
            np.asarray(picks["interface"].values),
        )

    def __repr__(self) -> str:
        parts = ", ".join(
            f"{name}{'' if k == 0 else f'[{k}]'}: {idx.size}" for name, k, idx in self._groups
        )
        return f"TravelTimeOperator(n_pick={self.n_pick}, n_layers={self.n_layers}; {parts})"

    def __call__(self, thickness, velocity, time_zero=0.0) -> np.ndarray:
        """Predicted pick times, ns, shape ``(..., n_pick)``.

        Parameters
        ----------
        thickness : array_like
            Layer thicknesses, m, shape ``(..., n_interfaces)`` (more are ignored).
        velocity : array_like
            Layer velocities, m/ns, shape ``(..., n_layers)``.
        time_zero : array_like, optional
            Time-zero shift added to every pick, ns, shape ``(...)`` or scalar.

        Returns
        -------
        numpy.ndarray
            Geometric time plus ``time_zero``; NaN where the phase does not
            exist for that model.
        """
        h = np.asarray(thickness, dtype=float)
        v = np.asarray(velocity, dtype=float)
        t0 = np.asarray(time_zero, dtype=float)
        if h.ndim == 0:
            h = h[None]
        if v.ndim == 0:
            v = v[None]
        if h.shape[-1] < self.n_interfaces:
            msg = (
                f"thickness has {h.shape[-1]} interface(s) on its last axis; the picks "
                f"reference interface {self.n_interfaces}"
            )
            raise InputError(msg)
        if v.shape[-1] < self._n_velocity_needed:
            msg = (
                f"velocity has {v.shape[-1]} layer(s) on its last axis; the picks need "
                f"{self._n_velocity_needed} (model size n_layers={self.n_layers})"
            )
            raise InputError(msg)
        try:
            batch = np.broadcast_shapes(h.shape[:-1], v.shape[:-1], t0.shape)
        except ValueError:
            msg = (
                f"batch shapes of thickness {h.shape[:-1]}, velocity {v.shape[:-1]} and "
                f"time_zero {t0.shape} do not broadcast"
            )
            raise InputError(msg) from None
        out = np.empty((*batch, self.n_pick))
        for name, k, idx in self._groups:
            x = self.offset[idx]
            if name == "air":
                t = np.broadcast_to(air_wave_time(x), (*batch, idx.size))
            elif name == "ground":
                t = ground_wave_time(x, v)
            elif name == "reflection":
                t = reflection_time(x, h, v, interface=k)
            else:
                t = head_wave_time(x, h, v, interface=k)
            out[..., idx] = np.broadcast_to(t, (*batch, idx.size))
        return out + t0[..., None]
