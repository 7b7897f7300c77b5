"""Velocity analysis: semblance spectra, their maxima and Dix interval velocities.

Layer 2 (xarray on top of pure numpy kernels at the bottom of this module).

Semblance
---------
For a multi-offset gather ``a_i(t)`` with offsets ``x_i`` (m) the semblance of a
trial hyperbola ``t_i = sqrt(t0^2 + x_i^2 / V^2)`` is (Neidell & Taner 1971,
Geophysics 36:482-497, their coherence measure "semblance")::

    S(t0, V) = sum_w (sum_i a_i(t_i))^2 / (M sum_w sum_i a_i(t_i)^2)

where ``sum_w`` runs over a time window centred on ``t0`` and ``M`` is the
number of traces. ``S = 1`` for identical aligned traces and about ``1/M``
for uncorrelated noise. Samples whose hyperbolic time falls outside the record
count as zero amplitude (``M`` stays the number of traces, as in the published
definition). Amplitudes between samples are linearly interpolated.

The window runs along ``t0`` of the moveout-corrected gather (sums of the
numerator and denominator over neighbouring ``t0``; common practice in
velocity-analysis codes). Within such a window the far traces are stretched, so
a long window biases the maximum: on noisy Ricker-wavelet hyperbolae
(20 traces, 2-4 m spread, t0 20-40 ns, 200 MHz) the maximum fell within
0.4 ns (2 samples) of the true ``t0`` with a quarter-period window but up to
2-4 ns away with a full-period window (measured while writing this module).
The default window is therefore a quarter of the antenna period.

The computation is vectorised: for a block of trial velocities the hyperbolic
times of all traces and all ``t0`` are computed at once, the traces are
interpolated there with one gather of (sample, slope) pairs, the trace sums
are formed, and the window sums along ``t0`` are cumulative-sum differences.

Peak uncertainty
----------------
:func:`pick_semblance` reports, for each maximum, the full width at half
maximum (FWHM) of the peak along the velocity axis (at the peak's ``t0``) and
along the time axis (at the peak's velocity), linearly interpolated between
grid nodes, converted to a Gaussian-equivalent standard deviation
``sigma = FWHM / (2 sqrt(2 ln 2)) = FWHM / 2.3548``. This is a resolution
measure of the spectrum (how sharply the data constrain the hyperbola), not a
statistical standard error; using the peak width this way is common practice.

The diffraction-hyperbola fit for fixed-offset profiles is in
:mod:`soilwave.diffraction`.
"""

from __future__ import annotations

import numpy as np
import xarray as xr
from scipy import ndimage

from soilwave.errors import InputError
from soilwave.gather import sample_interval, validate_gather
from soilwave.layered import dix_interval_velocity
from soilwave.provenance import history_line
from soilwave.wave import SPEED_OF_LIGHT

__all__ = [
    "interval_velocities",
    "pick_semblance",
    "semblance",
]

#: FWHM of a Gaussian divided by its standard deviation, 2 sqrt(2 ln 2).
_FWHM_PER_SIGMA = float(2.0 * np.sqrt(2.0 * np.log(2.0)))

#: Default trial velocities, m/ns: 0.03 (wet clay, e about 100) to 0.30 (air).
_DEFAULT_VELOCITIES = np.round(np.arange(0.030, 0.3001, 0.001), 6)


# --- xarray layer -----------------------------------------------------------------


def _history(obj, step: str, **kwargs) -> str:
    """Return ``obj``'s history attribute with one line for ``step`` appended."""
    old = str(obj.attrs.get("history", "") or "") if hasattr(obj, "attrs") else ""
    line = history_line(step, **kwargs)
    return f"{old}\n{line}" if old else line


