"""Survey sets: repeat surveys of one spot or line, each tagged with its acquisition time.

A survey set is a folder of pick tables (CSV, see :mod:`soilwave.picks`) or
recorded multi-offset gathers (``.nc``, ``.sgy``/``.segy``, see
:mod:`soilwave.gather_io`; each is picked with :func:`soilwave.auto_pick`, after
the processing of :func:`load_survey_file`) plus a small *manifest* that lists
them with their acquisition timestamps. Loaded, it
is one :class:`xarray.Dataset` with a ``time`` dimension (one entry per survey,
elapsed hours from a stated reference time) and a ``pick`` dimension (the
longest pick table; shorter ones are padded):

=====================  ===========  ========  =============================================
variable               dims         units     meaning
=====================  ===========  ========  =============================================
``time`` (coordinate)  time         h         elapsed time since ``attrs['reference_time']``
``timestamp``          time         --        absolute acquisition time (datetime64, UTC
                                              when the manifest gave time zones)
``pre_wetting``        time         --        True for a survey before water was applied
``source_file``        time         --        pick file of the survey
``label``              time         --        free text ('' when not given)
``survey_position``    time         m         position of the sounding (NaN when not given)
``applied_water``      time         mm        cumulative water applied up to the survey
                                              (NaN when not given)
``n_picks``            time         1         picks of the survey (rows ``0..n_picks-1``)
``offset``             time, pick   m         antenna offset (NaN padding)
``travel_time``        time, pick   ns        picked time (the pick table's ``time``)
``sigma``              time, pick   ns        pick uncertainty
``phase``              time, pick   --        phase ('' padding)
``interface``          time, pick   1         interface (0 padding)
``position``           time, pick   m         optional per-pick position (lines)
``amplitude``...       time, pick   1         optional, as in the pick tables
=====================  ===========  ========  =============================================

The picked time is stored as ``travel_time`` because ``time`` names the survey
axis here. :func:`survey_picks` gives back one survey as an ordinary pick table.

Manifest (TOML)
---------------
``survey_set.toml`` in the folder (or any ``.toml`` file passed directly)::

    [survey_set]
    reference_time = "2024-06-03T09:00:00"  # start of wetting; optional
    frequency_mhz = 250                     # optional, for pick files without one
    title = "plot 3, sprinkler test"        # optional

    [[surveys]]
    file = "picks_0830.csv"                 # relative to the manifest's folder
    timestamp = "2024-06-03T08:30:00"       # ISO 8601, or a TOML date-time
    pre_wetting = true                      # optional, default false
    label = "before irrigation"             # optional
    position_m = 0.0                        # optional
    applied_water_mm = 0                    # optional, cumulative

    [[surveys]]
    file = "picks_1100.csv"
    timestamp = "2024-06-03T11:00:00"
    applied_water_mm = 40

Manifest (CSV)
--------------
``survey_set.csv``: optional ``# key: value`` comment lines (``reference_time``,
``frequency_mhz``, ``title``), then a header and one row per survey. Columns
``file`` and ``timestamp`` are required; ``pre_wetting`` (true/false/1/0/yes/no
or empty), ``label``, ``position_m`` and ``applied_water_mm`` are optional::

    # reference_time: 2024-06-03T09:00:00
    file,timestamp,pre_wetting,applied_water_mm
    picks_0830.csv,2024-06-03T08:30:00,true,0
    picks_1100.csv,2024-06-03T11:00:00,,40

Rules: timestamps are ISO 8601; all of them (and ``reference_time``) either
carry a UTC offset or none do. Without ``reference_time`` the reference is the
earliest timestamp of a survey that is not ``pre_wetting`` (else the earliest
of all), and the attribute ``reference_time_rule`` says so. Two surveys at the
same time are an error. Surveys are sorted by time. Errors name the manifest,
the row (CSV data row, 1-based) or ``[[surveys]]`` entry, and the column or key.

Examples
--------
>>> import soilwave as sw
>>> dry = sw.make_picks([1.0, 2.0], [10.2, 20.1], "ground", sigma=0.3)
>>> wet = sw.make_picks([1.0, 2.0], [12.9, 25.6], "ground", sigma=0.3)
>>> ss = sw.survey_set_from_picks({0.0: dry, 3.0: wet}, pre_wetting=[0.0])
>>> ss["time"].values.tolist(), ss["pre_wetting"].values.tolist()
([0.0, 3.0], [True, False])
>>> sw.survey_picks(ss, 1)["time"].values.tolist()
[12.9, 25.6]
"""

