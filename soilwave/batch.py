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
import multiprocessing.context as _mpc
import os
import socket
import sys
import threading
import time
import traceback
import warnings
from concurrent.futures import ProcessPoolExecutor
from concurrent.futures import as_completed as _as_completed
from concurrent.futures.process import BrokenProcessPool
from pathlib import Path

import numpy as np

from soilwave.batch_store import (
    ATTR_INPUT_FILE,
    ATTR_INPUT_HASH,
    ATTR_SEED,
    BatchStore,
    atomic_write_text,
    file_sha256,
    write_result_file,
)
from soilwave.errors import FileFormatError, InputError, OutputExistsError, SoilwaveError

__all__ = ["BatchReport", "gather_seed", "read_batch_manifest", "run_batch"]

#: File name suffixes of pick tables and (with ``gathers=True``) recorded gathers; a
#: ``.txt`` or ``.csv`` file with a TOML sidecar of the same stem is a text gather.
PICK_SUFFIXES = (".csv",)
GATHER_SUFFIXES = (".nc", ".sgy", ".segy")
TEXT_GATHER_SUFFIXES = (".txt", ".csv")
#: Environment variables that cap BLAS/OpenMP threads, set to 1 in every local worker.
THREAD_ENV = {
    "OMP_NUM_THREADS": "1",
    "OPENBLAS_NUM_THREADS": "1",
    "MKL_NUM_THREADS": "1",
    "VECLIB_MAXIMUM_THREADS": "1",
    "NUMEXPR_NUM_THREADS": "1",
}
#: Seconds to wait for a dask scheduler to answer.
SCHEDULER_TIMEOUT_S = 20
SUMMARY_FILE = "summary.csv"
COMBINED_FILE = "combined.nc"
ATTR_SECONDS = "soilwave_batch_seconds"
ATTR_WORKER = "soilwave_batch_worker"
ATTR_PEAK_RSS = "soilwave_batch_peak_rss_mb"
ATTR_CPU = "soilwave_batch_cpu_seconds"
ATTR_DIAG = "soilwave_batch_"  # + converged, acceptance, ess_min, tau_max
ATTR_POSITION = "soilwave_batch_position_m"
ATTR_SURVEY_TIME = "soilwave_batch_survey_time_h"
#: NetCDF group of each result file holding the gather's row of the combined dataset.
ROW_GROUP = "batch_summary"
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


# --- work done in a worker -------------------------------------------------------------


def _default_inverter():
    from soilwave.inversion import invert

    return invert


def _peak_rss_mb() -> float:
    try:
        import resource
    except ImportError:  # pragma: no cover - Windows
        return math.nan
    rss = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    return rss / 1024.0 if sys.platform != "darwin" else rss / 2**20  # KiB on Linux, bytes on macOS


def _scalar(value, how) -> float:
    try:
        arr = np.asarray(value, dtype=float)
    except (TypeError, ValueError):
        return math.nan
    if arr.size == 0 or not np.isfinite(arr).any():
        return math.nan
    return float(how(arr[np.isfinite(arr)]))


def _diagnostic_fields(diagnostics) -> dict:
    d = dict(diagnostics or {})
    return {
        "converged": bool(d.get("converged", False)),
        "acceptance": _scalar(d.get("acceptance", math.nan), np.mean),
        "ess_min": _scalar(d.get("ess", math.nan), np.min),
        "tau_max": _scalar(d.get("tau", math.nan), np.max),
    }


def _picks_coords(picks) -> dict:
    """Position (m) and survey time (h) of a pick table when constant over its picks."""
    out = {"position_m": math.nan, "survey_time_h": math.nan}
    for var, key in (("position", "position_m"), ("survey_time", "survey_time_h")):
        if var in picks:
            v = np.asarray(picks[var].values, dtype=float)
            v = v[np.isfinite(v)]
            if v.size and np.all(v == v[0]):
                out[key] = float(v[0])
    return out


def _gather_row(result, diag: dict, depth) -> object:
    """The gather's row of the combined dataset: posterior summary on the batch depth grid."""
    row = result.summary(depth=np.asarray(depth, dtype=float))
    row.attrs = {}
    for key in ("acceptance", "ess_min", "tau_max"):
        row[f"batch_{key}"] = ((), float(diag[key]))
    row["batch_converged"] = ((), np.int8(diag["converged"]))
    return row


