"""Property-based fuzzing of every reader of user files (hypothesis).

Each reader, given arbitrary bytes, a corrupted copy of a valid file or a
well-formed file full of numeric edge cases, must either return a complete,
valid object or raise soilwave's own error (a ``SoilwaveError`` subclass):
never another exception, never a hang (each call runs under a 20 s alarm)
and never a partial result (returned objects pass the package's validators).

Readers covered: ``read_picks`` (CSV pick tables), ``read_gather`` (NetCDF,
SEG-Y, text matrix + TOML sidecar), ``read_survey_set`` (CSV and TOML survey
manifests), ``read_batch_manifest`` and ``read_batch_settings``.

Example counts are modest (``max_examples`` 40-80) and derandomised (fixed
seed) so the suite stays fast and reproducible.
"""

from __future__ import annotations

import contextlib
import signal
import tempfile
import warnings
from pathlib import Path

import numpy as np
import pytest
from hypothesis import HealthCheck, example, given, settings
from hypothesis import strategies as st

import soilwave as sw
from soilwave import gather_io, surveys
from soilwave import picks as picks_mod
from soilwave.errors import SoilwaveError

FUZZ = settings(
    max_examples=60,
    deadline=None,
    derandomize=True,
    suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large],
)
HANG_SECONDS = 20


class ReaderHang(Exception):
    """A reader ran longer than HANG_SECONDS."""


@contextlib.contextmanager
def _alarm(seconds: int):
    def handler(signum, frame):
        raise ReaderHang(f"reader still running after {seconds} s")

    old = signal.signal(signal.SIGALRM, handler)
    signal.setitimer(signal.ITIMER_REAL, seconds)
    try:
        yield
    finally:
        signal.setitimer(signal.ITIMER_REAL, 0)
        signal.signal(signal.SIGALRM, old)


def _read(reader, *args, **kwargs):
    """Call a reader; return its output or None if it raised a SoilwaveError.

    Any other exception propagates and fails the test with the input that caused it.
    """
    with _alarm(HANG_SECONDS), warnings.catch_warnings():
        warnings.simplefilter("ignore")
        try:
            return reader(*args, **kwargs)
        except SoilwaveError:
            return None


def _mutate(data: bytes, draw) -> bytes:
    """Corrupt valid bytes: truncate, flip bytes, insert or delete a run."""
    kind = draw(st.sampled_from(["truncate", "flip", "insert", "delete", "zero"]))
    n = len(data)
    i = draw(st.integers(0, max(n - 1, 0)))
    if kind == "truncate":
        return data[:i]
    if kind == "flip":
        k = draw(st.integers(1, 8))
        out = bytearray(data)
        for j in range(i, min(i + k, n)):
            out[j] ^= draw(st.integers(1, 255))
        return bytes(out)
    if kind == "insert":
        return data[:i] + draw(st.binary(min_size=1, max_size=64)) + data[i:]
    if kind == "delete":
        return data[:i] + data[i + draw(st.integers(1, 64)) :]
    k = draw(st.integers(1, 512))
    return data[:i] + b"\x00" * min(k, n - i) + data[i + k :]


# --- pick tables -----------------------------------------------------------------------

NUMBER_CELLS = st.one_of(
    st.sampled_from(
        ["", "nan", "NaN", "inf", "-inf", "1e308", "1e-308", "1e400", "-0", "0", "5e-324", "x"]
    ),
    st.floats(allow_nan=True, allow_infinity=True).map(repr),
    st.integers(-(10**30), 10**30).map(str),
)
PHASE_CELLS = st.one_of(st.sampled_from(list(picks_mod.PHASES)), st.text(max_size=8))
COLUMNS = ["offset_m", "time_ns", "sigma_ns", "phase", "interface", "amplitude", "position_m"]
VALID_PICKS = (
    b"# frequency_mhz: 250\noffset_m,time_ns,sigma_ns,phase,interface\n"
    b"0.5,1.70,0.4,air,\n1.0,3.40,0.4,air,\n0.5,5.00,0.4,ground,\n"
    b"1.0,10.0,0.4,ground,\n0.5,20.65,0.5,reflection,1\n1.0,21.2,0.5,reflection,1\n"
)


def _check_picks(out):
    if out is not None:
        assert out.sizes["pick"] >= 1
        picks_mod.validate_picks(out)  # complete and valid, not a partial table


def _write(folder: str, name: str, data: bytes) -> Path:
    path = Path(folder) / name
    path.write_bytes(data)
    return path


@FUZZ
@given(st.binary(max_size=3000))
@example(b"offset_m,time_ns,phase\n\x00\n")
@example(b"offset_m,time_ns,phase\n" + b"1" * 200_000 + b",1,air\n")
def test_read_picks_arbitrary_bytes(data):
    with tempfile.TemporaryDirectory() as d:
        _check_picks(_read(sw.read_picks, _write(d, "p.csv", data)))


@FUZZ
@given(st.data())
def test_read_picks_corrupted_valid_file(data):
    with tempfile.TemporaryDirectory() as d:
        corrupted = _mutate(VALID_PICKS, data.draw)
        _check_picks(_read(sw.read_picks, _write(d, "p.csv", corrupted)))


