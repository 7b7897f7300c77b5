"""Amplitude forward model of multi-offset GPR picks in a layered, lossy earth.

Pure numpy (layer 1), vectorised over a batch of models like
:mod:`soilwave.traveltime`: model arrays carry any leading *batch* dimensions
(for example a walker ensemble) and the layer axis last:

``thickness``
    shape ``(..., n_interfaces)``, m (layer 1 at the surface).
``permittivity``
    shape ``(..., n_layers)``, relative permittivity (dimensionless, ``>= 1``).
``conductivity``
    shape ``(..., n_layers)``, electrical conductivity, mS/m (``>= 0``).

Results are **natural logarithms of the absolute amplitude** (``log|A|``),
shape ``(..., n)``, in the same relative unit as the picked amplitudes up to a
gain. Working in logs turns the unknown source strength, antenna coupling and
receiver gain into an additive constant per wave family (the ``log_gain``
nuisance parameter) and makes a relative amplitude error a constant
uncertainty.

The model
---------
For a pick at antenna separation ``x`` (m) and wave family ``f`` with log
gain ``g_f``:

air wave (direct wave through air)
    ``log|A| = g_air - 2 log x``. Geometric spreading ``1/x^2``: the far-field
    decay of a wave guided along the air-ground interface (the usual law for
    GPR surface waves; Annan, value from memory). No attenuation (air is
    lossless).
ground wave (direct wave along the top of layer 1)
    ``log|A| = g_ground - 2 log x - alpha_1 x``: the same ``1/x^2`` spreading
    and plane-wave attenuation of layer 1 over the horizontal distance ``x``.
    The near field (``x`` below about a wavelength) is not modelled, so air
    and ground picks need ``x > 0``.
reflection from interface ``k``
    ::

        log|A| = g_refl - log L + log|r_k(theta_k)|
                 + sum_{j<k} log|t_j(theta_j) t'_j(theta_{j+1})|
                 - sum_{i<=k} alpha_i L_i

    The ray is traced exactly through layers ``1..k``
    (:func:`soilwave.traveltime.reflection_rays`); its ray parameter ``p``
    gives the angle in each layer, ``sin theta_i = p v_i``, ``v_i = c /
    sqrt(eps_i)``. ``L_i = 2 h_i / cos theta_i`` is the two-way path length in
    layer ``i`` and ``L = sum L_i`` the total path length: spreading is
    ``1 / L`` (spherical spreading of a point source along the unfolded ray;
    the focusing or defocusing by refraction at the interfaces is ignored).
    ``r_k`` is the TE (electric field parallel to the interfaces, i.e. the
    usual broadside antenna orientation) Fresnel reflection coefficient at
    interface ``k`` for the angle ``theta_k``, and ``t_j``, ``t'_j`` the TE
    transmission coefficients down and back up through each interface above
    (:func:`soilwave.fresnel.fresnel_coefficients`; their product is
    ``1 - r_j^2``). Beyond the critical angle ``|r_k| = 1``. One gain is
    shared by the reflections from all interfaces, so their relative strength
    also informs the model.

Attenuation ``alpha_i`` (Np/m) is the plane-wave attenuation of layer ``i`` at
the antenna centre frequency (:func:`soilwave.wave.attenuation`): exact
(default) or the frequency-independent low-loss limit ``sigma Z0 / (2
sqrt(eps))`` (``low_loss=True``).

Approximations (stated, not hidden): geometric optics (straight rays in each
layer, no near field, no caustics); TE coefficients of lossless media (the
small imaginary part of a lossy permittivity is ignored in ``r`` and ``t``);
velocities ``c / sqrt(eps)`` as in the travel-time model (no dispersion, so the
wavelet keeps its shape and a picked envelope peak scales with ``|A|``); no
antenna radiation pattern beyond what the per-family gain absorbs; no
multiples; head waves (refractions) and diffractions are not modelled.

A model that is not physical (thickness below zero, permittivity below 1,
negative conductivity, non-finite values) gives NaN for every pick, so a
likelihood can reject it without an exception in the middle of a batch; a
reflection coefficient of exactly zero (no contrast) gives ``-inf``.
"""

from __future__ import annotations

import numpy as np

from soilwave.errors import InputError
from soilwave.fresnel import fresnel_coefficients
from soilwave.traveltime import C_M_PER_NS, _as_offset, reflection_rays
from soilwave.wave import attenuation

