"""Batch inversion of many gathers: local process pool or dask.distributed, with resume.

:func:`run_batch` inverts every pick table (``*.csv``) in a folder, and with
``gathers=True`` also every recorded gather (auto-picked first), in parallel:

* **Where it runs.** By default a local pool of ``workers`` processes (default:
  the machine's cores), started with the ``spawn`` method and with one
  BLAS/OpenMP thread each (``OMP_NUM_THREADS``, ``OPENBLAS_NUM_THREADS``,
  ``MKL_NUM_THREADS`` ... set to 1 in each worker's environment before it
  imports numpy), so N workers use N cores without oversubscription.
  ``scheduler="tcp://host:8786"`` (or a ``distributed.Client``) sends the
  gathers to a running dask.distributed cluster instead; its nanny already
  starts workers with those variables set to 1 (dask's default
  ``distributed.nanny.pre-spawn-environ``). Workers read the inputs and write
  the results themselves, so input and output folders must be reachable under
  the same paths from every worker (a shared file system). ``workers=0`` runs
  everything in the calling process (for debugging).
* **Seeds.** Each gather's seed comes from the master ``seed`` and the gather's
  file name through :class:`numpy.random.SeedSequence` (:func:`gather_seed`), so
  results depend neither on the number of workers nor on the order of work.
* **Nothing lost.** Each result is written atomically to
  ``OUT_DIR/results/<name>.nc`` by the worker as soon as it finishes. A rerun
  of the same command reuses every finished result whose settings hash and
  input hash match (see :mod:`soilwave.batch_store`) and does the rest. A
  gather that fails (unreadable file, non-convergence, a worker process that
  died) is written to ``OUT_DIR/failed/<name>.txt`` and the log, and the batch
  goes on. Results made with other settings or from changed inputs are never
  replaced unless ``overwrite=True`` (command line ``--overwrite``).
  Ctrl-C stops the workers at once; finished results stay, and the next run
  redoes only the unfinished gathers.
* **Products.** A progress bar; at the end ``OUT_DIR/summary.csv`` (one row per
  gather: status, seed, sampler diagnostics, wall and CPU seconds to read and
  invert it, worker, the worker's peak resident memory in MB, error) and
  ``OUT_DIR/combined.nc``: for every finished gather its posterior summary
  (:meth:`soilwave.result.InversionResult.summary`) on one depth grid (``depth``,
  default 0-3 m every 5 cm) plus per-layer quantiles and diagnostics, along a
  ``gather`` dimension with ``position`` (m) and ``survey_time`` (h)
  coordinates from the manifest or the pick tables where known. Each worker
  computes its gather's part and stores it in the result file (group
  ``batch_summary``), so the final assembly only concatenates.

Manifest (optional, ``manifest=``): a CSV file with columns ``file`` (file name
in the input folder), and optional ``position_m`` (m) and ``survey_time_h``
(elapsed survey time, h), the column names of the pick-table CSV format. It is
deliberately separate from the survey-set manifest of :mod:`soilwave.surveys`,
which requires absolute timestamps and reads every pick table at once (one bad
file would stop the whole batch before it starts).

Examples
--------
>>> gather_seed(0, "line1_0010.csv") == gather_seed(0, "line1_0010.csv")
True
>>> gather_seed(0, "a.csv") != gather_seed(0, "b.csv")
True
"""

from __future__ import annotations

import contextlib
import csv
import dataclasses
import hashlib
import inspect
import math
import os
import time
from pathlib import Path

import numpy as np

from soilwave.batch_store import (
    BatchStore,
    atomic_write_text,
    file_sha256,
)
from soilwave.batch_workers import (
    ATTR_CPU,
    ATTR_DIAG,
    ATTR_PEAK_RSS,
    ATTR_POSITION,
    ATTR_SECONDS,
    ATTR_SURVEY_TIME,
    ATTR_WORKER,
    ROW_GROUP,
    default_inverter,
    run_dask,
    run_local,
    run_serial,
)
from soilwave.errors import FileFormatError, InputError, OutputExistsError

__all__ = ["BatchReport", "gather_seed", "read_batch_manifest", "run_batch"]

