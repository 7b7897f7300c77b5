"""Products derived from layer conductivity: attenuation, penetration depth, Archie.

Layer 2. Every function takes numpy arrays (results are numpy arrays) or
``xarray.DataArray`` objects such as the posterior draws
``result.samples["conductivity"]`` (dims ``sample``, ``layer``); with
DataArrays the result is a DataArray with units and ``long_name``, and
``quantiles=`` reduces the ``sample`` dimension to posterior quantiles, which
carry the uncertainty of the inversion into the product. The numpy kernels
are at the bottom of the module.

Attenuation
    :func:`attenuation_db_per_m`: plane-wave amplitude attenuation at the
    antenna centre frequency in dB/m (:func:`soilwave.wave.attenuation`,
    exact or low-loss ``1.636 sigma / sqrt(eps)`` dB/m).
Penetration depth
    :func:`penetration_depth`: the depth at which a zero-offset reflection
    from a reference reflector falls to the noise level (assumptions in its
    docstring).
Pore-water conductivity (Archie 1942)
    :func:`archie_pore_water_conductivity` and its inverse
    :func:`archie_bulk_conductivity`. Archie's law, ``rho_b = a rho_w
    phi^-m S^-n``, was fitted to clean, clay-free sandstones at low frequency;
    soil conductivity from GPR amplitudes is an effective value at radar
    frequencies that also contains dielectric losses, and clay adds surface
    conduction that Archie's law ignores. The defaults ``a = 1, m = 2, n = 2``
    lie inside the published ranges (``a`` 0.6-1.5, ``m`` 1.3-3, ``n`` about 2)
    but are not a calibration: **pore-water conductivity from this relation
    needs site calibration** (water samples, laboratory cores) before
    decisions rest on it. DataArray results carry that caution in a
    ``caution`` attribute.
"""

from __future__ import annotations

import warnings

import numpy as np
import xarray as xr

from soilwave.errors import InputError, RangeWarning, ValidRangeError
from soilwave.fresnel import reflection_coefficient
from soilwave.wave import attenuation

__all__ = [
    "ARCHIE_CAUTION",
    "ARCHIE_DEFAULTS",
    "archie_bulk_conductivity",
    "archie_pore_water_conductivity",
    "attenuation_db_per_m",
    "penetration_depth",
]

#: Default Archie parameters (tortuosity factor a, cementation exponent m,
#: saturation exponent n): common textbook defaults inside the published ranges.
ARCHIE_DEFAULTS = {"a": 1.0, "m": 2.0, "n": 2.0}

#: Published ranges (Archie 1942 and later compilations, checked via a
#: geophysics dictionary): a 0.6-1.5, m 1.3-3; n "about 2" (we warn outside
#: 1.5-2.5, our choice of what "about" allows).
ARCHIE_RANGES = {"a": (0.6, 1.5), "m": (1.3, 3.0), "n": (1.5, 2.5)}

ARCHIE_CAUTION = (
    "Pore-water conductivity from Archie's law (Archie 1942) with uncalibrated parameters "
    "needs site calibration (water samples or cores) before decisions rest on it; Archie's "
    "law ignores clay surface conduction, and GPR conductivity is an effective value at "
    "radar frequency."
)

_PENETRATION_NOTE = (
    "zero-offset reflection from a reference reflector of the given coefficient, 1/(2z) "
    "spreading, two-way attenuation and normal-incidence transmission losses of the "
    "layers above; depth where its amplitude equals the noise level"
)


# --- xarray layer -------------------------------------------------------------------


def _is_xr(*values) -> bool:
    return any(isinstance(v, xr.DataArray) for v in values)


def _finish(da: xr.DataArray, *, name, units, long_name, quantiles, extra=None):
    da = da.rename(name)
    da.attrs = {"units": units, "long_name": long_name, **(extra or {})}
    if quantiles is not None:
        q = np.atleast_1d(np.asarray(quantiles, dtype=float))
        if q.ndim != 1 or np.any(~((q >= 0) & (q <= 1))):
            msg = f"quantiles must be numbers between 0 and 1; got {quantiles!r}"
            raise InputError(msg)
        if "sample" not in da.dims:
            msg = (
                f"quantiles need a 'sample' dimension (posterior draws); {name} has dims {da.dims}"
            )
            raise InputError(msg)
        attrs = dict(da.attrs)
        attrs["long_name"] = f"{long_name}, posterior quantiles"
        da = da.quantile(q, dim="sample")
        da.attrs = attrs
        da["quantile"].attrs = {"units": "1", "long_name": "posterior quantile"}
    return da