from __future__ import annotations

import csv
import datetime as _dt
import math
import tomllib
from collections.abc import Mapping
from pathlib import Path

import numpy as np
import xarray as xr

from soilwave.autopick import auto_pick
from soilwave.errors import FileFormatError, InputError, location
from soilwave.gather_io import read_gather
from soilwave.picks import read_picks, validate_picks
from soilwave.processing import bandpass, dewow
from soilwave.provenance import append_history

__all__ = [
    "GATHER_SUFFIXES",
    "MANIFEST_NAMES",
    "load_survey_file",
    "read_survey_set",
    "survey_picks",
    "survey_set_from_picks",
]

#: Manifest file names looked for, in this order, when a folder is given.
MANIFEST_NAMES = ("survey_set.toml", "survey_set.csv")

_PICK_VARS = ("offset", "time", "sigma", "phase", "interface")
_OPTIONAL_PICK_VARS = ("amplitude", "amplitude_sigma", "position")
_CSV_COLUMNS = ("file", "timestamp", "pre_wetting", "label", "position_m", "applied_water_mm")
_SET_KEYS = ("reference_time", "frequency_mhz", "title")
_TRUE = {"true", "1", "yes", "y", "t"}
_FALSE = {"false", "0", "no", "n", "f", ""}


# --- parsing helpers ------------------------------------------------------------------


def _parse_timestamp(value, where: str) -> _dt.datetime:
    if isinstance(value, _dt.datetime):
        ts = value
    elif isinstance(value, _dt.date):
        ts = _dt.datetime(value.year, value.month, value.day)
    else:
        text = str(value).strip()
        try:
            ts = _dt.datetime.fromisoformat(text)
        except ValueError:
            msg = (
                f"{where}: timestamp {text!r} is not an ISO 8601 date-time; "
                "expected e.g. '2024-06-03T09:30:00' or '2024-06-03 09:30:00+02:00'"
            )
            raise FileFormatError(msg) from None
    return ts


def _parse_bool(value, where: str) -> bool:
    if isinstance(value, bool):
        return value
    if value is None:
        return False
    text = str(value).strip().lower()
    if text in _TRUE:
        return True
    if text in _FALSE:
        return False
    msg = f"{where}: {value!r} is not a yes/no value; expected true/false, 1/0 or yes/no"
    raise FileFormatError(msg)


def _parse_float(value, where: str, *, minimum=None) -> float:
    if value is None or (isinstance(value, str) and not value.strip()):
        return math.nan
    try:
        x = float(value)
    except (TypeError, ValueError):
        msg = f"{where}: {value!r} is not a number"
        raise FileFormatError(msg) from None
    if not math.isfinite(x) or (minimum is not None and x < minimum):
        rule = "a finite number" + (f" >= {minimum:g}" if minimum is not None else "")
        msg = f"{where}: {value!r} is not {rule}"
        raise FileFormatError(msg)
    return x


def _to_utc_naive(stamps: list, where: list[str]) -> list:
    """All aware (converted to naive UTC) or all naive; otherwise an error."""
    aware = [s.tzinfo is not None and s.utcoffset() is not None for s in stamps]
    if any(aware) and not all(aware):
        i = aware.index(not aware[0])
        msg = (
            f"{where[i]}: mixes timestamps with and without a UTC offset "
            f"(first {'with' if aware[0] else 'without'} at {where[0]}); give all or none"
        )
        raise FileFormatError(msg)
    if all(aware):
        return [s.astimezone(_dt.UTC).replace(tzinfo=None) for s in stamps], True
    return list(stamps), False


# --- manifest readers ----------------------------------------------------------------------


