"""Tests of soilwave.picks: pick tables, CSV reading/writing, checks and editing."""

from __future__ import annotations

import os
import warnings

import numpy as np
import pytest
import xarray as xr
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from scipy import constants

import soilwave as sw
from soilwave.errors import (
    FileFormatError,
    InputError,
    OutputExistsError,
    PickTableError,
    SoilwaveError,
    SoilwaveWarning,
)
from soilwave.picks import CONSISTENCY_SIGMAS, DEFAULT_SIGMA_FRACTION, UNKNOWN_TIME_ZERO_NS

C = constants.c * 1e-9  # m/ns


def _csv(tmp_path, text, name="picks.csv"):
    path = tmp_path / name
    path.write_text(text)
    return path


GOOD = """# frequency_mhz: 250
# source: plot A, CMP 1
offset_m,time_ns,sigma_ns,phase,interface
0.5,1.70,0.3,air,
1.0,3.40,0.3,air,0
0.5,5.05,0.4,ground,
1.0,10.0,0.4,ground,
0.5,20.70,0.5,reflection,1
1.0,22.40,0.5,reflection,1
"""


def _table():
    x = np.array([0.5, 1.0, 0.5, 1.0, 0.5, 1.0])
    t = np.array([1.7, 3.4, 5.05, 10.0, 20.7, 22.4])
    ph = ["air", "air", "ground", "ground", "reflection", "reflection"]
    return sw.make_picks(x, t, ph, interface=[0, 0, 0, 0, 1, 1], sigma=0.4, frequency_mhz=250)


# --- reading -----------------------------------------------------------------------------


def test_read_good_file(tmp_path):
    p = sw.read_picks(_csv(tmp_path, GOOD))
    assert p.sizes["pick"] == 6
    assert p["phase"].values.tolist()[:3] == ["air", "air", "ground"]
    assert p["interface"].values.tolist() == [0, 0, 0, 0, 1, 1]
    assert p["interface"].dtype.kind == "i"
    assert p.attrs["frequency_mhz"] == 250.0
    assert p.attrs["source"] == "plot A, CMP 1"
    assert "read_picks" in p.attrs["history"]
    for var, units in [("offset", "m"), ("time", "ns"), ("sigma", "ns"), ("interface", "1")]:
        assert p[var].attrs["units"] == units
        assert p[var].attrs["long_name"]
    assert p["phase"].attrs["long_name"]


def test_default_sigma_from_frequency(tmp_path):
    # default: DEFAULT_SIGMA_FRACTION of the period 1000/f ns (common practice 1/10..1/4,
    # value from memory); 250 MHz -> period 4 ns -> 0.4 ns
    assert DEFAULT_SIGMA_FRACTION == 0.1
    text = (
        "# frequency_mhz: 250\n"
        "offset_m,time_ns,sigma_ns,phase\n"
        "1.0,10.0,,ground\n"
        "2.0,20,0.7,ground\n"
    )
    p = sw.read_picks(_csv(tmp_path, text))
    np.testing.assert_allclose(p["sigma"].values, [0.4, 0.7])
    # the keyword overrides the file's comment: 500 MHz -> 0.2 ns
    p = sw.read_picks(_csv(tmp_path, text), frequency_mhz=500)
    np.testing.assert_allclose(p["sigma"].values, [0.2, 0.7])
    assert p.attrs["frequency_mhz"] == 500.0


def test_no_sigma_and_no_frequency_is_an_error(tmp_path):
    path = _csv(tmp_path, "offset_m,time_ns,phase\n1.0,10.0,ground\n")
    with pytest.raises(PickTableError, match=r"picks\.csv, row 1, column 'sigma_ns'.*frequency"):
        sw.read_picks(path)
    with pytest.raises(PickTableError, match="no pick uncertainty and no antenna frequency"):
        sw.make_picks([1.0], [10.0], "ground")


