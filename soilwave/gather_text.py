"""Gather files as a plain-text matrix with a TOML metadata sidecar.

``name.txt`` (whitespace-separated) or ``name.csv`` (comma-separated) holds
the amplitudes as a plain matrix, **one row per time sample and one column per
trace** (``rows = "samples"``, the layout written) or one row per trace
(``rows = "traces"``). Lines starting with ``#`` and blank lines are
ignored. ``name.toml`` holds the metadata:

.. code-block:: toml

    format = "soilwave-gather-text"   # optional on reading
    format_version = 1                # optional on reading
    rows = "samples"                  # or "traces"; inferred from the shape if absent
    n_samples = 512                   # optional on reading; checked if present
    dt_ns = 0.1                       # required, ns
    t0_ns = 0.0                       # optional, ns (default 0)
    frequency_mhz = 250.0             # required, MHz
    geometry = "CMP"                  # optional ("CMP"/"WARR" with offsets_m,
                                      #   "fixed-offset" with positions_m)
    offsets_m = [0.5, 1.0, 1.5]       # one of offsets_m / positions_m, m
    antenna_separation_m = 1.0        # profiles only, m
    units = "1"                       # optional amplitude units (default "1")
    history = ["...", "..."]          # optional, one entry per step

    [attrs]                           # optional further gather attrs
    time_zero_shift_ns = 1.5

Values are written with 17 significant digits, so the round trip is lossless.
Unknown keys are an error (they are usually typos).

:func:`toml_dumps` is the small TOML writer used for the sidecar (reading
uses the standard library's :mod:`tomllib`). Read and write through
:func:`soilwave.read_gather` and :func:`soilwave.write_gather`.
"""

from __future__ import annotations

import math
import re
import tomllib
from pathlib import Path

import numpy as np
import xarray as xr

from soilwave.atomic import atomic_write
from soilwave.errors import FileFormatError, InputError
from soilwave.gather import GEOMETRIES, gather_from_array
from soilwave.gather_io import extra_attrs, finish_read

__all__ = ["read_text", "toml_dumps", "toml_key", "toml_value", "write_text"]

_FORMAT_VERSION = 1
_TEXT_FORMAT_NAME = "soilwave-gather-text"

# --- TOML writing -------------------------------------------------------------------------

_BARE_KEY = re.compile(r"^[A-Za-z0-9_-]+$")


def _toml_string(s: str) -> str:
    out = ['"']
    for ch in s:
        code = ord(ch)
        if ch == '"':
            out.append('\\"')
        elif ch == "\\":
            out.append("\\\\")
        elif ch == "\n":
            out.append("\\n")
        elif ch == "\t":
            out.append("\\t")
        elif code < 0x20 or code == 0x7F:
            out.append(f"\\u{code:04X}")
        else:
            out.append(ch)
    out.append('"')
    return "".join(out)


def toml_key(key: str) -> str:
    return key if _BARE_KEY.match(key) else _toml_string(key)


def toml_value(value, *, wrap: bool = True) -> str:
    if isinstance(value, bool | np.bool_):
        return "true" if value else "false"
    if isinstance(value, int | np.integer):
        return str(int(value))
    if isinstance(value, float | np.floating):
        x = float(value)
        if math.isnan(x):
            return "nan"
        if math.isinf(x):
            return "inf" if x > 0 else "-inf"
        return repr(x)
    if isinstance(value, str):
        return _toml_string(value)
    if isinstance(value, list | tuple | np.ndarray):
        items = [toml_value(v) for v in value]
        if not wrap or sum(len(i) + 2 for i in items) <= 80:
            return "[" + ", ".join(items) + "]"
        per_line = 1 if any(isinstance(v, str) for v in value) else 6
        lines = ["["]
        for i in range(0, len(items), per_line):
            lines.append("    " + ", ".join(items[i : i + per_line]) + ",")
        lines.append("]")
        return "\n".join(lines)
    msg = f"cannot write {value!r} ({type(value).__name__}) to TOML"
    raise InputError(msg)