def _read_toml(path: Path) -> tuple[dict, list[dict]]:
    try:
        with open(path, "rb") as fh:
            doc = tomllib.load(fh)
    except (tomllib.TOMLDecodeError, UnicodeDecodeError) as err:
        msg = f"{path}: not valid TOML ({err}); expected UTF-8 TOML text"
        raise FileFormatError(msg) from None
    head = doc.get("survey_set", {})
    if not isinstance(head, dict):
        msg = f"{path}: [survey_set] must be a table of keys; got {head!r}"
        raise FileFormatError(msg)
    unknown = sorted(set(head) - set(_SET_KEYS))
    if unknown:
        msg = f"{path}, [survey_set]: unknown key(s) {unknown}; expected some of {list(_SET_KEYS)}"
        raise FileFormatError(msg)
    extra = sorted(set(doc) - {"survey_set", "surveys"})
    if extra:
        msg = f"{path}: unknown table(s) {extra}; expected [survey_set] and [[surveys]]"
        raise FileFormatError(msg)
    entries = doc.get("surveys")
    if not isinstance(entries, list) or not entries:
        msg = f"{path}: no [[surveys]] entries; expected one per pick file"
        raise FileFormatError(msg)
    rows = []
    keys = {
        "file",
        "timestamp",
        "pre_wetting",
        "label",
        "position_m",
        "applied_water_mm",
    }
    for i, entry in enumerate(entries, start=1):
        where = f"{path}, [[surveys]] entry {i}"
        if not isinstance(entry, dict):
            msg = f"{where}: expected a table of keys; got {entry!r}"
            raise FileFormatError(msg)
        bad = sorted(set(entry) - keys)
        if bad:
            msg = f"{where}: unknown key(s) {bad}; expected some of {sorted(keys)}"
            raise FileFormatError(msg)
        rows.append(({k: entry.get(k) for k in keys}, lambda k, w=where: f"{w}, key {k!r}"))
    return head, rows


def _read_csv_manifest(path: Path) -> tuple[dict, list]:
    head: dict = {}
    try:
        text = path.read_text(encoding="utf-8")
    except UnicodeDecodeError as err:
        msg = f"{path}: not UTF-8 text ({err})"
        raise FileFormatError(msg) from None
    lines = text.splitlines()
    n = 0
    while n < len(lines) and (lines[n].startswith("#") or not lines[n].strip()):
        body = lines[n].lstrip("#").strip()
        if ":" in body:
            key, value = body.split(":", 1)
            key = key.strip()
            if key in _SET_KEYS:
                head[key] = value.strip()
        n += 1
    reader = csv.reader(lines[n:])
    try:
        header = [h.strip() for h in next(reader)]
    except StopIteration:
        msg = f"{path}: no header line; expected columns {list(_CSV_COLUMNS)}"
        raise FileFormatError(msg) from None
    bad = [h for h in header if h not in _CSV_COLUMNS]
    if bad:
        msg = (
            f"{path}, line {n + 1}: unknown column(s) {bad}; expected some of {list(_CSV_COLUMNS)}"
        )
        raise FileFormatError(msg)
    for req in ("file", "timestamp"):
        if req not in header:
            msg = f"{path}, line {n + 1}: required column {req!r} is missing"
            raise FileFormatError(msg)
    rows = []
    row_no = 0
    for cells in reader:
        if not any(c.strip() for c in cells):
            continue
        row_no += 1
        if len(cells) != len(header):
            msg = f"{location(path, row_no)}: {len(cells)} cells; expected {len(header)}"
            raise FileFormatError(msg)
        rec = {k: None for k in _CSV_COLUMNS}
        for k, c in zip(header, cells, strict=True):
            rec[k] = c.strip() if c.strip() else None
        rows.append((rec, lambda k, r=row_no: location(path, r, k)))
    if not rows:
        msg = f"{path}: no survey rows after the header"
        raise FileFormatError(msg)
    return head, rows


