"""Batch inversion: seeds, resume, failures, settings protection, local pool and dask.

The pick tables are synthetic: travel times of a two-layer earth from the
forward model (``soilwave.TravelTimeOperator``) plus seeded Gaussian noise.
The truth, velocity 0.10 m/ns in layer 1, is relative permittivity
``(c / v)^2 = 8.988`` (derived from the formula v = c / sqrt(eps), with c from
scipy.constants, CODATA).
"""

from __future__ import annotations

import hashlib
import json
import os
import signal
import warnings
from pathlib import Path

import numpy as np
import pytest
import scipy.constants
import xarray as xr

import soilwave as sw
from soilwave import batch_workers
from soilwave.batch_store import BatchStore, read_batch_settings

V1, V2, H1 = 0.10, 0.08, 0.6  # m/ns, m/ns, m
EPS1_TRUE = (scipy.constants.c * 1e-9 / V1) ** 2  # 8.988, from v = c / sqrt(eps)


def make_pick_folder(folder: Path, n: int, *, seed: int = 100, corrupt: bool = True) -> Path:
    """``n`` synthetic two-layer pick tables (cmp_000.csv ...) and one corrupt file."""
    folder.mkdir(parents=True, exist_ok=True)
    x = np.tile(np.linspace(0.5, 3.0, 8), 2)
    phase = ["ground"] * 8 + ["reflection"] * 8
    iface = [0] * 8 + [1] * 8
    op = sw.TravelTimeOperator(x, phase, iface)
    for i in range(n):
        rng = np.random.default_rng(seed + i)
        t = op([H1 + 0.02 * i], [V1, V2], 0.0)
        picks = sw.make_picks(
            x,
            t + rng.normal(0.0, 0.3, t.shape),
            phase,
            interface=iface,
            sigma=0.3,
            position=np.full(x.size, 1.0 * i),  # m along a line
        )
        sw.write_picks(picks, folder / f"cmp_{i:03d}.csv")
    if corrupt:
        (folder / "cmp_bad.csv").write_bytes(b"offset_m,time_ns,phase\n1.0,\xff\xfe,ground\n")
    return folder


def stamp(path: Path) -> tuple[int, int]:
    st = path.stat()
    return st.st_ino, st.st_mtime_ns


def log_events(out: Path) -> list[dict]:
    return [json.loads(line) for line in (out / "batch_log.jsonl").read_text().splitlines()]


def crashing_inverter(picks, *, seed, progress=False, **options):
    """Test stand-in: dies like an out-of-memory kill on gathers named *crash*."""
    if "crash_me" in str(picks.attrs.get("history", "")):  # read_picks('.../crash_me.csv')
        os.kill(os.getpid(), signal.SIGKILL)
    return sw.invert(picks, seed=seed, progress=progress, **options)


def env_probe(name):
    return os.environ.get(name)


@pytest.fixture(scope="module")
def serial_run(tmp_path_factory):
    """Three good pick tables and a corrupt one, run in this process."""
    base = tmp_path_factory.mktemp("serial")
    inp = make_pick_folder(base / "in", 2)
    (base / "manifest.csv").write_text("file,position_m,survey_time_h\ncmp_000.csv,2.0,1.5\n")
    report = sw.run_batch(
        inp, base / "out", workers=0, seed=11, manifest=base / "manifest.csv", progress=False
    )
    return base, report


# --- seeds -----------------------------------------------------------------------------


def test_gather_seed_follows_seed_sequence_of_file_name():
    # the documented derivation, written out independently
    digest = hashlib.sha256(b"cmp_007.csv").digest()
    key = [int.from_bytes(digest[i : i + 4], "little") for i in range(0, 16, 4)]
    expected = int(np.random.SeedSequence(42, spawn_key=key).generate_state(1, np.uint64)[0]) >> 1
    assert sw.gather_seed(42, "cmp_007.csv") == expected
    names = [f"cmp_{i:03d}.csv" for i in range(200)]
    seeds = [sw.gather_seed(42, n) for n in names]
    assert len(set(seeds)) == 200  # distinct streams
    assert seeds == [sw.gather_seed(42, n) for n in reversed(names)][::-1]  # order-free
    assert sw.gather_seed(43, "cmp_007.csv") != expected
    with pytest.raises(sw.InputError, match="non-negative integer"):
        sw.gather_seed(-1, "a.csv")


# --- a complete run --------------------------------------------------------------------