__all__ = [
    "AMPLITUDE_FAMILIES",
    "AmplitudeOperator",
    "air_wave_log_amplitude",
    "ground_wave_log_amplitude",
    "reflection_log_amplitude",
]

#: Wave families with an amplitude model, in the order of ``log_gain`` entries.
AMPLITUDE_FAMILIES = ("air", "ground", "reflection")


# --- input checks -----------------------------------------------------------------


def _check_frequency(frequency_mhz) -> float:
    try:
        f = float(frequency_mhz)
    except (TypeError, ValueError):
        msg = f"frequency_mhz must be a number in MHz; got {frequency_mhz!r}"
        raise InputError(msg) from None
    if not (np.isfinite(f) and f > 0):
        msg = f"frequency_mhz must be finite and > 0 MHz; got {frequency_mhz!r}"
        raise InputError(msg)
    return f


def _layer_array(value, name: str) -> np.ndarray:
    arr = np.asarray(value, dtype=float)
    if arr.ndim == 0:
        msg = f"{name} needs a layer axis (last); got the scalar {float(arr)!r}: pass [value, ...]"
        raise InputError(msg)
    return arr


def _need_layers(arr: np.ndarray, name: str, n: int, why: str) -> None:
    if arr.shape[-1] < n:
        msg = f"{name} has {arr.shape[-1]} layer(s) on its last axis; {why} needs at least {n}"
        raise InputError(msg)


def _broadcast_batch(*shapes, names) -> tuple:
    try:
        return np.broadcast_shapes(*shapes)
    except ValueError:
        desc = ", ".join(f"{n} {s}" for n, s in zip(names, shapes, strict=True))
        msg = f"batch shapes do not broadcast: {desc}"
        raise InputError(msg) from None


def _safe(arr: np.ndarray, minimum: float):
    """Per-model validity (``arr >= minimum`` and finite over the last axis) and a copy
    with invalid entries replaced by ``minimum`` so vectorised kernels do not raise."""
    ok = np.isfinite(arr) & (arr >= minimum)
    return np.all(ok, axis=-1), np.where(ok, arr, minimum)


def _alpha(eps, sigma, frequency_mhz, low_loss):
    """Attenuation, Np/m, of already-sanitised media (reuses soilwave.wave)."""
    return np.asarray(attenuation(eps, sigma, frequency_mhz, low_loss=low_loss), dtype=float)


def _log_abs(z) -> np.ndarray:
    with np.errstate(divide="ignore"):
        return np.log(np.abs(z))


def _angle_deg(sin_theta) -> np.ndarray:
    return np.rad2deg(np.arcsin(np.clip(sin_theta, 0.0, 1.0)))


# --- single phases -------------------------------------------------------------------


def air_wave_log_amplitude(offset) -> np.ndarray:
    """Log amplitude of the air wave without gain: ``-2 log x``.

    Parameters
    ----------
    offset : array_like
        Antenna separation, m, shape ``(n,)``; must be > 0.

    Returns
    -------
    numpy.ndarray
        ``log|A|`` (natural log, relative to a unit gain), shape ``(n,)``.

    Examples
    --------
    >>> air_wave_log_amplitude([1.0, 2.0]).round(4).tolist()
    [-0.0, -1.3863]
    """
    x = _surface_offset(offset)
    return -2.0 * np.log(x)


def _surface_offset(offset) -> np.ndarray:
    x = _as_offset(offset)
    bad = ~(np.isfinite(x) & (x > 0))
    if np.any(bad):
        i = int(np.flatnonzero(bad)[0])
        msg = (
            f"offset[{i}] = {float(x[i])!r} m: air- and ground-wave amplitudes need a finite "
            "offset > 0 (1/x^2 spreading diverges at x = 0)"
        )
        raise InputError(msg)
    return x


