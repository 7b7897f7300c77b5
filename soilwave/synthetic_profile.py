"""Synthetic fixed-offset GPR profiles: curved interfaces and point diffractors.

The profile counterpart of :mod:`soilwave.synthetic` (same amplitude model,
wavelets, noise and arrivals bookkeeping; see that module's documentation).
Transmitter and receiver sit at ``position -+ antenna_separation_m / 2``.
"""

from __future__ import annotations

from collections.abc import Mapping

import numpy as np

from soilwave.earth import LayeredEarth
from soilwave.errors import InputError
from soilwave.fresnel import fresnel_coefficients
from soilwave.provenance import history_line
from soilwave.synthetic import (
    PROFILE_PHASES,
    _arrivals_dataset,
    _finish,
    _layered_reflection,
    _phases,
    _render,
    _rng,
    _scales,
    _surface_spreading,
    _time_axis,
    _wavelet,
)
from soilwave.traveltime import reflection_rays
from soilwave.wave import SPEED_OF_LIGHT

__all__ = ["bowl_depth", "synthetic_profile"]


# --- fixed-offset profiles --------------------------------------------------------------------


def bowl_depth(*, center_m, half_width_m, base_depth_m, extra_depth_m):
    """Depth function of a smooth bowl- or trench-shaped interface.

    ``z(x) = base + extra * cos^2(pi (x - center) / (2 half_width))`` for
    ``|x - center| < half_width`` and ``base`` elsewhere: flat, then a
    smooth (continuously sloped) dip of ``extra`` m at the centre
    (``extra < 0`` gives a mound).

    Returns
    -------
    callable
        ``z(x)`` for positions in m, returning depths in m.

    Examples
    --------
    >>> z = bowl_depth(center_m=5.0, half_width_m=1.0, base_depth_m=0.8, extra_depth_m=0.4)
    >>> z(np.array([0.0, 5.0, 5.5])).round(3).tolist()
    [0.8, 1.2, 1.0]
    """
    c, w, b, e = (float(v) for v in (center_m, half_width_m, base_depth_m, extra_depth_m))
    if not all(np.isfinite(v) for v in (c, w, b, e)) or w <= 0 or b <= 0 or b + e <= 0:
        msg = (
            "bowl_depth needs finite values with half_width_m > 0, base_depth_m > 0 and "
            f"base_depth_m + extra_depth_m > 0; got center {c}, half width {w}, base {b}, "
            f"extra {e}"
        )
        raise InputError(msg)

    def depth(x):
        x = np.asarray(x, dtype=float)
        u = (x - c) / w
        return b + e * np.where(np.abs(u) < 1.0, np.cos(0.5 * np.pi * u) ** 2, 0.0)

    return depth


def _depth_functions(model, interface_depth):
    """Callable depth per interface (flat ones return the model depth)."""
    flat = model.interface_depth
    funcs = {k: None for k in range(1, model.n_interfaces + 1)}
    if interface_depth is None:
        return funcs
    if callable(interface_depth):
        interface_depth = {1: interface_depth}
    if not isinstance(interface_depth, Mapping):
        msg = (
            "interface_depth must be a callable (interface 1) or a mapping interface -> "
            f"callable; got {interface_depth!r}"
        )
        raise InputError(msg)
    for k, fn in interface_depth.items():
        if k not in funcs:
            msg = f"interface_depth names interface {k!r}; the model has 1..{flat.size}"
            raise InputError(msg)
        if not callable(fn):
            msg = f"interface_depth[{k}] must be callable z(x_m) -> depth_m; got {fn!r}"
            raise InputError(msg)
        funcs[k] = fn
    return funcs


