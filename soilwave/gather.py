"""The gather data model: recorded GPR traces as a labelled ``xarray.DataArray``.

A *gather* is a two-dimensional ``xarray.DataArray`` of trace amplitudes:

=====================  ==========================  =====================================
kind                   dims                        geometry attr
=====================  ==========================  =====================================
multi-offset gather    (``offset``, ``time``)      ``"CMP"`` or ``"WARR"``
fixed-offset profile   (``position``, ``time``)    ``"fixed-offset"``
=====================  ==========================  =====================================

Coordinates
    ``offset`` (antenna separation, m) or ``position`` (along the line, m),
    strictly increasing and finite; ``time`` (trace sample time, ns), strictly
    increasing and uniformly sampled. Each coordinate has ``units`` and
    ``long_name`` attrs.
Attributes
    ``frequency_mhz`` (antenna centre frequency, MHz, > 0); ``geometry``;
    ``antenna_separation_m`` (profiles only, m, >= 0); ``units`` (amplitude
    units, e.g. ``"1"`` or ``"mV"``); ``history`` (processing steps, one per
    line, ``"<ISO time> soilwave <version> <step>(<args>)"``); ``long_name``.
Values
    finite float64 amplitudes.

Build gathers with :func:`gather_from_array`, check foreign ones with
:func:`validate_gather`, and record processing steps with :func:`with_history`.
"""

from __future__ import annotations

import numpy as np
import xarray as xr

from soilwave.errors import InputError
from soilwave.provenance import history_line

__all__ = [
    "GEOMETRIES",
    "MULTI_OFFSET_GEOMETRIES",
    "gather_from_array",
    "gather_trace_dim",
    "history_line",
    "sample_interval",
    "validate_gather",
    "with_history",
]

#: Acquisition geometries a gather may declare.
GEOMETRIES = ("CMP", "WARR", "fixed-offset")
#: Geometries of multi-offset gathers (dims ``offset``, ``time``).
MULTI_OFFSET_GEOMETRIES = ("CMP", "WARR")

#: Relative tolerance on the uniformity of the time axis (spacing deviations
#: are compared with ``dt``); coordinates read back from text files carry
#: rounding of a few ulp, so this is loose enough for them and tight enough to
#: catch a missing or duplicated sample.
_DT_RTOL = 1e-6

_COORD_ATTRS = {
    "offset": {"units": "m", "long_name": "antenna separation (offset)"},
    "position": {"units": "m", "long_name": "position along the profile line"},
    "time": {"units": "ns", "long_name": "trace sample time"},
}


# --- validation helpers -----------------------------------------------------------


def _positive_scalar(value, name: str, unit: str, *, allow_zero: bool = False) -> float:
    try:
        x = float(value)
    except (TypeError, ValueError):
        msg = f"{name} must be a number in {unit}; got {value!r}"
        raise InputError(msg) from None
    ok = np.isfinite(x) and (x >= 0 if allow_zero else x > 0)
    if not ok:
        bound = ">= 0" if allow_zero else "> 0"
        msg = f"{name} must be finite and {bound} {unit}; got {value!r}"
        raise InputError(msg)
    return x


def _finite_scalar(value, name: str, unit: str) -> float:
    try:
        x = float(value)
    except (TypeError, ValueError):
        msg = f"{name} must be a number in {unit}; got {value!r}"
        raise InputError(msg) from None
    if not np.isfinite(x):
        msg = f"{name} must be finite ({unit}); got {value!r}"
        raise InputError(msg)
    return x


def _check_axis(values, name: str, unit: str) -> np.ndarray:
    """1-D, finite, strictly increasing coordinate values."""
    try:
        a = np.asarray(values, dtype=float)
    except (TypeError, ValueError):
        msg = f"{name} must be numbers in {unit}; got {values!r}"
        raise InputError(msg) from None
    if a.ndim != 1:
        msg = f"{name} must be a 1-D array ({unit}); got shape {a.shape}"
        raise InputError(msg)
    if a.size == 0:
        msg = f"{name} is empty; a gather needs at least one trace"
        raise InputError(msg)
    if not np.all(np.isfinite(a)):
        i = int(np.flatnonzero(~np.isfinite(a))[0])
        msg = f"{name}[{i}] is {float(a[i])!r}; expected finite values in {unit}"
        raise InputError(msg)
    d = np.diff(a)
    if np.any(d <= 0):
        i = int(np.flatnonzero(d <= 0)[0])
        msg = (
            f"{name} must be strictly increasing ({unit}); {name}[{i}] = {float(a[i])!r} is "
            f"followed by {name}[{i + 1}] = {float(a[i + 1])!r} (sort the traces and drop "
            "duplicates)"
        )
        raise InputError(msg)
    return a