#: File name suffixes of pick tables and (with ``gathers=True``) recorded gathers; a
#: ``.txt`` or ``.csv`` file with a TOML sidecar of the same stem is a text gather.
PICK_SUFFIXES = (".csv",)
GATHER_SUFFIXES = (".nc", ".sgy", ".segy")
TEXT_GATHER_SUFFIXES = (".txt", ".csv")
#: Environment variables that cap BLAS/OpenMP threads, set to 1 in every local worker.
SUMMARY_FILE = "summary.csv"
COMBINED_FILE = "combined.nc"
#: Default depth grid of the combined dataset's profiles, m: 0 to 3 m every 5 cm.
DEFAULT_DEPTH = tuple(round(0.05 * i, 10) for i in range(61))

SUMMARY_COLUMNS = (
    "gather",
    "file",
    "status",
    "this_run",
    "seed",
    "converged",
    "acceptance",
    "ess_min",
    "tau_max",
    "seconds",
    "cpu_seconds",
    "worker",
    "peak_rss_mb",
    "position_m",
    "survey_time_h",
    "error",
)


# --- seeds and inputs ------------------------------------------------------------------


def gather_seed(master_seed: int, file_name: str) -> int:
    """Seed of one gather, from the master seed and the gather's file name.

    ``SeedSequence(master_seed, spawn_key=<first 16 bytes of SHA-256(file name)>)``
    gives a stream independent of every other gather's and of the order in
    which gathers are run.

    Parameters
    ----------
    master_seed : int
        Non-negative master seed of the batch.
    file_name : str
        The input's file name (without folder), e.g. ``"cmp_012.csv"``.

    Returns
    -------
    int
        A seed in ``[0, 2**63)``.

    Examples
    --------
    >>> gather_seed(1, "cmp_001.csv") == gather_seed(2, "cmp_001.csv")
    False
    """
    if isinstance(master_seed, bool) or not isinstance(master_seed, int | np.integer):
        msg = f"seed={master_seed!r}; expected a non-negative integer"
        raise InputError(msg)
    if master_seed < 0:
        msg = f"seed={master_seed}; expected a non-negative integer"
        raise InputError(msg)
    digest = hashlib.sha256(str(file_name).encode("utf-8")).digest()
    key = tuple(int.from_bytes(digest[i : i + 4], "little") for i in range(0, 16, 4))
    ss = np.random.SeedSequence(int(master_seed), spawn_key=key)
    return int(ss.generate_state(1, dtype=np.uint64)[0] >> np.uint64(1))


def _manifest_number(text: str, path, row: int, column: str) -> float:
    text = text.strip()
    if text == "":
        return math.nan
    try:
        value = float(text)
    except ValueError:
        msg = f"{path}, row {row}, column {column!r}: {text!r} is not a number"
        raise FileFormatError(msg) from None
    if not math.isfinite(value):
        msg = (
            f"{path}, row {row}, column {column!r}: {text!r} is not finite; "
            "expected a number or an empty cell"
        )
        raise FileFormatError(msg)
    return value


