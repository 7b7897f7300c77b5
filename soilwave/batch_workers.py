"""Running batch jobs: the work done for one gather, and the executors that run it.

Three back ends run the same job function :func:`run_job` (one gather: read,
optionally auto-pick, invert, write the result atomically): a local pool of
spawn-started processes with one BLAS/OpenMP thread each, a dask.distributed
cluster, or the calling process (``workers=0``). :mod:`soilwave.batch`
decides what to run and gathers the records these return.
"""

from __future__ import annotations

import contextlib
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
    write_result_file,
)
from soilwave.errors import InputError, SoilwaveError

__all__ = [
    "THREAD_ENV",
    "default_inverter",
    "run_dask",
    "run_job",
    "run_local",
    "run_serial",
]

THREAD_ENV = {
    "OMP_NUM_THREADS": "1",
    "OPENBLAS_NUM_THREADS": "1",
    "MKL_NUM_THREADS": "1",
    "VECLIB_MAXIMUM_THREADS": "1",
    "NUMEXPR_NUM_THREADS": "1",
}
#: Seconds to wait for a dask scheduler to answer.
SCHEDULER_TIMEOUT_S = 20
ATTR_SECONDS = "soilwave_batch_seconds"
ATTR_WORKER = "soilwave_batch_worker"
ATTR_PEAK_RSS = "soilwave_batch_peak_rss_mb"
ATTR_CPU = "soilwave_batch_cpu_seconds"
ATTR_DIAG = "soilwave_batch_"  # + converged, acceptance, ess_min, tau_max
ATTR_POSITION = "soilwave_batch_position_m"
ATTR_SURVEY_TIME = "soilwave_batch_survey_time_h"
#: NetCDF group of each result file holding the gather's row of the combined dataset.
ROW_GROUP = "batch_summary"

# --- work done in a worker -------------------------------------------------------------


def default_inverter():
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


def run_job(job: dict) -> dict:
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
        inverter = job["inverter"] or default_inverter()
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


def run_local(jobs, n_workers, on_record):
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
            futures = {pool.submit(run_job, job): name for name, job in pending.items()}
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
            rec = pool.submit(run_job, job).result()
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


def run_serial(jobs, on_record):
    for job in jobs:
        on_record(run_job(job))


def run_dask(jobs, scheduler, on_record):
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
                run_job, job, pure=False, key=f"soilwave-batch-{job['name']}-{os.urandom(4).hex()}"
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