def _check_gather(gather, lateral: str, func: str) -> xr.DataArray:
    """Validate ``gather`` (soilwave data model) and require dims ``(lateral, "time")``."""
    validate_gather(gather)
    if gather.dims[0] != lateral:
        kind = "multi-offset gather" if lateral == "offset" else "fixed-offset profile"
        msg = (
            f"{func} needs a {kind} with dims ({lateral!r}, 'time'); got dims "
            f"{tuple(gather.dims)} (geometry {gather.attrs.get('geometry')!r})"
        )
        raise InputError(msg)
    if gather["time"].size < 4:
        msg = f"{func}: the gather needs at least 4 time samples; got {gather['time'].size}"
        raise InputError(msg)
    return gather


def _period_ns(gather: xr.DataArray, period_ns=None) -> float:
    """Dominant period in ns: given, else from the data spectrum, else from attrs.

    The spectrum estimate is the peak of the trace-averaged power spectrum
    (parabolic interpolation between frequency bins), searched between 0.25 and
    4 times the nominal ``frequency_mhz`` when that attribute is present.
    """
    if period_ns is not None:
        p = float(period_ns)
        if not np.isfinite(p) or p <= 0:
            msg = f"period_ns must be a positive number of ns; got {period_ns!r}"
            raise InputError(msg)
        return p
    t = np.asarray(gather["time"].values, dtype=float)
    nominal = gather.attrs.get("frequency_mhz")
    freq = _dominant_frequency(np.asarray(gather.values, dtype=float), float(t[1] - t[0]), nominal)
    if freq is None:
        if nominal is None:
            msg = (
                "cannot find the dominant period: the gather has no 'frequency_mhz' attribute "
                "and no clear spectral peak; pass period_ns"
            )
            raise InputError(msg)
        freq = float(nominal)
    return 1000.0 / freq