def attenuation_db_per_m(
    permittivity, conductivity, *, frequency_mhz, low_loss=False, quantiles=None
):
    """Plane-wave amplitude attenuation per layer, dB/m, at the antenna frequency.

    Parameters
    ----------
    permittivity : array_like or xarray.DataArray
        Relative permittivity (``>= 1``), e.g. ``samples["permittivity"]``.
    conductivity : array_like or xarray.DataArray
        Electrical conductivity, mS/m (``>= 0``), e.g. ``samples["conductivity"]``.
    frequency_mhz : float
        Antenna centre frequency, MHz.
    low_loss : bool, optional
        Use the low-loss limit ``sigma Z0 / (2 sqrt(eps))`` (1.636 sigma /
        sqrt(eps) dB/m with sigma in mS/m) instead of the exact expression.
    quantiles : sequence of float, optional
        With DataArray inputs that have a ``sample`` dimension: return these
        posterior quantiles (new dimension ``quantile``) instead of per-draw values.

    Returns
    -------
    numpy.ndarray or xarray.DataArray
        Attenuation in dB/m, broadcast over the inputs (DataArray ``attenuation``
        with ``units="dB/m"`` when an input is a DataArray).

    Examples
    --------
    >>> round(float(attenuation_db_per_m(25.0, 10.0, frequency_mhz=100.0)), 4)
    3.2701
    """
    f = _check_positive(frequency_mhz, "frequency_mhz", "MHz")

    def kernel(e, s):
        return np.asarray(attenuation(e, s, f, unit="dB/m", low_loss=low_loss), dtype=float)

    if not _is_xr(permittivity, conductivity):
        if quantiles is not None:
            msg = "quantiles need DataArray inputs with a 'sample' dimension"
            raise InputError(msg)
        return kernel(permittivity, conductivity)
    da = xr.apply_ufunc(kernel, permittivity, conductivity, keep_attrs=False)
    how = "low-loss limit" if low_loss else "exact plane-wave expression"
    return _finish(
        da,
        name="attenuation",
        units="dB/m",
        long_name=f"amplitude attenuation at {f:g} MHz ({how})",
        quantiles=quantiles,
        extra={"frequency_mhz": f},
    )


