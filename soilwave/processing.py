"""Trace processing for gathers: time zero, dewow, band-pass, gains, normalisation.

Every function takes a gather (see :mod:`soilwave.gather`), leaves it
untouched and returns a new one with one line appended to its ``history``
attr (``"<ISO time> soilwave <version> <step>(<args>)"``). All work along the
``time`` axis of each trace unless stated otherwise. Invalid arguments raise
:class:`~soilwave.errors.InputError` naming the value and what is expected.

Steps in the usual order: :func:`time_zero_correction`, :func:`dewow`,
:func:`bandpass`, a gain (:func:`gain_spreading_exponential` or
:func:`agc`), :func:`normalize_traces`, and for profiles
:func:`remove_background`. :func:`envelope` and :func:`instantaneous_phase`
give the attributes of the analytic signal (Hilbert transform).
"""

from __future__ import annotations

import numpy as np
import xarray as xr
from scipy import ndimage, signal

from soilwave.errors import InputError
from soilwave.gather import sample_interval, validate_gather, with_history
from soilwave.wave import SPEED_OF_LIGHT

__all__ = [
    "agc",
    "bandpass",
    "dewow",
    "envelope",
    "first_arrival_times",
    "gain_spreading_exponential",
    "instantaneous_phase",
    "normalize_traces",
    "remove_background",
    "time_zero_correction",
]


# --- helpers ------------------------------------------------------------------------


def _number(value, name: str, unit: str, *, minimum=None, strict=True, maximum=None) -> float:
    try:
        x = float(value)
    except (TypeError, ValueError):
        msg = f"{name} must be a number in {unit}; got {value!r}"
        raise InputError(msg) from None
    if not np.isfinite(x):
        msg = f"{name} must be finite ({unit}); got {value!r}"
        raise InputError(msg)
    if minimum is not None and (x <= minimum if strict else x < minimum):
        op = ">" if strict else ">="
        msg = f"{name} must be {op} {minimum:g} {unit}; got {value!r}"
        raise InputError(msg)
    if maximum is not None and x >= maximum:
        msg = f"{name} must be < {maximum:g} {unit}; got {value!r}"
        raise InputError(msg)
    return x


def _window_samples(window_ns: float, dt: float, n: int, name: str) -> int:
    """Odd window length in samples (at least 3, at most the trace length)."""
    w = round(window_ns / dt)
    w += 1 - w % 2
    if w < 3:
        msg = f"{name}={window_ns!r} ns is shorter than 3 samples of {dt!r} ns"
        raise InputError(msg)
    if w > n:
        msg = f"{name}={window_ns!r} ns ({w} samples) is longer than the trace ({n} samples)"
        raise InputError(msg)
    return w


def _result(gather, values, step: str, *, units=None, time=None, extra_attrs=None, **kwargs):
    """New gather with ``values`` (and optionally new time coords / units)."""
    out = gather.copy(data=values)
    if time is not None:
        out = out.assign_coords(time=xr.Variable("time", time, attrs=dict(gather.time.attrs)))
    out.attrs = dict(gather.attrs)
    if units is not None:
        out.attrs["units"] = units
    if extra_attrs:
        out.attrs.update(extra_attrs)
    return with_history(out, step, **kwargs)


#: The first-arrival threshold is at least this many times the trace's median
#: envelope: for Gaussian noise of standard deviation s the envelope is Rayleigh
#: distributed with median 1.18 s, so 4 medians (4.7 s) is exceeded by noise alone
#: with probability exp(-4.7^2 / 2) ~ 2e-5 per sample.
_NOISE_FACTOR = 4.0


def _hilbert(values: np.ndarray) -> np.ndarray:
    return signal.hilbert(values, axis=-1)


# --- time zero ---------------------------------------------------------------------------