def toml_dumps(table: dict, *, header: str = "") -> str:
    """Serialise a flat dict (plus one level of sub-tables) as TOML text.

    A minimal writer for soilwave's sidecar files: strings, booleans,
    integers, floats (``repr``, so they read back exactly) and lists of
    those; dict values become ``[sub-tables]`` written after the plain keys.

    Parameters
    ----------
    table : dict
        Keys are strings.
    header : str, optional
        Comment lines placed at the top (each prefixed with ``# ``).

    Returns
    -------
    str

    Examples
    --------
    >>> import tomllib
    >>> text = toml_dumps({"dt_ns": 0.1, "name": 'a "b"', "x": [1.0, 2.5],
    ...                    "attrs": {"k": 1}})
    >>> tomllib.loads(text) == {"dt_ns": 0.1, "name": 'a "b"', "x": [1.0, 2.5],
    ...                         "attrs": {"k": 1}}
    True
    """
    lines = [f"# {h}" for h in header.splitlines()]
    subtables = {}
    for key, value in table.items():
        if isinstance(value, dict):
            subtables[key] = value
            continue
        lines.append(f"{toml_key(key)} = {toml_value(value)}")
    for name, sub in subtables.items():
        lines.append("")
        lines.append(f"[{toml_key(name)}]")
        for key, value in sub.items():
            if isinstance(value, dict):
                msg = f"toml_dumps supports one level of tables; {name}.{key} is a table"
                raise InputError(msg)
            lines.append(f"{toml_key(key)} = {toml_value(value)}")
    return "\n".join(lines) + "\n"


# --- text matrix + TOML ------------------------------------------------------------------

_SIDECAR_KEYS = {
    "format",
    "format_version",
    "rows",
    "n_samples",
    "dt_ns",
    "t0_ns",
    "frequency_mhz",
    "geometry",
    "offsets_m",
    "positions_m",
    "antenna_separation_m",
    "units",
    "history",
    "attrs",
}


def _sidecar_path(path: Path) -> Path:
    return path.with_suffix(".toml")


def write_text(gather, path: Path, *, overwrite: bool) -> None:
    extra = extra_attrs(gather)
    dim = gather.dims[0]
    time = np.asarray(gather["time"].values, dtype=float)
    n = time.size
    dt = (time[-1] - time[0]) / (n - 1)
    meta = {
        "format": _TEXT_FORMAT_NAME,
        "format_version": _FORMAT_VERSION,
        "rows": "samples",
        "n_samples": int(n),
        "dt_ns": float(dt),
        "t0_ns": float(time[0]),
        "frequency_mhz": float(gather.attrs["frequency_mhz"]),
        "geometry": gather.attrs["geometry"],
        f"{dim}s_m": [float(v) for v in gather[dim].values],
    }
    if dim == "position":
        meta["antenna_separation_m"] = float(gather.attrs["antenna_separation_m"])
    meta["units"] = gather.attrs["units"]
    history = gather.attrs.get("history") or ""
    meta["history"] = history.split("\n") if history else []
    if extra:
        meta["attrs"] = {
            k: (v.tolist() if isinstance(v, np.ndarray) else v) for k, v in extra.items()
        }
    sidecar = toml_dumps(
        meta,
        header=(
            f"soilwave gather metadata for {path.name}: rows = time samples, columns = "
            f"traces ({dim}s_m)"
        ),
    )
    delim = "," if path.suffix.lower() == ".csv" else " "
    values = np.asarray(gather.values, dtype=float).T  # (n_samples, n_traces)

    def write_matrix(tmp):
        with open(tmp, "w", encoding="utf-8", newline="\n") as fh:
            np.savetxt(fh, values, fmt="%.17g", delimiter=delim)

    def write_sidecar(tmp):
        with open(tmp, "w", encoding="utf-8", newline="\n") as fh:
            fh.write(sidecar)

    atomic_write(
        [(path, write_matrix), (_sidecar_path(path), write_sidecar)],
        overwrite=overwrite,
    )


