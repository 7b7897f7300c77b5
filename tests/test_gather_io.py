"""Tests of gather readers and writers (soilwave.gather_io).

The NetCDF files are checked with xarray/h5netcdf, the TOML sidecars with the
standard-library parser :mod:`tomllib` and the SEG-Y files with :mod:`segyio`,
all independent of the writers under test.
"""

from __future__ import annotations

import sys
import tomllib

import numpy as np
import pytest
import xarray as xr
from hypothesis import given, settings
from hypothesis import strategies as st

import soilwave as sw
from soilwave.errors import FileFormatError, InputError, OutputExistsError
from soilwave.gather import with_history
from soilwave.gather_text import toml_dumps

segyio = pytest.importorskip("segyio")

HISTORY_NOTE = 'ü "quoted" \\ back\tslash  trailing  ' + "x" * 150 + "  "


def _cmp_gather():
    rng = np.random.default_rng(7)
    g = sw.gather_from_array(
        rng.normal(size=(5, 64)),
        offsets=[0.1, 0.25, 0.5, 1.0, 1.2345],
        dt_ns=0.1,
        t0_ns=-2.3,
        frequency_mhz=250.0,
        units="mV",
        geometry="WARR",
    )
    g = with_history(g, "dewow", window_ns=8.0)
    g = with_history(g, "note", text=HISTORY_NOTE)
    g.attrs["time_zero_shift_ns"] = 1.25
    g.attrs["tags"] = [1.0, 2.5]
    return g


def _profile():
    rng = np.random.default_rng(8)
    return sw.gather_from_array(
        rng.normal(size=(6, 40)),
        positions=np.arange(6) * 0.05,
        dt_ns=0.2,
        frequency_mhz=500.0,
        antenna_separation_m=0.14,
    )


@pytest.fixture(params=["cmp", "profile"])
def gather(request):
    return _cmp_gather() if request.param == "cmp" else _profile()


def _assert_same(back, g, *, exact_values=True):
    assert back.dims == g.dims
    dim = g.dims[0]
    if exact_values:
        np.testing.assert_array_equal(back[dim].values, g[dim].values)
    else:  # SEG-Y: decimal-scaled integers read back as the nearest double
        np.testing.assert_allclose(back[dim].values, g[dim].values, rtol=1e-12, atol=1e-15)
    np.testing.assert_allclose(back.time.values, g.time.values, rtol=0, atol=1e-9)
    if exact_values:
        np.testing.assert_array_equal(back.values, g.values)
    else:  # 32-bit IEEE samples in SEG-Y
        np.testing.assert_allclose(back.values, g.values, rtol=2**-23, atol=0)
    assert back.attrs == g.attrs


def test_netcdf_round_trip_identical(tmp_path, gather):
    path = tmp_path / "g.nc"
    sw.write_gather(gather, path)
    back = sw.read_gather(path)
    assert back.identical(gather)
    with xr.open_dataset(path, engine="h5netcdf", decode_times=False) as ds:
        assert ds.attrs["soilwave_format"] == "gather"
        assert ds.attrs["history"] == gather.attrs["history"]
        assert ds["amplitude"].attrs["frequency_mhz"] == gather.attrs["frequency_mhz"]
        assert ds["time"].attrs["units"] == "ns"


@pytest.mark.parametrize("suffix", [".csv", ".txt"])
def test_text_round_trip(tmp_path, gather, suffix):
    path = tmp_path / f"g{suffix}"
    sw.write_gather(gather, path)
    back = sw.read_gather(path)
    _assert_same(back, gather)
    meta = tomllib.loads((tmp_path / "g.toml").read_text(encoding="utf-8"))
    assert meta["rows"] == "samples"
    assert meta["n_samples"] == gather.sizes["time"]
    assert meta["frequency_mhz"] == gather.attrs["frequency_mhz"]
    first = (tmp_path / f"g{suffix}").read_text().splitlines()[0]
    sep = "," if suffix == ".csv" else " "
    assert len(first.split(sep)) == gather.shape[0]  # one column per trace


def test_segy_round_trip(tmp_path, gather):
    path = tmp_path / "g.sgy"
    sw.write_gather(gather, path)
    back = sw.read_gather(path)
    _assert_same(back, gather, exact_values=False)
    # header mapping, read independently with segyio
    with segyio.open(str(path), ignore_geometry=True) as f:
        assert f.bin[segyio.BinField.Interval] == round(1e3 * sw.gather.sample_interval(gather))
        assert f.bin[segyio.BinField.Format] == 5
        h = f.header[1]
        scalar = h[segyio.TraceField.SourceGroupScalar]
        if gather.dims[0] == "offset":
            assert h[segyio.TraceField.offset] / -scalar == gather.offset.values[1]
        else:
            assert h[segyio.TraceField.CDP_X] / -scalar == gather.position.values[1]
            assert h[segyio.TraceField.offset] / -scalar == 0.14