def read_batch_manifest(path) -> dict:
    """Read a batch manifest: which file was measured where and when.

    Parameters
    ----------
    path : str or path-like
        UTF-8 CSV file with a header ``file`` plus optional ``position_m`` (m)
        and ``survey_time_h`` (h); empty cells are unknown values. Lines starting
        with ``#`` before the header are comments.

    Returns
    -------
    dict
        ``{file name: {"position_m": float, "survey_time_h": float}}`` (NaN where unknown).

    Raises
    ------
    FileFormatError
        Unreadable or non-UTF-8 file, missing ``file`` column, unknown column,
        a row with the wrong number of fields, a non-numeric value, a file name
        with a folder part or listed twice (each naming file, row and column).

    Examples
    --------
    >>> import pathlib, tempfile
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "manifest.csv"
    >>> _ = p.write_text("file,position_m,survey_time_h\\ncmp_1.csv,2.5,0\\n")
    >>> read_batch_manifest(p)["cmp_1.csv"]["position_m"]
    2.5
    """
    path = Path(path)
    try:
        raw = path.read_bytes()
    except OSError as exc:
        msg = f"{path}: cannot read manifest ({exc.strerror or exc})"
        raise FileFormatError(msg) from exc
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        msg = f"{path}: manifest is not UTF-8 text (byte {exc.start}); expected CSV"
        raise FileFormatError(msg) from exc
    if "\x00" in text:
        msg = (
            f"{path}: manifest contains a NUL byte at character {text.index(chr(0))}; expected CSV"
        )
        raise FileFormatError(msg)
    lines = text.splitlines()
    i = 0
    while i < len(lines) and (lines[i].strip() == "" or lines[i].lstrip().startswith("#")):
        i += 1
    if i == len(lines):
        msg = f"{path}: empty manifest; expected a header such as 'file,position_m,survey_time_h'"
        raise FileFormatError(msg)
    try:
        rows = list(csv.reader(lines[i:], strict=True))
    except csv.Error as exc:
        msg = f"{path}: manifest is not valid CSV ({exc})"
        raise FileFormatError(msg) from exc
    header = [h.strip() for h in rows[0]]
    allowed = ("file", "position_m", "survey_time_h")
    for col in header:
        if col not in allowed:
            msg = (
                f"{path}, column {col!r}: unknown manifest column; expected one of {list(allowed)}"
            )
            raise FileFormatError(msg)
    if "file" not in header or len(set(header)) != len(header):
        msg = (
            f"{path}: manifest header is {header}; expected a 'file' column and no repeated columns"
        )
        raise FileFormatError(msg)
    out: dict = {}
    for r, row in enumerate(rows[1:], start=1):
        if not row or all(c.strip() == "" for c in row):
            continue
        if len(row) != len(header):
            msg = (
                f"{path}, row {r}: {len(row)} fields; expected {len(header)} as in header {header}"
            )
            raise FileFormatError(msg)
        cells = dict(zip(header, row, strict=True))
        name = cells["file"].strip()
        if name == "" or name != Path(name).name or name in (".", ".."):
            msg = f"{path}, row {r}, column 'file': {name!r}; expected a file name without folder"
            raise FileFormatError(msg)
        if name in out:
            msg = f"{path}, row {r}, column 'file': {name!r} is listed twice"
            raise FileFormatError(msg)
        out[name] = {
            col: _manifest_number(cells[col], path, r, col) if col in cells else math.nan
            for col in ("position_m", "survey_time_h")
        }
    return out


def _discover(input_dir: Path, *, gathers: bool, exclude: set) -> list[tuple[str, Path, str]]:
    """Sorted ``(name, path, kind)`` of the inputs; names (file stems) must be unique."""
    if not input_dir.is_dir():
        msg = f"input folder {input_dir} does not exist or is not a folder"
        raise InputError(msg)
    found: dict[str, tuple[Path, str]] = {}
    for path in sorted(input_dir.iterdir()):
        if not path.is_file() or path.name.startswith(".") or path.resolve() in exclude:
            continue
        suffix = path.suffix.lower()
        if suffix in TEXT_GATHER_SUFFIXES and path.with_suffix(".toml").is_file():
            kind = "gather"  # a text matrix with its TOML sidecar (soilwave.gather_io)
        elif suffix in PICK_SUFFIXES:
            kind = "picks"
        elif suffix in GATHER_SUFFIXES:
            kind = "gather"
        else:
            continue
        if kind == "gather" and not gathers:
            continue
        if path.stem in found:
            msg = (
                f"{path} and {found[path.stem][0]} share the gather name {path.stem!r}; "
                "results are named after the file stem, so rename one of them"
            )
            raise InputError(msg)
        found[path.stem] = (path, kind)
    return [(name, p, kind) for name, (p, kind) in sorted(found.items())]


# --- the batch -------------------------------------------------------------------------


@dataclasses.dataclass
class BatchReport:
    """What :func:`run_batch` did.

    Attributes
    ----------
    out_dir : pathlib.Path
        Output folder.
    summary : pandas.DataFrame
        One row per input (columns :data:`SUMMARY_COLUMNS`), also in ``summary.csv``.
    combined : xarray.Dataset or None
        Posterior summaries of the finished gathers along ``gather`` (also in
        ``combined.nc``); None when no gather finished.
    """

    out_dir: Path
    summary: object
    combined: object

    @property
    def failed(self) -> list[str]:
        """Names of the gathers that failed."""
        return self.summary.loc[self.summary["status"] == "failed", "gather"].tolist()

    @property
    def n_done(self) -> int:
        """Gathers with a finished result (this run or an earlier one)."""
        return int((self.summary["status"] == "done").sum())

    @property
    def n_new(self) -> int:
        """Gathers finished by this run."""
        return int(((self.summary["status"] == "done") & self.summary["this_run"]).sum())


