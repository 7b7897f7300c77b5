"""InversionResult NetCDF round trip: lossless, atomic, never overwriting by default."""

import os
import warnings

import h5py
import numpy as np
import pytest
import xarray as xr

import soilwave as sw
from soilwave.errors import FileFormatError, InputError, OutputExistsError, RangeWarning


@pytest.fixture(scope="module")
def result():
    x = np.tile(np.linspace(0.3, 3.0, 8), 3)
    ph = ["air"] * 8 + ["ground"] * 8 + ["reflection"] * 8
    itf = [0] * 16 + [1] * 8
    t = sw.TravelTimeOperator(x, ph, itf)([0.7], sw.wave_velocity(np.array([8.0, 20.0])), 0.8)
    t = t + np.random.default_rng(0).normal(0, 0.25, t.shape)
    picks = sw.make_picks(x, t, ph, interface=itf, sigma=0.25, frequency_mhz=500.0)
    model = sw.CRIM(porosity=sw.Uncertain(0.42, 0.03), eps_solid=4.7, eps_water=80.0)
    return sw.invert(picks, seed=9, model=model, priors=sw.Priors(max_thickness=3.0))


def test_round_trip_is_lossless(result, tmp_path):
    path = result.to_netcdf(tmp_path / "res.nc")
    back = sw.read_result(path)
    xr.testing.assert_identical(back.samples, result.samples)
    xr.testing.assert_identical(back.summary(), result.summary())
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RangeWarning)
        xr.testing.assert_identical(back.water_content(), result.water_content())
    xr.testing.assert_identical(back.picks, result.picks)
    assert back.priors == result.priors == sw.Priors(max_thickness=3.0)
    assert back.seed == 9
    assert back.software_version == sw.__version__
    for key, value in result.diagnostics.items():
        if isinstance(value, xr.DataArray):
            xr.testing.assert_identical(back.diagnostics[key], value)
        else:
            assert back.diagnostics[key] == value, key
    assert back.table() == result.table()


def test_every_variable_has_units_and_long_name(result, tmp_path):
    path = result.to_netcdf(tmp_path / "res.nc")
    tree = xr.open_datatree(path, engine="h5netcdf")
    try:
        for group in ("samples", "summary", "water_content", "diagnostics"):
            ds = tree[group].to_dataset()
            for name, var in ds.variables.items():
                if name == "parameter":
                    continue
                assert "units" in var.attrs, (group, name)
                assert "long_name" in var.attrs, (group, name)
        wc = tree["water_content"].to_dataset()
        # CF standard name table: volume_fraction_of_condensed_water_in_soil, canonical unit 1
        assert wc["water_content"].attrs["standard_name"] == (
            "volume_fraction_of_condensed_water_in_soil"
        )
        assert wc.attrs["petro_model"] == "CRIM"
        assert tree.attrs["Conventions"].startswith("CF-")
        assert tree.attrs["prior_max_thickness"] == "3.0"
    finally:
        tree.close()
    with h5py.File(path, "r") as f:  # a genuine NetCDF-4/HDF5 file with groups
        assert {"samples", "summary", "water_content", "diagnostics", "picks"} <= set(f)


def test_refuses_to_overwrite_and_writes_atomically(result, tmp_path):
    path = tmp_path / "res.nc"
    path.write_bytes(b"keep me")
    with pytest.raises(OutputExistsError, match="exists; pass overwrite=True"):
        result.to_netcdf(path)
    assert path.read_bytes() == b"keep me"
    result.to_netcdf(path, overwrite=True)
    assert sw.read_result(path).seed == 9
    assert sorted(os.listdir(tmp_path)) == ["res.nc"]  # no temporary file left behind


def test_read_errors(tmp_path):
    with pytest.raises(InputError, match="does not exist"):
        sw.read_result(tmp_path / "missing.nc")
    bad = tmp_path / "bad.nc"
    bad.write_text("not a netcdf file")
    with pytest.raises(FileFormatError, match="not a readable NetCDF-4 file"):
        sw.read_result(bad)
    other = tmp_path / "other.nc"
    xr.Dataset({"a": ("x", [1.0])}).to_netcdf(other, engine="h5netcdf")
    with pytest.raises(FileFormatError, match="attribute 'format'"):
        sw.read_result(other)


def test_missing_output_folder(result, tmp_path):
    with pytest.raises(InputError, match=r"output folder .* does not exist"):
        result.to_netcdf(tmp_path / "no_such_dir" / "r.nc")
