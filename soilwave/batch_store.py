"""The output folder of a batch run: settings, lock, finished results, failures and log.

A batch output folder holds

``batch_settings.json``
    The settings every result in the folder was made with and their SHA-256 hash.
``results/<name>.nc``
    One finished inversion per gather, written atomically (temporary file in the
    same folder, then :func:`os.replace`); its global attributes repeat the
    settings hash, the input file's SHA-256 and the per-gather seed.
``failed/<name>.txt``
    The error of a gather that could not be inverted (bad file, non-convergence,
    a worker process that died), written atomically.
``batch_log.jsonl``
    One JSON object per line and event (run start, gather done, gather failed,
    run end), appended and flushed as it happens.
``summary.csv`` and ``combined.nc``
    Written at the end of each run (see :mod:`soilwave.batch`).

A finished result is reused by a later run only when its settings hash and input
hash match the current ones; a result made with other settings or from a changed
input is never replaced unless the caller asks for it (``overwrite=True``,
command line ``--overwrite``). Only JSON is read from the folder, never pickle.

Examples
--------
>>> h = settings_hash({"seed": 0, "invert_options": {"n_walkers": 16}})
>>> len(h)
64
"""

from __future__ import annotations

import contextlib
import datetime as _dt
import hashlib
import json
import os
import socket
import tempfile
from pathlib import Path

from soilwave.errors import FileFormatError, InputError, OutputExistsError

try:  # POSIX advisory locks; released by the kernel when the process dies
    import fcntl
except ImportError:  # pragma: no cover - Windows
    fcntl = None

__all__ = [
    "BatchStore",
    "atomic_write_text",
    "file_sha256",
    "read_batch_settings",
    "settings_hash",
    "write_batch_settings",
    "write_result_file",
]

SETTINGS_FILE = "batch_settings.json"
LOG_FILE = "batch_log.jsonl"
LOCK_FILE = ".batch.lock"
RESULTS_DIR = "results"
FAILED_DIR = "failed"
SETTINGS_FORMAT = "soilwave batch settings"
SETTINGS_VERSION = 1
#: Largest settings file read (bytes); a real one is a few hundred bytes.
MAX_SETTINGS_BYTES = 1_000_000
#: Global attributes written into every finished result file.
ATTR_SETTINGS_HASH = "soilwave_batch_settings_hash"
ATTR_INPUT_HASH = "soilwave_batch_input_sha256"
ATTR_SEED = "soilwave_batch_seed"
ATTR_INPUT_FILE = "soilwave_batch_input_file"
ATTR_COMPLETE = "soilwave_batch_complete"
_TMP_PREFIX = ".tmp-batch-"


def _canonical_json(obj) -> str:
    return json.dumps(obj, sort_keys=True, separators=(",", ":"), allow_nan=False)


def settings_hash(settings: dict) -> str:
    """SHA-256 (hex) of the canonical JSON form of a settings mapping.

    Parameters
    ----------
    settings : dict
        JSON-serialisable settings (keys sorted before hashing, so order does not matter).

    Returns
    -------
    str
        64 hexadecimal characters.

    Examples
    --------
    >>> settings_hash({"a": 1, "b": 2}) == settings_hash({"b": 2, "a": 1})
    True
    """
    try:
        text = _canonical_json(settings)
    except (TypeError, ValueError) as exc:
        msg = f"batch settings must be plain JSON values (numbers, text, lists, tables): {exc}"
        raise InputError(msg) from exc
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


def file_sha256(path) -> str:
    """SHA-256 (hex) of a file's bytes, read in 1 MiB blocks.

    Examples
    --------
    >>> import pathlib, tempfile
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "x.txt"
    >>> _ = p.write_bytes(b"abc")
    >>> file_sha256(p)[:16]
    'ba7816bf8f01cfea'
    """
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            h.update(block)
    return h.hexdigest()


def _fsync_dir(path: Path) -> None:
    """Flush a directory entry (makes a rename durable on POSIX); no-op elsewhere."""
    if os.name != "posix":  # pragma: no cover
        return
    fd = os.open(path, os.O_RDONLY)
    try:
        os.fsync(fd)
    finally:
        os.close(fd)


def atomic_write_text(path, text: str) -> None:
    """Write ``text`` to ``path`` through a temporary file in the same folder and os.replace."""
    path = Path(path)
    fd, tmp = tempfile.mkstemp(prefix=_TMP_PREFIX, suffix=path.suffix, dir=path.parent)
    try:
        with os.fdopen(fd, "w", encoding="utf-8", newline="") as fh:
            fh.write(text)
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, path)
    except BaseException:
        with contextlib.suppress(OSError):
            os.unlink(tmp)
        raise
    _fsync_dir(path.parent)