def test_segy_coordinates_finer_than_scalar_are_rounded(tmp_path):
    g = sw.gather_from_array(
        np.zeros((2, 8)), offsets=[0.123456, 1.0], dt_ns=0.1, frequency_mhz=100.0
    )
    sw.write_gather(g, tmp_path / "g.segy")
    back = sw.read_gather(tmp_path / "g.segy")
    np.testing.assert_allclose(back.offset.values, [0.1235, 1.0], rtol=0, atol=1e-12)


def _foreign_segy(path, *, interval=100, n_tr=4, n_s=32, offsets=(500, 1000, 1500, 2000)):
    """A SEG-Y file without soilwave's textual-header tokens."""
    spec = segyio.spec()
    spec.samples = list(range(n_s))
    spec.format = 5
    spec.tracecount = n_tr
    with segyio.create(str(path), spec) as f:
        f.text[0] = "C01 SOME OTHER ACQUISITION".ljust(3200)
        f.bin.update({segyio.BinField.Interval: interval, segyio.BinField.Samples: n_s})
        for i in range(n_tr):
            f.header[i] = {
                segyio.TraceField.offset: offsets[i],
                segyio.TraceField.SourceGroupScalar: -1000,
                segyio.TraceField.TRACE_SAMPLE_COUNT: n_s,
                segyio.TraceField.TRACE_SAMPLE_INTERVAL: interval,
                segyio.TraceField.DelayRecordingTime: 0,
            }
            f.trace[i] = np.full(n_s, float(i), dtype=np.float32)


def test_foreign_segy_needs_frequency_and_uses_time_unit(tmp_path):
    path = tmp_path / "other.sgy"
    _foreign_segy(path)
    with pytest.raises(FileFormatError, match="does not give the antenna frequency"):
        sw.read_gather(path)
    g = sw.read_gather(path, frequency_mhz=250.0)
    assert g.attrs["geometry"] == "CMP"
    np.testing.assert_array_equal(g.offset.values, [0.5, 1.0, 1.5, 2.0])
    assert sw.gather.sample_interval(g) == pytest.approx(0.1)  # 100 ps
    g_ns = sw.read_gather(path, frequency_mhz=250.0, time_unit="ns")
    assert sw.gather.sample_interval(g_ns) == pytest.approx(100.0)


def test_foreign_segy_profile_inferred(tmp_path):
    path = tmp_path / "line.sgy"
    spec = segyio.spec()
    spec.samples = list(range(16))
    spec.format = 5
    spec.tracecount = 3
    with segyio.create(str(path), spec) as f:
        f.bin.update({segyio.BinField.Interval: 200, segyio.BinField.Samples: 16})
        for i in range(3):
            f.header[i] = {
                segyio.TraceField.offset: 14,
                segyio.TraceField.SourceGroupScalar: -100,
                segyio.TraceField.SourceX: 10 * i - 7,
                segyio.TraceField.GroupX: 10 * i + 7,
                segyio.TraceField.TRACE_SAMPLE_COUNT: 16,
            }
            f.trace[i] = np.zeros(16, dtype=np.float32)
    g = sw.read_gather(path, frequency_mhz=500.0)
    assert g.attrs["geometry"] == "fixed-offset"
    assert g.attrs["antenna_separation_m"] == pytest.approx(0.14)
    np.testing.assert_allclose(g.position.values, [0.0, 0.1, 0.2])


def test_no_silent_overwrite_and_no_temp_files(tmp_path):
    g = _profile()
    for name in ("a.nc", "a.sgy", "a.csv"):
        sw.write_gather(g, tmp_path / name)
        with pytest.raises(OutputExistsError, match="exists; pass overwrite=True"):
            sw.write_gather(g, tmp_path / name)
        sw.write_gather(g, tmp_path / name, overwrite=True)
    # the text sidecar counts as an output too
    with pytest.raises(OutputExistsError, match=r"a\.toml exists"):
        sw.write_gather(g, tmp_path / "a.txt")
    assert sorted(p.name for p in tmp_path.iterdir()) == ["a.csv", "a.nc", "a.sgy", "a.toml"]


def test_failed_write_leaves_nothing(tmp_path, monkeypatch):
    g = _profile()

    def boom(self, *args, **kwargs):
        raise OSError("disk full")

    monkeypatch.setattr(xr.Dataset, "to_netcdf", boom)
    with pytest.raises(OSError, match="disk full"):
        sw.write_gather(g, tmp_path / "x.nc")
    assert list(tmp_path.iterdir()) == []