def _find_manifest(path: Path) -> Path:
    if path.is_dir():
        for name in MANIFEST_NAMES:
            if (path / name).is_file():
                return path / name
        msg = f"{path}: no survey manifest; expected one of {list(MANIFEST_NAMES)} in the folder"
        raise FileFormatError(msg)
    if not path.is_file():
        msg = f"{path}: no such file or folder; expected a survey folder or its manifest"
        raise FileFormatError(msg)
    if path.suffix.lower() not in (".toml", ".csv"):
        msg = f"{path}: manifest must be a .toml or .csv file; got suffix {path.suffix!r}"
        raise FileFormatError(msg)
    return path


# --- building the dataset ----------------------------------------------------------------


def _assemble(tables, *, elapsed, stamps, pre, files, labels, positions, water, attrs):
    order = np.argsort(elapsed, kind="stable")
    elapsed = np.asarray(elapsed, float)[order]
    dup = np.flatnonzero(np.diff(elapsed) == 0)
    if dup.size:
        i = int(dup[0])
        msg = (
            f"surveys {files[order[i]]!r} and {files[order[i + 1]]!r} have the same elapsed "
            f"time {elapsed[i]:g} h; expected one survey per time"
        )
        raise InputError(msg)
    tables = [tables[i] for i in order]
    n_max = max(int(t.sizes["pick"]) for t in tables)
    n_t = len(tables)
    data = {}
    fills = {"phase": "", "interface": 0}
    pick_vars = list(_PICK_VARS) + [v for v in _OPTIONAL_PICK_VARS if any(v in t for t in tables)]
    for var in pick_vars:
        fill = fills.get(var, np.nan)
        if var == "phase":
            arr = np.full((n_t, n_max), "", dtype=object)
        elif var == "interface":
            arr = np.zeros((n_t, n_max), dtype=np.int64)
        else:
            arr = np.full((n_t, n_max), fill, dtype=float)
        a_attrs = {}
        for j, t in enumerate(tables):
            if var in t:
                vals = t[var].values
                arr[j, : vals.size] = vals
                a_attrs = dict(t[var].attrs)
        name = "travel_time" if var == "time" else var
        if var == "phase":
            arr = arr.astype(str)
        data[name] = (("time", "pick"), arr, a_attrs)
    data["n_picks"] = (
        "time",
        np.array([t.sizes["pick"] for t in tables], dtype=np.int64),
        {"long_name": "number of picks of the survey", "units": "1"},
    )
    freq = np.array([float(t.attrs.get("frequency_mhz", np.nan)) for t in tables])
    coords = {
        "time": (
            "time",
            elapsed,
            {
                "units": "h",
                "long_name": "elapsed time since the reference time",
                "reference_time": attrs["reference_time"],
            },
        ),
        "timestamp": (
            "time",
            np.array([stamps[i] for i in order], dtype="datetime64[ns]"),
            {"long_name": "acquisition time" + (" (UTC)" if attrs.get("utc") else "")},
        ),
        "pre_wetting": (
            "time",
            np.array([pre[i] for i in order], bool),
            {"long_name": "survey before water was applied"},
        ),
        "source_file": (
            "time",
            np.array([str(files[i]) for i in order]),
            {"long_name": "pick file"},
        ),
        "label": ("time", np.array([labels[i] for i in order]), {"long_name": "survey label"}),
        "survey_position": (
            "time",
            np.array([positions[i] for i in order], float),
            {"units": "m", "long_name": "position of the sounding"},
        ),
        "applied_water": (
            "time",
            np.array([water[i] for i in order], float),
            {"units": "mm", "long_name": "cumulative applied water up to the survey"},
        ),
        "frequency_mhz": (
            "time",
            freq[order],
            {"units": "MHz", "long_name": "antenna centre frequency"},
        ),
    }
    ds_attrs = {k: v for k, v in attrs.items() if k != "utc"}
    ds_attrs["title"] = attrs.get("title") or "soilwave survey set"
    return xr.Dataset(data, coords=coords, attrs=ds_attrs)


def _reference(ref, stamps, pre):
    if ref is not None:
        return ref, "given"
    candidates = [s for s, p in zip(stamps, pre, strict=True) if not p] or list(stamps)
    return min(candidates), "earliest survey not flagged pre_wetting (no reference_time given)"