@FUZZ
@given(
    header=st.lists(st.sampled_from(COLUMNS), min_size=1, max_size=7, unique=True),
    n_rows=st.integers(0, 6),
    data=st.data(),
)
def test_read_picks_numeric_edge_cases(header, n_rows, data):
    rows = []
    for _ in range(n_rows):
        cells = [
            data.draw(PHASE_CELLS if col == "phase" else NUMBER_CELLS).replace(",", ";")
            for col in header
        ]
        rows.append(",".join(c.replace("\n", " ").replace("\r", " ") for c in cells))
    text = "# frequency_mhz: 500\n" + ",".join(header) + "\n" + "\n".join(rows) + "\n"
    with tempfile.TemporaryDirectory() as d:
        _check_picks(_read(sw.read_picks, _write(d, "p.csv", text.encode("utf-8", "replace"))))


def test_read_picks_edge_cases_explicit(tmp_path):
    """Zero picks, one pick, identical offsets, NaN: soilwave errors or valid tables."""
    head = "# frequency_mhz: 250\noffset_m,time_ns,phase\n"
    with pytest.raises(sw.PickTableError, match="no picks"):
        sw.read_picks(_write(tmp_path, "zero.csv", head.encode()))
    one = sw.read_picks(_write(tmp_path, "one.csv", (head + "1.0,10.0,ground\n").encode()))
    assert one.sizes["pick"] == 1
    same = head + "".join(f"2.0,{t},ground\n" for t in (10.0, 10.1, 10.2))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        assert sw.read_picks(_write(tmp_path, "same.csv", same.encode())).sizes["pick"] == 3
    with pytest.raises(sw.PickTableError, match="not finite"):
        sw.read_picks(_write(tmp_path, "nan.csv", (head + "1.0,nan,ground\n").encode()))


# --- gathers ---------------------------------------------------------------------------


def _valid_gather():
    from soilwave.gather import gather_from_array

    rng = np.random.default_rng(5)
    return gather_from_array(
        rng.normal(size=(3, 16)), offsets=[0.5, 1.0, 1.5], dt_ns=0.4, frequency_mhz=250.0
    )


def _valid_bytes(suffix: str) -> dict[str, bytes]:
    """Bytes of a valid gather file (and its sidecar) in the given format."""
    from soilwave.gather_io import write_gather

    with tempfile.TemporaryDirectory() as d:
        path = Path(d) / f"g{suffix}"
        write_gather(_valid_gather(), path)
        return {p.name: p.read_bytes() for p in Path(d).iterdir()}


def _check_gather(out):
    if out is not None:
        from soilwave.gather import validate_gather

        validate_gather(out)


@pytest.mark.parametrize("suffix", [".nc", ".sgy", ".txt"])
@FUZZ
@given(st.binary(max_size=4000))
def test_read_gather_arbitrary_bytes(suffix, data):
    with tempfile.TemporaryDirectory() as d:
        path = _write(d, f"g{suffix}", data)
        if suffix == ".txt":
            _write(d, "g.toml", b"dt_ns = 0.4\nfrequency_mhz = 250.0\noffsets_m = [0.5, 1.0]\n")
        _check_gather(_read(gather_io.read_gather, path))


@pytest.mark.parametrize("suffix", [".nc", ".sgy", ".txt"])
@FUZZ
@given(st.data())
def test_read_gather_corrupted_valid_file(suffix, data):
    files = _valid_bytes(suffix)
    # corrupt the data file, or for text gathers sometimes the TOML sidecar
    target = data.draw(st.sampled_from(sorted(files)))
    with tempfile.TemporaryDirectory() as d:
        for name, raw in files.items():
            _write(d, name, _mutate(raw, data.draw) if name == target else raw)
        _check_gather(_read(gather_io.read_gather, Path(d) / f"g{suffix}"))


TOML_VALUES = st.one_of(
    NUMBER_CELLS.filter(lambda s: s not in ("", "x")),
    st.sampled_from(['"CMP"', '"fixed-offset"', '"samples"', '"traces"', "true", "[]", "[0.5]"]),
    st.lists(st.floats(allow_nan=False, allow_infinity=False), max_size=4).map(
        lambda v: "[" + ", ".join(repr(x) for x in v) + "]"
    ),
)
TOML_KEYS = ["dt_ns", "t0_ns", "frequency_mhz", "offsets_m", "positions_m", "geometry", "rows"]


@FUZZ
@given(
    keys=st.lists(st.sampled_from(TOML_KEYS), min_size=0, max_size=7, unique=True),
    data=st.data(),
    matrix=st.lists(st.lists(NUMBER_CELLS.filter(bool), min_size=1, max_size=4), max_size=5),
)
def test_read_gather_text_edge_cases(keys, data, matrix):
    toml = "".join(f"{k} = {data.draw(TOML_VALUES)}\n" for k in keys)
    text = "\n".join(" ".join(row) for row in matrix) + "\n"
    with tempfile.TemporaryDirectory() as d:
        _write(d, "g.toml", toml.encode())
        path = _write(d, "g.txt", text.encode())
        _check_gather(_read(gather_io.read_gather, path))