def test_run_writes_results_failures_summary_and_combined(serial_run):
    base, report = serial_run
    out = base / "out"
    s = report.summary.set_index("gather")
    assert list(s.index) == ["cmp_000", "cmp_001", "cmp_bad"]
    assert (s.loc[["cmp_000", "cmp_001"], "status"] == "done").all()
    assert s.loc["cmp_bad", "status"] == "failed"
    assert "PickTableError" in s.loc["cmp_bad", "error"]
    assert report.failed == ["cmp_bad"] and report.n_done == 2 and report.n_new == 2
    failure = (out / "failed" / "cmp_bad.txt").read_text()
    assert "cmp_bad.csv" in failure and "PickTableError" in failure
    # result files: readable by read_result, with the batch attributes
    for name in ("cmp_000", "cmp_001"):
        res = sw.read_result(out / "results" / f"{name}.nc")
        assert res.seed == sw.gather_seed(11, f"{name}.csv")
        assert res.converged
    attrs = BatchStore(out, {}).result_attrs("cmp_001")
    assert (
        attrs["soilwave_batch_input_sha256"]
        == hashlib.sha256((base / "in" / "cmp_001.csv").read_bytes()).hexdigest()
    )
    settings = read_batch_settings(out / "batch_settings.json")
    assert attrs["soilwave_batch_settings_hash"] == settings["settings_hash"]
    assert settings["settings"]["seed"] == 11
    # summary.csv is the returned table
    import pandas as pd

    on_disk = pd.read_csv(out / "summary.csv")
    assert on_disk["gather"].tolist() == list(s.index)
    assert on_disk["status"].tolist() == s["status"].tolist()


def test_combined_dataset_matches_each_result_and_recovers_truth(serial_run):
    base, _ = serial_run
    out = base / "out"
    combined = xr.open_dataset(out / "combined.nc", engine="h5netcdf").load()
    assert combined.sizes["gather"] == 2
    assert combined["gather"].values.tolist() == ["cmp_000", "cmp_001"]
    # cmp_000: the manifest's position (2 m) overrides the pick table's (0 m);
    # cmp_001 is not listed: position from its pick table, survey time unknown
    np.testing.assert_array_equal(combined["position"].values, [2.0, 1.0])
    np.testing.assert_array_equal(combined["survey_time"].values, [1.5, np.nan])
    assert combined["position"].attrs["units"] == "m"
    assert combined["survey_time"].attrs["units"] == "h"
    for i, name in enumerate(combined["gather"].values):
        res = sw.read_result(out / "results" / f"{name}.nc")
        direct = res.summary(depth=combined["depth"].values)
        np.testing.assert_allclose(
            combined["layer_permittivity"].isel(gather=i).values,
            direct["layer_permittivity"].values,
        )
        np.testing.assert_allclose(
            combined["permittivity"].isel(gather=i).values, direct["permittivity"].values
        )
    med = combined["layer_permittivity"].sel(quantile=0.5, layer=1).values
    # tolerance: 0.3 ns pick noise on 16 picks constrains eps1 to a few percent;
    # 10 % is a loose bound that a wrong forward model or unit slip would break
    np.testing.assert_allclose(med, EPS1_TRUE, rtol=0.10)
    assert (combined["batch_converged"].values == 1).all()


def test_rerun_reuses_finished_results_and_retries_failures(serial_run):
    base, _ = serial_run
    out = base / "out"
    before = {p.name: stamp(p) for p in (out / "results").glob("*.nc")}
    n_events = len(log_events(out))
    report = sw.run_batch(
        base / "in", out, workers=0, seed=11, manifest=base / "manifest.csv", progress=False
    )
    assert {p.name: stamp(p) for p in (out / "results").glob("*.nc")} == before
    assert report.n_new == 0 and report.n_done == 2 and report.failed == ["cmp_bad"]
    assert not report.summary.set_index("gather").loc["cmp_000", "this_run"]
    new = log_events(out)[n_events:]
    assert new[0]["event"] == "start" and new[0]["todo"] == 1 and new[0]["reused"] == 2
    assert [e["gather"] for e in new if e["event"] == "failed"] == ["cmp_bad"]
    assert not [e for e in new if e["event"] == "done"]


# --- protection of finished work -------------------------------------------------------