def _jsonable(value, where: str):
    """A JSON form of an option value, for the settings hash; refuse what has none."""
    if value is None or isinstance(value, bool | str):
        return value
    if isinstance(value, int | np.integer):
        return int(value)
    if isinstance(value, float | np.floating):
        value = float(value)
        if not math.isfinite(value):
            msg = f"{where}={value!r}; option values must be finite numbers"
            raise InputError(msg)
        return value
    if isinstance(value, list | tuple | np.ndarray):
        return [_jsonable(v, f"{where}[{i}]") for i, v in enumerate(list(value))]
    if isinstance(value, dict):
        return {str(k): _jsonable(v, f"{where}[{k!r}]") for k, v in value.items()}
    cls = f"{type(value).__module__}.{type(value).__qualname__}"
    if dataclasses.is_dataclass(value) and not isinstance(value, type):
        fields = {f.name: getattr(value, f.name) for f in dataclasses.fields(value)}
        return {"__class__": cls, **_jsonable(fields, where)}
    if callable(getattr(value, "to_attrs", None)):
        return {"__class__": cls, **_jsonable(dict(value.to_attrs()), where)}
    text = repr(value)
    if " at 0x" not in text:  # a repr that states the object's parameters
        return {"__class__": cls, "repr": text}
    msg = (
        f"{where} is a {type(value).__name__} whose settings cannot be recorded in the batch "
        "settings; use numbers, text, lists, dicts, dataclasses (such as soilwave.Priors) or "
        "objects with a to_attrs() method or an informative repr"
    )
    raise InputError(msg)


def _check_options(inverter, options: dict) -> None:
    for reserved in ("seed", "progress"):
        if reserved in options:
            msg = (
                f"invert option {reserved!r} is set by the batch itself; remove it from the options"
            )
            raise InputError(msg)
    try:
        sig = inspect.signature(inverter)
    except (TypeError, ValueError):  # pragma: no cover - builtins
        return
    try:
        sig.bind_partial(None, seed=0, progress=False, **options)
    except TypeError as exc:
        msg = f"inversion options {sorted(options)} do not fit {inverter.__qualname__}{sig}: {exc}"
        raise InputError(msg) from exc


def _name_of(func) -> str:
    return f"{getattr(func, '__module__', '?')}:{getattr(func, '__qualname__', repr(func))}"


def _combine(store: BatchStore, names: list[str], coords: dict):
    """Concatenate the finished gathers' rows (group :data:`ROW_GROUP`) along ``gather``."""
    import xarray as xr

    if not names:
        return None
    parts = []
    for name in names:
        path = store.result_path(name)
        try:
            with xr.open_dataset(path, group=ROW_GROUP, engine="h5netcdf") as ds:
                parts.append(ds.load())
        except Exception as exc:
            msg = (
                f"{path}: group '/{ROW_GROUP}' of a finished result cannot be read "
                f"({type(exc).__name__}: {exc})"
            )
            raise FileFormatError(msg) from exc
    combined = xr.concat(parts, dim="gather", join="outer", combine_attrs="drop")
    combined = combined.assign_coords(
        gather=("gather", np.array(names, dtype=str)),
        position=("gather", np.array([coords[n]["position_m"] for n in names], dtype=float)),
        survey_time=("gather", np.array([coords[n]["survey_time_h"] for n in names], dtype=float)),
    )
    combined["position"].attrs.update(units="m", long_name="position along the profile")
    combined["survey_time"].attrs.update(units="h", long_name="elapsed survey time")
    combined["gather"].attrs.update(long_name="gather name (input file stem)")
    long_names = {
        "batch_acceptance": ("1", "mean acceptance fraction of the sampler"),
        "batch_ess_min": ("1", "smallest bulk effective sample size over parameters"),
        "batch_tau_max": ("1", "largest integrated autocorrelation time, steps"),
        "batch_converged": ("1", "1 if the sampler met its convergence criteria, else 0"),
    }
    for var, (units, long_name) in long_names.items():
        combined[var].attrs.update(units=units, long_name=long_name)
    return combined


