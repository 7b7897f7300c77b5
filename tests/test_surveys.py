"""Survey sets: folder + manifest (TOML or CSV) -> one xarray Dataset along time."""

import numpy as np
import pytest

import soilwave as sw
from soilwave.errors import FileFormatError, InputError, PickTableError


def _picks(t_shift=0.0, n=3):
    x = np.linspace(0.5, 1.5, n)
    c = 0.299792458
    return sw.make_picks(
        np.r_[x, x],
        np.r_[x / c, 3 * x / c + t_shift],
        ["air"] * n + ["ground"] * n,
        sigma=0.3,
        frequency_mhz=250,
    )


@pytest.fixture
def folder(tmp_path):
    sw.write_picks(_picks(0.0), tmp_path / "p0830.csv")
    sw.write_picks(_picks(1.0, n=4), tmp_path / "p1100.csv")
    sw.write_picks(_picks(2.0), tmp_path / "p1500.csv")
    return tmp_path


TOML = """
[survey_set]
reference_time = "2024-06-03T09:00:00"
title = "plot 3"

[[surveys]]
file = "p1500.csv"
timestamp = "2024-06-03T15:00:00"
applied_water_mm = 40

[[surveys]]
file = "p0830.csv"
timestamp = 2024-06-03T08:30:00
pre_wetting = true
label = "before irrigation"
applied_water_mm = 0

[[surveys]]
file = "p1100.csv"
timestamp = "2024-06-03T11:00:00"
position_m = 2.5
applied_water_mm = 40
"""


def test_toml_manifest(folder):
    (folder / "survey_set.toml").write_text(TOML)
    ss = sw.read_survey_set(folder)
    # sorted by time; elapsed hours from the stated reference
    assert ss["time"].values.tolist() == [-0.5, 2.0, 6.0]
    assert ss["time"].attrs["units"] == "h"
    assert ss.attrs["reference_time"] == "2024-06-03T09:00:00"
    assert ss.attrs["reference_time_rule"] == "given"
    assert ss["pre_wetting"].values.tolist() == [True, False, False]
    assert ss["label"].values.tolist() == ["before irrigation", "", ""]
    assert np.isnan(ss["survey_position"].values[0]) and ss["survey_position"].values[1] == 2.5
    assert ss["applied_water"].values.tolist() == [0.0, 40.0, 40.0]
    assert str(ss["timestamp"].values[1]).startswith("2024-06-03T11:00")
    assert ss["n_picks"].values.tolist() == [6, 8, 6]
    assert ss.sizes["pick"] == 8
    # padding: phase '' and NaN times beyond n_picks
    assert ss["phase"].values[0, 6] == "" and np.isnan(ss["travel_time"].values[0, 6])
    assert ss["travel_time"].attrs["units"] == "ns"
    assert "read_survey_set" in ss.attrs["history"]
    assert ss.attrs["title"] == "plot 3"


def test_survey_picks_round_trip(folder):
    (folder / "survey_set.toml").write_text(TOML)
    ss = sw.read_survey_set(folder / "survey_set.toml")
    p = sw.survey_picks(ss, 1)
    orig = sw.read_picks(folder / "p1100.csv")
    np.testing.assert_array_equal(p["time"].values, orig["time"].values)
    np.testing.assert_array_equal(p["offset"].values, orig["offset"].values)
    assert p["phase"].values.tolist() == orig["phase"].values.tolist()
    assert p["survey_time"].values.tolist() == [2.0] * 8
    assert p.attrs["frequency_mhz"] == 250.0
    sw.validate_picks(p)  # an ordinary, valid pick table
    with pytest.raises(InputError, match=r"survey index 5 is outside 0\.\.2"):
        sw.survey_picks(ss, 5)


def test_csv_manifest_default_reference(folder):
    (folder / "survey_set.csv").write_text(
        "# title: plot 3\n"
        "file,timestamp,pre_wetting,applied_water_mm\n"
        "p0830.csv,2024-06-03T08:30:00,yes,0\n"
        "p1100.csv,2024-06-03T11:00:00,,40\n"
        "\n"
        "p1500.csv,2024-06-03 15:00:00,no,40\n"
    )
    ss = sw.read_survey_set(folder)
    # no reference_time: the earliest survey not flagged pre_wetting
    assert ss["time"].values.tolist() == [-2.5, 0.0, 4.0]
    assert "earliest survey not flagged pre_wetting" in ss.attrs["reference_time_rule"]
    ss2 = sw.read_survey_set(folder, reference_time="2024-06-03T09:00")
    assert ss2["time"].values.tolist() == [-0.5, 2.0, 6.0]


