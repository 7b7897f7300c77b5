"""Read and write gathers: NetCDF, SEG-Y and a plain-text matrix with a TOML sidecar.

:func:`read_gather` and :func:`write_gather` choose the format from the file
suffix:

============================  =================================================
suffix                        format
============================  =================================================
``.nc``                       NetCDF-4 (HDF5) through the ``h5netcdf`` engine
``.sgy``, ``.segy``           SEG-Y (revision 1) through ``segyio`` (extra ``segy``),
                              see :mod:`soilwave.gather_segy`
``.txt``, ``.csv``            plain-text matrix + TOML sidecar (same stem, ``.toml``),
                              see :mod:`soilwave.gather_text`
============================  =================================================

Every reader checks the whole file and raises :class:`~soilwave.errors.FileFormatError`
naming the file and the problem; it never returns a half-read gather. Every
writer writes to a temporary file in the target folder and moves it into place
with ``os.replace``; an existing file is only replaced with ``overwrite=True``
(otherwise :class:`~soilwave.errors.OutputExistsError`).

NetCDF layout
-------------
One data variable ``amplitude`` (float64) with dims ``(offset, time)`` or
``(position, time)``; coordinate variables ``offset`` or ``position`` (m) and
``time`` (ns), each with ``units`` and ``long_name``. The variable carries the
gather attrs (``units``, ``long_name``, ``frequency_mhz``, ``geometry``,
``antenna_separation_m`` for profiles, and any other scalar, string or numeric
list attrs). Global attributes: ``Conventions = "CF-1.10"``,
``soilwave_format = "gather"``, ``soilwave_format_version = 1``, ``title`` and
``history`` (the gather's processing history, one step per line, as CF's
global ``history``). The round trip is lossless (values, coordinates, attrs).

The formats live in :mod:`soilwave.gather_text` (text matrix + TOML sidecar)
and :mod:`soilwave.gather_segy` (SEG-Y); this module holds the NetCDF format,
the dispatch and the shared checks.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import xarray as xr

from soilwave.atomic import atomic_write
from soilwave.errors import FileFormatError, InputError
from soilwave.gather import validate_gather

__all__ = ["extra_attrs", "finish_read", "read_gather", "write_gather"]

_NETCDF_SUFFIXES = (".nc",)
_SEGY_SUFFIXES = (".sgy", ".segy")
_TEXT_SUFFIXES = (".txt", ".csv")
_FORMAT_NAME = "gather"
_FORMAT_VERSION = 1
_TEXT_FORMAT_NAME = "soilwave-gather-text"


def _kind(path: Path) -> str:
    suffix = path.suffix.lower()
    if suffix in _NETCDF_SUFFIXES:
        return "netcdf"
    if suffix in _SEGY_SUFFIXES:
        return "segy"
    if suffix in _TEXT_SUFFIXES:
        return "text"
    known = ", ".join(_NETCDF_SUFFIXES + _SEGY_SUFFIXES + _TEXT_SUFFIXES)
    msg = f"{path}: unknown gather file suffix {path.suffix!r}; expected one of {known}"
    raise InputError(msg)


# --- public entry points -------------------------------------------------------------


def read_gather(path, *, frequency_mhz=None, geometry=None, time_unit="ps"):
    """Read a gather from NetCDF, SEG-Y or a text matrix with TOML sidecar.

    Parameters
    ----------
    path : str or path-like
        ``.nc``, ``.sgy``/``.segy``, ``.txt`` or ``.csv`` (the sidecar is the
        same name with ``.toml``).
    frequency_mhz : float, optional
        SEG-Y only: antenna centre frequency, MHz, for files whose textual
        header does not give it (must agree with it when it does).
    geometry : {"CMP", "WARR", "fixed-offset"}, optional
        SEG-Y only: geometry for files that do not say; by default a file
        with one common offset and varying midpoints is a fixed-offset
        profile, anything else a CMP gather.
    time_unit : {"ps", "ns", "us"}, optional
        SEG-Y only: unit of the binary-header sample interval for files
        without an exact ``DT_NS`` in the textual header (default ``"ps"``,
        GPR practice of scaling times by 10^6; ``"us"`` is the unscaled SEG-Y
        unit). The trace delay is read in the unit a thousand times larger.

    Returns
    -------
    xarray.DataArray
        A valid gather (see :mod:`soilwave.gather`).

    Raises
    ------
    FileFormatError
        For a missing, corrupt, truncated or inconsistent file (message names
        the file and the problem).
    InputError
        For an unknown suffix or SEG-Y-only options given for another format.

    Examples
    --------
    >>> import numpy as np, tempfile, os
    >>> from soilwave.gather import gather_from_array
    >>> g = gather_from_array(np.ones((2, 5)), offsets=[1.0, 2.0], dt_ns=0.5,
    ...                       frequency_mhz=250.0)
    >>> with tempfile.TemporaryDirectory() as d:
    ...     write_gather(g, os.path.join(d, "g.nc"))
    ...     back = read_gather(os.path.join(d, "g.nc"))
    >>> bool(back.identical(g))
    True
    """
    path = Path(path)
    kind = _kind(path)
    if kind != "segy" and (frequency_mhz is not None or geometry is not None):
        msg = (
            f"{path}: frequency_mhz= and geometry= are only used for SEG-Y files; "
            "NetCDF and text+TOML files carry their own metadata"
        )
        raise InputError(msg)
    if time_unit not in ("ps", "ns", "us"):
        msg = f"time_unit must be 'ps', 'ns' or 'us'; got {time_unit!r}"
        raise InputError(msg)
    if not path.is_file():
        msg = f"{path}: no such file"
        raise FileFormatError(msg)
    if kind == "netcdf":
        return _read_netcdf(path)
    if kind == "segy":
        from soilwave.gather_segy import read_segy

        return read_segy(path, frequency_mhz=frequency_mhz, geometry=geometry, time_unit=time_unit)
    from soilwave.gather_text import read_text

    return read_text(path)


def write_gather(gather, path, *, overwrite=False) -> None:
    """Write a gather to NetCDF, SEG-Y or a text matrix with TOML sidecar.

    Parameters
    ----------
    gather : xarray.DataArray
        A valid gather.
    path : str or path-like
        Target file; the suffix chooses the format (see the module docstring).
        Text formats also write ``<stem>.toml``.
    overwrite : bool, optional
        Replace existing files (default: raise :class:`OutputExistsError`).

    Raises
    ------
    OutputExistsError
        If a target exists and ``overwrite`` is False.
    InputError
        For an invalid gather, unknown suffix or attrs the format cannot hold.

    Examples
    --------
    >>> import numpy as np, tempfile, os
    >>> from soilwave.gather import gather_from_array
    >>> g = gather_from_array(np.ones((2, 5)), offsets=[1.0, 2.0], dt_ns=0.5,
    ...                       frequency_mhz=250.0)
    >>> with tempfile.TemporaryDirectory() as d:
    ...     write_gather(g, os.path.join(d, "g.csv"))
    ...     sorted(os.listdir(d))
    ['g.csv', 'g.toml']
    """
    validate_gather(gather)
    path = Path(path)
    kind = _kind(path)
    if kind == "netcdf":
        _write_netcdf(gather, path, overwrite=overwrite)
    elif kind == "segy":
        from soilwave.gather_segy import write_segy

        write_segy(gather, path, overwrite=overwrite)
    else:
        from soilwave.gather_text import write_text

        write_text(gather, path, overwrite=overwrite)


# --- shared checks ---------------------------------------------------------------------


def extra_attrs(gather) -> dict:
    """Attrs beyond the fixed metadata, checked to be storable."""
    fixed = {"units", "long_name", "frequency_mhz", "geometry", "antenna_separation_m", "history"}
    out = {}
    for key, value in gather.attrs.items():
        if key in fixed:
            continue
        ok = isinstance(value, str | int | float | np.integer | np.floating) and not isinstance(
            value, bool
        )
        if isinstance(value, list | tuple | np.ndarray):
            arr = np.asarray(value)
            ok = arr.ndim == 1 and arr.dtype.kind in "iuf"
            value = arr
        if not ok:
            msg = (
                f"gather attr {key!r} = {value!r} cannot be stored; attrs must be strings, "
                "numbers or 1-D numeric lists"
            )
            raise InputError(msg)
        out[key] = value
    return out


def finish_read(path: Path, da: xr.DataArray) -> xr.DataArray:
    """Validate a gather built from a file, turning problems into FileFormatError."""
    try:
        return validate_gather(da)
    except InputError as exc:
        msg = f"{path}: the file does not hold a valid gather: {exc}"
        raise FileFormatError(msg) from None


# --- NetCDF ------------------------------------------------------------------------------


def _write_netcdf(gather, path: Path, *, overwrite: bool) -> None:
    extra = extra_attrs(gather)
    dim = gather.dims[0]
    var_attrs = {
        "units": gather.attrs["units"],
        "long_name": gather.attrs.get("long_name", "trace amplitude"),
        "frequency_mhz": float(gather.attrs["frequency_mhz"]),
        "geometry": gather.attrs["geometry"],
    }
    if dim == "position":
        var_attrs["antenna_separation_m"] = float(gather.attrs["antenna_separation_m"])
    var_attrs.update(extra)
    ds = xr.Dataset(
        {"amplitude": ((dim, "time"), np.asarray(gather.values, dtype=float), var_attrs)},
        coords={
            dim: (dim, np.asarray(gather[dim].values, dtype=float), dict(gather[dim].attrs)),
            "time": (
                "time",
                np.asarray(gather["time"].values, dtype=float),
                dict(gather.time.attrs),
            ),
        },
        attrs={
            "Conventions": "CF-1.10",
            "title": "GPR gather (soilwave)",
            "soilwave_format": _FORMAT_NAME,
            "soilwave_format_version": _FORMAT_VERSION,
            "history": gather.attrs.get("history") or "",
        },
    )

    def writer(tmp):
        ds.to_netcdf(tmp, engine="h5netcdf")

    atomic_write([(path, writer)], overwrite=overwrite)


def _touch_hdf5_object(name, obj) -> None:
    import h5py

    dict(obj.attrs)
    if isinstance(obj, h5py.Dataset):
        obj[()]


def _read_netcdf(path: Path) -> xr.DataArray:
    import h5py

    try:
        # read every object with h5py first: damage is reported here, before
        # h5netcdf builds (and on failure half-initialises) its own file object
        with h5py.File(path, "r") as f:
            dict(f.attrs)
            f.visititems(_touch_hdf5_object)
        with xr.open_dataset(
            path, engine="h5netcdf", decode_times=False, decode_timedelta=False
        ) as ds:
            ds = ds.load()
    except (OSError, ValueError, KeyError, RuntimeError, TypeError) as exc:
        msg = f"{path}: cannot be read as NetCDF-4/HDF5 (corrupt or truncated?): {exc}"
        raise FileFormatError(msg) from None
    fmt = ds.attrs.get("soilwave_format")
    if fmt != _FORMAT_NAME:
        msg = (
            f"{path}: global attribute soilwave_format is {fmt!r}; expected {_FORMAT_NAME!r} "
            "(a gather written by write_gather)"
        )
        raise FileFormatError(msg)
    version = ds.attrs.get("soilwave_format_version")
    if version != _FORMAT_VERSION:
        msg = f"{path}: soilwave_format_version is {version!r}; this version reads 1"
        raise FileFormatError(msg)
    if "amplitude" not in ds.data_vars:
        msg = f"{path}: no variable 'amplitude'; found {sorted(ds.data_vars)}"
        raise FileFormatError(msg)
    var = ds["amplitude"]
    attrs = {}
    for key, value in var.attrs.items():
        if isinstance(value, np.ndarray):
            value = value.tolist()
        elif isinstance(value, np.generic):
            value = value.item()
        attrs[key] = value
    attrs["history"] = str(ds.attrs.get("history", ""))
    da = xr.DataArray(
        np.asarray(var.values, dtype=float),
        dims=var.dims,
        coords={d: (d, ds[d].values, dict(ds[d].attrs)) for d in var.dims if d in ds.coords},
        attrs=attrs,
        name="amplitude",
    )
    return finish_read(path, da)


def __getattr__(name):
    # toml_dumps moved to soilwave.gather_text; keep `from soilwave.gather_io import
    # toml_dumps` working (imported lazily: gather_text itself imports this module)
    if name == "toml_dumps":
        from soilwave.gather_text import toml_dumps

        return toml_dumps
    msg = f"module {__name__!r} has no attribute {name!r}"
    raise AttributeError(msg)