def first_arrival_times(gather, *, threshold=0.2, reference="peak") -> np.ndarray:
    """Time of the first arrival on each trace from its envelope, ns.

    The first sample whose envelope (modulus of the analytic signal) reaches
    ``threshold`` times the trace's envelope maximum, and at least four times
    its median envelope (a noise floor: the median is dominated by noise on a
    trace whose events are short), marks the first event.
    ``reference="onset"`` returns that crossing (linearly interpolated);
    ``reference="peak"`` returns the parabolically interpolated time of the
    envelope maximum within one period (of ``frequency_mhz``) after the
    crossing, which is the arrival time of a zero-phase wavelet such as the
    Ricker wavelet.

    Parameters
    ----------
    gather : xarray.DataArray
        A gather.
    threshold : float, optional
        Fraction of the trace's envelope maximum, 0 < threshold < 1.
    reference : {"peak", "onset"}, optional
        Which point of the first event to return.

    Returns
    -------
    numpy.ndarray, shape (n_traces,)
        Times in ns; NaN for dead (all-zero) traces.

    Examples
    --------
    >>> import numpy as np
    >>> from soilwave.gather import gather_from_array
    >>> from soilwave.wavelets import ricker
    >>> t = np.arange(400) * 0.1
    >>> g = gather_from_array(ricker(t - 12.0, 250.0)[None], offsets=[1.0], dt_ns=0.1,
    ...                       frequency_mhz=250.0)
    >>> round(float(first_arrival_times(g)[0]), 2)
    12.0
    """
    validate_gather(gather)
    thr = _number(threshold, "threshold", "(fraction of the envelope maximum)", minimum=0.0)
    if thr >= 1.0:
        msg = f"threshold must be < 1 (fraction of the envelope maximum); got {threshold!r}"
        raise InputError(msg)
    if reference not in ("peak", "onset"):
        msg = f"reference must be 'peak' or 'onset'; got {reference!r}"
        raise InputError(msg)
    time = np.asarray(gather["time"].values, dtype=float)
    dt = sample_interval(gather)
    env = np.abs(_hilbert(np.asarray(gather.values, dtype=float)))
    n = env.shape[1]
    span = max(1, round(1000.0 / float(gather.attrs["frequency_mhz"]) / dt))
    out = np.full(env.shape[0], np.nan)
    for i, e in enumerate(env):
        top = e.max()
        if top <= 0:
            continue
        level = max(thr * top, _NOISE_FACTOR * float(np.median(e)))
        j = int(np.argmax(e >= level))
        if reference == "onset":
            if j == 0:
                out[i] = time[0]
            else:
                frac = (level - e[j - 1]) / (e[j] - e[j - 1])
                out[i] = time[j - 1] + frac * dt
            continue
        # the envelope maximum within one period after the crossing (the Ricker
        # envelope crosses 0.2 of its peak 0.61 periods before it)
        k = j + int(np.argmax(e[j : j + span + 1]))
        if 0 < k < n - 1:
            a, b, c = e[k - 1], e[k], e[k + 1]
            den = a - 2 * b + c
            delta = 0.5 * (a - c) / den if den < 0 else 0.0
            out[i] = time[k] + np.clip(delta, -0.5, 0.5) * dt
        else:
            out[i] = time[k]
    return out