def test_time_zones_are_converted_to_utc(folder):
    (folder / "survey_set.csv").write_text(
        "file,timestamp\np0830.csv,2024-06-03T08:30:00+02:00\np1100.csv,2024-06-03T09:00:00Z\n"
    )
    ss = sw.read_survey_set(folder, reference_time="2024-06-03T06:00:00+00:00")
    assert ss["time"].values.tolist() == [0.5, 3.0]
    assert ss.attrs["reference_time"].endswith("Z")
    (folder / "survey_set.csv").write_text(
        "file,timestamp\np0830.csv,2024-06-03T08:30:00+02:00\np1100.csv,2024-06-03T09:00:00\n"
    )
    with pytest.raises(FileFormatError, match=r"row 2, column 'timestamp'.*UTC offset"):
        sw.read_survey_set(folder)


@pytest.mark.parametrize(
    ("csv", "match"),
    [
        (
            "file,timestamp\np0830.csv,03/06/2024 08:30\n",
            r"survey_set.csv, row 1, column 'timestamp': timestamp '03/06/2024 08:30' is not "
            r"an ISO 8601",
        ),
        ("file,timestamp,when\np0830.csv,2024-06-03T08:30,x\n", r"unknown column\(s\) \['when'\]"),
        ("file,label\np0830.csv,x\n", "required column 'timestamp' is missing"),
        (
            "file,timestamp\np0830.csv,2024-06-03T08:30\nnothere.csv,2024-06-03T09:30\n",
            r"row 2, column 'file': pick file 'nothere.csv' not found",
        ),
        (
            "file,timestamp,pre_wetting\np0830.csv,2024-06-03T08:30,maybe\n",
            r"row 1, column 'pre_wetting': 'maybe' is not a yes/no value",
        ),
        (
            "file,timestamp,applied_water_mm\np0830.csv,2024-06-03T08:30,-3\n",
            r"row 1, column 'applied_water_mm': '-3' is not a finite number >= 0",
        ),
        ("file,timestamp\np0830.csv,2024-06-03T08:30,extra\n", r"row 1: 3 cells; expected 2"),
        ("file,timestamp\n", "no survey rows"),
    ],
)
def test_csv_manifest_errors(folder, csv, match):
    (folder / "survey_set.csv").write_text(csv)
    with pytest.raises(FileFormatError, match=match):
        sw.read_survey_set(folder)


def test_duplicate_times(folder):
    (folder / "survey_set.csv").write_text(
        "file,timestamp\np0830.csv,2024-06-03T08:30\np1100.csv,2024-06-03T08:30\n"
    )
    with pytest.raises(InputError, match="same elapsed time"):
        sw.read_survey_set(folder)


@pytest.mark.parametrize(
    ("toml", "match"),
    [
        ('[[surveys]]\nfile = "p0830.csv"\ntimestamp = "x"\n', r"entry 1, key 'timestamp'"),
        (
            '[[surveys]]\nfile = "p0830.csv"\ntimestamp = "2024-06-03T08:30"\ncolour = 1\n',
            r"entry 1: unknown key\(s\) \['colour'\]",
        ),
        ('[survey_set]\nsite = "a"\n', r"\[survey_set\]: unknown key\(s\) \['site'\]"),
        ('[survey_set]\ntitle = "a"\n', r"no \[\[surveys\]\] entries"),
        ("[[surveys]\n", "not valid TOML"),
        ('[[surveys]]\ntimestamp = "2024-06-03T08:30"\n', r"entry 1, key 'file': missing pick"),
    ],
)
def test_toml_manifest_errors(folder, toml, match):
    (folder / "survey_set.toml").write_text(toml)
    with pytest.raises(FileFormatError, match=match):
        sw.read_survey_set(folder)


def test_bad_pick_file_names_that_file(folder):
    (folder / "bad.csv").write_text("offset_m,time_ns,sigma_ns,phase,interface\n1.0,abc,0.3,air,\n")
    (folder / "survey_set.csv").write_text("file,timestamp\nbad.csv,2024-06-03T08:30\n")
    with pytest.raises(PickTableError, match=r"bad.csv, row 1, column 'time_ns'"):
        sw.read_survey_set(folder)