def ground_wave_log_amplitude(
    offset, permittivity, conductivity, *, frequency_mhz, low_loss=False
) -> np.ndarray:
    """Log amplitude of the direct ground wave without gain: ``-2 log x - alpha_1 x``.

    Parameters
    ----------
    offset : array_like
        Antenna separation, m, shape ``(n,)``; must be > 0.
    permittivity : array_like
        Relative permittivity per layer, shape ``(..., n_layers)``; layer 1 is used.
    conductivity : array_like
        Conductivity per layer, mS/m, shape ``(..., n_layers)``; layer 1 is used.
    frequency_mhz : float
        Antenna centre frequency, MHz.
    low_loss : bool, optional
        Use the low-loss attenuation limit instead of the exact expression.

    Returns
    -------
    numpy.ndarray
        ``log|A|``, shape ``(..., n)``; NaN for an unphysical model.

    Examples
    --------
    Lossless top layer: only spreading.

    >>> ground_wave_log_amplitude([1.0, 2.0], [9.0], [0.0], frequency_mhz=200.0).round(4).tolist()
    [-0.0, -1.3863]
    """
    x = _surface_offset(offset)
    f = _check_frequency(frequency_mhz)
    eps = _layer_array(permittivity, "permittivity")[..., :1]
    sig = _layer_array(conductivity, "conductivity")[..., :1]
    batch = _broadcast_batch(eps.shape[:-1], sig.shape[:-1], names=("permittivity", "conductivity"))
    ok_e, eps = _safe(np.broadcast_to(eps, (*batch, 1)), 1.0)
    ok_s, sig = _safe(np.broadcast_to(sig, (*batch, 1)), 0.0)
    valid = ok_e & ok_s
    alpha = _alpha(eps[..., 0], sig[..., 0], f, low_loss)
    out = -2.0 * np.log(x) - alpha[..., None] * x
    return np.where(valid[..., None], out, np.nan)


def _reflection_terms(x, h, eps, sig, k, f, low_loss, p=None):
    """Log amplitude (no gain) of the reflection from interface ``k`` (1-based).

    ``h`` (B, >= k), ``eps`` and ``sig`` (B, >= k + 1) are already broadcast to
    a common flat batch B and sanitised; ``p`` (B, n), when given, is the ray
    parameter already traced for these models and offsets. Returns (B, n).
    """
    v = C_M_PER_NS / np.sqrt(eps[:, : k + 1])
    if p is None:
        _, p = reflection_rays(x, h[:, :k], v[:, :k], interface=k)  # (B, n)
    sin_t = p[:, :, None] * v[:, None, :]  # (B, n, k + 1); beyond 1 below a faster layer
    cos_t = np.sqrt(np.clip(1.0 - sin_t[..., :k] ** 2, 0.0, None))
    with np.errstate(divide="ignore", invalid="ignore"):
        lengths = np.where(h[:, None, :k] > 0, 2.0 * h[:, None, :k] / cos_t, 0.0)
    total = np.sum(lengths, axis=-1)
    ang = _angle_deg(sin_t)
    e = eps[:, None, :]
    r, _ = fresnel_coefficients(e[..., k - 1], e[..., k], ang[..., k - 1])
    with np.errstate(divide="ignore"):  # zero path only in rows rejected as unphysical
        out = _log_abs(r) - np.log(total)
    for j in range(k - 1):
        _, t_down = fresnel_coefficients(e[..., j], e[..., j + 1], ang[..., j])
        _, t_up = fresnel_coefficients(e[..., j + 1], e[..., j], ang[..., j + 1])
        out = out + _log_abs(t_down * t_up)
    alpha = _alpha(eps[:, :k], sig[:, :k], f, low_loss)  # (B, k)
    return out - np.sum(alpha[:, None, :] * lengths, axis=-1)


