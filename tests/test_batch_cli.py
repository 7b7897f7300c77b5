"""End-to-end tests of ``soilwave batch`` on the command line, including a hard kill.

Acceptance check of the batch feature: a folder of 12 synthetic pick tables
plus one corrupt file, 2 workers; the batch process is killed with SIGKILL
after the first results appear, then the same command is run again. All 12
results must then exist, the ones finished before the kill must not have been
redone (same inode and modification time, no second ``done`` log event), and
the corrupt input must be named in the output, the failure record and the log.
"""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest

import soilwave as sw
from soilwave.cli import _batch_option, main

sys.path.insert(0, str(Path(__file__).parent))
from test_batch import make_pick_folder, stamp


def _cmd(inp: Path, out: Path, *extra: str) -> list[str]:
    return [sys.executable, "-m", "soilwave.cli", "batch", str(inp), "--out", str(out), *extra]


def _events(out: Path) -> list[dict]:
    return [json.loads(x) for x in (out / "batch_log.jsonl").read_text().splitlines()]


def test_option_values_are_toml_literals():
    import argparse

    assert _batch_option("max_steps=4000") == ("max_steps", 4000)
    assert _batch_option("tau_factor=25.5") == ("tau_factor", 25.5)
    assert _batch_option("flag=true") == ("flag", True)
    assert _batch_option("name=uniform") == ("name", "uniform")  # bare word: text
    with pytest.raises(argparse.ArgumentTypeError, match="KEY=VALUE"):
        _batch_option("max_steps")


def test_cli_run_rerun_and_settings_conflict(tmp_path, capsys):
    inp = make_pick_folder(tmp_path / "in", 1)
    out = tmp_path / "out"
    args = ["batch", str(inp), "--out", str(out), "--workers", "0", "--no-progress"]
    assert main([*args, "--invert-option", "max_steps=20000"]) == 1  # one input failed
    text = capsys.readouterr().out
    assert "cmp_bad" in text and "PickTableError" in text
    assert "2 input(s): 1 done (1 in this run), 1 failed" in text
    assert main([*args, "--invert-option", "max_steps=20000"]) == 1
    assert "1 done (0 in this run)" in capsys.readouterr().out
    assert main([*args, "--invert-option", "max_steps=5000"]) == 2
    err = capsys.readouterr().err
    assert "changed: invert_options" in err and "--overwrite" in err


def test_cli_unknown_option_names_it(tmp_path, capsys):
    inp = make_pick_folder(tmp_path / "in", 1, corrupt=False)
    code = main(["batch", str(inp), "--out", str(tmp_path / "o"), "--invert-option", "walkers=8"])
    assert code == 2
    assert "walkers" in capsys.readouterr().err


@pytest.mark.slow
def test_acceptance_kill_hard_then_resume(tmp_path):
    psutil = pytest.importorskip("psutil")
    inp = make_pick_folder(tmp_path / "in", 12, corrupt=True)
    out = tmp_path / "out"
    cmd = _cmd(inp, out, "--workers", "2", "--no-progress")
    proc = subprocess.Popen(cmd, stdout=subprocess.PIPE, stderr=subprocess.PIPE)
    results = out / "results"
    deadline = time.monotonic() + 300
    while not (results.is_dir() and any(results.glob("cmp_*.nc"))):
        assert proc.poll() is None, proc.communicate()
        assert time.monotonic() < deadline, "no result within 300 s"
        time.sleep(0.05)
    workers = psutil.Process(proc.pid).children(recursive=True)
    os.kill(proc.pid, signal.SIGKILL)
    proc.communicate()
    # orphaned pool workers notice that the batch process is gone and stop
    _, alive = psutil.wait_procs(workers, timeout=15)
    assert not alive, alive
    finished = {p.stem: stamp(p) for p in results.glob("cmp_*.nc")}
    assert 1 <= len(finished) < 12, sorted(finished)
    first_run = _events(out)
    assert not any(e["event"] == "end" for e in first_run)  # it really was cut short

    rerun = subprocess.run(cmd, capture_output=True, text=True, timeout=900)
    assert rerun.returncode == 1, rerun.stderr  # 1: some input failed (the corrupt one)
    assert "cmp_bad" in rerun.stdout
    names = [f"cmp_{i:03d}" for i in range(12)]
    assert sorted(p.stem for p in results.glob("*.nc")) == names
    for name, before in finished.items():
        assert stamp(results / f"{name}.nc") == before, f"{name} was redone"
    second_run = _events(out)[len(first_run) :]
    assert second_run[0]["event"] == "start"
    assert second_run[0]["reused"] == len(finished)
    redone = {e["gather"] for e in second_run if e["event"] == "done"}
    assert redone.isdisjoint(finished)
    assert redone | set(finished) == set(names)
    assert [e["gather"] for e in second_run if e["event"] == "failed"] == ["cmp_bad"]
    assert "cmp_bad.csv" in (out / "failed" / "cmp_bad.txt").read_text()
    summary = (out / "summary.csv").read_text()
    assert summary.count(",done,") == 12 and "cmp_bad,cmp_bad.csv,failed" in summary
    for name in names:
        assert sw.read_result(results / f"{name}.nc").converged
