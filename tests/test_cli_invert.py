"""End-to-end: `soilwave invert PICKS.csv --out RESULT.nc` through soilwave.cli.main."""

import numpy as np
import pytest

import soilwave as sw
from soilwave.cli import main


@pytest.fixture(scope="module")
def picks_csv(tmp_path_factory):
    folder = tmp_path_factory.mktemp("cli")
    x = np.tile(np.linspace(0.3, 3.0, 8), 3)
    ph = ["air"] * 8 + ["ground"] * 8 + ["reflection"] * 8
    itf = [0] * 16 + [1] * 8
    t = sw.TravelTimeOperator(x, ph, itf)([0.6], sw.wave_velocity(np.array([9.0, 16.0])), 1.0)
    t = t + np.random.default_rng(1).normal(0, 0.25, t.shape)
    path = folder / "picks.csv"
    sw.write_picks(sw.make_picks(x, t, ph, interface=itf, sigma=0.25), path)
    return path


def test_invert_writes_result_and_prints_table(picks_csv, capsys):
    out = picks_csv.parent / "result.nc"
    status = main(
        ["invert", str(picks_csv), "--out", str(out), "--seed", "3", "--max-thickness", "2"]
    )
    assert status == 0
    text = capsys.readouterr().out
    assert "permittivity" in text and "water content" in text and "half-space" in text
    assert "converged" in text and "seed 3" in text
    res = sw.read_result(out)
    assert res.seed == 3 and res.priors.max_thickness == 2.0
    med = float(res.samples["permittivity"].sel(layer=1).median())
    assert abs(med - 9.0) < 1.0  # truth 9; about 5 posterior sd at these picks
    # refuses to overwrite, says how to, and leaves the file alone
    before = out.read_bytes()
    status = main(["invert", str(picks_csv), "--out", str(out), "--quiet"])
    err = capsys.readouterr().err
    assert status == 2
    assert "exists; pass --overwrite" in err
    assert out.read_bytes() == before


def test_overwrite_quiet_and_crim(picks_csv, capsys):
    out = picks_csv.parent / "crim.nc"
    out.write_bytes(b"old")
    args = ["invert", str(picks_csv), "-o", str(out), "--seed", "4", "--quiet", "--overwrite"]
    args += ["--water-model", "crim", "--porosity", "0.4", "--porosity-sd", "0.02"]
    args += ["--eps-water", "80", "--fixed-noise", "--max-steps", "3000"]
    assert main(args) == 0
    assert capsys.readouterr().out == ""
    res = sw.read_result(out)
    wc = res.water_content()
    assert wc.attrs["petro_model"] == "CRIM"
    assert res.priors.noise_scale_sd is None
    assert np.all(res.samples["noise_scale"].values == 1.0)


def test_errors_are_one_line_with_status_2(picks_csv, tmp_path, capsys):
    out = tmp_path / "r.nc"
    assert main(["invert", str(picks_csv), "-o", str(out), "--water-model", "crim"]) == 2
    assert "needs --porosity" in capsys.readouterr().err
    assert main(["invert", str(tmp_path / "nope.csv"), "-o", str(out)]) == 2
    assert "nope.csv" in capsys.readouterr().err
    assert main(["invert", str(picks_csv), "-o", str(out), "--max-thickness", "-1"]) == 2
    assert "max_thickness=-1.0" in capsys.readouterr().err
    assert not out.exists()


def test_help_lists_the_options(capsys):
    with pytest.raises(SystemExit):
        main(["invert", "--help"])
    text = capsys.readouterr().out
    for option in (
        "--out",
        "--seed",
        "--water-model",
        "--porosity",
        "--max-thickness",
        "--overwrite",
    ):
        assert option in text