def test_other_settings_are_refused_unless_overwrite(tmp_path):
    inp = make_pick_folder(tmp_path / "in", 1, corrupt=False)
    out = tmp_path / "out"
    sw.run_batch(inp, out, workers=0, seed=1, progress=False)
    first = stamp(out / "results" / "cmp_000.nc")
    with pytest.raises(
        sw.OutputExistsError, match=r"other settings \(changed: seed\).*--overwrite"
    ):
        sw.run_batch(inp, out, workers=0, seed=2, progress=False)
    assert stamp(out / "results" / "cmp_000.nc") == first
    report = sw.run_batch(inp, out, workers=0, seed=2, overwrite=True, progress=False)
    assert report.n_new == 1
    assert sw.read_result(out / "results" / "cmp_000.nc").seed == sw.gather_seed(2, "cmp_000.csv")


def test_changed_input_is_refused_unless_overwrite(tmp_path):
    inp = make_pick_folder(tmp_path / "in", 1, corrupt=False)
    out = tmp_path / "out"
    sw.run_batch(inp, out, workers=0, progress=False)
    path = inp / "cmp_000.csv"
    path.write_text("# note: re-picked\n" + path.read_text())  # same picks, new file
    with pytest.raises(sw.OutputExistsError, match=r"different version of its input.*overwrite"):
        sw.run_batch(inp, out, workers=0, progress=False)
    assert sw.run_batch(inp, out, workers=0, overwrite=True, progress=False).n_new == 1


def test_incomplete_result_and_leftover_temporaries_are_redone(tmp_path):
    inp = make_pick_folder(tmp_path / "in", 2, corrupt=False)
    out = tmp_path / "out"
    sw.run_batch(inp, out, workers=0, progress=False)
    kept = stamp(out / "results" / "cmp_000.nc")
    broken = out / "results" / "cmp_001.nc"
    broken.write_bytes(broken.read_bytes()[:5000])  # as if cut off by a full disk
    stray = out / "results" / ".tmp-batch-abc.nc"
    stray.write_bytes(b"partial")
    inner = out / "results" / "..tmp-batch-abc.nc.x1y2.tmp"  # the result writer's own temporary
    inner.write_bytes(b"partial")
    report = sw.run_batch(inp, out, workers=0, progress=False)
    assert report.summary.set_index("gather")["this_run"].to_dict() == {
        "cmp_000": False,
        "cmp_001": True,
    }
    assert stamp(out / "results" / "cmp_000.nc") == kept
    assert not stray.exists() and not inner.exists()
    assert sw.read_result(broken).converged


def test_second_run_on_same_folder_is_locked_out(tmp_path):
    with BatchStore(tmp_path / "out", {"seed": 0}):
        with pytest.raises(sw.OutputExistsError, match="another soilwave batch run"):
            with BatchStore(tmp_path / "out", {"seed": 0}):
                pass
    with BatchStore(tmp_path / "out", {"seed": 0}):  # released on exit
        pass


# --- failures --------------------------------------------------------------------------


def test_non_convergence_is_a_failure_unless_kept(tmp_path):
    inp = make_pick_folder(tmp_path / "in", 1, corrupt=False)
    opts = {"max_steps": 100}  # far below 50 autocorrelation times
    report = sw.run_batch(inp, tmp_path / "o1", workers=0, invert_options=opts, progress=False)
    row = report.summary.iloc[0]
    assert row["status"] == "failed" and "NotConverged" in row["error"]
    assert "keep-unconverged" in (tmp_path / "o1" / "failed" / "cmp_000.txt").read_text()
    assert not (tmp_path / "o1" / "results" / "cmp_000.nc").exists()
    kept = sw.run_batch(
        inp,
        tmp_path / "o2",
        workers=0,
        invert_options=opts,
        keep_unconverged=True,
        progress=False,
    )
    assert kept.summary.iloc[0]["status"] == "done"
    assert not kept.summary.iloc[0]["converged"]
    assert int(kept.combined["batch_converged"].item()) == 0


EDGE_CASES = {
    "zero": "offset_m,time_ns,sigma_ns,phase,interface\n",
    "one": "offset_m,time_ns,sigma_ns,phase,interface\n1.0,10.0,0.3,ground,0\n",
    "same_offset": "offset_m,time_ns,sigma_ns,phase,interface\n"
    + "".join(f"1.0,{10 + 0.01 * i},0.3,ground,0\n" for i in range(6)),
    "huge": "offset_m,time_ns,sigma_ns,phase,interface\n1e300,1e300,0.3,ground,0\n"
    "2e300,2e300,0.3,ground,0\n",
    "tiny": "offset_m,time_ns,sigma_ns,phase,interface\n1e-300,1e-300,1e-300,ground,0\n"
    "2e-300,2e-300,1e-300,ground,0\n",
    "nan": "offset_m,time_ns,sigma_ns,phase,interface\n1.0,nan,0.3,ground,0\n",
}