def time_zero_correction(
    gather, *, method="air_wave", threshold=0.2, reference="peak", shift_ns=None
):
    """Shift the time axis so that time zero is the moment of transmission.

    With ``method="air_wave"`` the first arrival on each trace is taken to be
    the air wave, which travels at the speed of light ``c`` (CODATA, from
    :mod:`scipy.constants`), so it should arrive at ``x / c`` for antenna
    separation ``x`` (the offsets, or ``antenna_separation_m`` for a profile).
    The first arrival of each trace is found with :func:`first_arrival_times`
    and the shift is the median over traces of ``t_first - x / c``, robust to
    a minority of traces where the air wave is masked (for example by the
    ground wave at short offsets). With ``method="shift"`` the given
    ``shift_ns`` is applied.

    The samples are not resampled: the ``time`` coordinate becomes
    ``time - shift`` (so early samples get negative times). The shift is added
    to the attr ``time_zero_shift_ns`` (cumulative) and to the history.

    Parameters
    ----------
    gather : xarray.DataArray
        A gather.
    method : {"air_wave", "shift"}, optional
        How to find the shift.
    threshold : float, optional
        Envelope threshold of the first-arrival detector (fraction of each
        trace's envelope maximum).
    reference : {"peak", "onset"}, optional
        ``"peak"`` (default): the envelope maximum of the first event is the
        arrival, right for zero-phase wavelets; ``"onset"``: the threshold
        crossing (first break) is put at ``x / c``.
    shift_ns : float, optional
        Shift for ``method="shift"``, ns (positive moves the traces earlier).

    Returns
    -------
    xarray.DataArray

    Examples
    --------
    >>> import numpy as np
    >>> from soilwave.gather import gather_from_array
    >>> from soilwave.wavelets import ricker
    >>> x = np.array([1.0, 2.0, 3.0])
    >>> t = np.arange(600) * 0.1
    >>> data = ricker(t[None] - (x[:, None] / SPEED_OF_LIGHT + 5.0), 250.0)
    >>> g = gather_from_array(data, offsets=x, dt_ns=0.1, frequency_mhz=250.0)
    >>> round(time_zero_correction(g).attrs["time_zero_shift_ns"], 2)
    5.0
    """
    validate_gather(gather)
    if method == "air_wave":
        if shift_ns is not None:
            msg = "shift_ns is only used with method='shift'"
            raise InputError(msg)
        dim = gather.dims[0]
        if dim == "offset":
            x = np.asarray(gather["offset"].values, dtype=float)
        else:
            x = np.full(gather.shape[0], float(gather.attrs["antenna_separation_m"]))
        t_first = first_arrival_times(gather, threshold=threshold, reference=reference)
        shifts = t_first - x / SPEED_OF_LIGHT
        shifts = shifts[np.isfinite(shifts)]
        if shifts.size == 0:
            msg = "time_zero_correction: every trace is zero; no air wave to find"
            raise InputError(msg)
        shift = float(np.median(shifts))
        spread = float(np.median(np.abs(shifts - shift)))
        kwargs = {
            "method": method,
            "threshold": threshold,
            "reference": reference,
            "shift_ns": shift,
            "mad_ns": spread,
        }
    elif method == "shift":
        if shift_ns is None:
            msg = "method='shift' needs shift_ns= (ns)"
            raise InputError(msg)
        shift = _number(shift_ns, "shift_ns", "ns")
        kwargs = {"method": method, "shift_ns": shift}
    else:
        msg = f"method must be 'air_wave' or 'shift'; got {method!r}"
        raise InputError(msg)
    time = np.asarray(gather["time"].values, dtype=float)
    n = time.size
    dt = sample_interval(gather)
    new_time = (time[0] - shift) + dt * np.arange(n)
    total = float(gather.attrs.get("time_zero_shift_ns", 0.0)) + shift
    return _result(
        gather,
        np.array(gather.values, dtype=float),
        "time_zero_correction",
        time=new_time,
        extra_attrs={"time_zero_shift_ns": total},
        **kwargs,
    )


# --- filters ------------------------------------------------------------------------------


def dewow(gather, *, window_ns=None):
    """Remove low-frequency drift ("wow") by subtracting a running mean.

    Each sample is replaced by itself minus the mean of a centred window of
    ``window_ns`` (rounded to an odd number of samples; mirrored at the trace
    ends). The result has frequency response ``1 - sinc(f W)`` for window
    length ``W`` (continuous approximation; ``sinc(u) = sin(pi u)/(pi u)``):
    zero at DC, removing constant offsets and linear trends exactly away from
    the ends, and exactly one at ``f = k / W``.

    Parameters
    ----------
    gather : xarray.DataArray
        A gather.
    window_ns : float, optional
        Window length, ns. Default: two periods of the antenna centre
        frequency, ``2000 / frequency_mhz`` (common practice: one to two
        periods); the response is then 1 at the centre frequency.

    Returns
    -------
    xarray.DataArray

    Examples
    --------
    >>> import numpy as np
    >>> from soilwave.gather import gather_from_array
    >>> g = gather_from_array(np.full((1, 200), 3.0), offsets=[1.0], dt_ns=0.1,
    ...                       frequency_mhz=250.0)
    >>> float(np.abs(dewow(g).values).max())
    0.0
    """
    validate_gather(gather)
    dt = sample_interval(gather)
    if window_ns is None:
        window_ns = 2000.0 / float(gather.attrs["frequency_mhz"])
    w_ns = _number(window_ns, "window_ns", "ns", minimum=0.0)
    n = gather.shape[1]
    w = _window_samples(w_ns, dt, n, "window_ns")
    x = np.asarray(gather.values, dtype=float)
    mean = ndimage.uniform_filter1d(x, size=w, axis=1, mode="reflect")
    return _result(gather, x - mean, "dewow", window_ns=w_ns, window_samples=w)