@pytest.mark.parametrize(
    ("body", "match"),
    [
        (
            "offset_m,time_ns,sigma_ns,phase\n1.0,abc,0.4,ground\n",
            r"row 1, column 'time_ns'.*'abc'",
        ),
        (
            "offset_m,time_ns,sigma_ns,phase\n1.0,10,0.4,ground\n2.0,nan,0.4,ground\n",
            r"row 2, column 'time_ns' \(line 3\).*not finite",
        ),
        ("offset_m,time_ns,sigma_ns,phase\ninf,10,0.4,ground\n", r"column 'offset_m'.*not finite"),
        ("offset_m,time_ns,sigma_ns,phase\n-1.0,10,0.4,ground\n", r"offset -1\.0 m is negative"),
        ("offset_m,time_ns,sigma_ns,phase\n1.0,10,0,ground\n", r"column 'sigma_ns'.*must be > 0"),
        ("offset_m,time_ns,sigma_ns,phase\n1.0,10,-0.2,ground\n", r"sigma -0\.2 ns must be > 0"),
        ("offset_m,time_ns,sigma_ns,phase\n1.0,10,0.4,direct\n", r"column 'phase'.*'direct'"),
        (
            "offset_m,time_ns,sigma_ns,phase\n1.0,30,0.4,reflection\n",
            r"row 1, column 'interface'.*add an 'interface' column",
        ),
        (
            "offset_m,time_ns,sigma_ns,phase,interface\n1.0,30,0.4,reflection,\n",
            r"column 'interface'.*needs an integer interface >= 1.*got missing",
        ),
        (
            "offset_m,time_ns,sigma_ns,phase,interface\n1.0,30,0.4,refraction,1.5\n",
            r"needs an integer interface >= 1.*got 1\.5",
        ),
        (
            "offset_m,time_ns,sigma_ns,phase,interface\n1.0,10,0.4,ground,2\n",
            r"ground pick has interface 2\.0",
        ),
        ("offset_m,time_ns,phase,colour\n1.0,10,ground,red\n", r"column 'colour'.*unknown column"),
        ("offset_m,phase\n1.0,ground\n", r"column 'time_ns': required column missing"),
        (
            "offset_m,time_ns,sigma_ns,phase\n1.0,10,0.4\n",
            r"row 1 \(line 2\): 3 fields; expected 4",
        ),
        ("offset_m,time_ns,time_ns,phase\n1,2,3,air\n", r"'time_ns' appears more than once"),
        ("offset_m,time_ns,sigma_ns,phase\n", "no picks below the header"),
        ("", "empty pick table"),
        ("# only a comment\n\n", "empty pick table"),
        ("# frequency_mhz: fast\noffset_m,time_ns,phase\n1,10,ground\n", "'fast' is not a number"),
        ("# frequency_mhz: -5\noffset_m,time_ns,phase\n1,10,ground\n", "positive finite"),
        (
            "offset_m,time_ns,sigma_ns,phase,amplitude_sigma\n1,10,0.4,ground,0\n",
            r"column 'amplitude_sigma'.*must be > 0",
        ),
        ("offset_m,time_ns,sigma_ns,phase,amplitude\n1,10,0.4,ground,inf\n", "infinite"),
    ],
)
def test_read_errors_name_file_row_and_column(tmp_path, body, match):
    path = _csv(tmp_path, body)
    with pytest.raises(PickTableError, match=match) as info:
        sw.read_picks(path)
    assert "picks.csv" in str(info.value)


def _shifted_survey(t0, *, eps=4.0, h=0.6, air=True, sigma=0.2):
    """Air, ground and reflection times of one layer over a half-space, shifted by t0.

    Straight-ray formulas written out here: air x/c, ground x sqrt(eps)/c,
    reflection sqrt(x^2 + 4 h^2) sqrt(eps)/c (two-way), each plus t0.
    """
    x = np.linspace(0.5, 3.0, 6)
    times = [x * np.sqrt(eps) / C, np.sqrt(x**2 + 4 * h * h) * np.sqrt(eps) / C]
    phases = ["ground"] * 6 + ["reflection"] * 6
    if air:
        times.insert(0, x / C)
        phases = ["air"] * 6 + phases
    offs = np.tile(x, len(times))
    t = np.concatenate(times) + t0
    itf = [1 if p == "reflection" else 0 for p in phases]
    return offs, t, phases, itf