def _write_combined(combined, path: Path) -> None:
    import tempfile

    fd, tmp = tempfile.mkstemp(prefix=".tmp-batch-", suffix=".nc", dir=path.parent)
    os.close(fd)
    try:
        combined.to_netcdf(tmp, engine="h5netcdf")
        os.replace(tmp, path)
    except BaseException:
        with contextlib.suppress(OSError):
            os.unlink(tmp)
        raise


def run_batch(
    input_dir,
    out_dir,
    *,
    workers: int | None = None,
    scheduler=None,
    seed: int = 0,
    gathers: bool = False,
    manifest=None,
    invert_options: dict | None = None,
    autopick_options: dict | None = None,
    keep_unconverged: bool = False,
    depth=None,
    overwrite: bool = False,
    progress: bool = True,
    inverter=None,
) -> BatchReport:
    """Invert every pick table (and optionally gather) in a folder, in parallel, resumably.

    Parameters
    ----------
    input_dir : str or path-like
        Folder with pick tables (``*.csv``) and, with ``gathers=True``, gathers
        (``*.nc``, ``*.sgy``, ``*.segy``, or ``*.txt``/``*.csv`` with a ``.toml``
        sidecar of the same stem, which is then not a pick table). Files starting
        with ``.`` are ignored; each input's file stem names its gather and must
        be unique.
    out_dir : str or path-like
        Output folder (created; layout in :mod:`soilwave.batch_store`). Must not
        be ``input_dir``.
    workers : int, optional
        Local worker processes (default ``os.cpu_count()``), one BLAS thread each;
        0 runs in this process. Ignored with ``scheduler``.
    scheduler : str or distributed.Client, optional
        Address of a running dask.distributed scheduler (``"tcp://host:8786"``)
        or a connected client; workers need the same paths to both folders.
    seed : int
        Master seed; each gather's seed is :func:`gather_seed` ``(seed, file name)``.
    gathers : bool
        Also invert recorded gathers, auto-picked with ``soilwave.auto_pick``.
    manifest : str or path-like, optional
        CSV of ``file, position_m, survey_time_h`` (:func:`read_batch_manifest`).
    invert_options : dict, optional
        Keyword options passed to the inversion (e.g. ``{"max_steps": 2000,
        "n_walkers": 16}``); recorded in the settings hash.
    autopick_options : dict, optional
        Keyword options of ``auto_pick`` (with ``gathers=True``).
    keep_unconverged : bool
        Keep results whose sampler did not converge (default: record them as failed).
    depth : array_like, optional
        Depth grid of the profiles in the combined dataset, m (default
        :data:`DEFAULT_DEPTH`, 0 to 3 m every 5 cm); each worker summarises its
        gather on it, so it is part of the settings.
    overwrite : bool
        Replace results made with other settings or from changed inputs.
    progress : bool
        Show a tqdm progress bar.
    inverter : callable, optional
        Replaces ``soilwave.invert`` (a hook for testing and for custom
        inversions): called as ``inverter(picks, seed=..., progress=False,
        **invert_options)``; must return an object with ``diagnostics`` and
        ``to_netcdf(path, overwrite=...)`` readable by ``soilwave.read_result``,
        and be importable by worker processes (a module-level function).

    Returns
    -------
    BatchReport
        Summary table and combined dataset (also written to ``out_dir``).

    Raises
    ------
    InputError
        Missing input folder, clashing gather names, bad options, unreachable scheduler.
    OutputExistsError
        ``out_dir`` holds results made with other settings or from changed inputs
        (pass ``overwrite=True``), or another batch is writing to it.
    FileFormatError
        Unreadable manifest or settings file.

    Examples
    --------
    >>> import soilwave as sw, tempfile
    >>> report = sw.run_batch(tempfile.mkdtemp(), tempfile.mkdtemp(), workers=0, progress=False)
    >>> len(report.summary)
    0
    """
    import pandas as pd
    from tqdm.auto import tqdm

    input_dir, out_dir = Path(input_dir), Path(out_dir)
    if scheduler is None:
        if workers is None:
            workers = os.cpu_count() or 1
        if isinstance(workers, bool) or not isinstance(workers, int | np.integer) or workers < 0:
            msg = f"workers={workers!r}; expected a non-negative integer (0 = run in this process)"
            raise InputError(msg)
    gather_seed(seed, "check")  # validates the seed
    if out_dir.resolve() == input_dir.resolve():
        msg = f"out_dir {out_dir} is the input folder; choose a separate output folder"
        raise InputError(msg)
    inverter_func = inverter if inverter is not None else default_inverter()
    invert_options = dict(invert_options or {})
    autopick_options = dict(autopick_options or {})
    _check_options(inverter_func, invert_options)
    manifest_rows = read_batch_manifest(manifest) if manifest is not None else {}
    exclude = {Path(manifest).resolve()} if manifest is not None else set()
    inputs = _discover(input_dir, gathers=gathers, exclude=exclude)
    unknown = sorted(set(manifest_rows) - {p.name for _, p, _ in inputs})
    if unknown:
        msg = f"manifest {manifest} lists {unknown[0]!r}, which is not an input in {input_dir}"
        raise InputError(msg)
    depth = np.asarray(DEFAULT_DEPTH if depth is None else depth, dtype=float)
    if depth.ndim != 1 or depth.size < 1 or not np.all(np.isfinite(depth)) or np.any(depth < 0):
        msg = f"depth={depth!r}; expected a 1-D grid of finite depths >= 0 m"
        raise InputError(msg)
    if np.any(np.diff(depth) <= 0):
        msg = f"depth={depth!r}; expected strictly increasing depths, m"
        raise InputError(msg)
    settings = {
        "depth_m": [float(z) for z in depth],
        "gathers": bool(gathers),
        "seed": int(seed),
        "invert_options": _jsonable(invert_options, "invert_options"),
        "autopick_options": _jsonable(autopick_options, "autopick_options"),
        "keep_unconverged": bool(keep_unconverged),
        "inverter": _name_of(inverter_func),
    }
    with BatchStore(out_dir, settings, overwrite=overwrite) as store:
        states, jobs, hashes = {}, [], {}
        for name, path, _kind in inputs:
            hashes[name] = file_sha256(path)
            states[name] = store.result_state(name, hashes[name])
        conflicts = [n for n, s in states.items() if s in ("other-settings", "input-changed")]
        if conflicts and not overwrite:
            why = {
                "other-settings": "made with other settings",
                "input-changed": "made from a different version of its input file",
            }
            msg = (
                f"{len(conflicts)} finished result(s) in {store.results_dir} would be replaced, "
                f"e.g. {conflicts[0]!r} ({why[states[conflicts[0]]]}); rerun with the same "
                "settings and inputs, choose another output folder, or pass overwrite=True "
                "(command line: --overwrite) to replace them"
            )
            raise OutputExistsError(msg)
        for name, path, kind in inputs:
            if states[name] == "done":
                continue
            jobs.append(
                {
                    "name": name,
                    "path": str(path),
                    "kind": kind,
                    "seed": gather_seed(seed, path.name),
                    "input_sha256": hashes[name],
                    "invert_options": invert_options,
                    "autopick_options": autopick_options,
                    "keep_unconverged": bool(keep_unconverged),
                    "inverter": inverter,
                    "result_path": str(store.result_path(name)),
                    "depth": depth,
                    "settings_hash": store.settings_hash,
                }
            )
        where = (
            "this process"
            if scheduler is None and workers == 0
            else (
                f"{workers} local worker(s)" if scheduler is None else f"dask scheduler {scheduler}"
            )
        )
        store.log(
            "start",
            inputs=len(inputs),
            todo=len(jobs),
            reused=len(inputs) - len(jobs),
            where=where,
            settings_hash=store.settings_hash,
        )
        records: dict[str, dict] = {}
        bar = tqdm(total=len(jobs), desc="soilwave batch", unit="gather", disable=not progress)

        def on_record(rec: dict) -> None:
            name = rec["gather"]
            records[name] = rec
            if rec["status"] == "done":
                store.clear_failure(name)
                store.log("done", gather=name, seconds=rec.get("seconds"), worker=rec.get("worker"))
            else:
                text = (
                    f"gather: {name}\nfile: {dict((n, p) for n, p, _ in inputs)[name]}\n"
                    f"error_type: {rec.get('error_type', '')}\nerror: {rec.get('error', '')}\n"
                )
                if rec.get("traceback"):
                    text += "\n" + rec["traceback"]
                store.write_failure(name, text)
                if overwrite and states.get(name) in ("other-settings", "input-changed"):
                    with contextlib.suppress(FileNotFoundError):
                        store.result_path(name).unlink()  # stale result of other settings
                store.log(
                    "failed", gather=name, error_type=rec.get("error_type"), error=rec.get("error")
                )
            bar.update(1)
            n_failed = sum(r["status"] != "done" for r in records.values())
            bar.set_postfix(failed=n_failed, refresh=False)

        try:
            if not jobs:
                pass
            elif scheduler is not None:
                run_dask(jobs, scheduler, on_record)
            elif workers == 0:
                run_serial(jobs, on_record)
            else:
                run_local(jobs, min(int(workers), len(jobs)), on_record)
        except KeyboardInterrupt:
            store.log("interrupted", finished=len(records))
            raise
        finally:
            bar.close()

        done = [
            n
            for n, _, _ in inputs
            if states[n] == "done" or records.get(n, {}).get("status") == "done"
        ]
        attrs_of = {n: store.result_attrs(n) or {} for n in done}
        coords = {}
        for name, path, _kind in inputs:
            a = attrs_of.get(name, {})
            c = {
                "position_m": float(a.get(ATTR_POSITION, math.nan)),
                "survey_time_h": float(a.get(ATTR_SURVEY_TIME, math.nan)),
            }
            for key, value in manifest_rows.get(path.name, {}).items():
                if math.isfinite(value):  # the manifest's known values have the last word
                    c[key] = value
            coords[name] = c
        combined = _combine(store, done, coords)
        rows = []
        for name, path, _kind in inputs:
            rec = records.get(name)
            row = {
                "gather": name,
                "file": path.name,
                "seed": gather_seed(seed, path.name),
                "this_run": rec is not None,
                **coords[name],
            }
            if name in attrs_of:
                a = attrs_of[name]
                row.update(
                    status="done",
                    converged=bool(a.get(ATTR_DIAG + "converged", False)),
                    acceptance=float(a.get(ATTR_DIAG + "acceptance", math.nan)),
                    ess_min=float(a.get(ATTR_DIAG + "ess_min", math.nan)),
                    tau_max=float(a.get(ATTR_DIAG + "tau_max", math.nan)),
                    seconds=float(a.get(ATTR_SECONDS, math.nan)),
                    cpu_seconds=float(a.get(ATTR_CPU, math.nan)),
                    worker=str(a.get(ATTR_WORKER, "")),
                    peak_rss_mb=float(a.get(ATTR_PEAK_RSS, math.nan)),
                    error="",
                )
            else:
                rec = rec or {}
                row.update(
                    status="failed",
                    converged=rec.get("converged", False),
                    acceptance=rec.get("acceptance", math.nan),
                    ess_min=rec.get("ess_min", math.nan),
                    tau_max=rec.get("tau_max", math.nan),
                    seconds=rec.get("seconds", math.nan),
                    cpu_seconds=rec.get("cpu_seconds", math.nan),
                    worker=rec.get("worker", ""),
                    peak_rss_mb=rec.get("peak_rss_mb", math.nan),
                    error=f"{rec.get('error_type', '')}: {rec.get('error', '')}",
                )
            rows.append(row)
        summary = pd.DataFrame(rows, columns=list(SUMMARY_COLUMNS))
        atomic_write_text(out_dir / SUMMARY_FILE, summary.to_csv(index=False))
        if combined is not None:
            from soilwave import __version__

            combined.attrs.update(
                title="soilwave batch inversion: posterior summaries per gather",
                soilwave_batch_settings_hash=store.settings_hash,
                failed_gathers=", ".join(r["gather"] for r in rows if r["status"] == "failed"),
                history=(
                    f"{time.strftime('%Y-%m-%dT%H:%M:%S')} soilwave {__version__} "
                    f"run_batch({str(input_dir)!r}, seed={seed})"
                ),
            )
            _write_combined(combined, out_dir / COMBINED_FILE)
        store.log(
            "end",
            done=int((summary["status"] == "done").sum()),
            failed=int((summary["status"] == "failed").sum()),
            new=len([r for r in records.values() if r["status"] == "done"]),
        )
    return BatchReport(out_dir=out_dir, summary=summary, combined=combined)