def bandpass(gather, *, low_mhz, high_mhz, order=4):
    """Zero-phase Butterworth band-pass filter.

    A Butterworth filter of the given order (second-order sections,
    :func:`scipy.signal.butter`) is run forwards and backwards
    (:func:`scipy.signal.sosfiltfilt`), so the phase response is zero and the
    magnitude response is ``|H(f)|^2`` of the single pass (the -6 dB points
    are at the corner frequencies). ``low_mhz=None`` gives a low-pass and
    ``high_mhz=None`` a high-pass filter.

    Parameters
    ----------
    gather : xarray.DataArray
        A gather.
    low_mhz, high_mhz : float or None
        Corner frequencies, MHz, ``0 < low < high < Nyquist = 500 / dt_ns``.
    order : int, optional
        Butterworth order of one pass, 1-10.

    Returns
    -------
    xarray.DataArray

    Examples
    --------
    >>> import numpy as np
    >>> from soilwave.gather import gather_from_array
    >>> t = np.arange(2000) * 0.1
    >>> g = gather_from_array(np.sin(2 * np.pi * 0.25 * t)[None], offsets=[1.0],
    ...                       dt_ns=0.1, frequency_mhz=250.0)
    >>> out = bandpass(g, low_mhz=100.0, high_mhz=500.0)
    >>> round(float(np.abs(out.values[0, 500:1500]).max()), 2)
    1.0
    """
    validate_gather(gather)
    dt = sample_interval(gather)
    fs = 1000.0 / dt  # MHz
    nyq = fs / 2
    if isinstance(order, bool) or not isinstance(order, int | np.integer) or not 1 <= order <= 10:
        msg = f"order must be an integer from 1 to 10; got {order!r}"
        raise InputError(msg)
    if low_mhz is None and high_mhz is None:
        msg = "give low_mhz, high_mhz or both (MHz)"
        raise InputError(msg)
    lo = None if low_mhz is None else _number(low_mhz, "low_mhz", "MHz", minimum=0.0, maximum=nyq)
    hi = (
        None if high_mhz is None else _number(high_mhz, "high_mhz", "MHz", minimum=0.0, maximum=nyq)
    )
    if lo is not None and hi is not None and lo >= hi:
        msg = f"low_mhz ({lo!r}) must be below high_mhz ({hi!r})"
        raise InputError(msg)
    if lo is not None and hi is not None:
        sos = signal.butter(order, [lo, hi], btype="bandpass", fs=fs, output="sos")
    elif lo is not None:
        sos = signal.butter(order, lo, btype="highpass", fs=fs, output="sos")
    else:
        sos = signal.butter(order, hi, btype="lowpass", fs=fs, output="sos")
    x = np.asarray(gather.values, dtype=float)
    try:
        y = signal.sosfiltfilt(sos, x, axis=1)
    except ValueError as exc:
        msg = f"bandpass: traces of {x.shape[1]} samples are too short for this filter ({exc})"
        raise InputError(msg) from None
    return _result(gather, y, "bandpass", low_mhz=lo, high_mhz=hi, order=int(order))


# --- gains ----------------------------------------------------------------------------------


def agc(gather, *, window_ns):
    """Automatic gain control: divide by the running RMS amplitude.

    ``y = x / rms_W(x)``, with the RMS over a centred window of ``window_ns``
    (odd number of samples, mirrored at the trace ends). Samples where the
    running RMS is zero stay zero. The result is dimensionless (``units="1"``).

    Parameters
    ----------
    gather : xarray.DataArray
        A gather.
    window_ns : float
        Window length, ns; a few dominant periods is common practice.

    Returns
    -------
    xarray.DataArray

    Examples
    --------
    >>> import numpy as np
    >>> from soilwave.gather import gather_from_array
    >>> t = np.arange(1000) * 0.1
    >>> g = gather_from_array((5 * np.cos(2 * np.pi * 0.25 * t))[None], offsets=[1.0],
    ...                       dt_ns=0.1, frequency_mhz=250.0)
    >>> round(float(np.abs(agc(g, window_ns=20.0).values[0, 300:700]).max()), 2)
    1.41
    """
    validate_gather(gather)
    dt = sample_interval(gather)
    w_ns = _number(window_ns, "window_ns", "ns", minimum=0.0)
    w = _window_samples(w_ns, dt, gather.shape[1], "window_ns")
    x = np.asarray(gather.values, dtype=float)
    ms = ndimage.uniform_filter1d(x * x, size=w, axis=1, mode="reflect")
    rms = np.sqrt(np.clip(ms, 0.0, None))
    tiny = np.finfo(float).tiny
    y = np.divide(x, rms, out=np.zeros_like(x), where=rms > tiny)
    return _result(gather, y, "agc", units="1", window_ns=w_ns, window_samples=w)