def _check_time_axis(time) -> float:
    """Return dt of a strictly increasing, uniformly sampled time axis (ns)."""
    t = _check_axis(time, "time", "ns")
    if t.size < 2:
        msg = f"a gather needs at least 2 time samples; got {t.size}"
        raise InputError(msg)
    d = np.diff(t)
    dt = (t[-1] - t[0]) / (t.size - 1)
    dev = np.abs(d - dt)
    if np.any(dev > _DT_RTOL * dt + 8 * np.finfo(float).eps * np.abs(t[1:])):
        i = int(np.argmax(dev))
        msg = (
            f"time must be uniformly sampled; spacing time[{i + 1}] - time[{i}] = "
            f"{float(d[i])!r} ns differs from the mean interval {dt!r} ns"
        )
        raise InputError(msg)
    return float(dt)


def _check_history(history) -> str:
    if history is None:
        return ""
    if isinstance(history, str):
        return history
    if isinstance(history, list | tuple) and all(isinstance(h, str) for h in history):
        return "\n".join(history)
    msg = f"history must be a string (one step per line) or a list of strings; got {history!r}"
    raise InputError(msg)


# --- public API ---------------------------------------------------------------------


def gather_from_array(
    data,
    *,
    offsets=None,
    positions=None,
    dt_ns,
    frequency_mhz,
    t0_ns=0.0,
    geometry=None,
    antenna_separation_m=None,
    units="1",
    history=None,
) -> xr.DataArray:
    """Build a gather from an ``(n_traces, n_samples)`` array of amplitudes.

    Parameters
    ----------
    data : array_like, shape (n_traces, n_samples)
        Trace amplitudes, one trace per row; finite numbers.
    offsets : array_like, shape (n_traces,), optional
        Antenna separation of each trace, m, strictly increasing (multi-offset
        gather). Give exactly one of ``offsets`` and ``positions``.
    positions : array_like, shape (n_traces,), optional
        Position of each trace along the line, m, strictly increasing
        (fixed-offset profile).
    dt_ns : float
        Sample interval, ns, > 0.
    frequency_mhz : float
        Antenna centre frequency, MHz, > 0.
    t0_ns : float, optional
        Time of the first sample, ns (may be negative before time-zero correction).
    geometry : {"CMP", "WARR", "fixed-offset"}, optional
        Acquisition geometry. Default ``"CMP"`` with ``offsets`` and
        ``"fixed-offset"`` with ``positions``.
    antenna_separation_m : float, optional
        Antenna separation of a profile, m, >= 0; required with ``positions``
        and not allowed with ``offsets`` (there the offsets say it).
    units : str, optional
        Amplitude units, e.g. ``"1"`` (dimensionless) or ``"mV"``.
    history : str or list of str, optional
        Earlier processing history, one step per line.

    Returns
    -------
    xarray.DataArray
        The gather (float64 copy of ``data``); see the module docstring.

    Raises
    ------
    InputError
        For a wrong shape, non-finite values, non-increasing coordinates, a
        non-positive ``dt_ns`` or ``frequency_mhz``, an unknown geometry or a
        geometry that does not fit the coordinates.

    Examples
    --------
    >>> import numpy as np
    >>> g = gather_from_array(np.zeros((3, 100)), offsets=[0.5, 1.0, 1.5],
    ...                       dt_ns=0.1, frequency_mhz=250.0)
    >>> g.dims, g.attrs["geometry"], float(g.time[-1])
    (('offset', 'time'), 'CMP', 9.9)
    """
    if (offsets is None) == (positions is None):
        msg = (
            "give exactly one of offsets= (multi-offset gather, m) and positions= "
            "(fixed-offset profile, m); got " + ("both" if offsets is not None else "neither")
        )
        raise InputError(msg)
    try:
        arr = np.array(data, dtype=float)
    except (TypeError, ValueError):
        msg = f"data must be a numeric array of shape (n_traces, n_samples); got {type(data)}"
        raise InputError(msg) from None
    if arr.ndim != 2:
        msg = f"data must be 2-D (n_traces, n_samples); got shape {arr.shape}"
        raise InputError(msg)
    dim = "offset" if offsets is not None else "position"
    coord = _check_axis(offsets if offsets is not None else positions, f"{dim}s", "m")
    if coord.size != arr.shape[0]:
        msg = (
            f"data has {arr.shape[0]} traces (rows) but {dim}s has {coord.size} values; "
            "expected one value per trace (data shape is (n_traces, n_samples))"
        )
        raise InputError(msg)
    if arr.shape[1] < 2:
        msg = f"data must have at least 2 samples per trace; got shape {arr.shape}"
        raise InputError(msg)
    dt = _positive_scalar(dt_ns, "dt_ns", "ns")
    t0 = _finite_scalar(t0_ns, "t0_ns", "ns")
    time = t0 + dt * np.arange(arr.shape[1])
    freq = _positive_scalar(frequency_mhz, "frequency_mhz", "MHz")
    if geometry is None:
        geometry = "CMP" if dim == "offset" else "fixed-offset"
    attrs = {
        "long_name": "trace amplitude",
        "units": units,
        "frequency_mhz": freq,
        "geometry": geometry,
    }
    if antenna_separation_m is not None:
        attrs["antenna_separation_m"] = _positive_scalar(
            antenna_separation_m, "antenna_separation_m", "m", allow_zero=True
        )
    attrs["history"] = _check_history(history)
    da = xr.DataArray(
        arr,
        dims=(dim, "time"),
        coords={
            dim: xr.Variable(dim, coord, attrs=dict(_COORD_ATTRS[dim])),
            "time": xr.Variable("time", time, attrs=dict(_COORD_ATTRS["time"])),
        },
        attrs=attrs,
        name="amplitude",
    )
    return validate_gather(da)


