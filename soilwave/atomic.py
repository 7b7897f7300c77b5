"""Atomic, non-clobbering output: the one place soilwave writes files from.

Every writer in soilwave goes through :func:`atomic_write`: each target is
written to a temporary file in its own folder, then moved into place with
:func:`os.replace`, so a reader never sees a half-written file and an
interrupted run leaves the old file (or none). An existing file is replaced
only when the caller passes ``overwrite=True``; otherwise
:class:`~soilwave.errors.OutputExistsError` names it.
"""

from __future__ import annotations

import os
import uuid
from collections.abc import Callable, Sequence
from pathlib import Path

from soilwave.errors import InputError, OutputExistsError

__all__ = ["atomic_write", "check_target", "write_dataset", "write_text"]


def check_target(path, overwrite: bool) -> Path:
    """Check that ``path`` may be written; return it as a :class:`~pathlib.Path`.

    Raises
    ------
    OutputExistsError
        ``path`` exists and ``overwrite`` is false.
    InputError
        The folder of ``path`` does not exist.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> check_target(d / "new.nc", overwrite=False).name
    'new.nc'
    """
    path = Path(path)
    if path.exists() and not overwrite:
        msg = (
            f"{path} exists; pass overwrite=True (or the command's overwrite option) to replace it"
        )
        raise OutputExistsError(msg)
    if not path.parent.is_dir():
        msg = f"{path}: folder {path.parent} does not exist; create it first"
        raise InputError(msg)
    return path


def _temp_name(path: Path) -> Path:
    return path.with_name(f".{path.stem}.{uuid.uuid4().hex}.tmp{path.suffix}")


def atomic_write(
    paths_and_writers: Sequence[tuple[Path, Callable[[Path], object]]], *, overwrite: bool
) -> None:
    """Write each ``(path, writer)`` pair to a temporary file, then move all into place.

    ``writer(tmp_path)`` must write the complete file to ``tmp_path``. All
    targets are checked before anything is written; temporary files are
    removed if any writer fails.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "a.txt"
    >>> atomic_write([(p, lambda t: t.write_text("hi"))], overwrite=False)
    >>> p.read_text()
    'hi'
    """
    pairs = [(check_target(p, overwrite), w) for p, w in paths_and_writers]
    temps = []
    try:
        for path, writer in pairs:
            tmp = _temp_name(path)
            temps.append(tmp)
            writer(tmp)
        for (path, _), tmp in zip(pairs, temps, strict=True):
            os.replace(tmp, path)
    finally:
        for tmp in temps:
            if tmp.exists():
                tmp.unlink()


def write_text(path, text: str, *, overwrite: bool = False) -> Path:
    """Write UTF-8 ``text`` to ``path`` atomically; return the path.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> p = write_text(pathlib.Path(tempfile.mkdtemp()) / "r.txt", "ok\\n")
    >>> p.read_text()
    'ok\\n'
    """
    path = Path(path)
    atomic_write([(path, lambda t: t.write_text(text, encoding="utf-8"))], overwrite=overwrite)
    return path


def write_dataset(dataset, path, *, overwrite: bool = False) -> Path:
    """Write an :class:`xarray.Dataset` to NetCDF4 (engine ``h5netcdf``) atomically.

    Examples
    --------
    >>> import tempfile, pathlib, xarray as xr
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "d.nc"
    >>> _ = write_dataset(xr.Dataset({"a": ("x", [1.0, 2.0])}), p)
    >>> float(xr.load_dataset(p, engine="h5netcdf")["a"].sum())
    3.0
    """
    path = Path(path)
    atomic_write(
        [(path, lambda t: dataset.to_netcdf(t, engine="h5netcdf", invalid_netcdf=False))],
        overwrite=overwrite,
    )
    return path