GATHER_SUFFIXES = (".nc", ".sgy", ".segy")


def load_survey_file(path, *, frequency_mhz=None):
    """One survey's pick table: read a CSV pick table, or pick a recorded gather.

    A gather (``.nc``, ``.sgy``, ``.segy``) is dewowed and band-passed from a
    quarter to 2.5 times its antenna frequency, then picked with
    :func:`soilwave.auto_pick`; the steps are in the table's ``history``.

    Parameters
    ----------
    path : str or path-like
        Pick table (``.csv``) or gather file.
    frequency_mhz : float, optional
        Antenna centre frequency, MHz, for pick tables (and SEG-Y files) without one.

    Returns
    -------
    xarray.Dataset
        Pick table.

    Examples
    --------
    >>> import soilwave as sw, tempfile, pathlib
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "s.csv"
    >>> _ = sw.write_picks(sw.make_picks([1.0], [10.0], "ground", sigma=0.3), p)
    >>> load_survey_file(p)["time"].values.tolist()
    [10.0]
    """
    path = Path(path)
    if path.suffix.lower() not in GATHER_SUFFIXES:
        return read_picks(path, frequency_mhz=frequency_mhz)
    kw = {"frequency_mhz": frequency_mhz} if path.suffix.lower() != ".nc" else {}
    gather = read_gather(path, **kw)
    f = float(gather.attrs["frequency_mhz"])
    return auto_pick(bandpass(dewow(gather), low_mhz=0.25 * f, high_mhz=2.5 * f))


def read_survey_set(path, *, reference_time=None, frequency_mhz=None) -> xr.Dataset:
    """Read a survey set: a folder (or manifest file) listing pick tables with timestamps.

    Parameters
    ----------
    path : str or path-like
        Folder holding ``survey_set.toml`` or ``survey_set.csv``, or the manifest itself.
    reference_time : str or datetime.datetime, optional
        Time from which elapsed hours are counted (usually the start of wetting);
        overrides the manifest's ``reference_time``.
    frequency_mhz : float, optional
        Antenna centre frequency, MHz, for pick files without one (used for
        missing pick uncertainties); overrides the manifest's value.

    Returns
    -------
    xarray.Dataset
        Survey set (layout in the module documentation).

    Raises
    ------
    FileFormatError
        Malformed manifest: names the file, row or entry, column or key.
    PickTableError
        A listed pick file is malformed (names that file, row and column).

    Examples
    --------
    >>> import pathlib, tempfile
    >>> import soilwave as sw
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> _ = sw.write_picks(sw.make_picks([1.0], [10.0], "ground", sigma=0.3), d / "a.csv")
    >>> _ = (d / "survey_set.csv").write_text("file,timestamp\\na.csv,2024-06-03T10:30\\n")
    >>> ss = sw.read_survey_set(d, reference_time="2024-06-03T09:00")
    >>> float(ss["time"][0])
    1.5
    """
    manifest = _find_manifest(Path(path))
    if manifest.suffix.lower() == ".toml":
        head, rows = _read_toml(manifest)
    else:
        head, rows = _read_csv_manifest(manifest)
    folder = manifest.parent
    f_mhz = frequency_mhz
    if f_mhz is None and head.get("frequency_mhz") not in (None, ""):
        f_mhz = _parse_float(
            head["frequency_mhz"], f"{manifest}, survey_set key 'frequency_mhz'", minimum=0.0
        )
    tables, stamps, pre, files, labels, positions, water, wheres = [], [], [], [], [], [], [], []
    for rec, where in rows:
        if rec.get("file") in (None, ""):
            msg = f"{where('file')}: missing pick file name"
            raise FileFormatError(msg)
        if rec.get("timestamp") in (None, ""):
            msg = f"{where('timestamp')}: missing timestamp; expected ISO 8601"
            raise FileFormatError(msg)
        fpath = folder / str(rec["file"])
        if not fpath.is_file():
            msg = f"{where('file')}: pick file {str(rec['file'])!r} not found in {folder}"
            raise FileFormatError(msg)
        tables.append(load_survey_file(fpath, frequency_mhz=f_mhz))
        stamps.append(_parse_timestamp(rec["timestamp"], where("timestamp")))
        wheres.append(where("timestamp"))
        pre.append(_parse_bool(rec.get("pre_wetting"), where("pre_wetting")))
        files.append(str(rec["file"]))
        labels.append("" if rec.get("label") is None else str(rec["label"]))
        positions.append(_parse_float(rec.get("position_m"), where("position_m")))
        water.append(
            _parse_float(rec.get("applied_water_mm"), where("applied_water_mm"), minimum=0.0)
        )
    ref_in = reference_time if reference_time is not None else head.get("reference_time")
    ref_where = (
        "reference_time argument" if reference_time is not None else f"{manifest}, reference_time"
    )
    if ref_in is not None:
        ref_in = _parse_timestamp(ref_in, ref_where)
        all_stamps, utc = _to_utc_naive([*stamps, ref_in], [*wheres, ref_where])
        stamps, ref_in = all_stamps[:-1], all_stamps[-1]
    else:
        stamps, utc = _to_utc_naive(stamps, wheres)
    ref, rule = _reference(ref_in, stamps, pre)
    elapsed = [(s - ref).total_seconds() / 3600.0 for s in stamps]
    attrs = {
        "reference_time": ref.isoformat() + ("Z" if utc else ""),
        "reference_time_rule": rule,
        "manifest": str(manifest),
        "title": str(head.get("title") or ""),
        "utc": utc,
    }
    attrs = append_history(attrs, "read_survey_set", path=str(manifest))
    return _assemble(
        tables,
        elapsed=elapsed,
        stamps=stamps,
        pre=pre,
        files=files,
        labels=labels,
        positions=positions,
        water=water,
        attrs=attrs,
    )