def _parse_matrix(path: Path) -> np.ndarray:
    delim = "," if path.suffix.lower() == ".csv" else None
    try:
        text = path.read_text(encoding="utf-8")
    except (OSError, UnicodeDecodeError) as exc:
        msg = f"{path}: cannot be read as UTF-8 text: {exc}"
        raise FileFormatError(msg) from None
    rows = []
    width = None
    first_line = None
    for lineno, line in enumerate(text.splitlines(), start=1):
        stripped = line.strip()
        if not stripped or stripped.startswith("#"):
            continue
        fields = stripped.split(delim)
        if width is None:
            width, first_line = len(fields), lineno
        elif len(fields) != width:
            msg = (
                f"{path}, line {lineno}: {len(fields)} values; expected {width} like line "
                f"{first_line} (truncated or ragged file?)"
            )
            raise FileFormatError(msg)
        row = []
        for col, field in enumerate(fields, start=1):
            try:
                x = float(field)
            except ValueError:
                msg = f"{path}, line {lineno}, column {col}: {field.strip()!r} is not a number"
                raise FileFormatError(msg) from None
            if not math.isfinite(x):
                msg = f"{path}, line {lineno}, column {col}: {field.strip()!r} is not finite"
                raise FileFormatError(msg)
            row.append(x)
        rows.append(row)
    if not rows:
        msg = f"{path}: no data rows (empty file?)"
        raise FileFormatError(msg)
    return np.array(rows, dtype=float)


def _read_sidecar(sidecar: Path) -> dict:
    if not sidecar.is_file():
        msg = f"{sidecar}: metadata sidecar not found (needed beside the text matrix)"
        raise FileFormatError(msg)
    try:
        with open(sidecar, "rb") as fh:
            meta = tomllib.load(fh)
    except (OSError, UnicodeDecodeError, tomllib.TOMLDecodeError) as exc:
        msg = f"{sidecar}: not valid TOML: {exc}"
        raise FileFormatError(msg) from None
    unknown = sorted(set(meta) - _SIDECAR_KEYS)
    if unknown:
        msg = f"{sidecar}: unknown key(s) {unknown}; expected keys among {sorted(_SIDECAR_KEYS)}"
        raise FileFormatError(msg)
    for key in ("dt_ns", "frequency_mhz"):
        if key not in meta:
            msg = f"{sidecar}: required key {key!r} is missing"
            raise FileFormatError(msg)
    if ("offsets_m" in meta) == ("positions_m" in meta):
        msg = (
            f"{sidecar}: give exactly one of 'offsets_m' (multi-offset gather) and "
            "'positions_m' (fixed-offset profile)"
        )
        raise FileFormatError(msg)
    if "format" in meta and meta["format"] != _TEXT_FORMAT_NAME:
        msg = f"{sidecar}: format is {meta['format']!r}; expected {_TEXT_FORMAT_NAME!r}"
        raise FileFormatError(msg)
    if "format_version" in meta and meta["format_version"] != _FORMAT_VERSION:
        msg = f"{sidecar}: format_version is {meta['format_version']!r}; this version reads 1"
        raise FileFormatError(msg)
    for key in ("dt_ns", "t0_ns", "frequency_mhz", "antenna_separation_m"):
        if key in meta and (isinstance(meta[key], bool) or not isinstance(meta[key], int | float)):
            msg = f"{sidecar}: {key} must be a number; got {meta[key]!r}"
            raise FileFormatError(msg)
    for key in ("offsets_m", "positions_m"):
        if key in meta:
            vals = meta[key]
            if not isinstance(vals, list) or not all(
                isinstance(v, int | float) and not isinstance(v, bool) for v in vals
            ):
                msg = f"{sidecar}: {key} must be a list of numbers (m); got {vals!r}"
                raise FileFormatError(msg)
    history = meta.get("history", [])
    if isinstance(history, str):
        history = history.split("\n") if history else []
    if not isinstance(history, list) or not all(isinstance(h, str) for h in history):
        msg = f"{sidecar}: history must be a list of strings; got {history!r}"
        raise FileFormatError(msg)
    meta["history"] = history
    if "attrs" in meta and not isinstance(meta["attrs"], dict):
        msg = f"{sidecar}: 'attrs' must be a table; got {meta['attrs']!r}"
        raise FileFormatError(msg)
    return meta