def _run_job(job: dict) -> dict:
    """Invert one gather and write its result; never raises (errors are returned)."""
    t0, c0 = time.perf_counter(), time.process_time()
    rec = {
        "gather": job["name"],
        "worker": f"{socket.gethostname()}:{os.getpid()}",
        "status": "failed",
        "error": "",
        "error_type": "",
        "traceback": "",
    }
    try:
        if job["kind"] == "picks":
            from soilwave.picks import read_picks

            picks = read_picks(job["path"])
        else:
            from soilwave.autopick import auto_pick
            from soilwave.gather_io import read_gather

            picks = auto_pick(read_gather(job["path"]), **job["autopick_options"])
        inverter = job["inverter"] or _default_inverter()
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")  # convergence is judged from the diagnostics
            result = inverter(picks, seed=job["seed"], progress=False, **job["invert_options"])
        diag = _diagnostic_fields(result.diagnostics)
        rec.update(diag)
        if not rec["converged"] and not job["keep_unconverged"]:
            reason = dict(result.diagnostics).get("reason", "")
            rec["error_type"] = "NotConverged"
            rec["error"] = (
                f"the sampler did not converge ({reason or 'see diagnostics'}; "
                f"ess_min={rec['ess_min']:.3g}, tau_max={rec['tau_max']:.3g}, "
                f"acceptance={rec['acceptance']:.3g}); raise max_steps, or pass "
                "keep_unconverged=True (command line: --keep-unconverged) to keep such results"
            )
        else:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                row = _gather_row(result, diag, job["depth"])
            coords = _picks_coords(picks)
            rec["seconds"] = time.perf_counter() - t0
            rec["cpu_seconds"] = time.process_time() - c0
            rec["peak_rss_mb"] = _peak_rss_mb()
            attrs = {
                ATTR_INPUT_HASH: job["input_sha256"],
                ATTR_INPUT_FILE: Path(job["path"]).name,
                ATTR_SEED: str(job["seed"]),
                ATTR_SECONDS: rec["seconds"],
                ATTR_CPU: rec["cpu_seconds"],
                ATTR_WORKER: rec["worker"],
                ATTR_PEAK_RSS: rec["peak_rss_mb"],
                ATTR_POSITION: coords["position_m"],
                ATTR_SURVEY_TIME: coords["survey_time_h"],
                **{ATTR_DIAG + k: (np.int8(v) if k == "converged" else v) for k, v in diag.items()},
            }
            write_result_file(
                job["result_path"],
                result,
                attrs,
                job["settings_hash"],
                groups={ROW_GROUP: row},
            )
            rec["status"] = "done"
    except Exception as exc:  # every failure of one gather is recorded, the batch goes on
        rec["error_type"] = type(exc).__name__
        rec["error"] = str(exc) or repr(exc)
        if not isinstance(exc, SoilwaveError):
            rec["traceback"] = traceback.format_exc()
    rec.setdefault("seconds", time.perf_counter() - t0)
    rec.setdefault("cpu_seconds", time.process_time() - c0)
    rec.setdefault("peak_rss_mb", _peak_rss_mb())
    return rec


# --- local process pool ----------------------------------------------------------------


@contextlib.contextmanager
def _environ(values: dict):
    old = {k: os.environ.get(k) for k in values}
    os.environ.update(values)
    try:
        yield
    finally:
        for k, v in old.items():
            if v is None:
                os.environ.pop(k, None)
            else:
                os.environ[k] = v


class _OneThreadProcess(_mpc.SpawnProcess):
    """A spawned process whose environment caps BLAS/OpenMP threads at one."""

    def start(self):
        with _environ(THREAD_ENV):
            super().start()


class _OneThreadContext(_mpc.SpawnContext):
    Process = _OneThreadProcess


def _watch_parent(parent_pid: int) -> None:
    while True:
        if os.getppid() != parent_pid:
            os._exit(1)  # the batch process is gone: stop, it cannot record our work
        time.sleep(0.5)


def _worker_init(parent_pid: int) -> None:
    os.environ.update(THREAD_ENV)
    with contextlib.suppress(ImportError):
        from threadpoolctl import threadpool_limits

        threadpool_limits(1)
    threading.Thread(target=_watch_parent, args=(parent_pid,), daemon=True).start()