def write_batch_settings(path, settings: dict) -> str:
    """Write a batch settings file atomically; return the settings hash.

    Parameters
    ----------
    path : str or path-like
        Destination (``batch_settings.json``); replaced if present.
    settings : dict
        JSON-serialisable settings.

    Returns
    -------
    str
        The SHA-256 settings hash stored beside the settings.

    Examples
    --------
    >>> import pathlib, tempfile
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "batch_settings.json"
    >>> h = write_batch_settings(p, {"seed": 3})
    >>> read_batch_settings(p)["settings"]
    {'seed': 3}
    """
    digest = settings_hash(settings)
    doc = {
        "format": SETTINGS_FORMAT,
        "version": SETTINGS_VERSION,
        "settings_hash": digest,
        "settings": settings,
    }
    atomic_write_text(path, json.dumps(doc, sort_keys=True, indent=2, allow_nan=False) + "\n")
    return digest


def _reject_constant(name):
    msg = f"non-standard JSON number {name!r}"
    raise ValueError(msg)


def read_batch_settings(path) -> dict:
    """Read and check a batch settings file written by :func:`write_batch_settings`.

    Parameters
    ----------
    path : str or path-like
        A ``batch_settings.json`` file.

    Returns
    -------
    dict
        ``{"format", "version", "settings_hash", "settings"}``; the hash has been
        checked against the settings.

    Raises
    ------
    FileFormatError
        The file is missing, too large, not UTF-8 JSON, not a settings document,
        or its hash does not match its settings (edited or corrupted).

    Examples
    --------
    >>> import pathlib, tempfile
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "batch_settings.json"
    >>> _ = p.write_text("not json")
    >>> try:
    ...     read_batch_settings(p)
    ... except FileFormatError as e:
    ...     print("refused")
    refused
    """
    path = Path(path)
    try:
        with open(path, "rb") as fh:
            raw = fh.read(MAX_SETTINGS_BYTES + 1)
    except OSError as exc:
        msg = f"{path}: cannot read batch settings file ({exc.strerror or exc})"
        raise FileFormatError(msg) from exc
    if len(raw) > MAX_SETTINGS_BYTES:
        msg = (
            f"{path}: batch settings file is larger than {MAX_SETTINGS_BYTES} bytes; "
            "expected a small JSON document"
        )
        raise FileFormatError(msg)
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError as exc:
        msg = f"{path}: batch settings file is not UTF-8 text (byte {exc.start}); expected JSON"
        raise FileFormatError(msg) from exc
    try:
        doc = json.loads(text, parse_constant=_reject_constant)
    except RecursionError as exc:
        msg = f"{path}: batch settings file is nested too deeply; expected a flat JSON document"
        raise FileFormatError(msg) from exc
    except ValueError as exc:  # includes json.JSONDecodeError
        msg = f"{path}: batch settings file is not valid JSON ({exc})"
        raise FileFormatError(msg) from exc
    if not isinstance(doc, dict):
        msg = f"{path}: batch settings file holds a JSON {type(doc).__name__}; expected an object"
        raise FileFormatError(msg)
    if doc.get("format") != SETTINGS_FORMAT:
        msg = f"{path}: key 'format' is {doc.get('format')!r}; expected {SETTINGS_FORMAT!r}"
        raise FileFormatError(msg)
    if doc.get("version") != SETTINGS_VERSION or isinstance(doc.get("version"), bool):
        msg = f"{path}: key 'version' is {doc.get('version')!r}; expected {SETTINGS_VERSION}"
        raise FileFormatError(msg)
    settings = doc.get("settings")
    if not isinstance(settings, dict):
        msg = f"{path}: key 'settings' is {type(settings).__name__}; expected a JSON object"
        raise FileFormatError(msg)
    stored = doc.get("settings_hash")
    try:
        actual = settings_hash(settings)
    except (InputError, RecursionError) as exc:
        msg = f"{path}: settings cannot be hashed ({exc})"
        raise FileFormatError(msg) from exc
    if stored != actual:
        msg = (
            f"{path}: key 'settings_hash' is {stored!r} but the settings hash to {actual!r}; "
            "the file was edited or corrupted"
        )
        raise FileFormatError(msg)
    return doc