def test_numeric_edge_cases_fail_cleanly_and_the_batch_goes_on(tmp_path):
    inp = make_pick_folder(tmp_path / "in", 1, corrupt=False)
    for name, text in EDGE_CASES.items():
        (inp / f"{name}.csv").write_text(text)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        report = sw.run_batch(
            inp,
            tmp_path / "out",
            workers=0,
            invert_options={"max_steps": 300},  # bounded time; non-convergence is a clean failure
            keep_unconverged=True,
            progress=False,
        )
    s = report.summary.set_index("gather")
    assert s.loc["cmp_000", "status"] == "done"
    soilwave_errors = {c.__name__ for c in vars(sw.errors).values() if isinstance(c, type)}
    for name in EDGE_CASES:
        if s.loc[name, "status"] == "done":  # a valid, if uninformative, table may invert
            assert (
                sw.read_result(tmp_path / "out" / "results" / f"{name}.nc").samples.sizes["sample"]
                > 0
            )
            continue
        error_type = s.loc[name, "error"].split(":")[0]
        failure = (tmp_path / "out" / "failed" / f"{name}.txt").read_text()
        assert error_type in soilwave_errors | {"NotConverged"}, (name, failure)
        assert "Traceback" not in failure, (name, failure)


@pytest.mark.slow
def test_worker_that_dies_is_recorded_and_the_rest_complete(tmp_path):
    inp = make_pick_folder(tmp_path / "in", 1, corrupt=False)
    (inp / "crash_me.csv").write_bytes((inp / "cmp_000.csv").read_bytes())
    report = sw.run_batch(
        inp, tmp_path / "out", workers=2, inverter=crashing_inverter, progress=False
    )
    s = report.summary.set_index("gather")
    assert s.loc["crash_me", "status"] == "failed"
    assert "WorkerDied" in s.loc["crash_me", "error"]
    assert s.loc["cmp_000", "status"] == "done"
    settings = read_batch_settings(tmp_path / "out" / "batch_settings.json")["settings"]
    assert settings["inverter"].endswith(":crashing_inverter")


def test_gathers_are_auto_picked_and_inverted(tmp_path):
    """NetCDF, SEG-Y and text+TOML gathers go through auto_pick; a broken one fails alone."""
    pytest.importorskip("segyio")
    from soilwave.gather_io import write_gather

    # ground wave in layer 1 of permittivity 9 (the synthetic model's truth)
    g = sw.synthetic_gather(
        {"permittivity": [9.0, 16.0], "thickness": [0.6]},
        offsets=np.linspace(0.3, 3.0, 19),
        dt_ns=0.1,
        n_samples=600,
        frequency_mhz=250.0,
        noise=0.02,
        rng=3,
    )
    inp = tmp_path / "in"
    inp.mkdir()
    for name in ("a.nc", "b.sgy", "c.txt"):
        write_gather(g, inp / name)
    (inp / "d.sgy").write_bytes(b"\x00" * 400)
    empty = sw.run_batch(inp, tmp_path / "picks_only", workers=0, progress=False)
    assert len(empty.summary) == 0  # c.txt/c.toml is a gather, not a pick table
    report = sw.run_batch(inp, tmp_path / "out", workers=0, gathers=True, progress=False)
    s = report.summary.set_index("gather")
    assert s["status"].to_dict() == {"a": "done", "b": "done", "c": "done", "d": "failed"}
    assert s.loc["d", "error"].startswith("FileFormatError")
    med = report.combined["layer_permittivity"].sel(quantile=0.5, layer=1).values
    # tolerance 5 %: 19 ground-wave picks on a low-noise synthetic gather
    np.testing.assert_allclose(med, 9.0, rtol=0.05)


# --- inputs and options ----------------------------------------------------------------


