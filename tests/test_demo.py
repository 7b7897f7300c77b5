"""End-to-end: ``soilwave demo`` on the bundled invented data (issue acceptance)."""

from pathlib import Path

import pytest
import xarray as xr

from soilwave.cli import main
from soilwave.scenario import DemoTruth

DATA = Path(__file__).resolve().parents[1] / "data_demo"
CF_WATER = "volume_fraction_of_condensed_water_in_soil"


@pytest.mark.slow
def test_demo_end_to_end(tmp_path, capsys):
    out = tmp_path / "demo"
    assert main(["demo", "--out", str(out), "--data", str(DATA), "--quiet"]) == 0
    printed = capsys.readouterr().out
    assert "report:" in printed
    report = (out / "report.txt").read_text()
    assert "SYNTHETIC" in report and "utility locating" in report
    pngs = sorted(out.glob("*.png"))
    assert len(pngs) >= 3
    with_cf = []
    for path in sorted(out.glob("*.nc")):
        tree = xr.open_datatree(path, engine="h5netcdf")
        for node in tree.subtree:
            for name, var in node.dataset.data_vars.items():
                if var.attrs.get("standard_name") == CF_WATER:
                    assert var.attrs.get("units") == "1"
                    with_cf.append((path.name, name))
        tree.close()
    assert with_cf, "no NetCDF variable carries the CF water-content standard name"
    # The wetting front is recovered: medians within 10 % of the invented truth after 4 h
    # (the demo truth is Green-Ampt; soilwave.scenario).
    front = xr.load_dataset(out / "wetting_front.nc", engine="h5netcdf")
    truth = dict(zip(DemoTruth().survey_hours, DemoTruth().front_depths(), strict=True))
    for t in (4.0, 8.0, 12.0):
        median = float(front["front_depth"].sel(time=t, quantile=0.5))
        assert median == pytest.approx(truth[t], rel=0.10)
    # A second run into the same folder refuses to overwrite (exit status 2, nothing changed).
    before = (out / "report.txt").stat().st_mtime_ns
    assert main(["demo", "--out", str(out), "--data", str(DATA), "--quiet"]) == 2
    assert "exists" in capsys.readouterr().err
    assert (out / "report.txt").stat().st_mtime_ns == before