def reflection_log_amplitude(
    offset, thickness, permittivity, conductivity, *, interface, frequency_mhz, low_loss=False
) -> np.ndarray:
    """Log amplitude of the reflection from one interface, without gain.

    See the module docstring for the model (1/L spreading, TE Fresnel
    coefficients at the ray angles, attenuation along the path).

    Parameters
    ----------
    offset : array_like
        Antenna separation, m, shape ``(n,)``; ``>= 0``.
    thickness : array_like
        Layer thicknesses, m, shape ``(..., n_interfaces)``.
    permittivity : array_like
        Relative permittivity, shape ``(..., n_layers)``, ``n_layers > interface``
        (the layer below the reflector sets the reflection coefficient).
    conductivity : array_like
        Conductivity, mS/m, shape ``(..., n_layers)``; layers ``1..interface`` are used.
    interface : int
        Reflecting interface, 1-based (1 = bottom of layer 1).
    frequency_mhz : float
        Antenna centre frequency, MHz.
    low_loss : bool, optional
        Use the low-loss attenuation limit instead of the exact expression.

    Returns
    -------
    numpy.ndarray
        ``log|A|``, shape ``(..., n)``; NaN for an unphysical model.

    Examples
    --------
    Lossless layer of permittivity 9, 1 m thick, over permittivity 25, at zero
    offset: ``|R| = 0.25`` and a two-way path of 2 m.

    >>> a = reflection_log_amplitude([0.0], [1.0], [9.0, 25.0], [0.0, 0.0],
    ...                              interface=1, frequency_mhz=200.0)
    >>> round(float(np.exp(a[0])), 6)
    0.125
    """
    x = _as_offset(offset)
    if np.any(~np.isfinite(x) | (x < 0)):
        msg = f"offset must be finite and >= 0 m; got {x[~(np.isfinite(x) & (x >= 0))][:3]}"
        raise InputError(msg)
    f = _check_frequency(frequency_mhz)
    h = _layer_array(thickness, "thickness")
    eps = _layer_array(permittivity, "permittivity")
    sig = _layer_array(conductivity, "conductivity")
    if isinstance(interface, bool) or not isinstance(interface, int | np.integer):
        msg = f"interface must be an integer (1 = bottom of layer 1); got {interface!r}"
        raise InputError(msg)
    k = int(interface)
    if k < 1 or k > h.shape[-1]:
        msg = f"interface={k} is outside 1..{h.shape[-1]} (interfaces on thickness's last axis)"
        raise InputError(msg)
    _need_layers(eps, "permittivity", k + 1, f"a reflection from interface {k}")
    _need_layers(sig, "conductivity", k, f"a reflection from interface {k}")
    batch = _broadcast_batch(
        h.shape[:-1],
        eps.shape[:-1],
        sig.shape[:-1],
        names=("thickness", "permittivity", "conductivity"),
    )
    return _reflection_batch(x, h, eps, sig, k, f, low_loss, batch)


def _reflection_batch(x, h, eps, sig, k, f, low_loss, batch, p=None):
    m = int(np.prod(batch, dtype=int))
    if p is not None:
        p = np.broadcast_to(p, (*batch, x.size)).reshape(m, x.size)
    ok_h, hb = _safe(np.broadcast_to(h[..., :k], (*batch, k)).reshape(m, k), 0.0)
    ok_e, eb = _safe(np.broadcast_to(eps[..., : k + 1], (*batch, k + 1)).reshape(m, k + 1), 1.0)
    ok_s, sb = _safe(np.broadcast_to(sig[..., :k], (*batch, k)).reshape(m, k), 0.0)
    out = _reflection_terms(x, hb, eb, sb, k, f, low_loss, p)
    out = np.where((ok_h & ok_e & ok_s)[:, None], out, np.nan)
    return out.reshape(*batch, x.size)


# --- operator over a pick table -------------------------------------------------------