def penetration_depth(
    permittivity,
    conductivity,
    thickness=None,
    *,
    frequency_mhz,
    noise_level,
    source_amplitude=1.0,
    reflection_coefficient=0.1,
    low_loss=False,
    quantiles=None,
):
    """Depth at which a reflection of the survey frequency falls to the noise level.

    Assumptions (a penetration *estimate*, not a detection guarantee): a
    reference reflector of amplitude reflection coefficient ``R_ref`` at depth
    ``z`` below the antennas at zero offset. Its amplitude is

    ``A(z) = S |R_ref| T(z) exp(-2 int_0^z alpha dz') / (2 z)``

    with ``S`` the source amplitude (the amplitude of a perfect reflector at
    1 m two-way path without losses: the same scale as the reflection gain
    ``exp(g_reflection)`` of :class:`soilwave.amplitude.AmplitudeOperator`),
    spreading ``1 / (2 z)`` over the two-way path, ``alpha`` the plane-wave
    attenuation of each layer at ``frequency_mhz``
    (:func:`soilwave.wave.attenuation`) and ``T(z) = prod (1 - r_j^2)`` the
    two-way normal-incidence transmission through the model's interfaces
    above ``z``. ``A`` decreases strictly with depth; the returned depth
    solves ``A(z) = noise_level``. In a lossless medium it is ``S |R_ref| /
    (2 noise_level)``; in a strongly attenuating one it approaches
    ``(delta / 2) ln(S |R_ref| / (2 z noise_level))``, a few skin depths
    ``delta = 1 / alpha``. Antenna gain patterns, scattering losses and the
    wavelet's frequency content are ignored.

    Parameters
    ----------
    permittivity : array_like or xarray.DataArray
        Relative permittivity per layer, shape ``(..., n_layers)`` (dim ``layer``).
    conductivity : array_like or xarray.DataArray
        Conductivity per layer, mS/m, same layout.
    thickness : array_like or xarray.DataArray, optional
        Thickness of the layers above the half-space, m, shape
        ``(..., n_layers - 1)`` (dim ``interface`` or ``layer``); a last entry
        for the half-space (e.g. the NaN of ``samples["thickness"]``) is
        ignored. May be omitted for a single (homogeneous) layer.
    frequency_mhz : float
        Antenna centre frequency, MHz.
    noise_level : float
        Noise amplitude (1 sigma), in the unit of ``source_amplitude``
        (e.g. the ``amplitude_sigma`` of picks from :func:`soilwave.auto_pick`).
    source_amplitude : float, array_like or xarray.DataArray, optional
        ``S`` above (default 1); may vary per draw, e.g.
        ``numpy.exp(samples["log_gain_reflection"])`` of a joint inversion.
    reflection_coefficient : float, optional
        ``|R_ref|`` of the reference reflector, between 0 and 1 (default 0.1,
        a weak soil contrast such as permittivity 9 over 13.4).
    low_loss : bool, optional
        Low-loss attenuation limit instead of the exact expression.
    quantiles : sequence of float, optional
        With DataArray inputs that have a ``sample`` dimension: posterior quantiles.

    Returns
    -------
    numpy.ndarray or xarray.DataArray
        Depth in m, shape ``(...)``; 0 where even the shallowest reflection is
        below the noise.

    Examples
    --------
    Lossless soil: ``S |R| / (2 N) = 0.1 / (2 x 0.01) = 5 m``.

    >>> round(float(penetration_depth([9.0], [0.0], frequency_mhz=200.0, noise_level=0.01)), 6)
    5.0
    """
    f = _check_positive(frequency_mhz, "frequency_mhz", "MHz")
    noise = _check_positive(noise_level, "noise_level", "amplitude units")
    src_in = source_amplitude
    if not isinstance(src_in, xr.DataArray):
        src_in = _positive_array(src_in, "source_amplitude", "amplitude units")
    else:
        _positive_array(src_in.values, "source_amplitude", "amplitude units")
    r_ref = float(reflection_coefficient)
    if not (0.0 < r_ref <= 1.0):
        msg = (
            f"reflection_coefficient must be an amplitude coefficient in (0, 1]; "
            f"got {reflection_coefficient!r}"
        )
        raise InputError(msg)
    opts = {"noise": noise, "r_ref": r_ref, "f": f, "low_loss": low_loss}
    if not _is_xr(permittivity, conductivity, thickness, src_in):
        if quantiles is not None:
            msg = "quantiles need DataArray inputs with a 'sample' dimension"
            raise InputError(msg)
        eps = _layers(permittivity, "permittivity")
        sig = _layers(conductivity, "conductivity")
        h = _thickness(thickness, eps.shape[-1])
        return _out(_penetration_kernel(eps, sig, h, src=src_in, **opts))
    eps, sig = (
        _as_da(v, name)
        for v, name in ((permittivity, "permittivity"), (conductivity, "conductivity"))
    )
    for da, name in ((eps, "permittivity"), (sig, "conductivity")):
        if "layer" not in da.dims:
            msg = f"{name} needs a 'layer' dimension; got dims {da.dims}"
            raise InputError(msg)
    eps, sig = xr.broadcast(eps, sig)
    eps = eps.transpose(..., "layer")
    sig = sig.transpose(..., "layer")
    other = [d for d in eps.dims if d != "layer"]
    template = eps.isel(layer=0, drop=True)
    n_l = eps.sizes["layer"]
    if thickness is None:
        h = np.zeros((*template.shape, 0))
    else:
        hd = _as_da(thickness, "thickness")
        hdim = "interface" if "interface" in hd.dims else "layer"
        if hdim not in hd.dims:
            msg = f"thickness needs an 'interface' or 'layer' dimension; got dims {hd.dims}"
            raise InputError(msg)
        hd = hd.broadcast_like(template).transpose(*other, hdim)
        h = _thickness(hd.values, n_l)
    if isinstance(src_in, xr.DataArray):
        src = src_in.broadcast_like(template).transpose(*other).values
    else:
        src = np.broadcast_to(src_in, template.shape)
    depth = _penetration_kernel(eps.values, sig.values, h, src=src, **opts)
    da = xr.DataArray(depth, dims=template.dims, coords=template.coords)
    return _finish(
        da,
        name="penetration_depth",
        units="m",
        long_name=f"estimated penetration depth at {f:g} MHz",
        quantiles=quantiles,
        extra={
            "assumptions": _PENETRATION_NOTE,
            "reference_reflection_coefficient": r_ref,
            "noise_level": noise,
            "source_amplitude": (
                float(src_in) if np.ndim(src_in) == 0 else "varies (one value per draw)"
            ),
        },
    )