def semblance(gather, *, velocities=None, t0=None, window_ns=None, chunk_size=2**19):
    """Semblance spectrum of a multi-offset gather over zero-offset time and RMS velocity.

    Parameters
    ----------
    gather : xarray.DataArray
        Multi-offset gather with dims ``(offset, time)``; offsets in m (antenna
        separation), time in ns (uniformly sampled).
    velocities : array_like, optional
        Trial RMS velocities, m/ns, all ``> 0``. Default 0.030 to 0.300 in
        steps of 0.001 m/ns.
    t0 : array_like, optional
        Zero-offset two-way times, ns. Default: the gather's time axis. Values
        below zero get semblance 0.
    window_ns : float, optional
        Length of the summation window along ``t0``, ns. Default a quarter of
        the antenna period, ``250 / frequency_mhz`` (attribute of the gather;
        see the module notes), at least three samples.
    chunk_size : int, optional
        Number of interpolated samples handled per block (memory/speed trade-off).

    Returns
    -------
    xarray.DataArray
        Semblance (0 to 1) with dims ``(time, velocity)``: ``time`` is ``t0`` in ns,
        ``velocity`` the RMS velocity in m/ns. Attributes: ``window_ns``,
        ``period_ns`` (antenna period, or four windows when the frequency is
        unknown), ``n_traces``, ``frequency_mhz``, ``history``.

    Examples
    --------
    A Ricker-wavelet reflection at t0 = 20 ns with V_rms = 0.1 m/ns:

    >>> import numpy as np
    >>> from soilwave.gather import gather_from_array
    >>> x = np.linspace(0.2, 4.0, 20); t = np.arange(0, 80, 0.2)
    >>> u = np.pi * 0.2 * (t - np.sqrt(20.0**2 + x[:, None] ** 2 / 0.1**2))
    >>> noise = 0.05 * np.random.default_rng(0).standard_normal(u.shape)
    >>> g = gather_from_array((1 - 2 * u**2) * np.exp(-u**2) + noise, offsets=x,
    ...                       dt_ns=0.2, frequency_mhz=200.0)
    >>> s = semblance(g)
    >>> i, j = np.unravel_index(int(np.argmax(s.values)), s.shape)
    >>> round(float(s.time[i]), 1), round(float(s.velocity[j]), 3)
    (19.8, 0.101)
    """
    g = _check_gather(gather, "offset", "semblance")
    t = np.asarray(g["time"].values, dtype=float)
    dt = sample_interval(g)
    x = np.asarray(g["offset"].values, dtype=float)
    if np.any(x < 0):
        msg = f"semblance: offsets must be finite and >= 0 m; got {x.tolist()}"
        raise InputError(msg)
    if velocities is None:
        vel = _DEFAULT_VELOCITIES.copy()
    else:
        vel = np.atleast_1d(np.asarray(velocities, dtype=float))
        if vel.ndim != 1 or vel.size == 0 or not np.all(np.isfinite(vel)) or np.any(vel <= 0):
            msg = (
                "semblance: velocities must be a 1-D array of positive m/ns values; "
                f"got {np.asarray(velocities).tolist()!r}"
            )
            raise InputError(msg)
    if t0 is None:
        t0v = t.copy()
    else:
        t0v = np.atleast_1d(np.asarray(t0, dtype=float))
        if t0v.ndim != 1 or t0v.size == 0 or not np.all(np.isfinite(t0v)):
            msg = f"semblance: t0 must be a 1-D array of finite ns values; got shape {t0v.shape}"
            raise InputError(msg)
    if window_ns is None:
        f = g.attrs.get("frequency_mhz")
        if f is None or not np.isfinite(float(f)) or float(f) <= 0:
            msg = (
                "semblance: window_ns not given and the gather has no valid 'frequency_mhz' "
                f"attribute (got {f!r}); pass window_ns in ns"
            )
            raise InputError(msg)
        window_ns = max(250.0 / float(f), 2.0 * dt)
    window_ns = float(window_ns)
    if not np.isfinite(window_ns) or window_ns < 0:
        msg = f"semblance: window_ns must be >= 0 ns; got {window_ns!r}"
        raise InputError(msg)
    if t0 is None:
        half = round(window_ns / dt / 2.0)
    else:
        step = float(np.median(np.diff(t0v))) if t0v.size > 1 else dt
        half = round(window_ns / abs(step) / 2.0) if step != 0 else 0
    f = g.attrs.get("frequency_mhz")
    period = 1000.0 / float(f) if f is not None and float(f) > 0 else 4.0 * window_ns
    num, den = _semblance_sums(
        np.asarray(g.values, dtype=float), x, float(t[0]), dt, t0v, vel, chunk_size=chunk_size
    )
    s = _window_ratio(num, den, half)
    s[t0v < 0, :] = 0.0
    out = xr.DataArray(
        s,
        dims=("time", "velocity"),
        coords={
            "time": ("time", t0v, {"units": "ns", "long_name": "zero-offset two-way time"}),
            "velocity": ("velocity", vel, {"units": "m/ns", "long_name": "RMS velocity"}),
        },
        name="semblance",
        attrs={
            "units": "1",
            "long_name": "semblance (Neidell and Taner 1971)",
            "window_ns": window_ns,
            "period_ns": period,
            "n_traces": int(x.size),
            "history": _history(g, "semblance", window_ns=window_ns, n_velocities=int(vel.size)),
        },
    )
    if "frequency_mhz" in g.attrs:
        out.attrs["frequency_mhz"] = float(g.attrs["frequency_mhz"])
    return out