def gain_spreading_exponential(gather, *, velocity, attenuation_db_per_m=0.0):
    """Compensate geometric spreading and exponential attenuation.

    Multiplies each sample at time ``t`` by ``g(t) = r 10^(a r / 20)`` with
    ``r = velocity * t`` the path length (m) travelled in a homogeneous
    medium of that velocity and ``a`` the attenuation in dB/m: a reflection
    whose amplitude falls as ``exp(-alpha r) / r`` (spherical spreading,
    ``alpha = a ln(10) / 20`` Np/m) becomes constant. Times below one sample
    interval (including negative times before time zero) use ``r = velocity *
    dt``. The amplitude units gain a factor m.

    Parameters
    ----------
    gather : xarray.DataArray
        A gather, time zero corrected.
    velocity : float
        Wave velocity, m/ns, ``0 < velocity <= c``.
    attenuation_db_per_m : float, optional
        Amplitude attenuation, dB/m, >= 0.

    Returns
    -------
    xarray.DataArray

    Examples
    --------
    >>> import numpy as np
    >>> from soilwave.gather import gather_from_array
    >>> t = 0.5 + np.arange(100) * 0.5
    >>> g = gather_from_array((1.0 / (0.1 * t))[None], offsets=[1.0], dt_ns=0.5,
    ...                       t0_ns=0.5, frequency_mhz=250.0)
    >>> np.allclose(gain_spreading_exponential(g, velocity=0.1).values, 1.0)
    True
    """
    validate_gather(gather)
    v = _number(velocity, "velocity", "m/ns", minimum=0.0)
    if v > SPEED_OF_LIGHT * (1 + 1e-12):
        msg = f"velocity must be <= c = {SPEED_OF_LIGHT:.6f} m/ns; got {velocity!r}"
        raise InputError(msg)
    a_db = _number(attenuation_db_per_m, "attenuation_db_per_m", "dB/m", minimum=0.0, strict=False)
    dt = sample_interval(gather)
    t = np.asarray(gather["time"].values, dtype=float)
    r = v * np.maximum(t, dt)
    g = r * 10.0 ** (a_db * r / 20.0)
    y = np.asarray(gather.values, dtype=float) * g[None, :]
    units = gather.attrs["units"]
    new_units = "m" if units == "1" else f"{units} m"
    return _result(
        gather,
        y,
        "gain_spreading_exponential",
        units=new_units,
        velocity=v,
        attenuation_db_per_m=a_db,
    )


def normalize_traces(gather, *, method="max"):
    """Scale each trace to unit maximum absolute amplitude or unit RMS.

    All-zero traces stay zero. The result is dimensionless (``units="1"``).

    Parameters
    ----------
    gather : xarray.DataArray
        A gather.
    method : {"max", "rms"}, optional
        Divide by the maximum absolute value or by the root mean square.

    Returns
    -------
    xarray.DataArray

    Examples
    --------
    >>> import numpy as np
    >>> from soilwave.gather import gather_from_array
    >>> g = gather_from_array([[1.0, -4.0], [0.5, 0.25]], offsets=[1.0, 2.0], dt_ns=1.0,
    ...                       frequency_mhz=100.0)
    >>> normalize_traces(g).values.tolist()
    [[0.25, -1.0], [1.0, 0.5]]
    """
    validate_gather(gather)
    x = np.asarray(gather.values, dtype=float)
    if method == "max":
        scale = np.max(np.abs(x), axis=1)
    elif method == "rms":
        scale = np.sqrt(np.mean(x * x, axis=1))
    else:
        msg = f"method must be 'max' or 'rms'; got {method!r}"
        raise InputError(msg)
    y = np.divide(x, scale[:, None], out=np.zeros_like(x), where=scale[:, None] > 0)
    return _result(gather, y, "normalize_traces", units="1", method=method)