def archie_pore_water_conductivity(
    bulk_conductivity, water_content, porosity=None, *, a=1.0, m=2.0, n=2.0
):
    """Pore-water conductivity from bulk conductivity by Archie's law (Archie 1942).

    Archie's law, in its published resistivity form,
    ``rho_b = a rho_w phi^-m S^-n`` with water saturation ``S = theta / phi``,
    gives ``sigma_w = a sigma_b phi^-m S^-n = a sigma_b theta^-n phi^(n - m)``.

    .. caution:: Needs site calibration. The defaults ``a = 1, m = 2, n = 2``
       are generic values inside the published ranges (``a`` 0.6-1.5, ``m``
       1.3-3, ``n`` about 2), not a calibration; Archie's law ignores the
       surface conduction of clay, and conductivity from GPR amplitudes is an
       effective value at radar frequency. Parameters outside those ranges
       raise a :class:`soilwave.RangeWarning`.

    Parameters
    ----------
    bulk_conductivity : array_like or xarray.DataArray
        Bulk electrical conductivity of the soil, mS/m (``>= 0``).
    water_content : array_like or xarray.DataArray
        Volumetric water content, m3/m3, in ``(0, porosity]``.
    porosity : array_like or xarray.DataArray, optional
        Porosity, m3/m3, in ``(0, 1]``. Needed unless ``m == n`` (then
        ``phi`` cancels: ``sigma_w = a sigma_b theta^-n``).
    a, m, n : float, optional
        Tortuosity factor, cementation exponent and saturation exponent.

    Returns
    -------
    numpy.ndarray or xarray.DataArray
        Pore-water conductivity, mS/m (DataArray ``pore_water_conductivity``
        with a ``caution`` attribute when an input is a DataArray).

    Examples
    --------
    >>> round(float(archie_pore_water_conductivity(10.0, 0.2)), 6)  # 10 / 0.2^2
    250.0
    """
    params = _archie_params(a, m, n, porosity)

    def kernel(sb, th, *phi):
        sb = _nonneg(sb, "bulk_conductivity", "mS/m")
        th, ph = _saturation_inputs(th, phi[0] if phi else None)
        return params["a"] * sb * th ** -params["n"] * ph ** (params["n"] - params["m"])

    return _archie_apply(
        kernel,
        bulk_conductivity,
        water_content,
        porosity,
        params,
        name="pore_water_conductivity",
        long_name="pore-water electrical conductivity (Archie)",
    )


def archie_bulk_conductivity(
    pore_water_conductivity, water_content, porosity=None, *, a=1.0, m=2.0, n=2.0
):
    """Bulk conductivity from pore-water conductivity by Archie's law (Archie 1942).

    ``sigma_b = sigma_w phi^m S^n / a = sigma_w theta^n phi^(m - n) / a``; the
    inverse of :func:`archie_pore_water_conductivity` (same parameters and
    caution: it needs site calibration).

    Parameters
    ----------
    pore_water_conductivity : array_like or xarray.DataArray
        Pore-water conductivity, mS/m (``>= 0``).
    water_content, porosity, a, m, n
        As in :func:`archie_pore_water_conductivity`.

    Returns
    -------
    numpy.ndarray or xarray.DataArray
        Bulk conductivity, mS/m.

    Examples
    --------
    >>> round(float(archie_bulk_conductivity(250.0, 0.2)), 6)
    10.0
    """
    params = _archie_params(a, m, n, porosity)

    def kernel(sw, th, *phi):
        sw = _nonneg(sw, "pore_water_conductivity", "mS/m")
        th, ph = _saturation_inputs(th, phi[0] if phi else None)
        return sw * th ** params["n"] * ph ** (params["m"] - params["n"]) / params["a"]

    return _archie_apply(
        kernel,
        pore_water_conductivity,
        water_content,
        porosity,
        params,
        name="bulk_conductivity",
        long_name="bulk electrical conductivity (Archie)",
    )