# --- survey-set manifests --------------------------------------------------------------


@pytest.mark.parametrize("name", ["survey_set.csv", "survey_set.toml"])
@FUZZ
@given(st.binary(max_size=2000))
@example(b"\x80")  # not UTF-8
def test_read_survey_set_arbitrary_bytes(name, data):
    with tempfile.TemporaryDirectory() as d:
        _write(d, "a.csv", VALID_PICKS)
        _read(surveys.read_survey_set, _write(d, name, data))


VALID_SURVEY_CSV = (
    b"# reference_time: 2024-06-03T09:00:00\nfile,timestamp,pre_wetting,applied_water_mm\n"
    b"a.csv,2024-06-03T08:30:00,true,0\nb.csv,2024-06-03T11:00:00,,40\n"
)
VALID_SURVEY_TOML = (
    b'[survey_set]\nreference_time = "2024-06-03T09:00:00"\n\n[[surveys]]\nfile = "a.csv"\n'
    b'timestamp = "2024-06-03T08:30:00"\npre_wetting = true\n\n[[surveys]]\nfile = "b.csv"\n'
    b'timestamp = "2024-06-03T11:00:00"\napplied_water_mm = 40\n'
)


@pytest.mark.parametrize(
    ("name", "valid"),
    [("survey_set.csv", VALID_SURVEY_CSV), ("survey_set.toml", VALID_SURVEY_TOML)],
)
@FUZZ
@given(st.data())
def test_read_survey_set_corrupted_valid_file(name, valid, data):
    with tempfile.TemporaryDirectory() as d:
        _write(d, "a.csv", VALID_PICKS)
        _write(d, "b.csv", VALID_PICKS)
        out = _read(surveys.read_survey_set, _write(d, name, _mutate(valid, data.draw)))
        if out is not None:
            assert out.sizes["time"] >= 1
            surveys.check_survey_set(out)


# --- batch manifest and settings --------------------------------------------------------


def _check_manifest(out):
    if out is not None:
        assert isinstance(out, dict)
        for name, row in out.items():
            assert name and "/" not in name
            assert set(row) == {"position_m", "survey_time_h"}
            assert all(isinstance(v, float) for v in row.values())


@FUZZ
@given(st.binary(max_size=2000))
@example(b"file,position_m\n\x00a.csv,1\n")
@example(b'file\n"a.csv\n')
def test_read_batch_manifest_arbitrary_bytes(data):
    with tempfile.TemporaryDirectory() as d:
        _check_manifest(_read(sw.read_batch_manifest, _write(d, "m.csv", data)))


@FUZZ
@given(
    header=st.lists(
        st.sampled_from(["file", "position_m", "survey_time_h", "x"]), min_size=1, max_size=4
    ),
    rows=st.lists(st.lists(NUMBER_CELLS, min_size=1, max_size=4), max_size=5),
)
def test_read_batch_manifest_edge_cases(header, rows):
    text = ",".join(header) + "\n" + "\n".join(",".join(r) for r in rows) + "\n"
    with tempfile.TemporaryDirectory() as d:
        _check_manifest(_read(sw.read_batch_manifest, _write(d, "m.csv", text.encode())))


def _valid_settings_bytes() -> bytes:
    from soilwave.batch_store import write_batch_settings

    with tempfile.TemporaryDirectory() as d:
        path = Path(d) / "batch_settings.json"
        write_batch_settings(path, {"seed": 7, "invert_options": {"max_steps": 2000}})
        return path.read_bytes()


@FUZZ
@given(st.binary(max_size=2000))
@example(b"[" * 100_000)
@example(b'{"format": NaN}')
def test_read_batch_settings_arbitrary_bytes(data):
    with tempfile.TemporaryDirectory() as d:
        out = _read(sw.read_batch_settings, _write(d, "batch_settings.json", data))
        assert out is None  # random bytes never carry a matching SHA-256 hash


@FUZZ
@given(st.data())
def test_read_batch_settings_corrupted_valid_file(data):
    valid = _valid_settings_bytes()
    corrupted = _mutate(valid, data.draw)
    with tempfile.TemporaryDirectory() as d:
        out = _read(sw.read_batch_settings, _write(d, "batch_settings.json", corrupted))
        if out is not None:  # only changes JSON does not see (e.g. whitespace) may pass
            assert out["settings"] == {"seed": 7, "invert_options": {"max_steps": 2000}}


def test_read_batch_settings_detects_edit(tmp_path):
    """Changing a setting without its hash is refused; the valid file round-trips."""
    path = tmp_path / "batch_settings.json"
    path.write_bytes(_valid_settings_bytes())
    assert sw.read_batch_settings(path)["settings"]["seed"] == 7
    path.write_text(path.read_text().replace('"seed": 7', '"seed": 8'))
    with pytest.raises(sw.FileFormatError, match="settings_hash"):
        sw.read_batch_settings(path)
    with pytest.raises(sw.FileFormatError, match="cannot read"):
        sw.read_batch_settings(tmp_path / "missing.json")