def survey_set_from_picks(
    surveys: Mapping, *, pre_wetting=None, reference_time=None, applied_water_mm=None
) -> xr.Dataset:
    """Build a survey set from a mapping ``elapsed hours -> pick table``.

    Parameters
    ----------
    surveys : mapping
        Elapsed time since the reference (h, float) -> pick table (``xarray.Dataset``).
    pre_wetting : sequence of float, optional
        Elapsed times of surveys made before water was applied. Default: the
        surveys at times ``<= 0``.
    reference_time : str or datetime.datetime, optional
        Absolute reference time; timestamps are ``reference_time + elapsed``.
        Default: none known (timestamps NaT).
    applied_water_mm : mapping or float, optional
        Cumulative applied water per elapsed time (mm), or one total for every
        survey after wetting began.

    Returns
    -------
    xarray.Dataset
        Survey set (see the module documentation).

    Examples
    --------
    >>> import soilwave as sw
    >>> p = sw.make_picks([1.0], [10.0], "ground", sigma=0.3)
    >>> sw.survey_set_from_picks({2.0: p, 0.0: p})["time"].values.tolist()
    [0.0, 2.0]
    """
    if not isinstance(surveys, Mapping) or isinstance(surveys, xr.Dataset) or not surveys:
        msg = (
            "surveys must be a non-empty mapping of elapsed hours to pick tables; "
            f"got {type(surveys).__name__}"
        )
        raise InputError(msg)
    keys, tables = [], []
    for k, table in surveys.items():
        try:
            t = float(k)
        except (TypeError, ValueError):
            msg = f"survey key {k!r} is not an elapsed time in hours"
            raise InputError(msg) from None
        if not math.isfinite(t):
            msg = f"survey key {k!r} is not a finite elapsed time in hours"
            raise InputError(msg)
        if not isinstance(table, xr.Dataset):
            msg = (
                f"survey at {t:g} h: expected a pick table (xarray.Dataset); "
                f"got {type(table).__name__}"
            )
            raise InputError(msg)
        keys.append(t)
        tables.append(validate_picks(table))
    if pre_wetting is None:
        pre = [t <= 0 for t in keys]
    else:
        flagged = {float(p) for p in np.atleast_1d(pre_wetting)}
        unknown = sorted(flagged - set(keys))
        if unknown:
            msg = f"pre_wetting times {unknown} h are not survey times {sorted(keys)}"
            raise InputError(msg)
        pre = [t in flagged for t in keys]
    if reference_time is not None:
        ref = _parse_timestamp(reference_time, "reference_time argument")
        ref, utc = (
            (ref.astimezone(_dt.UTC).replace(tzinfo=None), True) if ref.tzinfo else (ref, False)
        )
        stamps = [ref + _dt.timedelta(hours=t) for t in keys]
        ref_text = ref.isoformat() + ("Z" if utc else "")
    else:
        stamps = [None] * len(keys)
        utc = False
        ref_text = "unknown (elapsed hours given directly)"
    if applied_water_mm is None:
        water = [math.nan] * len(keys)
    elif isinstance(applied_water_mm, Mapping):
        wmap = {float(k): float(v) for k, v in applied_water_mm.items()}
        water = [wmap.get(t, math.nan) for t in keys]
    else:
        total = float(applied_water_mm)
        water = [0.0 if p else total for p in pre]
    files = [str(t.attrs.get("source", "arrays")) for t in tables]
    attrs = {
        "reference_time": ref_text,
        "reference_time_rule": "given" if reference_time is not None else "elapsed hours given",
        "title": "soilwave survey set",
        "utc": utc,
    }
    attrs = append_history(attrs, "survey_set_from_picks", n_surveys=len(keys))
    return _assemble(
        tables,
        elapsed=keys,
        stamps=[np.datetime64("NaT") if s is None else s for s in stamps],
        pre=pre,
        files=files,
        labels=[""] * len(keys),
        positions=[math.nan] * len(keys),
        water=water,
        attrs=attrs,
    )