def write_result_file(
    path, result, attrs: dict, settings_digest: str, *, groups: dict | None = None
) -> Path:
    """Write an inversion result atomically, with batch attributes added to the file.

    The result is written with its own ``to_netcdf`` to a temporary file in the
    destination folder, the attributes (plus the settings hash and a completion
    mark) are added, the file is flushed to disk and then moved into place with
    :func:`os.replace`, so ``path`` either does not exist or is complete.

    Parameters
    ----------
    path : str or path-like
        Destination ``.nc`` file (replaced if present: callers decide).
    result : object
        Anything with ``to_netcdf(path, overwrite=...)``, normally a
        :class:`~soilwave.result.InversionResult`.
    attrs : dict
        Extra global attributes (str or numbers).
    settings_digest : str
        The batch settings hash.
    groups : dict of str to xarray.Dataset, optional
        Extra NetCDF groups added to the file (e.g. the batch's per-gather summary).

    Returns
    -------
    pathlib.Path
        ``path``.
    """
    import h5netcdf

    path = Path(path)
    fd, tmp = tempfile.mkstemp(prefix=_TMP_PREFIX, suffix=".nc", dir=path.parent)
    os.close(fd)
    os.unlink(tmp)  # the writer creates the file itself
    try:
        result.to_netcdf(tmp, overwrite=True)
        for name, ds in (groups or {}).items():
            ds.to_netcdf(tmp, mode="a", group=name, engine="h5netcdf")
        with h5netcdf.File(tmp, "a") as fh:
            for key, value in attrs.items():
                fh.attrs[key] = value
            fh.attrs[ATTR_SETTINGS_HASH] = settings_digest
            fh.attrs[ATTR_COMPLETE] = "yes"
        with open(tmp, "rb+") as fh:
            os.fsync(fh.fileno())
        os.replace(tmp, path)
    except BaseException:
        with contextlib.suppress(OSError):
            os.unlink(tmp)
        raise
    _fsync_dir(path.parent)
    return path


def _now() -> str:
    return _dt.datetime.now(_dt.UTC).isoformat(timespec="seconds")