def test_bad_options_and_inputs_are_refused(tmp_path):
    inp = make_pick_folder(tmp_path / "in", 1, corrupt=False)
    out = tmp_path / "out"
    with pytest.raises(sw.InputError, match="max_stepz"):
        sw.run_batch(inp, out, workers=0, invert_options={"max_stepz": 10})
    with pytest.raises(sw.InputError, match="'seed' is set by the batch"):
        sw.run_batch(inp, out, workers=0, invert_options={"seed": 3})
    with pytest.raises(sw.InputError, match="workers=-1"):
        sw.run_batch(inp, out, workers=-1)
    with pytest.raises(sw.InputError, match="is the input folder"):
        sw.run_batch(inp, inp, workers=0)
    with pytest.raises(sw.InputError, match="does not exist"):
        sw.run_batch(tmp_path / "nope", out, workers=0)
    (tmp_path / "m.csv").write_text("file,position_m\nother.csv,1\n")
    with pytest.raises(sw.InputError, match=r"'other\.csv', which is not an input"):
        sw.run_batch(inp, out, workers=0, manifest=tmp_path / "m.csv")
    (tmp_path / "m.csv").write_text("file,position_m\ncmp_000.csv,east\n")
    with pytest.raises(sw.FileFormatError, match="row 1, column 'position_m': 'east'"):
        sw.run_batch(inp, out, workers=0, manifest=tmp_path / "m.csv")
    (inp / "cmp_000.nc").write_bytes(b"")
    with pytest.raises(sw.InputError, match="share the gather name 'cmp_000'"):
        sw.run_batch(inp, out, workers=0, gathers=True)
    assert not (out / "results").exists()  # nothing started


def test_priors_object_is_recorded_in_settings(tmp_path):
    inp = make_pick_folder(tmp_path / "in", 1, corrupt=False)
    opts = {"priors": sw.Priors(max_thickness=3.0)}
    sw.run_batch(inp, tmp_path / "out", workers=0, invert_options=opts, progress=False)
    recorded = read_batch_settings(tmp_path / "out" / "batch_settings.json")["settings"]
    assert recorded["invert_options"]["priors"]["max_thickness"] == 3.0
    with pytest.raises(sw.OutputExistsError, match="changed: invert_options"):
        sw.run_batch(
            inp,
            tmp_path / "out",
            workers=0,
            invert_options={"priors": sw.Priors(max_thickness=4.0)},
            progress=False,
        )


def test_unreachable_scheduler_is_an_input_error(tmp_path, monkeypatch):
    pytest.importorskip("distributed")
    monkeypatch.setattr(batch_workers, "SCHEDULER_TIMEOUT_S", 2)
    inp = make_pick_folder(tmp_path / "in", 1, corrupt=False)
    with pytest.raises(sw.InputError, match=r"cannot connect to the dask.*127\.0\.0\.1:9"):
        sw.run_batch(inp, tmp_path / "out", scheduler="tcp://127.0.0.1:9", progress=False)


# --- parallel back ends ----------------------------------------------------------------


def test_local_pool_workers_have_one_blas_thread():
    before = os.environ.get("OPENBLAS_NUM_THREADS")
    pool = batch_workers._local_executor(1)
    try:
        values = [pool.submit(env_probe, k).result() for k in batch_workers.THREAD_ENV]
    finally:
        pool.shutdown()
    assert values == ["1"] * len(batch_workers.THREAD_ENV)
    assert os.environ.get("OPENBLAS_NUM_THREADS") == before  # the caller's env is untouched


@pytest.mark.slow
def test_results_do_not_depend_on_workers_or_scheduler(tmp_path):
    """1 worker, 2 workers and a dask LocalCluster give bit-identical posterior draws."""
    distributed = pytest.importorskip("distributed")
    inp = make_pick_folder(tmp_path / "in", 3, corrupt=True)
    one = sw.run_batch(inp, tmp_path / "w1", workers=1, seed=5, progress=False)
    two = sw.run_batch(inp, tmp_path / "w2", workers=2, seed=5, progress=False)
    with distributed.LocalCluster(
        n_workers=2, threads_per_worker=1, processes=True, dashboard_address=None
    ) as cluster:
        dask_report = sw.run_batch(
            inp, tmp_path / "dk", scheduler=cluster.scheduler_address, seed=5, progress=False
        )
    for report in (one, two, dask_report):
        assert report.n_done == 3 and report.failed == ["cmp_bad"]
    assert {w.split(":")[1] for w in two.summary["worker"] if w} != set()
    for name in ("cmp_000", "cmp_001", "cmp_002"):
        ref = sw.read_result(tmp_path / "w1" / "results" / f"{name}.nc").samples
        for other in ("w2", "dk"):
            got = sw.read_result(tmp_path / other / "results" / f"{name}.nc").samples
            np.testing.assert_array_equal(got["permittivity"].values, ref["permittivity"].values)
            np.testing.assert_array_equal(got["thickness"].values, ref["thickness"].values)
    xr.testing.assert_identical(one.combined.drop_attrs(), dask_report.combined.drop_attrs())