def validate_gather(gather) -> xr.DataArray:
    """Check that ``gather`` follows the data model and return it unchanged.

    Parameters
    ----------
    gather : xarray.DataArray
        Candidate gather.

    Returns
    -------
    xarray.DataArray
        The same object, for chaining.

    Raises
    ------
    InputError
        Naming the first problem found: dims, coordinates, attrs or values.

    Examples
    --------
    >>> import numpy as np
    >>> g = gather_from_array(np.ones((2, 4)), positions=[0.0, 0.1], dt_ns=0.5,
    ...                       frequency_mhz=500.0, antenna_separation_m=0.2)
    >>> validate_gather(g) is g
    True
    """
    if not isinstance(gather, xr.DataArray):
        msg = f"a gather must be an xarray.DataArray; got {type(gather).__name__}"
        raise InputError(msg)
    dims = tuple(gather.dims)
    if dims not in (("offset", "time"), ("position", "time")):
        msg = (
            f"a gather must have dims ('offset', 'time') or ('position', 'time'); got {dims} "
            "(transpose it, e.g. gather.transpose('offset', 'time'))"
        )
        raise InputError(msg)
    dim = dims[0]
    for name in dims:
        if name not in gather.coords:
            msg = f"gather has no {name!r} coordinate; expected values in {_COORD_ATTRS[name]}"
            raise InputError(msg)
    _check_axis(gather[dim].values, dim, "m")
    _check_time_axis(gather["time"].values)
    vals = gather.values
    if not np.issubdtype(vals.dtype, np.floating) and not np.issubdtype(vals.dtype, np.integer):
        msg = f"gather values must be real numbers; got dtype {vals.dtype}"
        raise InputError(msg)
    finite = np.isfinite(vals)
    if not np.all(finite):
        i, j = (int(k) for k in np.argwhere(~finite)[0])
        msg = (
            f"gather has a non-finite value {float(vals[i, j])!r} at "
            f"{dim}={float(gather[dim].values[i])!r} m, "
            f"time={float(gather['time'].values[j])!r} ns (trace {i}, sample {j}); expected "
            "finite amplitudes"
        )
        raise InputError(msg)
    attrs = gather.attrs
    for key in ("frequency_mhz", "geometry", "units"):
        if key not in attrs:
            msg = f"gather has no {key!r} attribute; build gathers with gather_from_array"
            raise InputError(msg)
    _positive_scalar(attrs["frequency_mhz"], "frequency_mhz", "MHz")
    geometry = attrs["geometry"]
    if geometry not in GEOMETRIES:
        msg = f"geometry must be one of {list(GEOMETRIES)}; got {geometry!r}"
        raise InputError(msg)
    if dim == "offset" and geometry not in MULTI_OFFSET_GEOMETRIES:
        msg = (
            f"a gather with an 'offset' axis is a multi-offset gather: geometry must be 'CMP' "
            f"or 'WARR'; got {geometry!r}"
        )
        raise InputError(msg)
    if dim == "position" and geometry != "fixed-offset":
        msg = (
            f"a gather with a 'position' axis is a fixed-offset profile: geometry must be "
            f"'fixed-offset'; got {geometry!r}"
        )
        raise InputError(msg)
    if dim == "position":
        if attrs.get("antenna_separation_m") is None:
            msg = (
                "a fixed-offset profile needs antenna_separation_m (m, >= 0): the distance "
                "between transmitter and receiver"
            )
            raise InputError(msg)
        _positive_scalar(
            attrs["antenna_separation_m"], "antenna_separation_m", "m", allow_zero=True
        )
    elif "antenna_separation_m" in attrs:
        msg = (
            "antenna_separation_m applies to fixed-offset profiles only; a multi-offset "
            f"gather takes it from its offsets (got {attrs['antenna_separation_m']!r})"
        )
        raise InputError(msg)
    if not isinstance(attrs["units"], str):
        msg = f"units must be a string such as '1' or 'mV'; got {attrs['units']!r}"
        raise InputError(msg)
    _check_history(attrs.get("history"))
    return gather