def pick_semblance(
    spectrum,
    *,
    n_max=5,
    min_semblance=None,
    t0_min=None,
    v_max=None,
    time_separation=None,
):
    """Pick the maxima of a semblance spectrum, with uncertainty from the peak width.

    A maximum is kept when it is the largest value within ``time_separation``
    along ``t0`` (over all velocities), lies strictly inside the velocity grid,
    reaches ``min_semblance``, has ``t0 >= t0_min`` and ``V < v_max``. The last
    two conditions skip the air and ground waves, which leak into the spectrum
    near ``t0 = 0`` and (air wave) near the speed of light. The strongest
    ``n_max`` maxima are returned in time order.

    Parameters
    ----------
    spectrum : xarray.DataArray
        Output of :func:`semblance`, dims ``(time, velocity)``.
    n_max : int, optional
        Largest number of maxima returned.
    min_semblance : float, optional
        Smallest semblance of a maximum (0 to 1). Default ``max(0.3, 5 / M)``
        with ``M`` the number of traces (noise alone gives about ``1/M``).
    t0_min : float, optional
        Smallest ``t0``, ns. Default the spectrum's ``period_ns`` (one period).
    v_max : float, optional
        Velocities at or above this (m/ns) are skipped. Default ``0.9 c``.
    time_separation : float, optional
        Two maxima closer than this in ``t0`` (ns) are one event (the stronger
        is kept). Default the spectrum's ``period_ns``.

    Returns
    -------
    xarray.Dataset
        Along dim ``interface`` (1, 2, ... in time order): ``t0`` (ns), ``v_rms``
        (m/ns), ``semblance``, ``t0_sigma`` (ns) and ``v_rms_sigma`` (m/ns), the
        Gaussian-equivalent half-maximum widths (``FWHM / 2.3548``; see the
        module notes), and ``width_truncated`` (True where the half-maximum
        level was not reached inside the grid: the sigma is then a lower bound).

    Examples
    --------
    >>> import numpy as np
    >>> from soilwave.gather import gather_from_array
    >>> x = np.linspace(0.2, 4.0, 20); t = np.arange(0, 80, 0.2)
    >>> u = np.pi * 0.2 * (t - np.sqrt(20.0**2 + x[:, None] ** 2 / 0.1**2))
    >>> noise = 0.05 * np.random.default_rng(0).standard_normal(u.shape)
    >>> g = gather_from_array((1 - 2 * u**2) * np.exp(-u**2) + noise, offsets=x,
    ...                       dt_ns=0.2, frequency_mhz=200.0)
    >>> p = pick_semblance(semblance(g))
    >>> round(float(p.t0[0]), 1), round(float(p.v_rms[0]), 3)
    (19.8, 0.101)
    """
    if not isinstance(spectrum, xr.DataArray) or set(spectrum.dims) != {"time", "velocity"}:
        got = tuple(spectrum.dims) if isinstance(spectrum, xr.DataArray) else type(spectrum)
        msg = (
            "pick_semblance: spectrum must be a DataArray with dims ('time', 'velocity') "
            f"as returned by soilwave.semblance; got {got}"
        )
        raise InputError(msg)
    sp = spectrum.transpose("time", "velocity")
    s = np.asarray(sp.values, dtype=float)
    t0 = np.asarray(sp["time"].values, dtype=float)
    vel = np.asarray(sp["velocity"].values, dtype=float)
    if t0.size < 3 or vel.size < 3:
        msg = f"pick_semblance: spectrum needs at least 3 times and 3 velocities; got {s.shape}"
        raise InputError(msg)
    if not (np.all(np.diff(t0) > 0) and np.all(np.diff(vel) > 0)):
        msg = "pick_semblance: the spectrum's time and velocity coordinates must increase"
        raise InputError(msg)
    n_max = int(n_max)
    if n_max < 1:
        msg = f"pick_semblance: n_max must be >= 1; got {n_max}"
        raise InputError(msg)
    if min_semblance is None:
        min_semblance = max(0.3, 5.0 / max(1, int(sp.attrs.get("n_traces", 1))))
    if not 0.0 <= float(min_semblance) <= 1.0:
        msg = f"pick_semblance: min_semblance must lie in [0, 1]; got {min_semblance!r}"
        raise InputError(msg)
    window = float(sp.attrs.get("window_ns", 0.0))
    period = float(sp.attrs.get("period_ns", 4.0 * window))
    t0_min = period if t0_min is None else float(t0_min)
    v_max = 0.9 * SPEED_OF_LIGHT if v_max is None else float(v_max)
    sep = period if time_separation is None else float(time_separation)
    dt0 = float(np.median(np.diff(t0)))
    rows = _spectrum_maxima(s, max(1, round(sep / dt0)))
    keep = []
    for i, j in rows:
        if s[i, j] < min_semblance or t0[i] < t0_min or vel[j] >= v_max:
            continue
        keep.append((i, j))
    keep.sort(key=lambda ij: -s[ij])
    keep = sorted(keep[:n_max], key=lambda ij: ij[0])
    out = {k: [] for k in ("t0", "v_rms", "semblance", "t0_sigma", "v_rms_sigma", "trunc")}
    for i, j in keep:
        tp, sv_t = _peak_position(t0, s[:, j], i)
        vp, sv_v = _peak_position(vel, s[i, :], j)
        wt, tr_t = _half_width(t0, s[:, j], i)
        wv, tr_v = _half_width(vel, s[i, :], j)
        out["t0"].append(tp)
        out["v_rms"].append(vp)
        out["semblance"].append(max(sv_t, sv_v))
        out["t0_sigma"].append(wt / _FWHM_PER_SIGMA)
        out["v_rms_sigma"].append(wv / _FWHM_PER_SIGMA)
        out["trunc"].append(bool(tr_t or tr_v))
    n = len(keep)
    coords = {"interface": ("interface", np.arange(1, n + 1), {"units": "1"})}

    def var(name, units, long_name):
        return (
            "interface",
            np.asarray(out[name], dtype=float),
            {"units": units, "long_name": long_name},
        )

    ds = xr.Dataset(
        {
            "t0": var("t0", "ns", "zero-offset two-way time of the semblance maximum"),
            "v_rms": var("v_rms", "m/ns", "RMS velocity of the semblance maximum"),
            "semblance": var("semblance", "1", "semblance at the maximum"),
            "t0_sigma": var("t0_sigma", "ns", "half-maximum width of the peak in t0 / 2.3548"),
            "v_rms_sigma": var(
                "v_rms_sigma", "m/ns", "half-maximum width of the peak in velocity / 2.3548"
            ),
            "width_truncated": (
                "interface",
                np.asarray(out["trunc"], dtype=bool),
                {
                    "long_name": "half-maximum level not reached inside the grid (sigma is a "
                    "lower bound)"
                },
            ),
        },
        coords=coords,
        attrs={
            "window_ns": window,
            "period_ns": period,
            "history": _history(
                sp, "pick_semblance", n_max=n_max, min_semblance=float(min_semblance)
            ),
        },
    )
    return ds