def test_negative_time_zero_table_is_valid(tmp_path):
    # time zero set 3 ns late (t0 = -3 ns, as when time zero is put on the air-wave first
    # break at 0.9 m): every ground pick precedes x/c, the nearest by more than
    # CONSISTENCY_SIGMAS sigma, yet the table is consistent with its own air wave
    offs, t, ph, itf = _shifted_survey(-3.0)
    ground = np.asarray(ph) == "ground"
    early = t[ground] < offs[ground] / C - CONSISTENCY_SIGMAS * 0.2
    assert early.any()  # the check against x/c alone rejected this table
    p = sw.make_picks(offs, t, ph, interface=itf, sigma=0.2)
    assert p.sizes["pick"] == 18
    path = sw.write_picks(p, tmp_path / "shifted.csv")
    assert sw.read_picks(path).sizes["pick"] == 18
    # without air picks time zero is unknown; the shift is inside UNKNOWN_TIME_ZERO_NS
    offs, t, ph, itf = _shifted_survey(-3.0, air=False)
    assert sw.make_picks(offs, t, ph, interface=itf, sigma=0.2).sizes["pick"] == 12


def test_unknown_time_zero_allowance():
    # derived: a time zero on the air-wave first break 3 m out shifts picks by 3 m / c
    assert UNKNOWN_TIME_ZERO_NS == pytest.approx(3.0 / C)
    assert UNKNOWN_TIME_ZERO_NS == pytest.approx(10.007, abs=1e-3)


def test_ground_wave_faster_than_light_is_an_error(tmp_path):
    # no air picks: at 10 m the air wave takes 10/c = 33.356 ns; a ground pick at 20 ns
    # is 13.4 ns early, more than 3 sigma + UNKNOWN_TIME_ZERO_NS; with time zero 0 it
    # implies eps = (20 c / 10)^2 = 0.36
    body = "offset_m,time_ns,sigma_ns,phase\n10.0,20.0,0.3,ground\n"
    with pytest.raises(
        PickTableError,
        match=r"row 1, column 'time_ns'.*unknown time zero.*permittivity of about 0\.36",
    ):
        sw.read_picks(_csv(tmp_path, body))
    # within CONSISTENCY_SIGMAS sigma + the allowance of x/c it is accepted
    t_ok = 10.0 / C - UNKNOWN_TIME_ZERO_NS - (CONSISTENCY_SIGMAS - 0.5) * 0.3
    assert sw.make_picks([10.0], [t_ok], "ground", sigma=0.3).sizes["pick"] == 1
    t_bad = 10.0 / C - UNKNOWN_TIME_ZERO_NS - (CONSISTENCY_SIGMAS + 0.5) * 0.3
    with pytest.raises(PickTableError, match="no air picks to fix time zero"):
        sw.make_picks([10.0], [t_bad], "ground", sigma=0.3)


def test_ground_wave_earlier_than_the_air_wave_line():
    # air picks at 0.5-3 m with t0 = -3 ns; a ground pick at 4 m (no air pick there) is
    # compared with the air-wave line x/c + t0 fitted through them: at 4 m
    # 4/c - 3 = 10.343 ns. The line's t0 is the inverse-variance weighted mean of
    # t_air - x/c (here all sigmas 0.2 ns: the plain mean, standard error 0.2/sqrt(6)).
    offs, t, ph, itf = _shifted_survey(-3.0)
    line = 4.0 / C - 3.0
    margin = CONSISTENCY_SIGMAS * np.hypot(0.2, 0.2 / np.sqrt(6))
    ok = sw.make_picks(
        np.r_[offs, 4.0],
        np.r_[t, line - margin + 0.05],
        [*ph, "ground"],
        interface=[*itf, 0],
        sigma=0.2,
    )
    assert ok.sizes["pick"] == 19
    with pytest.raises(
        PickTableError,
        match=r"pick index 18.*ground pick at .* offset 4\.0 m, is earlier than the air-wave "
        r"line x/c - 3\.000 ns \(time zero fitted to 6 air picks\)",
    ):
        sw.make_picks(
            np.r_[offs, 4.0],
            np.r_[t, line - margin - 0.05],
            [*ph, "ground"],
            interface=[*itf, 0],
            sigma=0.2,
        )
    # a reflection is held to the same line
    with pytest.raises(PickTableError, match=r"reflection pick at .* air-wave line"):
        sw.make_picks(
            np.r_[offs, 4.0],
            np.r_[t, line - 1.0],
            [*ph, "reflection"],
            interface=[*itf, 1],
            sigma=0.2,
        )