def test_write_rejects_unstorable_attr_and_unknown_suffix(tmp_path):
    g = _profile()
    g.attrs["meta"] = {"a": 1}
    with pytest.raises(InputError, match="attr 'meta'"):
        sw.write_gather(g, tmp_path / "x.nc")
    with pytest.raises(InputError, match=r"unknown gather file suffix '\.dat'"):
        sw.write_gather(_profile(), tmp_path / "x.dat")
    with pytest.raises(InputError, match="only used for SEG-Y"):
        sw.read_gather(tmp_path / "x.nc", frequency_mhz=100.0)


def test_missing_segyio_gives_clear_error(tmp_path, monkeypatch):
    monkeypatch.setitem(sys.modules, "segyio", None)
    with pytest.raises(ImportError, match=r"pip install 'soilwave\[segy\]'"):
        sw.write_gather(_profile(), tmp_path / "x.sgy")


# --- corrupt, truncated and inconsistent files ------------------------------------------


def test_missing_file(tmp_path):
    with pytest.raises(FileFormatError, match="no such file"):
        sw.read_gather(tmp_path / "nothing.nc")


def test_truncated_netcdf(tmp_path):
    path = tmp_path / "g.nc"
    sw.write_gather(_cmp_gather(), path)
    raw = path.read_bytes()
    path.write_bytes(raw[: len(raw) // 2])
    with pytest.raises(FileFormatError, match=r"g\.nc: cannot be read as NetCDF"):
        sw.read_gather(path)
    path.write_bytes(b"not a netcdf file at all" * 10)
    with pytest.raises(FileFormatError, match="cannot be read as NetCDF"):
        sw.read_gather(path)


def test_netcdf_of_another_kind(tmp_path):
    path = tmp_path / "other.nc"
    xr.Dataset({"x": ("a", [1.0, 2.0])}).to_netcdf(path, engine="h5netcdf")
    with pytest.raises(FileFormatError, match="soilwave_format is None"):
        sw.read_gather(path)


def test_netcdf_with_inconsistent_content(tmp_path):
    g = _cmp_gather()
    bad = g.copy()
    bad.values[1, 3] = np.nan
    path = tmp_path / "nan.nc"
    # bypass write_gather's validation, as a damaged file would
    ds = bad.to_dataset(name="amplitude")
    ds.attrs.update(soilwave_format="gather", soilwave_format_version=1)
    ds["amplitude"].attrs.pop("history")
    ds.to_netcdf(path, engine="h5netcdf")
    with pytest.raises(FileFormatError, match=r"not hold a valid gather: .*non-finite value nan"):
        sw.read_gather(path)


def test_truncated_segy(tmp_path):
    path = tmp_path / "g.sgy"
    sw.write_gather(_cmp_gather(), path)
    raw = path.read_bytes()
    path.write_bytes(raw[:-10])
    with pytest.raises(FileFormatError, match="cannot be read as SEG-Y"):
        sw.read_gather(path)
    path.write_bytes(raw[:3000])
    with pytest.raises(FileFormatError, match="cannot be read as SEG-Y"):
        sw.read_gather(path)


def test_segy_trace_header_disagrees_with_binary_header(tmp_path):
    path = tmp_path / "g.sgy"
    sw.write_gather(_cmp_gather(), path)
    with segyio.open(str(path), "r+", ignore_geometry=True) as f:
        f.header[2] = {segyio.TraceField.TRACE_SAMPLE_COUNT: 63}
    with pytest.raises(FileFormatError, match="trace 3: trace header gives 63 samples"):
        sw.read_gather(path)


def test_segy_textual_header_disagrees_with_binary_header(tmp_path):
    path = tmp_path / "g.sgy"
    sw.write_gather(_cmp_gather(), path)
    with segyio.open(str(path), "r+", ignore_geometry=True) as f:
        f.bin.update({segyio.BinField.Interval: 200})
        for i in range(f.tracecount):
            f.header[i] = {segyio.TraceField.TRACE_SAMPLE_INTERVAL: 200}
    with pytest.raises(FileFormatError, match=r"DT_NS=0\.1 disagrees with the binary header"):
        sw.read_gather(path)


def _write_text_pair(tmp_path, matrix_text, toml_text, suffix=".csv"):
    (tmp_path / f"m{suffix}").write_text(matrix_text, encoding="utf-8")
    (tmp_path / "m.toml").write_text(toml_text, encoding="utf-8")
    return tmp_path / f"m{suffix}"


GOOD_TOML = "dt_ns = 0.5\nfrequency_mhz = 100.0\noffsets_m = [1.0, 2.0]\nn_samples = 3\n"


def test_hand_made_text_files(tmp_path):
    # rows = samples inferred from the shape (3 x 2 with two offsets)
    path = _write_text_pair(tmp_path, "# comment\n1,2\n3,4\n\n5,6\n", GOOD_TOML)
    g = sw.read_gather(path)
    np.testing.assert_array_equal(g.values, [[1, 3, 5], [2, 4, 6]])
    # rows = traces, whitespace separated
    path = _write_text_pair(
        tmp_path,
        "1 3 5\n2 4 6\n",
        GOOD_TOML + 'rows = "traces"\nhistory = "measured"\n',
        suffix=".txt",
    )
    g2 = sw.read_gather(path)
    np.testing.assert_array_equal(g2.values, g.values)
    assert g2.attrs["history"] == "measured"


@pytest.mark.parametrize(
    ("matrix", "toml_text", "match"),
    [
        ("1,2\n3,4\n5\n", GOOD_TOML, r"m\.csv, line 3: 1 values; expected 2"),
        ("1,2\n3,x\n5,6\n", GOOD_TOML, r"line 2, column 2: 'x' is not a number"),
        ("1,2\n3,nan\n5,6\n", GOOD_TOML, r"line 2, column 2: 'nan' is not finite"),
        ("1,2\n3,4\n", GOOD_TOML, "2 samples per trace but m.toml says n_samples = 3"),
        ("1,2,3\n4,5,6\n7,8,9\n", GOOD_TOML, "neither its rows nor its columns match the 2"),
        (
            "1,2,3\n4,5,6\n7,8,9\n",
            GOOD_TOML + 'rows = "samples"\n',
            "3 columns of traces but m.toml lists 2 offsets",
        ),
        ("", GOOD_TOML, "no data rows"),
        ("1,2\n3,4\n5,6\n", "dt_ns = 0.5\noffsets_m = [1.0, 2.0]\n", "'frequency_mhz' is missing"),
        ("1,2\n3,4\n5,6\n", GOOD_TOML + "dt = 1\n", r"unknown key\(s\) \['dt'\]"),
        ("1,2\n3,4\n5,6\n", GOOD_TOML + "positions_m = [0.0, 1.0]\n", "exactly one of"),
        ("1,2\n3,4\n5,6\n", "dt_ns = [\n", "not valid TOML"),
        ("1,2\n3,4\n5,6\n", GOOD_TOML + 'rows = "columns"\n', "rows must be 'samples' or"),
        ("1,2\n3,4\n5,6\n", GOOD_TOML + 'geometry = "ZO"\n', "geometry must be one of"),
        ("1,2\n3,4\n5,6\n", GOOD_TOML.replace("0.5", '"0.5"'), "dt_ns must be a number"),
        (
            "1,2\n3,4\n5,6\n",
            GOOD_TOML.replace("[1.0, 2.0]", "[2.0, 1.0]"),
            "inconsistent metadata: offsets must be strictly increasing",
        ),
    ],
)
def test_bad_text_files(tmp_path, matrix, toml_text, match):
    path = _write_text_pair(tmp_path, matrix, toml_text)
    with pytest.raises(FileFormatError, match=match):
        sw.read_gather(path)


def test_square_matrix_needs_rows_key(tmp_path):
    toml_text = "dt_ns = 0.5\nfrequency_mhz = 100.0\noffsets_m = [1.0, 2.0]\n"
    path = _write_text_pair(tmp_path, "1,2\n3,4\n", toml_text)
    with pytest.raises(FileFormatError, match='add rows = "samples"'):
        sw.read_gather(path)


def test_missing_sidecar(tmp_path):
    (tmp_path / "m.csv").write_text("1,2\n", encoding="utf-8")
    with pytest.raises(FileFormatError, match="sidecar not found"):
        sw.read_gather(tmp_path / "m.csv")


# --- the TOML writer against the standard-library parser ---------------------------------

_floats = st.floats(allow_nan=False)
_text = st.text(st.characters(exclude_categories=("Cs",)), max_size=40)
_keys = st.text(st.characters(exclude_categories=("Cs",)), min_size=1, max_size=12)


@settings(max_examples=150, deadline=None)
@given(
    st.dictionaries(
        _keys,
        st.one_of(
            _floats,
            st.integers(-(2**63), 2**63 - 1),
            st.booleans(),
            _text,
            st.lists(_floats, max_size=20),
            st.lists(_text, max_size=5),
        ),
        max_size=6,
    )
)
def test_toml_writer_round_trips_through_tomllib(table):
    assert tomllib.loads(toml_dumps(table)) == table