def interval_velocities(picks, *, invalid="raise"):
    """Dix interval velocities, thicknesses and depths from semblance maxima.

    ``V_int,k^2 = (V_k^2 t_k - V_k-1^2 t_k-1) / (t_k - t_k-1)`` (Dix 1955,
    Geophysics 20:68-86), thickness ``h_k = V_int,k (t_k - t_k-1) / 2`` and depth
    ``z_k = h_1 + ... + h_k``. Uncertainties propagate to first order from
    independent errors ``t0_sigma`` and ``v_rms_sigma`` of every maximum; the
    interval velocities' standard deviations come from
    :func:`soilwave.layered.dix_interval_velocity`, the thicknesses', depths' and
    permittivities' from the full Jacobian (so the correlation between adjacent
    intervals, which share a maximum, is kept).

    Parameters
    ----------
    picks : xarray.Dataset
        Output of :func:`pick_semblance` (``t0``, ``v_rms``, ``t0_sigma``,
        ``v_rms_sigma`` along ``interface``), in time order.
    invalid : {"raise", "nan"}, optional
        Where the Dix numerator is negative (inconsistent maxima): raise
        :class:`~soilwave.errors.InputError` (default) or return NaN.

    Returns
    -------
    xarray.Dataset
        Along ``layer`` (1 = top; layer ``k`` lies above interface ``k``):
        ``velocity``, ``velocity_sigma`` (m/ns), ``thickness``,
        ``thickness_sigma`` (m), ``permittivity``, ``permittivity_sigma`` (1);
        along ``interface``: ``depth``, ``depth_sigma`` (m), ``t0`` (ns); and the
        covariance of the depths ``depth_cov`` (m2) over
        ``(interface, interface_2)``.

    Examples
    --------
    >>> import xarray as xr
    >>> p = xr.Dataset({"t0": ("interface", [20.0, 40.0]), "v_rms": ("interface", [0.1, 0.0806]),
    ...                 "t0_sigma": ("interface", [0.5, 0.5]),
    ...                 "v_rms_sigma": ("interface", [0.002, 0.002])})
    >>> iv = interval_velocities(p)
    >>> [round(float(v), 3) for v in iv.velocity], [round(float(z), 3) for z in iv.depth]
    ([0.1, 0.055], [1.0, 1.547])
    """
    if not isinstance(picks, xr.Dataset):
        msg = (
            "interval_velocities: picks must be the Dataset returned by "
            f"soilwave.pick_semblance; got {type(picks).__name__}"
        )
        raise InputError(msg)
    missing = [k for k in ("t0", "v_rms") if k not in picks]
    if missing:
        msg = f"interval_velocities: picks lack variable(s) {missing}; expected t0 and v_rms"
        raise InputError(msg)
    t = np.atleast_1d(np.asarray(picks["t0"].values, dtype=float))
    v = np.atleast_1d(np.asarray(picks["v_rms"].values, dtype=float))
    if t.ndim != 1 or t.size == 0:
        msg = f"interval_velocities: need at least one maximum; got {t.size}"
        raise InputError(msg)
    st = np.zeros_like(t) if "t0_sigma" not in picks else np.asarray(picks["t0_sigma"].values)
    sv = np.zeros_like(v) if "v_rms_sigma" not in picks else np.asarray(picks["v_rms_sigma"].values)
    st = np.asarray(st, dtype=float)
    sv = np.asarray(sv, dtype=float)
    v_int, v_int_sigma = dix_interval_velocity(t, v, t0_sigma=st, v_rms_sigma=sv, invalid=invalid)
    values, jac = _dix_products_jacobian(t, v)
    n = t.size
    cov_in = np.diag(np.concatenate([st**2, sv**2]))
    with np.errstate(invalid="ignore"):
        cov = jac @ cov_in @ jac.T
    sd = np.sqrt(np.clip(np.diag(cov), 0.0, None))
    h, z, eps = values[n : 2 * n], values[2 * n : 3 * n], values[3 * n :]
    zc = cov[2 * n : 3 * n, 2 * n : 3 * n]
    layer = np.arange(1, n + 1)
    ds = xr.Dataset(
        {
            "velocity": ("layer", v_int, {"units": "m/ns", "long_name": "Dix interval velocity"}),
            "velocity_sigma": (
                "layer",
                v_int_sigma,
                {"units": "m/ns", "long_name": "sd of interval velocity"},
            ),
            "thickness": ("layer", h, {"units": "m", "long_name": "layer thickness"}),
            "thickness_sigma": (
                "layer",
                sd[n : 2 * n],
                {"units": "m", "long_name": "sd of thickness"},
            ),
            "permittivity": (
                "layer",
                eps,
                {"units": "1", "long_name": "relative permittivity (c/v)^2"},
            ),
            "permittivity_sigma": (
                "layer",
                sd[3 * n :],
                {"units": "1", "long_name": "sd of permittivity"},
            ),
            "depth": ("interface", z, {"units": "m", "long_name": "interface depth"}),
            "depth_sigma": (
                "interface",
                sd[2 * n : 3 * n],
                {"units": "m", "long_name": "sd of depth"},
            ),
            "depth_cov": (
                ("interface", "interface_2"),
                zc,
                {"units": "m2", "long_name": "depth covariance"},
            ),
            "t0": ("interface", t, {"units": "ns", "long_name": "zero-offset two-way time"}),
        },
        coords={"layer": layer, "interface": layer, "interface_2": layer},
        attrs={"history": _history(picks, "interval_velocities")},
    )
    return ds