def _local_executor(n_workers: int) -> ProcessPoolExecutor:
    """A spawn-context process pool with one BLAS/OpenMP thread per worker."""
    return ProcessPoolExecutor(
        max_workers=n_workers,
        mp_context=_OneThreadContext(),
        initializer=_worker_init,
        initargs=(os.getpid(),),
    )


def _died(name: str) -> dict:
    return {
        "gather": name,
        "status": "failed",
        "error_type": "WorkerDied",
        "error": (
            "the worker process died (killed, or out of memory) while inverting this gather "
            "alone; the other gathers were not affected"
        ),
    }


def _run_local(jobs, n_workers, on_record):
    """Run jobs in a local pool; isolate the gathers in flight when worker processes die.

    When a worker dies the pool breaks and every gather then in flight is a
    suspect. The other gathers go on in a new pool; each suspect is run again
    alone, and one whose worker dies again while it runs alone is recorded as
    failed (``WorkerDied``).
    """
    pending = {job["name"]: job for job in jobs}
    suspects = []
    while pending:
        pool = _local_executor(n_workers)
        try:
            futures = {pool.submit(_run_job, job): name for name, job in pending.items()}
            try:
                for fut in _as_completed(futures):
                    name = futures[fut]
                    rec = fut.result()
                    on_record(rec)
                    pending.pop(name)
            except BrokenProcessPool:
                in_flight = [futures[f] for f in futures if f.running() or f.done()]
                for name in in_flight or list(pending):
                    if name in pending:
                        suspects.append(pending.pop(name))
        except BaseException:
            _stop_workers(pool)  # Ctrl-C or an error here: do not finish queued gathers
            raise
        finally:
            pool.shutdown(wait=True, cancel_futures=True)
    for job in suspects:
        pool = _local_executor(1)
        try:
            rec = pool.submit(_run_job, job).result()
        except BrokenProcessPool:
            rec = _died(job["name"])
        except BaseException:
            _stop_workers(pool)
            raise
        finally:
            pool.shutdown(wait=True, cancel_futures=True)
        on_record(rec)


def _stop_workers(pool: ProcessPoolExecutor) -> None:
    """Terminate a pool's worker processes (their unfinished gathers are simply redone later).

    ``ProcessPoolExecutor`` workers catch ``KeyboardInterrupt`` inside a task and go
    on with the next one, and Python 3.11 has no public way to stop them, hence
    the private ``_processes`` mapping (read defensively).
    """
    for proc in list((getattr(pool, "_processes", None) or {}).values()):
        with contextlib.suppress(Exception):
            proc.terminate()


def _run_serial(jobs, on_record):
    for job in jobs:
        on_record(_run_job(job))


def _run_dask(jobs, scheduler, on_record):
    try:
        from distributed import Client, as_completed
    except ImportError as exc:
        msg = "scheduler= needs dask.distributed; install the extra: pip install 'soilwave[dask]'"
        raise InputError(msg) from exc
    own = not isinstance(scheduler, Client)
    if own:
        try:
            client = Client(scheduler, timeout=f"{SCHEDULER_TIMEOUT_S}s")
        except (OSError, TimeoutError, ValueError) as exc:
            msg = (
                f"cannot connect to the dask scheduler at {scheduler!r} ({exc}); "
                "expected the address of a running scheduler, like tcp://host:8786"
            )
            raise InputError(msg) from exc
    else:
        client = scheduler
    futures = {}
    try:
        futures = {
            client.submit(
                _run_job, job, pure=False, key=f"soilwave-batch-{job['name']}-{os.urandom(4).hex()}"
            ): job
            for job in jobs
        }
        for fut in as_completed(list(futures)):
            job = futures[fut]
            try:
                rec = fut.result()
            except Exception as exc:  # KilledWorker, lost connection to a worker ...
                rec = {
                    "gather": job["name"],
                    "status": "failed",
                    "error_type": type(exc).__name__,
                    "error": f"the dask task failed ({exc})",
                }
            on_record(rec)
            fut.release()
    except BaseException:
        with contextlib.suppress(Exception):
            client.cancel(list(futures))  # queued gathers are not started; running ones end
        raise
    finally:
        if own:
            client.close()


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
    inverter_func = inverter if inverter is not None else _default_inverter()
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
                _run_dask(jobs, scheduler, on_record)
            elif workers == 0:
                _run_serial(jobs, on_record)
            else:
                _run_local(jobs, min(int(workers), len(jobs)), on_record)
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