def gather_trace_dim(gather) -> str:
    """Name of the trace axis: ``"offset"`` or ``"position"``.

    Examples
    --------
    >>> import numpy as np
    >>> g = gather_from_array(np.zeros((2, 3)), offsets=[1.0, 2.0], dt_ns=1.0,
    ...                       frequency_mhz=100.0)
    >>> gather_trace_dim(g)
    'offset'
    """
    validate_gather(gather)
    return str(gather.dims[0])


def sample_interval(gather) -> float:
    """Sample interval of a gather's time axis, ns.

    Examples
    --------
    >>> import numpy as np
    >>> g = gather_from_array(np.zeros((2, 3)), offsets=[1.0, 2.0], dt_ns=0.25,
    ...                       frequency_mhz=100.0)
    >>> sample_interval(g)
    0.25
    """
    return _check_time_axis(gather["time"].values)


def with_history(gather, step: str, **kwargs) -> xr.DataArray:
    """Return ``gather`` with one line appended to its ``history`` attr.

    The input is not modified: the result has its own attrs dict (data are
    shared, so callers pass a freshly computed array).

    Parameters
    ----------
    gather : xarray.DataArray
        Gather to annotate.
    step : str
        Name of the processing step, e.g. ``"dewow"``.
    **kwargs
        Arguments of the step, written as ``name=value``.

    Returns
    -------
    xarray.DataArray

    Examples
    --------
    >>> import numpy as np
    >>> g = gather_from_array(np.zeros((2, 3)), offsets=[1.0, 2.0], dt_ns=1.0,
    ...                       frequency_mhz=100.0)
    >>> h = with_history(g, "agc", window_ns=10.0)
    >>> g.attrs["history"], h.attrs["history"].endswith("agc(window_ns=10.0)")
    ('', True)
    """
    out = gather.copy(deep=False)
    out.attrs = dict(gather.attrs)
    line = history_line(step, **kwargs)
    old = out.attrs.get("history") or ""
    out.attrs["history"] = f"{old}\n{line}" if old else line
    return out