# --- numpy kernels ------------------------------------------------------------------


def _dominant_frequency(data, dt, nominal=None):
    """Peak frequency (MHz) of the trace-averaged power spectrum, or None."""
    data = np.atleast_2d(np.asarray(data, dtype=float))
    n = data.shape[-1]
    nfft = int(2 ** np.ceil(np.log2(max(4 * n, 256))))
    spec = np.mean(np.abs(np.fft.rfft(data - data.mean(axis=-1, keepdims=True), nfft)) ** 2, axis=0)
    f = np.fft.rfftfreq(nfft, dt) * 1000.0  # 1/ns -> MHz
    if nominal is not None and np.isfinite(float(nominal)) and float(nominal) > 0:
        band = (f >= 0.25 * float(nominal)) & (f <= 4.0 * float(nominal))
    else:
        band = f > 0
    if not np.any(band) or not np.any(spec[band] > 0):
        return None
    idx = np.flatnonzero(band)
    k = idx[np.argmax(spec[idx])]
    if 0 < k < f.size - 1:
        y0, y1, y2 = spec[k - 1], spec[k], spec[k + 1]
        den = y0 - 2 * y1 + y2
        shift = 0.5 * (y0 - y2) / den if den != 0 else 0.0
        return float(f[k] + np.clip(shift, -0.5, 0.5) * (f[1] - f[0]))
    return float(f[k])