class BatchStore:
    """The output folder of one batch run (see the module docstring for its layout).

    Use as a context manager: entering creates the folders, takes an exclusive
    lock (a second run on the same folder is refused) and removes temporary files
    left by a killed run; leaving releases the lock.

    Parameters
    ----------
    out_dir : str or path-like
        Output folder (created if missing).
    settings : dict
        JSON-serialisable settings of this run.
    overwrite : bool, default False
        Allow replacing results made with other settings or from changed inputs.

    Examples
    --------
    >>> import tempfile
    >>> with BatchStore(tempfile.mkdtemp(), {"seed": 0}) as store:
    ...     store.result_state("g1", "0" * 64)
    'todo'
    """

    def __init__(self, out_dir, settings: dict, *, overwrite: bool = False):
        self.out_dir = Path(out_dir)
        self.settings = settings
        self.settings_hash = settings_hash(settings)
        self.overwrite = bool(overwrite)
        self.results_dir = self.out_dir / RESULTS_DIR
        self.failed_dir = self.out_dir / FAILED_DIR
        self.log_path = self.out_dir / LOG_FILE
        self.previous_settings_hash: str | None = None
        self._lock_fh = None

    # -- context --------------------------------------------------------------
    def __enter__(self):
        try:
            self.results_dir.mkdir(parents=True, exist_ok=True)
            self.failed_dir.mkdir(exist_ok=True)
        except OSError as exc:
            msg = f"cannot create batch output folder {self.out_dir} ({exc.strerror or exc})"
            raise InputError(msg) from exc
        self._lock()
        try:
            self._remove_temporaries()
            self._check_settings_file()
        except BaseException:
            self._unlock()
            raise
        return self

    def __exit__(self, *exc_info):
        self._unlock()
        return False

    def _lock(self) -> None:
        self._lock_fh = open(self.out_dir / LOCK_FILE, "a+")
        if fcntl is None:  # pragma: no cover
            return
        try:
            fcntl.flock(self._lock_fh.fileno(), fcntl.LOCK_EX | fcntl.LOCK_NB)
        except OSError as exc:
            self._lock_fh.close()
            self._lock_fh = None
            msg = (
                f"another soilwave batch run is writing to {self.out_dir} "
                "(its lock file .batch.lock is held); wait for it or choose another output folder"
            )
            raise OutputExistsError(msg) from exc
        self._lock_fh.seek(0)
        self._lock_fh.truncate()
        self._lock_fh.write(f"{socket.gethostname()} pid {os.getpid()} since {_now()}\n")
        self._lock_fh.flush()

    def _unlock(self) -> None:
        if self._lock_fh is not None:
            if fcntl is not None:
                fcntl.flock(self._lock_fh.fileno(), fcntl.LOCK_UN)
            self._lock_fh.close()
            self._lock_fh = None

    def _remove_temporaries(self) -> None:
        """Delete temporary files a killed run left (safe: we hold the folder's lock)."""
        for folder in (self.out_dir, self.results_dir, self.failed_dir):
            # ours, and those the result writer makes beside ours (".<our name>.<random>.tmp")
            for tmp in folder.glob(".*"):
                if tmp.name.startswith((_TMP_PREFIX, "." + _TMP_PREFIX)) and tmp.is_file():
                    with contextlib.suppress(OSError):
                        tmp.unlink()

    def _check_settings_file(self) -> None:
        path = self.out_dir / SETTINGS_FILE
        if path.exists():
            doc = read_batch_settings(path)
            self.previous_settings_hash = doc["settings_hash"]
            if doc["settings_hash"] != self.settings_hash and not self.overwrite:
                changed = sorted(
                    k
                    for k in set(doc["settings"]) | set(self.settings)
                    if doc["settings"].get(k) != self.settings.get(k)
                )
                msg = (
                    f"{self.out_dir} holds batch results made with other settings "
                    f"(changed: {', '.join(changed)}); rerun with the same settings to resume, "
                    "choose another output folder, or pass overwrite=True "
                    "(command line: --overwrite) to replace them"
                )
                raise OutputExistsError(msg)
        write_batch_settings(path, self.settings)

    # -- results --------------------------------------------------------------
    def result_path(self, name: str) -> Path:
        """Path of the result file of gather ``name``."""
        return self.results_dir / f"{name}.nc"

    def failure_path(self, name: str) -> Path:
        """Path of the failure record of gather ``name``."""
        return self.failed_dir / f"{name}.txt"

    def result_attrs(self, name: str) -> dict | None:
        """Global attributes of a finished result file, or None if missing or unreadable."""
        import h5netcdf

        path = self.result_path(name)
        if not path.exists():
            return None
        try:
            with h5netcdf.File(path, "r") as fh:
                attrs = {k: fh.attrs[k] for k in fh.attrs}
        except Exception:  # any failure to open means the file is not a finished result
            return None
        attrs = {k: (v.decode() if isinstance(v, bytes) else v) for k, v in attrs.items()}
        if attrs.get(ATTR_COMPLETE) != "yes":
            return None
        return attrs

    def result_state(self, name: str, input_sha256: str) -> str:
        """State of gather ``name``'s result.

        Returns
        -------
        str
            ``"done"`` (finished with these settings from this input: reuse),
            ``"todo"`` (no result, or an unreadable/incomplete file), ``"other-settings"``
            or ``"input-changed"`` (a finished result that must not be replaced
            without ``overwrite``).
        """
        attrs = self.result_attrs(name)
        if attrs is None:
            return "todo"
        if attrs.get(ATTR_SETTINGS_HASH) != self.settings_hash:
            return "other-settings"
        if attrs.get(ATTR_INPUT_HASH) != input_sha256:
            return "input-changed"
        return "done"

    def write_result(self, name: str, result, attrs: dict) -> Path:
        """Write a result atomically with batch attributes (see :func:`write_result_file`)."""
        return write_result_file(self.result_path(name), result, attrs, self.settings_hash)

    def write_failure(self, name: str, text: str) -> Path:
        """Record gather ``name``'s failure atomically in ``failed/<name>.txt``."""
        path = self.failure_path(name)
        atomic_write_text(path, text if text.endswith("\n") else text + "\n")
        return path

    def clear_failure(self, name: str) -> None:
        """Remove an earlier failure record of gather ``name`` (it has now finished)."""
        with contextlib.suppress(FileNotFoundError):
            self.failure_path(name).unlink()

    def log(self, event: str, **fields) -> None:
        """Append one JSON line ``{"time", "event", ...}`` to ``batch_log.jsonl`` and flush it."""
        record = {"time": _now(), "event": event, **fields}
        line = json.dumps(record, sort_keys=True, default=str) + "\n"
        with open(self.log_path, "a", encoding="utf-8") as fh:
            fh.write(line)
            fh.flush()
            os.fsync(fh.fileno())