def test_air_wave_line_is_per_survey():
    # survey 0 has a late time zero (+5 ns) and air picks; survey 1 has an early one
    # (-3 ns) and no air picks: its picks fall back to x/c with the allowance, not to
    # survey 0's air line (which they precede by about 8 ns)
    a = _shifted_survey(5.0)
    b = _shifted_survey(-3.0, air=False)
    p = sw.make_picks(
        np.r_[a[0], b[0]],
        np.r_[a[1], b[1]],
        [*a[2], *b[2]],
        interface=[*a[3], *b[3]],
        sigma=0.2,
        survey_time=np.r_[np.zeros(a[0].size), np.ones(b[0].size)],
    )
    assert p.sizes["pick"] == 30
    # as one survey the early picks meet survey 0's air picks at the same offsets
    with pytest.raises(PickTableError, match="earlier than the air-wave pick at the same offset"):
        sw.make_picks(
            np.r_[a[0], b[0]],
            np.r_[a[1], b[1]],
            [*a[2], *b[2]],
            interface=[*a[3], *b[3]],
            sigma=0.2,
        )


def test_read_missing_file_directory_and_bad_bytes(tmp_path):
    # every failure is a SoilwaveError naming the path, never a bare OSError or
    # UnicodeDecodeError
    missing = tmp_path / "nope.csv"
    with pytest.raises(FileFormatError, match=r"nope\.csv: no such file"):
        sw.read_picks(missing)
    with pytest.raises(FileFormatError, match=r"is a directory; expected a CSV pick table"):
        sw.read_picks(tmp_path)
    bad = tmp_path / "latin1.csv"
    bad.write_bytes(b"offset_m,time_ns,phase\n1.0,10.0,gr\xfcnd\n")
    with pytest.raises(PickTableError, match=r"latin1\.csv: not a UTF-8 text file"):
        sw.read_picks(bad)
    with pytest.raises(FileFormatError, match=r"cannot be read \(embedded null byte\)"):
        sw.read_picks(str(tmp_path / "a\x00b.csv"))
    with pytest.raises(InputError, match=r"path None is not a file path"):
        sw.read_picks(None)
    for exc in (FileFormatError, PickTableError, InputError):
        assert issubclass(exc, SoilwaveError) and not issubclass(exc, OSError)


def test_ground_earlier_than_air_pick_at_same_offset(tmp_path):
    # air pick late (time-zero shift 5 ns); ground pick 2 ns before it is inconsistent
    body = "offset_m,time_ns,sigma_ns,phase\n1.0,8.34,0.2,air\n1.0,6.34,0.2,ground\n"
    with pytest.raises(PickTableError, match=r"row 2.*earlier than the air-wave pick"):
        sw.read_picks(_csv(tmp_path, body))
    # the same ground pick at another survey time is not compared with that air pick
    body2 = (
        "offset_m,time_ns,sigma_ns,phase,survey_time_h\n1.0,8.34,0.2,air,0\n1.0,6.34,0.2,ground,1\n"
    )
    assert sw.read_picks(_csv(tmp_path, body2, "b.csv")).sizes["pick"] == 2


def test_reflection_earlier_than_ground_wave(tmp_path):
    body = (
        "offset_m,time_ns,sigma_ns,phase,interface\n"
        "3.0,30.0,0.3,ground,0\n"
        "3.0,25.0,0.3,reflection,1\n"
    )
    with pytest.raises(PickTableError, match=r"row 2.*reflection pick at 25\.0 ns is earlier"):
        sw.read_picks(_csv(tmp_path, body))


def test_duplicates_warn(tmp_path):
    body = GOOD + "1.0,10.1,0.4,ground,\n"
    with pytest.warns(SoilwaveWarning, match=r"row 7.*duplicate pick.*repeats.*row 4"):
        p = sw.read_picks(_csv(tmp_path, body))
    assert p.sizes["pick"] == 7