def remove_background(gather, *, window_traces=None):
    """Subtract the mean trace of a fixed-offset profile (background removal).

    Removes features that are the same on every trace (air and ground waves,
    antenna ringing, flat bands) and keeps local ones (diffraction
    hyperbolas, dipping reflections). With ``window_traces`` the mean is taken
    over a centred running window of that many traces instead of the whole
    profile (mirrored at the ends).

    Parameters
    ----------
    gather : xarray.DataArray
        A fixed-offset profile (dims ``position``, ``time``).
    window_traces : int, optional
        Odd number of traces >= 3 in the running window; default the whole
        profile.

    Returns
    -------
    xarray.DataArray

    Raises
    ------
    InputError
        For a multi-offset gather: its traces differ by moveout, so a mean
        trace is not a background.

    Examples
    --------
    >>> import numpy as np
    >>> from soilwave.gather import gather_from_array
    >>> g = gather_from_array([[1.0, 2.0], [3.0, 2.0]], positions=[0.0, 0.1], dt_ns=1.0,
    ...                       frequency_mhz=500.0, antenna_separation_m=0.1)
    >>> remove_background(g).values.tolist()
    [[-1.0, 0.0], [1.0, 0.0]]
    """
    validate_gather(gather)
    if gather.dims[0] != "position":
        msg = (
            "remove_background works on fixed-offset profiles (dims position, time); got a "
            f"{gather.attrs['geometry']} gather with dims {gather.dims}"
        )
        raise InputError(msg)
    x = np.asarray(gather.values, dtype=float)
    if window_traces is None:
        bg = np.mean(x, axis=0, keepdims=True)
    else:
        ok = (
            isinstance(window_traces, int | np.integer)
            and not isinstance(window_traces, bool)
            and window_traces >= 3
            and window_traces % 2 == 1
        )
        if not ok:
            msg = f"window_traces must be an odd integer >= 3; got {window_traces!r}"
            raise InputError(msg)
        if window_traces > x.shape[0]:
            msg = f"window_traces={window_traces} exceeds the number of traces ({x.shape[0]})"
            raise InputError(msg)
        bg = ndimage.uniform_filter1d(x, size=int(window_traces), axis=0, mode="reflect")
    return _result(gather, x - bg, "remove_background", window_traces=window_traces)


# --- analytic-signal attributes -------------------------------------------------------------


def envelope(gather):
    """Envelope (instantaneous amplitude): modulus of the analytic signal.

    The analytic signal ``x + i H[x]`` uses the FFT-based Hilbert transform of
    :func:`scipy.signal.hilbert` along time (periodic at the trace ends).
    Units are those of the input.

    Examples
    --------
    >>> import numpy as np
    >>> from soilwave.gather import gather_from_array
    >>> t = np.arange(400) * 0.1
    >>> g = gather_from_array((2 * np.cos(2 * np.pi * 0.25 * t))[None], offsets=[1.0],
    ...                       dt_ns=0.1, frequency_mhz=250.0)
    >>> np.allclose(envelope(g).values, 2.0)
    True
    """
    validate_gather(gather)
    y = np.abs(_hilbert(np.asarray(gather.values, dtype=float)))
    return _result(gather, y, "envelope")


def instantaneous_phase(gather, *, unwrap=False):
    """Instantaneous phase of the analytic signal, radians.

    ``angle(x + i H[x])`` in ``(-pi, pi]``, or unwrapped along time with
    ``unwrap=True``. Units become ``"rad"``.

    Examples
    --------
    >>> import numpy as np
    >>> from soilwave.gather import gather_from_array
    >>> t = np.arange(400) * 0.1
    >>> g = gather_from_array(np.cos(2 * np.pi * 0.25 * t)[None], offsets=[1.0],
    ...                       dt_ns=0.1, frequency_mhz=250.0)
    >>> round(float(instantaneous_phase(g).values[0, 0]), 6)
    0.0
    """
    validate_gather(gather)
    if not isinstance(unwrap, bool):
        msg = f"unwrap must be True or False; got {unwrap!r}"
        raise InputError(msg)
    y = np.angle(_hilbert(np.asarray(gather.values, dtype=float)))
    if unwrap:
        y = np.unwrap(y, axis=1)
    return _result(gather, y, "instantaneous_phase", units="rad", unwrap=unwrap)
