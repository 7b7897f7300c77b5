"""Tests of the gather data model (soilwave.gather)."""

from __future__ import annotations

import re

import numpy as np
import pytest
import xarray as xr

import soilwave as sw
from soilwave.errors import InputError
from soilwave.gather import gather_trace_dim, history_line, sample_interval, with_history


def _cmp(n_tr=3, n_s=50, **kw):
    args = {"offsets": np.linspace(0.5, 1.5, n_tr), "dt_ns": 0.1, "frequency_mhz": 250.0}
    args.update(kw)
    return sw.gather_from_array(np.arange(n_tr * n_s, dtype=float).reshape(n_tr, n_s), **args)


def test_multi_offset_gather_layout():
    g = _cmp(t0_ns=-1.0, units="mV")
    assert g.dims == ("offset", "time")
    assert g.dtype == np.float64
    np.testing.assert_allclose(g.time.values, -1.0 + 0.1 * np.arange(50), rtol=0, atol=1e-12)
    assert g.offset.attrs["units"] == "m"
    assert g.time.attrs["units"] == "ns"
    assert g.attrs["frequency_mhz"] == 250.0
    assert g.attrs["geometry"] == "CMP"
    assert g.attrs["units"] == "mV"
    assert g.attrs["history"] == ""
    assert "antenna_separation_m" not in g.attrs
    assert gather_trace_dim(g) == "offset"
    assert sample_interval(g) == pytest.approx(0.1, rel=1e-12)


def test_profile_layout():
    g = sw.gather_from_array(
        np.zeros((4, 10)),
        positions=[0.0, 0.1, 0.2, 0.3],
        dt_ns=0.5,
        frequency_mhz=500.0,
        antenna_separation_m=0.14,
    )
    assert g.dims == ("position", "time")
    assert g.attrs["geometry"] == "fixed-offset"
    assert g.attrs["antenna_separation_m"] == 0.14
    assert gather_trace_dim(g) == "position"


def test_warr_geometry_and_history_list():
    g = _cmp(geometry="WARR", history=["a", "b"])
    assert g.attrs["geometry"] == "WARR"
    assert g.attrs["history"] == "a\nb"


def test_data_is_copied():
    data = np.zeros((2, 5))
    g = sw.gather_from_array(data, offsets=[1.0, 2.0], dt_ns=1.0, frequency_mhz=100.0)
    data[0, 0] = 99.0
    assert g.values[0, 0] == 0.0


@pytest.mark.parametrize(
    ("kwargs", "match"),
    [
        ({"offsets": None}, "exactly one of offsets"),
        ({"positions": [0.0, 1.0, 2.0], "antenna_separation_m": 0.1}, "exactly one of offsets"),
        ({"offsets": [0.5, 1.0]}, "3 traces .* 2 values"),
        ({"offsets": [0.5, 1.5, 1.0]}, "strictly increasing"),
        ({"offsets": [0.5, 1.0, np.nan]}, r"offsets\[2\] is nan"),
        ({"dt_ns": 0.0}, "dt_ns must be finite and > 0"),
        ({"dt_ns": "fast"}, "dt_ns must be a number"),
        ({"frequency_mhz": -100.0}, "frequency_mhz must be finite and > 0"),
        ({"t0_ns": np.inf}, "t0_ns must be finite"),
        ({"geometry": "ZO"}, "geometry must be one of"),
        ({"geometry": "fixed-offset"}, "geometry must be 'CMP' or 'WARR'"),
        ({"antenna_separation_m": 1.0}, "applies to fixed-offset profiles only"),
        ({"units": 3}, "units must be a string"),
        ({"history": 5}, "history must be a string"),
    ],
)
def test_gather_from_array_errors(kwargs, match):
    args = {"offsets": [0.5, 1.0, 1.5], "dt_ns": 0.1, "frequency_mhz": 250.0}
    args.update(kwargs)
    with pytest.raises(InputError, match=match):
        sw.gather_from_array(np.zeros((3, 10)), **args)


def test_profile_errors():
    with pytest.raises(InputError, match="needs antenna_separation_m"):
        sw.gather_from_array(np.zeros((2, 4)), positions=[0, 1], dt_ns=1.0, frequency_mhz=100)
    with pytest.raises(InputError, match="antenna_separation_m must be finite and >= 0"):
        sw.gather_from_array(
            np.zeros((2, 4)),
            positions=[0, 1],
            dt_ns=1.0,
            frequency_mhz=100,
            antenna_separation_m=-0.1,
        )
    with pytest.raises(InputError, match="geometry must be 'fixed-offset'"):
        sw.gather_from_array(
            np.zeros((2, 4)),
            positions=[0, 1],
            dt_ns=1.0,
            frequency_mhz=100,
            antenna_separation_m=0.1,
            geometry="CMP",
        )


@pytest.mark.parametrize(
    ("data", "match"),
    [
        (np.zeros(10), r"must be 2-D .* got shape \(10,\)"),
        (np.zeros((3, 1)), "at least 2 samples"),
        (np.where(np.eye(3, 10) > 0, np.nan, 0.0), "non-finite value nan at offset=0.5 m"),
        ([["a", "b"]], "numeric array"),
    ],
)
def test_bad_data(data, match):
    with pytest.raises(InputError, match=match):
        sw.gather_from_array(data, offsets=[0.5, 1.0, 1.5], dt_ns=0.1, frequency_mhz=250.0)


def test_validate_rejects_foreign_arrays():
    g = _cmp()
    with pytest.raises(InputError, match="dims"):
        sw.validate_gather(g.transpose("time", "offset"))
    with pytest.raises(InputError, match=r"must be an xarray\.DataArray"):
        sw.validate_gather(g.values)
    bad_time = g.assign_coords(time=np.r_[g.time.values[:-1], g.time.values[-1] + 0.05])
    with pytest.raises(InputError, match="uniformly sampled"):
        sw.validate_gather(bad_time)
    no_freq = g.copy()
    del no_freq.attrs["frequency_mhz"]
    with pytest.raises(InputError, match="no 'frequency_mhz' attribute"):
        sw.validate_gather(no_freq)
    with pytest.raises(InputError, match="a gather needs at least 2 time samples"):
        sw.validate_gather(g.isel(time=[0]))
    with pytest.raises(InputError, match="dims"):
        sw.validate_gather(xr.DataArray(np.zeros((2, 2)), dims=("x", "time")))


def test_with_history_appends_and_does_not_mutate():
    g = _cmp()
    h1 = with_history(g, "dewow", window_ns=8.0)
    h2 = with_history(h1, "agc", window_ns=np.float64(20.0), method="max")
    assert g.attrs["history"] == ""
    assert h1.attrs["history"].count("\n") == 0
    lines = h2.attrs["history"].split("\n")
    assert len(lines) == 2
    pattern = r"^\d{4}-\d\d-\d\dT\d\d:\d\d:\d\dZ soilwave \S+ agc\(window_ns=20.0, method='max'\)$"
    assert re.match(pattern, lines[1])
    assert lines[0].endswith("dewow(window_ns=8.0)")


def test_history_line_formats_arrays():
    line = history_line("synthetic", eps=np.array([9.0, 25.0]), n=np.int64(3))
    assert line.endswith("synthetic(eps=[9.0, 25.0], n=3)")