def _archie_apply(kernel, first, theta, porosity, params, *, name, long_name):
    args = (first, theta) if porosity is None else (first, theta, porosity)
    if not _is_xr(*args):
        return _out(kernel(*args))
    da = xr.apply_ufunc(kernel, *args, keep_attrs=False)
    return _finish(
        da,
        name=name,
        units="mS/m",
        long_name=long_name,
        quantiles=None,
        extra={
            "archie_a": params["a"],
            "archie_m": params["m"],
            "archie_n": params["n"],
            "caution": ARCHIE_CAUTION,
        },
    )


def _archie_params(a, m, n, porosity) -> dict:
    params = {}
    for key, value in (("a", a), ("m", m), ("n", n)):
        x = _check_positive(value, key, "dimensionless")
        lo, hi = ARCHIE_RANGES[key]
        if not lo <= x <= hi:
            msg = (
                f"Archie parameter {key}={x:g} lies outside the published range {lo:g}-{hi:g}; "
                "the pore-water conductivity is an extrapolation (calibrate it at the site)"
            )
            warnings.warn(msg, RangeWarning, stacklevel=3)
        params[key] = x
    if porosity is None and params["m"] != params["n"]:
        msg = (
            f"porosity is needed when m ({params['m']:g}) differs from n ({params['n']:g}); "
            "pass porosity= (m3/m3, between 0 and 1)"
        )
        raise InputError(msg)
    return params


# --- numpy kernels -------------------------------------------------------------------


def _out(arr):
    arr = np.asarray(arr)
    return arr[()] if arr.ndim == 0 else arr


def _as_da(value, name) -> xr.DataArray:
    if isinstance(value, xr.DataArray):
        return value
    arr = np.asarray(value, dtype=float)
    if arr.ndim == 1 and name != "thickness":
        return xr.DataArray(arr, dims=("layer",))
    if arr.ndim == 1:
        return xr.DataArray(arr, dims=("interface",))
    msg = f"{name}: mix DataArrays only with 1-D arrays over layers; got shape {arr.shape}"
    raise InputError(msg)


def _check_positive(value, name, unit) -> float:
    try:
        x = float(value)
    except (TypeError, ValueError):
        msg = f"{name} must be a number ({unit}); got {value!r}"
        raise InputError(msg) from None
    if not (np.isfinite(x) and x > 0):
        msg = f"{name} must be finite and > 0 ({unit}); got {value!r}"
        raise InputError(msg)
    return x


def _first_bad(arr, ok):
    idx = tuple(int(i) for i in np.argwhere(~ok)[0])
    where = "" if arr.ndim == 0 else f" at index {idx}"
    return float(arr[idx]), where


def _positive_array(value, name, unit) -> np.ndarray:
    try:
        arr = np.asarray(value, dtype=float)
    except (TypeError, ValueError):
        msg = f"{name} must be a number or array of numbers ({unit}); got {value!r}"
        raise InputError(msg) from None
    ok = np.isfinite(arr) & (arr > 0)
    if not np.all(ok):
        val, where = _first_bad(arr, ok)
        msg = f"{name} must be finite and > 0 ({unit}); got {val!r}{where}"
        raise InputError(msg)
    return arr


def _nonneg(value, name, unit) -> np.ndarray:
    arr = np.asarray(value, dtype=float)
    ok = np.isfinite(arr) & (arr >= 0)
    if not np.all(ok):
        val, where = _first_bad(arr, ok)
        msg = f"{name} must be finite and >= 0 {unit}; got {val!r}{where}"
        raise InputError(msg)
    return arr


def _saturation_inputs(theta, porosity):
    th = np.asarray(theta, dtype=float)
    ok = np.isfinite(th) & (th > 0) & (th <= 1)
    if not np.all(ok):
        val, where = _first_bad(th, ok)
        msg = f"water_content must lie in (0, 1] m3/m3 for Archie's law; got {val!r}{where}"
        raise ValidRangeError(msg)
    if porosity is None:
        return th, np.ones_like(th)
    ph = np.asarray(porosity, dtype=float)
    ok = np.isfinite(ph) & (ph > 0) & (ph <= 1)
    if not np.all(ok):
        val, where = _first_bad(ph, ok)
        msg = f"porosity must lie in (0, 1] m3/m3; got {val!r}{where}"
        raise ValidRangeError(msg)
    th_b, ph_b = np.broadcast_arrays(th, ph)
    ok = th_b <= ph_b * (1.0 + 1e-9)
    if not np.all(ok):
        val, where = _first_bad(th_b, ok)
        msg = (
            f"water_content {val!r}{where} exceeds the porosity {float(ph_b[~ok][0])!r}: "
            "saturation theta / phi must be <= 1"
        )
        raise ValidRangeError(msg)
    return th, ph