def test_comments_blank_lines_and_case(tmp_path):
    body = (
        "# a free comment line\n\n# frequency_mhz: 100\n"
        "phase,offset_m,time_ns\nGround ,1.0,10\n\n AIR,1.0,3.34\n"
    )
    p = sw.read_picks(_csv(tmp_path, body))
    assert p["phase"].values.tolist() == ["ground", "air"]
    np.testing.assert_allclose(p["sigma"].values, 1.0)  # 0.1 * 1000/100


# --- writing -----------------------------------------------------------------------------


def test_write_read_round_trip(tmp_path):
    p = sw.make_picks(
        [0.5, 1.0, 1.0],
        [1.7, 10.0, 22.4],
        ["air", "ground", "reflection"],
        interface=[0, 0, 1],
        sigma=[0.1, 0.2, 1 / 3],
        frequency_mhz=250,
        amplitude=[np.nan, 0.5, -0.25],
        survey_time=[1.5, 1.5, 1.5],
        position=[10.0, 10.0, 10.0],
    )
    path = sw.write_picks(p, tmp_path / "out.csv")
    q = sw.read_picks(path)
    for var in ("offset", "time", "sigma", "interface", "amplitude", "survey_time", "position"):
        np.testing.assert_array_equal(q[var].values, p[var].values)  # repr: lossless
    assert q["phase"].values.tolist() == p["phase"].values.tolist()
    assert q.attrs["frequency_mhz"] == 250.0
    assert q.attrs["source"] == "arrays"
    # history carried over line by line, plus the read step
    assert q.attrs["history"].splitlines()[0] == p.attrs["history"]
    assert "read_picks" in q.attrs["history"].splitlines()[1]


def test_write_refuses_to_overwrite_and_is_atomic(tmp_path):
    p = _table()
    path = tmp_path / "p.csv"
    sw.write_picks(p, path)
    before = path.read_text()
    with pytest.raises(OutputExistsError, match=r"p\.csv: output exists; pass overwrite=True"):
        sw.write_picks(sw.drop_picks(p, 0), path)
    assert path.read_text() == before
    sw.write_picks(sw.drop_picks(p, 0), path, overwrite=True)
    assert sw.read_picks(path).sizes["pick"] == 5
    assert os.listdir(tmp_path) == ["p.csv"]  # no temporary files left


def test_write_validates_first(tmp_path):
    bad = _table().copy()
    bad["sigma"] = bad["sigma"] * 0 - 1
    with pytest.raises(PickTableError, match="must be > 0"):
        sw.write_picks(bad, tmp_path / "x.csv")
    assert not (tmp_path / "x.csv").exists()


# --- building, merging, editing -----------------------------------------------------------


def test_make_picks_broadcast_and_shape_errors():
    p = sw.make_picks([1.0, 2.0], [30.0, 35.0], "reflection", interface=2, sigma=0.5)
    assert p["interface"].values.tolist() == [2, 2]
    assert p["phase"].values.tolist() == ["reflection", "reflection"]
    with pytest.raises(PickTableError, match=r"time has shape \(3,\); expected \(2,\)"):
        sw.make_picks([1.0, 2.0], [1.0, 2.0, 3.0], "air", sigma=0.1)
    with pytest.raises(PickTableError, match="no picks"):
        sw.make_picks([], [], "air", sigma=0.1)
    with pytest.raises(PickTableError, match=r"pick index 1, variable 'offset'.*negative"):
        sw.make_picks([1.0, -2.0], [10.0, 20.0], "ground", sigma=0.1)