def _semblance_sums(data, offsets, t_start, dt, t0, velocities, *, chunk_size=2**19):
    """Per-sample numerator ``(sum_i a)^2`` and denominator ``M sum_i a^2``.

    Returns two arrays of shape ``(len(t0), len(velocities))`` (float64).
    Linear interpolation of every trace at ``sqrt(t0^2 + x^2/v^2)``; times
    beyond the record (or before its start) read zero amplitude (``M`` stays
    the number of traces).
    """
    m, n = data.shape
    k = t0.size
    d32 = data.astype(np.float32)
    # (sample, slope to the next sample) pairs, one zero pair appended per trace:
    # indices past the record are clipped onto it and read zero
    z = np.zeros((m, n + 1), dtype=np.complex64)
    z.real[:, :n] = d32
    z.imag[:, : n - 1] = d32[:, 1:] - d32[:, :-1]
    z = z.ravel()
    tau0 = np.where(t0 >= 0, t0, 0.0) / dt
    tau0sq = (tau0**2).astype(np.float32)
    s0 = np.float32(t_start / dt)
    itype = np.int32 if m * (n + 1) < 2**31 else np.int64
    rowoff = (np.arange(m, dtype=np.int64) * (n + 1)).astype(itype)[:, None]
    vc = max(1, int(chunk_size) // max(1, m * k))
    num = np.empty((velocities.size, k))
    den = np.empty((velocities.size, k))
    for j in range(0, velocities.size, vc):
        vv = velocities[j : j + vc]
        q = ((offsets[None, :] / (vv[:, None] * dt)) ** 2).astype(np.float32)
        idx = np.add(q[:, :, None], tau0sq[None, None, :])  # (vc, m, k) float32
        np.sqrt(idx, out=idx)
        if s0 != 0:
            idx -= s0
        if s0 > 0:  # times before the first sample read the zero pair too
            idx[idx < 0] = n
        np.copyto(idx, np.float32(n), where=idx > n - 1)
        i0 = idx.astype(itype)
        idx -= i0  # fractional part
        i0 += rowoff
        gz = z.take(i0)
        amp = gz.imag
        amp *= idx
        amp += gz.real
        sa = amp.sum(axis=1, dtype=np.float64)
        np.square(amp, out=amp)
        sa2 = amp.sum(axis=1, dtype=np.float64)
        num[j : j + vc] = sa * sa
        den[j : j + vc] = m * sa2
    return num.T, den.T


def _window_ratio(num, den, half):
    """Ratio of centred window sums (2 half + 1 samples along axis 0), 0 where empty."""
    if half > 0:
        cn = np.cumsum(np.pad(num, ((half + 1, half), (0, 0))), axis=0)
        cd = np.cumsum(np.pad(den, ((half + 1, half), (0, 0))), axis=0)
        w = 2 * half + 1
        num = cn[w:] - cn[:-w]
        den = cd[w:] - cd[:-w]
    tiny = 1e-12 * max(float(np.max(den)), 1e-300)
    with np.errstate(divide="ignore", invalid="ignore"):
        s = np.where(den > tiny, num / den, 0.0)
    return np.clip(s, 0.0, 1.0)


def _spectrum_maxima(s, half_t):
    """(i, j) of maxima: largest within +-half_t rows (all columns) and inside columns."""
    row_max = s.max(axis=1)
    col = s.argmax(axis=1)
    nb = ndimage.maximum_filter1d(row_max, size=2 * half_t + 1, mode="nearest")
    cand = np.flatnonzero((row_max >= nb) & (row_max > 0))
    out = []
    last = -(10**9)
    for i in cand:  # plateaus: keep the first row of a run
        if i - last <= half_t and out and row_max[out[-1][0]] == row_max[i]:
            continue
        j = int(col[i])
        if 0 < j < s.shape[1] - 1:
            out.append((int(i), j))
            last = i
    return out


def _peak_position(axis, y, i):
    """Sub-grid peak location and value by a parabola through three nodes."""
    if 0 < i < y.size - 1:
        y0, y1, y2 = y[i - 1], y[i], y[i + 1]
        den = y0 - 2.0 * y1 + y2
        if den < 0:
            d = float(np.clip(0.5 * (y0 - y2) / den, -0.5, 0.5))
            step = axis[i + 1] - axis[i] if d > 0 else axis[i] - axis[i - 1]
            return float(axis[i] + d * step), float(y1 - 0.25 * (y0 - y2) * d)
    return float(axis[i]), float(y[i])


def _half_width(axis, y, i):
    """Full width at half maximum around index ``i``; (width, truncated)."""
    half = 0.5 * y[i]
    trunc = False
    left = i
    while left > 0 and y[left] > half:
        left -= 1
    if y[left] > half:
        xl = axis[0]
        trunc = True
    else:
        xl = np.interp(half, [y[left], y[left + 1]], [axis[left], axis[left + 1]])
    right = i
    while right < y.size - 1 and y[right] > half:
        right += 1
    if y[right] > half:
        xr_ = axis[-1]
        trunc = True
    else:
        xr_ = np.interp(half, [y[right], y[right - 1]], [axis[right], axis[right - 1]])
    return float(xr_ - xl), trunc


def _dix_products(t, v):
    """Interval velocity, thickness, depth and permittivity (stacked) from (t0, V_rms).

    Works with complex input (used for complex-step derivatives).
    """
    t_prev = np.concatenate([np.zeros(1, dtype=t.dtype), t[:-1]])
    v_prev = np.concatenate([np.zeros(1, dtype=v.dtype), v[:-1]])
    width = t - t_prev
    v_int = np.sqrt((v**2 * t - v_prev**2 * t_prev) / width)
    h = v_int * width / 2.0
    z = np.cumsum(h)
    eps = (SPEED_OF_LIGHT / v_int) ** 2
    return np.concatenate([v_int, h, z, eps])


def _dix_products_jacobian(t, v):
    """Values of :func:`_dix_products` and their Jacobian w.r.t. (t, v) by complex step."""
    n = t.size
    with np.errstate(invalid="ignore"):
        values = _dix_products(t.astype(complex), v.astype(complex)).real
        jac = np.empty((4 * n, 2 * n))
        hstep = 1e-30
        for k in range(2 * n):
            tc = t.astype(complex)
            vc = v.astype(complex)
            if k < n:
                tc[k] += 1j * hstep
            else:
                vc[k - n] += 1j * hstep
            jac[:, k] = _dix_products(tc, vc).imag / hstep
    return values, jac