def test_no_manifest(tmp_path):
    with pytest.raises(FileFormatError, match="no survey manifest"):
        sw.read_survey_set(tmp_path)
    with pytest.raises(FileFormatError, match="no such file or folder"):
        sw.read_survey_set(tmp_path / "missing")
    (tmp_path / "m.json").write_text("{}")
    with pytest.raises(FileFormatError, match=r"must be a \.toml or \.csv"):
        sw.read_survey_set(tmp_path / "m.json")


def test_from_picks_mapping():
    p = _picks()
    ss = sw.survey_set_from_picks(
        {3.0: p, -1.0: p, 6.0: p}, reference_time="2024-06-03T09:00", applied_water_mm=25
    )
    assert ss["time"].values.tolist() == [-1.0, 3.0, 6.0]
    assert ss["pre_wetting"].values.tolist() == [True, False, False]
    assert ss["applied_water"].values.tolist() == [0.0, 25.0, 25.0]
    assert str(ss["timestamp"].values[0]).startswith("2024-06-03T08:00")
    ss2 = sw.survey_set_from_picks({0.5: p, 3.0: p}, pre_wetting=[0.5])
    assert ss2["pre_wetting"].values.tolist() == [True, False]
    assert np.isnat(ss2["timestamp"].values).all()
    with pytest.raises(InputError, match=r"pre_wetting times \[9.0\] h are not survey times"):
        sw.survey_set_from_picks({0.5: p}, pre_wetting=[9.0])
    with pytest.raises(InputError, match="non-empty mapping"):
        sw.survey_set_from_picks({})
    with pytest.raises(InputError, match="non-empty mapping"):
        sw.survey_set_from_picks(p)
    with pytest.raises(InputError, match="survey key 'later' is not an elapsed time"):
        sw.survey_set_from_picks({"later": p})
    with pytest.raises(InputError, match="expected a pick table"):
        sw.survey_set_from_picks({1.0: [1, 2]})


def test_survey_set_to_netcdf(tmp_path, folder):
    (folder / "survey_set.toml").write_text(TOML)
    ss = sw.read_survey_set(folder)
    out = sw.write_timelapse(ss, tmp_path / "ss.nc")
    import xarray as xr

    back = xr.open_dataset(out, engine="h5netcdf")
    np.testing.assert_array_equal(back["time"].values, ss["time"].values)
    np.testing.assert_array_equal(back["pre_wetting"].values.astype(bool), ss["pre_wetting"].values)
    assert back["phase"].values[1].tolist()[:8] == ss["phase"].values[1].tolist()
    back.close()


def test_survey_set_of_recorded_gathers_is_auto_picked(tmp_path):
    # Gathers listed in a manifest are picked on loading (the bundled, invented demo
    # gathers; truth from soilwave.scenario, a Green-Ampt front).
    import shutil
    from pathlib import Path

    from soilwave.scenario import DemoTruth

    data = Path(__file__).resolve().parents[1] / "data_demo"
    for name in ("cmp_00h.nc", "cmp_08h.nc"):
        shutil.copy(data / name, tmp_path / name)
    (tmp_path / "survey_set.toml").write_text(
        '[survey_set]\nreference_time = "2026-05-12T08:00:00"\n\n'
        '[[surveys]]\nfile = "cmp_00h.nc"\ntimestamp = "2026-05-12T07:30:00"\n'
        "pre_wetting = true\n\n"
        '[[surveys]]\nfile = "cmp_08h.nc"\ntimestamp = "2026-05-12T16:00:00"\n'
    )
    ss = sw.read_survey_set(tmp_path)
    assert ss["time"].values.tolist() == [-0.5, 8.0]
    wet = sw.survey_picks(ss, 1)
    refl = wet["phase"].values == "reflection"
    assert refl.sum() >= 3
    # the front reflection's zero-offset time is near the truth: 2 L sqrt(eps_wet) / c
    truth = DemoTruth()
    t0 = (
        2
        * truth.front_depths()[3]
        * np.sqrt(truth.earth_at(8.0).permittivity[0])
        / sw.SPEED_OF_LIGHT
    )
    first = wet.isel(pick=np.flatnonzero(refl & (wet["interface"].values == 1)))
    assert float(first["time"].min()) == pytest.approx(t0, abs=1.0)