def read_text(path: Path) -> xr.DataArray:
    sidecar = _sidecar_path(path)
    meta = _read_sidecar(sidecar)
    matrix = _parse_matrix(path)
    dim = "offset" if "offsets_m" in meta else "position"
    coord = np.asarray(meta[f"{dim}s_m"], dtype=float)
    n_tr = coord.size
    rows = meta.get("rows")
    n_samples = meta.get("n_samples")
    if rows is None:
        candidates = []
        if matrix.shape[1] == n_tr:
            candidates.append(("samples", matrix.shape[0]))
        if matrix.shape[0] == n_tr:
            candidates.append(("traces", matrix.shape[1]))
        if not candidates:
            msg = (
                f"{path}: the matrix is {matrix.shape[0]} x {matrix.shape[1]}, but neither its "
                f"rows nor its columns match the {n_tr} {dim}s listed in {sidecar.name}"
            )
            raise FileFormatError(msg)
        fitting = [c for c in candidates if n_samples is None or c[1] == n_samples]
        if not fitting:
            msg = (
                f"{path}: {candidates[0][1]} samples per trace but {sidecar.name} says "
                f"n_samples = {n_samples!r} (truncated file?)"
            )
            raise FileFormatError(msg)
        if len(fitting) > 1:
            msg = (
                f"{sidecar}: the matrix in {path.name} is {matrix.shape[0]} x "
                f"{matrix.shape[1]}, so rows could be samples or traces; add "
                'rows = "samples" or rows = "traces"'
            )
            raise FileFormatError(msg)
        rows = fitting[0][0]
    if rows == "samples":
        data = matrix.T
        what = "columns"
    elif rows == "traces":
        data = matrix
        what = "rows"
    else:
        msg = f"{sidecar}: rows must be 'samples' or 'traces'; got {rows!r}"
        raise FileFormatError(msg)
    if data.shape[0] != n_tr:
        msg = (
            f"{path}: {data.shape[0]} {what} of traces but {sidecar.name} lists {n_tr} "
            f"{dim}s (rows = {rows!r})"
        )
        raise FileFormatError(msg)
    if n_samples is not None and n_samples != data.shape[1]:
        msg = (
            f"{path}: {data.shape[1]} samples per trace but {sidecar.name} says "
            f"n_samples = {n_samples!r} (truncated file?)"
        )
        raise FileFormatError(msg)
    geometry = meta.get("geometry")
    if geometry is not None and geometry not in GEOMETRIES:
        msg = f"{sidecar}: geometry must be one of {list(GEOMETRIES)}; got {geometry!r}"
        raise FileFormatError(msg)
    try:
        da = gather_from_array(
            data,
            **{f"{dim}s": coord},
            dt_ns=meta["dt_ns"],
            t0_ns=meta.get("t0_ns", 0.0),
            frequency_mhz=meta["frequency_mhz"],
            geometry=geometry,
            antenna_separation_m=meta.get("antenna_separation_m"),
            units=meta.get("units", "1"),
            history=meta["history"],
        )
    except InputError as exc:
        msg = f"{path} with {sidecar.name}: inconsistent metadata: {exc}"
        raise FileFormatError(msg) from None
    attrs = dict(da.attrs)
    for key, value in meta.get("attrs", {}).items():
        attrs[key] = value
    da.attrs = attrs
    return finish_read(path, da)