def _layers(value, name) -> np.ndarray:
    arr = np.asarray(value, dtype=float)
    if arr.ndim == 0:
        arr = arr[None]
    return arr


def _thickness(value, n_layers) -> np.ndarray:
    if value is None:
        if n_layers != 1:
            msg = (
                f"thickness is needed for {n_layers} layers (n_layers - 1 = {n_layers - 1} values)"
            )
            raise InputError(msg)
        return np.zeros((0,))
    h = np.asarray(value, dtype=float)
    if h.ndim == 0:
        h = h[None]
    if h.shape[-1] == n_layers:
        h = h[..., : n_layers - 1]  # the half-space entry (often NaN) is ignored
    if h.shape[-1] != n_layers - 1:
        msg = (
            f"thickness has {h.shape[-1]} value(s) on its last axis; expected "
            f"n_layers - 1 = {n_layers - 1} (one per layer above the half-space)"
        )
        raise InputError(msg)
    ok = np.isfinite(h) & (h >= 0)
    if not np.all(ok):
        val, where = _first_bad(h, ok)
        msg = f"thickness must be finite and >= 0 m; got {val!r}{where}"
        raise InputError(msg)
    return h


def _penetration_kernel(eps, sig, h, *, noise, src, r_ref, f, low_loss):
    """Vectorised root of ``log A(z) = log noise`` (see :func:`penetration_depth`)."""
    src = np.asarray(src, dtype=float)
    try:
        batch = np.broadcast_shapes(eps.shape[:-1], sig.shape[:-1], h.shape[:-1], src.shape)
    except ValueError:
        msg = (
            f"batch shapes of permittivity {eps.shape}, conductivity {sig.shape}, "
            f"thickness {h.shape} and source_amplitude {src.shape} do not broadcast"
        )
        raise InputError(msg) from None
    src = np.broadcast_to(src, batch)
    n_l = eps.shape[-1]
    if sig.shape[-1] != n_l:
        msg = f"conductivity has {sig.shape[-1]} layer(s); permittivity has {n_l}"
        raise InputError(msg)
    eps = np.broadcast_to(eps, (*batch, n_l))
    sig = np.broadcast_to(sig, (*batch, n_l))
    h = np.broadcast_to(h, (*batch, n_l - 1))
    alpha = np.asarray(attenuation(eps, sig, f, low_loss=low_loss), dtype=float)
    top = np.concatenate([np.zeros((*batch, 1)), np.cumsum(h, axis=-1)], axis=-1)
    span = np.concatenate([h, np.full((*batch, 1), np.inf)], axis=-1)
    if n_l > 1:
        r = np.asarray(reflection_coefficient(eps[..., :-1], eps[..., 1:]), dtype=float)
        with np.errstate(divide="ignore"):
            log_t = np.log1p(-(r * r))  # two-way transmission 1 - r^2 per interface
    else:
        log_t = np.zeros((*batch, 0))
    log_target = np.log(noise) - np.log(src * r_ref)

    def f_of(z):  # log A(z) - log noise, decreasing in z; z shape batch
        zz = z[..., None]
        path = np.clip(zz - top, 0.0, span)
        loss = 2.0 * np.sum(alpha * path, axis=-1)
        trans = np.sum(np.where(top[..., 1:] < zz, log_t, 0.0), axis=-1)
        return -np.log(2.0 * z) + trans - loss - log_target

    z_hi = np.full(batch, src * r_ref / (2.0 * noise))  # A(z_hi) <= noise (losses <= 1)
    z_lo = z_hi * 1e-12
    visible = f_of(z_lo) > 0
    lo, hi = np.log(z_lo), np.log(z_hi)
    for _ in range(64):  # bisection in log z: 2^-64 of a 28-decade bracket
        mid = 0.5 * (lo + hi)
        pos = f_of(np.exp(mid)) > 0
        lo = np.where(pos, mid, lo)
        hi = np.where(pos, hi, mid)
    return np.where(visible, np.exp(0.5 * (lo + hi)), 0.0)