class AmplitudeOperator:
    """Predicted log-amplitudes of a fixed set of picks for a batch of layered models.

    The amplitude counterpart of :class:`soilwave.traveltime.TravelTimeOperator`:
    built once from the picks, each call evaluates every pick for every model
    of a batch, one vectorised pass per phase and interface. See the module
    docstring for the physics and its approximations.

    Parameters
    ----------
    offset : array_like
        Pick offsets, m, shape ``(n_pick,)``; > 0 for air and ground picks.
    phase : array_like of str
        ``'air'``, ``'ground'`` or ``'reflection'`` per pick (refractions and
        diffractions have no amplitude model: leave them out).
    interface : array_like of int
        Interface per pick (1-based) for reflections; ignored (use 0) otherwise.
    frequency_mhz : float
        Antenna centre frequency, MHz, at which attenuation is evaluated.
    low_loss : bool, optional
        Use the frequency-independent low-loss attenuation limit (default
        False: exact plane-wave attenuation at ``frequency_mhz``).

    Attributes
    ----------
    families : tuple of str
        Wave families present in the picks, in the order of the last axis of
        ``log_gain`` (a subset of :data:`AMPLITUDE_FAMILIES`, in that order).
    family_index : numpy.ndarray
        Position in ``families`` of each pick, shape ``(n_pick,)``.
    n_pick, n_interfaces, n_layers : int
        Number of picks, deepest interface referenced and the model size
        expected (``n_interfaces + 1``; the layer below the deepest reflector
        sets its reflection coefficient).

    Examples
    --------
    >>> op = AmplitudeOperator([1.0, 2.0, 1.0], ["ground", "ground", "reflection"], [0, 0, 1],
    ...                        frequency_mhz=200.0)
    >>> op.families
    ('ground', 'reflection')
    >>> op([0.5], [9.0, 25.0], [0.0, 0.0], [0.0, 0.0]).round(4).tolist()
    [0.0, -1.3863, -1.3629]
    """

    def __init__(self, offset, phase, interface, *, frequency_mhz, low_loss=False):
        x = _as_offset(offset)
        ph = np.atleast_1d(np.asarray(phase, dtype=str))
        itf = np.atleast_1d(np.asarray(interface))
        if not (x.shape == ph.shape == itf.shape):
            msg = (
                "offset, phase and interface must have one entry per pick; got shapes "
                f"{x.shape}, {ph.shape}, {itf.shape}"
            )
            raise InputError(msg)
        self.frequency_mhz = _check_frequency(frequency_mhz)
        self.low_loss = bool(low_loss)
        unknown = sorted(set(ph.tolist()) - set(AMPLITUDE_FAMILIES))
        if unknown:
            msg = (
                f"phase(s) {unknown} have no amplitude model; expected one of "
                f"{list(AMPLITUDE_FAMILIES)} (leave other picks out of the amplitude term)"
            )
            raise InputError(msg)
        surface = (ph == "air") | (ph == "ground")
        bad = surface & ~(np.isfinite(x) & (x > 0))
        if np.any(bad):
            i = int(np.flatnonzero(bad)[0])
            msg = (
                f"pick {i}: {ph[i]} wave at offset {float(x[i])!r} m; air- and ground-wave "
                "amplitudes need a finite offset > 0 (1/x^2 spreading)"
            )
            raise InputError(msg)
        bad = ~surface & ~(np.isfinite(x) & (x >= 0))
        if np.any(bad):
            i = int(np.flatnonzero(bad)[0])
            msg = f"pick {i}: offset {float(x[i])!r} m is not finite and >= 0"
            raise InputError(msg)
        refl = ph == "reflection"
        try:
            itf_f = itf.astype(float)
        except (TypeError, ValueError):
            msg = f"interface must be integers; got {itf[:5].tolist()}"
            raise InputError(msg) from None
        bad = refl & ~((itf_f >= 1) & (itf_f == np.round(itf_f)))
        if np.any(bad):
            i = int(np.flatnonzero(bad)[0])
            msg = (
                f"pick {i}: reflection needs an interface >= 1 (1 = bottom of layer 1); "
                f"got {itf[i]}"
            )
            raise InputError(msg)
        itf_i = np.where(refl, np.round(np.where(refl, itf_f, 0.0)), 0).astype(int)
        self.offset = x.copy()
        self.phase = ph.copy()
        self.interface = itf_i
        self.n_pick = int(x.size)
        self.families = tuple(f for f in AMPLITUDE_FAMILIES if np.any(ph == f))
        self.family_index = np.array(
            [self.families.index(p) for p in ph.tolist()], dtype=int
        ).reshape(x.shape)
        self.n_interfaces = int(itf_i.max()) if itf_i.size else 0
        self.n_layers = self.n_interfaces + 1
        groups = []
        for name in ("air", "ground"):
            idx = np.flatnonzero(ph == name)
            if idx.size:
                groups.append((name, 0, idx))
        for k in np.unique(itf_i[refl]):
            groups.append(("reflection", int(k), np.flatnonzero(refl & (itf_i == k))))
        self._groups = groups

    @classmethod
    def from_picks(cls, picks, *, frequency_mhz=None, low_loss=False) -> AmplitudeOperator:
        """Build the operator from a pick table (``xarray.Dataset`` along ``pick``).

        ``frequency_mhz`` defaults to the table's ``frequency_mhz`` attribute.

        Examples
        --------
        >>> import xarray as xr
        >>> ds = xr.Dataset({"offset": ("pick", [1.0]), "phase": ("pick", ["air"]),
        ...                  "interface": ("pick", [0])}, attrs={"frequency_mhz": 250.0})
        >>> AmplitudeOperator.from_picks(ds).families
        ('air',)
        """
        for name in ("offset", "phase", "interface"):
            if name not in picks:
                msg = f"pick table has no variable {name!r}; expected offset, phase, interface"
                raise InputError(msg)
        if frequency_mhz is None:
            if "frequency_mhz" not in picks.attrs:
                msg = (
                    "pick table has no 'frequency_mhz' attribute; pass frequency_mhz= "
                    "(antenna centre frequency, MHz)"
                )
                raise InputError(msg)
            frequency_mhz = picks.attrs["frequency_mhz"]
        return cls(
            np.asarray(picks["offset"].values, dtype=float),
            np.asarray(picks["phase"].values).astype(str),
            np.asarray(picks["interface"].values),
            frequency_mhz=frequency_mhz,
            low_loss=low_loss,
        )

    def __repr__(self) -> str:
        parts = ", ".join(
            f"{name}{'' if k == 0 else f'[{k}]'}: {idx.size}" for name, k, idx in self._groups
        )
        return (
            f"AmplitudeOperator(n_pick={self.n_pick}, n_layers={self.n_layers}, "
            f"frequency_mhz={self.frequency_mhz:g}; {parts})"
        )

    def reflection_groups(self) -> dict:
        """Pick indices of the reflections from each interface: ``{k: idx}``.

        The order of ``idx`` is the order of the ``rays[k]`` entries that
        :meth:`__call__` accepts.
        """
        return {k: idx.copy() for name, k, idx in self._groups if name == "reflection"}

    def __call__(
        self, thickness, permittivity, conductivity, log_gain=0.0, *, rays=None
    ) -> np.ndarray:
        """Predicted natural-log amplitudes ``log|A|``, shape ``(..., n_pick)``.

        Parameters
        ----------
        thickness : array_like
            Layer thicknesses, m, shape ``(..., n_interfaces)`` (more are ignored).
        permittivity : array_like
            Relative permittivity, shape ``(..., n_layers)`` (from a velocity
            ``v`` in m/ns: ``(c / v)^2``, :func:`soilwave.permittivity_from_velocity`).
        conductivity : array_like
            Conductivity, mS/m, shape ``(..., n_layers)``.
        log_gain : array_like, optional
            Natural-log gain per wave family, shape ``(..., len(families))``,
            or a scalar applied to every family.
        rays : dict, optional
            Ray parameters (ns/m) already traced by
            :func:`soilwave.traveltime.reflection_rays` for these models:
            ``{k: p}`` with ``p`` of shape ``(..., len(idx))`` for the picks
            ``idx`` of :meth:`reflection_groups`; saves tracing them again when
            a travel-time model traced them. Velocities must be ``c / sqrt(eps)``.

        Returns
        -------
        numpy.ndarray
            NaN for an unphysical model.
        """
        h = np.atleast_1d(np.asarray(thickness, dtype=float))
        eps = _layer_array(permittivity, "permittivity")
        sig = _layer_array(conductivity, "conductivity")
        g = np.asarray(log_gain, dtype=float)
        if g.ndim == 0:
            g = np.broadcast_to(g, (len(self.families),))
        if g.shape[-1] != len(self.families):
            msg = (
                f"log_gain has {g.shape[-1]} entries on its last axis; expected one per "
                f"wave family {list(self.families)}"
            )
            raise InputError(msg)
        if h.shape[-1] < self.n_interfaces:
            msg = (
                f"thickness has {h.shape[-1]} interface(s) on its last axis; the picks "
                f"reference interface {self.n_interfaces}"
            )
            raise InputError(msg)
        need = self.n_layers if self.n_interfaces else 1
        _need_layers(eps, "permittivity", need, "the picks")
        _need_layers(sig, "conductivity", need, "the picks")
        batch = _broadcast_batch(
            h.shape[:-1],
            eps.shape[:-1],
            sig.shape[:-1],
            g.shape[:-1],
            names=("thickness", "permittivity", "conductivity", "log_gain"),
        )
        out = np.empty((*batch, self.n_pick))
        f = self.frequency_mhz
        for name, k, idx in self._groups:
            x = self.offset[idx]
            if name == "air":
                a = air_wave_log_amplitude(x)
            elif name == "ground":
                a = ground_wave_log_amplitude(x, eps, sig, frequency_mhz=f, low_loss=self.low_loss)
            else:
                p = None if rays is None else rays.get(k)
                a = _reflection_batch(x, h, eps, sig, k, f, self.low_loss, batch, p)
            out[..., idx] = np.broadcast_to(a, (*batch, idx.size))
        # one unphysical entry anywhere in the used part of a model rejects the whole model
        ni = self.n_interfaces
        valid = _safe(np.broadcast_to(eps[..., :need], (*batch, need)), 1.0)[0]
        valid &= _safe(np.broadcast_to(sig[..., :need], (*batch, need)), 0.0)[0]
        if ni:
            valid &= _safe(np.broadcast_to(h[..., :ni], (*batch, ni)), 0.0)[0]
        gain = np.broadcast_to(g, (*batch, len(self.families)))
        out = out + gain[..., self.family_index]
        return np.where(valid[..., None], out, np.nan)