def test_merge_picks(tmp_path):
    a = sw.make_picks([1.0], [3.34], "air", sigma=0.2, frequency_mhz=250)
    b = sw.make_picks([1.0], [10.0], "ground", sigma=0.4, frequency_mhz=250, amplitude=0.3)
    m = sw.merge_picks(a, b)
    assert m.sizes["pick"] == 2
    assert m.attrs["frequency_mhz"] == 250
    assert np.isnan(m["amplitude"].values[0]) and m["amplitude"].values[1] == 0.3
    assert "merge_picks" in m.attrs["history"]
    c = sw.make_picks([2.0], [20.0], "ground", sigma=0.4, frequency_mhz=100)
    assert "frequency_mhz" not in sw.merge_picks(a, c).attrs
    with pytest.warns(SoilwaveWarning, match="duplicate pick"):
        sw.merge_picks(b, b)
    with pytest.raises(PickTableError, match="at least one"):
        sw.merge_picks()
    # merging can expose an inconsistency between tables
    early = sw.make_picks([1.0], [8.0], "reflection", interface=1, sigma=0.1)
    with pytest.raises(PickTableError, match="earlier than the ground-wave pick"):
        sw.merge_picks(b, early)


def test_drop_and_edit_are_pure():
    p = _table()
    original = p.copy(deep=True)
    d = sw.drop_picks(p, [0, -1])
    assert d["time"].values.tolist() == [3.4, 5.05, 10.0, 20.7]
    assert "drop_picks(index=[0, 5])" in d.attrs["history"]
    e = sw.edit_pick(p, 3, offset=1.2, time=12.0, sigma=0.6)
    assert (e["offset"].values[3], e["time"].values[3], e["sigma"].values[3]) == (1.2, 12.0, 0.6)
    assert "edit_pick(index=3" in e.attrs["history"]
    xr.testing.assert_identical(p, original)


def test_drop_and_edit_errors():
    p = _table()
    with pytest.raises(PickTableError, match="out of range for a table of 6 picks"):
        sw.drop_picks(p, 6)
    with pytest.raises(PickTableError, match="every pick"):
        sw.drop_picks(p, list(range(6)))
    with pytest.raises(PickTableError, match="integer position"):
        sw.drop_picks(p, 1.5)
    with pytest.raises(PickTableError, match="edits one pick"):
        sw.edit_pick(p, [1, 2], time=3.0)
    # moving a ground pick to 2 m at 5.05 ns puts it 1.6 ns before the air-wave line through
    # the air picks (2/c + 0.05 = 6.72 ns): eps < 1
    with pytest.raises(PickTableError, match="earlier than the air-wave line"):
        sw.edit_pick(p, 2, offset=2.0)
    with pytest.raises(PickTableError, match="not a number"):
        sw.edit_pick(p, 2, time="soon")


def test_validate_picks_dataset_checks():
    with pytest.raises(PickTableError, match=r"must be an xarray\.Dataset"):
        sw.validate_picks({"offset": [1.0]})
    p = _table().drop_vars("sigma")
    with pytest.raises(PickTableError, match=r"lacks variable\(s\) \['sigma'\]"):
        sw.validate_picks(p)
    q = _table()
    q["phase"] = ("pick", np.array(["AIR", "air", "ground", "ground", "reflection", "reflection"]))
    assert sw.validate_picks(q)["phase"].values[0] == "air"


# --- fuzzing the reader ----------------------------------------------------------------------

_cell = st.sampled_from(
    ["", "1", "0.5", "-3", "nan", "inf", "x", "air", "ground", "reflection", "2", " ", '"', "1e400"]
)
_header = st.lists(
    st.sampled_from(["offset_m", "time_ns", "sigma_ns", "phase", "interface", "amplitude", "z"]),
    min_size=1,
    max_size=6,
)


@settings(
    max_examples=150, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture]
)
@given(
    header=_header,
    rows=st.lists(st.lists(_cell, min_size=1, max_size=7), max_size=5),
    freq=st.sampled_from(["", "# frequency_mhz: 200\n", "# frequency_mhz: 0\n"]),
)
def test_reader_fuzz_only_pick_table_errors(tmp_path, header, rows, freq):
    # any text either reads into a valid table or raises PickTableError, never anything else
    text = freq + ",".join(header) + "\n" + "".join(",".join(r) + "\n" for r in rows)
    path = _csv(tmp_path, text, "fuzz.csv")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", SoilwaveWarning)
        try:
            p = sw.read_picks(path)
        except PickTableError:
            return
    assert p.sizes["pick"] >= 1
    assert np.all(p["sigma"].values > 0) and np.all(np.isfinite(p["time"].values))