def survey_picks(survey_set: xr.Dataset, index: int) -> xr.Dataset:
    """One survey of a survey set as an ordinary pick table.

    Parameters
    ----------
    survey_set : xarray.Dataset
        From :func:`read_survey_set` or :func:`survey_set_from_picks`.
    index : int
        Position of the survey along ``time`` (0-based).

    Returns
    -------
    xarray.Dataset
        Pick table along ``pick`` with ``survey_time`` (h) filled in.

    Examples
    --------
    >>> import soilwave as sw
    >>> p = sw.make_picks([1.0], [10.0], "ground", sigma=0.3)
    >>> ss = sw.survey_set_from_picks({1.0: p})
    >>> float(sw.survey_picks(ss, 0)["survey_time"][0])
    1.0
    """
    check_survey_set(survey_set)
    n_t = survey_set.sizes["time"]
    if not isinstance(index, int | np.integer) or not -n_t <= index < n_t:
        msg = f"survey index {index!r} is outside 0..{n_t - 1}"
        raise InputError(msg)
    row = survey_set.isel(time=int(index))
    n = int(row["n_picks"])
    out = {}
    for var in (*_PICK_VARS, *_OPTIONAL_PICK_VARS):
        name = "travel_time" if var == "time" else var
        if name in survey_set:
            out[var] = ("pick", row[name].values[:n], dict(survey_set[name].attrs))
    out["survey_time"] = (
        "pick",
        np.full(n, float(row["time"])),
        {"units": "h", "long_name": "elapsed survey time"},
    )
    attrs = {"source": str(row["source_file"].values)}
    f = float(row["frequency_mhz"])
    if math.isfinite(f):
        attrs["frequency_mhz"] = f
    return xr.Dataset(out, attrs=attrs)


def check_survey_set(survey_set) -> None:
    """Raise :class:`InputError` unless ``survey_set`` has the survey-set layout."""
    if not isinstance(survey_set, xr.Dataset):
        msg = f"expected a survey set (xarray.Dataset); got {type(survey_set).__name__}"
        raise InputError(msg)
    need = ("time", "n_picks", "offset", "travel_time", "sigma", "phase", "interface")
    missing = [v for v in need if v not in survey_set.variables]
    if missing:
        msg = (
            f"dataset is not a survey set: missing {missing}; build one with "
            "read_survey_set or survey_set_from_picks"
        )
        raise InputError(msg)