def _depths_at(model, funcs, x) -> np.ndarray:
    """Interface depths at positions x, shape (n, n_interfaces), checked."""
    x = np.asarray(x, dtype=float)
    flat = model.interface_depth
    out = np.empty((x.size, flat.size))
    for k in range(1, flat.size + 1):
        fn = funcs[k]
        if fn is None:
            out[:, k - 1] = flat[k - 1]
            continue
        z = np.asarray(fn(x), dtype=float)
        if z.shape != x.shape or not np.all(np.isfinite(z)):
            msg = f"interface_depth[{k}] must return finite depths of shape {x.shape}"
            raise InputError(msg)
        out[:, k - 1] = z
    prev = np.zeros(x.size)
    for k in range(flat.size):
        bad = out[:, k] <= prev
        if np.any(bad):
            i = int(np.flatnonzero(bad)[0])
            msg = (
                f"interface {k + 1} at x = {float(x[i])!r} m is at depth "
                f"{float(out[i, k])!r} m, not below "
                f"{'the surface' if k == 0 else f'interface {k} ({float(prev[i])!r} m)'}"
            )
            raise InputError(msg)
        prev = out[:, k]
    return out


def _fermat_reflections(xs, xr, depth_fn, v1, step, pad):
    """Stationary two-leg travel paths off a curved interface 1 (straight rays).

    Returns times (n_traces, n_branch) in ns, incidence angles (deg) and
    path lengths (m), NaN-padded.
    """
    lo = min(xs.min(), xr.min()) - pad
    hi = max(xs.max(), xr.max()) + pad
    xi = np.arange(lo, hi + step, step)
    z = np.asarray(depth_fn(xi), dtype=float)
    results = []
    for a, b in zip(xs, xr, strict=True):
        length = np.hypot(a - xi, z) + np.hypot(b - xi, z)
        d = np.diff(length)
        turn = np.flatnonzero(np.sign(d[:-1]) != np.sign(d[1:])) + 1
        found = []
        for i in turn:
            l0, l1, l2 = length[i - 1], length[i], length[i + 1]
            den = l0 - 2 * l1 + l2
            delta = 0.5 * (l0 - l2) / den if den != 0 else 0.0
            x0 = xi[i] + np.clip(delta, -1.0, 1.0) * step
            zz = np.asarray(depth_fn(np.array([x0 - step, x0, x0 + step])), dtype=float)
            z0 = zz[1]
            slope = (zz[2] - zz[0]) / (2 * step)
            r_s = np.hypot(x0 - a, z0)
            r_r = np.hypot(x0 - b, z0)
            normal = np.array([-slope, 1.0]) / np.hypot(slope, 1.0)
            cosi = abs(((x0 - a) * normal[0] + z0 * normal[1]) / r_s)
            found.append(((r_s + r_r) / v1, np.rad2deg(np.arccos(min(cosi, 1.0))), r_s + r_r))
        results.append(found)
    n_branch = max((len(f) for f in results), default=0)
    out = np.full((3, xs.size, max(n_branch, 1)), np.nan)
    for i, found in enumerate(results):
        for j, vals in enumerate(found):
            out[:, i, j] = vals
    return out[0], out[1], out[2]


def _one_way(model, thickness_above, z_in_layer, layer, horizontal):
    """One-way time (ns), per-layer lengths (m) and sines from the surface to a point."""
    h = np.append(thickness_above, z_in_layer)
    v = model.velocity[: layer + 1]
    t2, p = reflection_rays(2.0 * np.asarray(horizontal, dtype=float), h, v, interface=layer + 1)
    sin_t = np.clip(p[:, None] * v[None, :], 0.0, 1.0)
    cos_t = np.sqrt(1.0 - sin_t**2)
    lengths = h[None, :] / np.maximum(cos_t, 1e-300)
    return 0.5 * t2, lengths, sin_t


def synthetic_profile(
    model,
    *,
    positions,
    antenna_separation_m,
    dt_ns,
    n_samples,
    frequency_mhz,
    t0_ns=0.0,
    wavelet="ricker",
    noise=0.0,
    rng=None,
    include=PROFILE_PHASES,
    diffractors=(),
    interface_depth=None,
    spreading=True,
    attenuation=True,
    phase_scale=None,
    return_arrivals=False,
):
    """Synthetic fixed-offset profile with optional curved interface and point diffractors.

    Transmitter and receiver sit at ``position -+ antenna_separation_m / 2``.

    * Air and ground waves arrive at ``s / c`` and ``s / v_1`` on every trace.
    * Reflections: interface 1, if curved (``interface_depth``), by exact
      two-dimensional ray tracing with straight rays in layer 1: every
      stationary path ``x_s -> (xi, z(xi)) -> x_r`` (Fermat), so synclines give
      several branches; the reflection coefficient uses the incidence angle on
      the local normal. Flat interfaces, and deeper curved ones (using the
      local layer thicknesses at the midpoint, a gentle-dip approximation),
      by exact layered ray tracing.
    * Diffractions from points ``(x0, z0[, s])``: ``t = t_1(|x_s - x0|, z0) +
      t_1(|x_r - x0|, z0)``, each leg a one-way layered ray (in a homogeneous
      top layer ``sqrt((x - x0)^2 + z0^2) / v``), using the interface depths
      at ``x0``; scattering strength ``s`` in m (default -0.3, the polarity of
      a wet or metallic object).

    Parameters
    ----------
    model : LayeredEarth or dict
        Layered earth (reference thicknesses for flat interfaces).
    positions : array_like
        Trace positions (antenna midpoints), m, strictly increasing.
    antenna_separation_m : float
        Transmitter-receiver distance, m, >= 0.
    dt_ns, n_samples, frequency_mhz, t0_ns, wavelet, noise, rng
        As in :func:`synthetic_gather`.
    include : sequence of str, optional
        Some of ``"air"``, ``"ground"``, ``"reflection"``, ``"diffraction"``.
    diffractors : sequence of tuples, optional
        ``(x0_m, depth_m)`` or ``(x0_m, depth_m, strength_m)``.
    interface_depth : callable or mapping, optional
        ``z(x)`` (m) for interface 1, or ``{k: z_k}``; see :func:`bowl_depth`.
    spreading, attenuation, phase_scale, return_arrivals
        As in :func:`synthetic_gather`; arrivals have ``position``,
        ``offset`` (the separation) and ``diffractor`` (index, -1 if none).

    Returns
    -------
    gather : xarray.DataArray
        Dims (position, time), geometry ``"fixed-offset"``.
    arrivals : xarray.Dataset
        Only with ``return_arrivals=True``.

    Examples
    --------
    >>> m = LayeredEarth(permittivity=[9.0, 25.0], thickness=[1.0])
    >>> g = synthetic_profile(m, positions=np.arange(0, 4, 0.05), antenna_separation_m=0.3,
    ...                       dt_ns=0.2, n_samples=300, frequency_mhz=250.0,
    ...                       diffractors=[(2.0, 0.6)])
    >>> g.dims, g.attrs["geometry"]
    (('position', 'time'), 'fixed-offset')
    """
    model = LayeredEarth.coerce(model)
    inc = _phases(include, PROFILE_PHASES)
    scales = _scales(phase_scale, PROFILE_PHASES)
    time = _time_axis(dt_ns, n_samples, t0_ns)
    wav = _wavelet(wavelet, frequency_mhz)
    gen = _rng(rng)
    pos = np.atleast_1d(np.asarray(positions, dtype=float))
    if pos.ndim != 1 or pos.size == 0 or not np.all(np.isfinite(pos)):
        msg = f"positions must be a non-empty 1-D array of finite values in m; got {positions!r}"
        raise InputError(msg)
    sep = float(antenna_separation_m)
    if not (np.isfinite(sep) and sep >= 0):
        msg = f"antenna_separation_m must be finite and >= 0 m; got {antenna_separation_m!r}"
        raise InputError(msg)
    f = float(frequency_mhz)
    alpha = model.attenuation_np_per_m(f)
    v = model.velocity
    eps = model.permittivity
    x_near = 0.5 * v[0] * 1e3 / f
    n = pos.size
    xs, xr = pos - sep / 2, pos + sep / 2
    funcs = _depth_functions(model, interface_depth)
    depths = _depths_at(model, funcs, pos)
    arrivals = []
    surf = float(_surface_spreading(sep, x_near)) if spreading else 1.0
    if "air" in inc:
        arrivals.append(
            {
                "phase": "air",
                "time": np.full(n, sep / SPEED_OF_LIGHT),
                "amplitude": np.full(n, scales["air"] * surf, dtype=complex),
            }
        )
    if "ground" in inc:
        loss = np.exp(-alpha[0] * sep) if attenuation else 1.0
        arrivals.append(
            {
                "phase": "ground",
                "time": np.full(n, sep / v[0]),
                "amplitude": np.full(n, scales["ground"] * surf * loss, dtype=complex),
            }
        )
    if "reflection" in inc:
        for k in range(1, model.n_interfaces + 1):
            if k == 1 and funcs[1] is not None:
                step = min(0.01, 0.02 * v[0] * 1e3 / f)
                pad = 3.0 * float(np.max(depths[:, 0])) + sep
                t, ang, length = _fermat_reflections(xs, xr, funcs[1], v[0], step, pad)
                r, _ = fresnel_coefficients(eps[0], eps[1], np.nan_to_num(ang))
                found = np.isfinite(t)
                length = np.where(found, length, 1.0)
                amp = np.asarray(r, dtype=complex) * scales["reflection"]
                if spreading:
                    amp = amp / length
                if attenuation:
                    amp = amp * np.exp(-alpha[0] * length)
                amp = np.where(found, amp, 0.0)
                for j in range(t.shape[1]):
                    arrivals.append(
                        {
                            "phase": "reflection",
                            "interface": 1,
                            "time": t[:, j],
                            "amplitude": amp[:, j],
                        }
                    )
                continue
            thick = np.diff(depths, axis=1, prepend=0.0)
            t, amp, _ = _layered_reflection(
                model,
                np.array([sep]),
                thick,
                k,
                alpha,
                spreading=spreading,
                attenuation=attenuation,
            )
            arrivals.append(
                {
                    "phase": "reflection",
                    "interface": k,
                    "time": t,
                    "amplitude": scales["reflection"] * amp,
                }
            )
    if "diffraction" in inc:
        for idx, item in enumerate(diffractors):
            vals = tuple(float(q) for q in item)
            if len(vals) not in (2, 3) or not all(np.isfinite(vals)):
                msg = f"diffractors[{idx}] must be (x_m, depth_m[, strength_m]); got {item!r}"
                raise InputError(msg)
            x0, z0 = vals[0], vals[1]
            strength = vals[2] if len(vals) == 3 else -0.3
            if z0 <= 0:
                msg = f"diffractors[{idx}] depth must be > 0 m; got {z0!r}"
                raise InputError(msg)
            zint = _depths_at(model, funcs, np.array([x0]))[0]
            layer = int(np.searchsorted(zint, z0, side="right"))  # 0-based layer index
            above = np.diff(np.concatenate([[0.0], zint[:layer]]))
            z_in = z0 - (zint[layer - 1] if layer else 0.0)
            t_s, l_s, sin_s = _one_way(model, above, z_in, layer, np.abs(xs - x0))
            t_r, l_r, sin_r = _one_way(model, above, z_in, layer, np.abs(xr - x0))
            amp = np.full(n, scales["diffraction"] * strength, dtype=complex)
            for j in range(layer):
                ang_down = np.rad2deg(np.arcsin(sin_s[:, j]))
                ang_up = np.rad2deg(np.arcsin(sin_r[:, j + 1]))
                _, t_down = fresnel_coefficients(eps[j], eps[j + 1], ang_down)
                _, t_up = fresnel_coefficients(eps[j + 1], eps[j], ang_up)
                amp = amp * t_down * t_up
            if spreading:
                amp = amp / (l_s.sum(axis=1) * l_r.sum(axis=1))
            if attenuation:
                amp = amp * np.exp(-((l_s + l_r) * alpha[: layer + 1]).sum(axis=1))
            arrivals.append(
                {"phase": "diffraction", "diffractor": idx, "time": t_s + t_r, "amplitude": amp}
            )
    data = _render(time, arrivals, wav, f, n)
    gather = _finish(
        data,
        time,
        noise,
        gen,
        positions=pos,
        antenna_separation_m=sep,
        frequency_mhz=f,
        history=history_line(
            "synthetic_profile",
            permittivity=model.permittivity,
            thickness=model.thickness,
            conductivity=model.conductivity,
            include=list(inc),
            diffractors=[list(d) for d in diffractors],
            curved=[k for k, fn in funcs.items() if fn is not None],
            noise=noise,
        ),
    )
    if not return_arrivals:
        return gather
    return gather, _arrivals_dataset(arrivals, "position", pos, time, extra_offset=sep)
