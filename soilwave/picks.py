"""Pick tables: travel times picked on multi-offset GPR gathers.

A pick table is an :class:`xarray.Dataset` along the dimension ``pick`` (one
row per picked arrival) with these variables:

=================  ======  ==========================================================
variable           units   meaning
=================  ======  ==========================================================
``offset``         m       antenna separation (>= 0)
``time``           ns      picked travel time (two-way for reflections)
``sigma``          ns      1-sigma pick uncertainty (> 0)
``phase``          --      ``air``, ``ground``, ``reflection``, ``refraction`` or
                           ``diffraction``
``interface``      1       interface of a reflection or refraction (1 = bottom of
                           layer 1); 0 for the other phases
``amplitude``      1       optional picked amplitude (NaN where not picked)
``amplitude_sigma`` 1      optional 1-sigma amplitude uncertainty
``survey_time``    h       optional elapsed time of the survey (repeat surveys)
``position``       m       optional position along a profile line
=================  ======  ==========================================================

Dataset attributes: ``frequency_mhz`` (antenna centre frequency, optional),
``source`` (file or ``"arrays"``) and ``history`` (one line per step).
Rows are addressed by position (``index`` 0, 1, ...); tables have no ``pick``
coordinate.

CSV format
----------
A UTF-8 text file: optional leading comment lines, then a header line, then
one line per pick, comma separated::

    # frequency_mhz: 250
    # source: CMP 3, north plot
    offset_m,time_ns,sigma_ns,phase,interface
    0.5,1.70,0.4,air,
    0.5,5.00,0.4,ground,
    0.5,20.65,0.5,reflection,1

* Comment lines start with ``#`` and come before the header. A comment of the
  form ``# key: value`` sets the dataset attribute ``key`` (``frequency_mhz``
  is read as a number in MHz); a key given on several lines (for example
  ``history``) is joined with newlines. Other comment lines are ignored.
* Columns, in any order: ``offset_m``, ``time_ns`` and ``phase`` are required;
  ``interface`` is required when any row is a reflection or refraction (an
  empty cell means 0 for the other phases); ``sigma_ns`` is optional; the
  optional columns ``amplitude``, ``amplitude_sigma``, ``survey_time_h`` and
  ``position_m`` may have empty cells (missing values). Other column names are
  an error. Blank lines are skipped.
* ``sigma_ns`` missing (column or cell) means the default pick uncertainty,
  :data:`DEFAULT_SIGMA_FRACTION` of the dominant period ``1000 /
  frequency_mhz`` ns: 1/10 of the period, the optimistic end of the usual 1/10
  to 1/4 (common practice, value from memory). Without a frequency (file
  comment or ``frequency_mhz=``) a missing sigma is an error.
* Rows in error messages are 1-based data rows (the header excluded); the
  file line number is given too.

Checks (:func:`validate_picks`, run by every function here): finite numbers,
offsets >= 0, sigmas > 0, known phases, an interface >= 1 for reflections and
refractions and 0 for air and ground picks, no reflection earlier than the
ground-wave pick at the same offset by more than :data:`CONSISTENCY_SIGMAS`
combined standard deviations, and no pick implying a relative permittivity
below 1: a ground wave, reflection or refraction must not arrive before the
air wave of its own survey (same survey time and position). Pick times
include the survey's time-zero shift, so the air wave they are compared with
is taken from the same table:

* the air-wave pick at the same offset, when there is one;
* otherwise the air-wave line ``t = x / c + t0`` through the survey's air
  picks (slope fixed by the speed of light ``c``, ``t0`` the
  inverse-variance weighted mean of ``t_air - x / c``, its standard error
  combined with the pick's sigma);
* only when the survey has no air picks, ``x / c`` itself, with a generous
  extra allowance :data:`UNKNOWN_TIME_ZERO_NS` for the unknown time zero.

A pick is rejected when it is earlier than that reference by more than
:data:`CONSISTENCY_SIGMAS` combined standard deviations (plus the allowance).
Picks repeating an offset, phase and interface give a
:class:`~soilwave.errors.SoilwaveWarning`.
"""

from __future__ import annotations

import csv
import datetime as _dt
import math
import os
import tempfile
import warnings
from pathlib import Path

import numpy as np
import xarray as xr

from soilwave.errors import (
    FileFormatError,
    InputError,
    OutputExistsError,
    PickTableError,
    SoilwaveWarning,
    location,
)
from soilwave.traveltime import C_M_PER_NS

__all__ = [
    "CONSISTENCY_SIGMAS",
    "DEFAULT_SIGMA_FRACTION",
    "PHASES",
    "UNKNOWN_TIME_ZERO_NS",
    "drop_picks",
    "edit_pick",
    "make_picks",
    "merge_picks",
    "read_picks",
    "validate_picks",
    "write_picks",
]

#: Phases a pick table may contain.
PHASES = ("air", "ground", "reflection", "refraction", "diffraction")

#: Default pick uncertainty as a fraction of the dominant period 1000/f ns
#: (common practice: 1/10 to 1/4 of the period; value from memory).
DEFAULT_SIGMA_FRACTION = 0.1

#: Margin, in combined standard deviations, before an arrival order that implies
#: a permittivity below 1 or a reflection before the ground wave is an error.
CONSISTENCY_SIGMAS = 3.0

#: Extra allowance, ns, for an unknown time zero when a survey has no air-wave
#: picks: a ground, reflection or refraction pick is rejected only when it is
#: earlier than ``x / c`` by more than this plus :data:`CONSISTENCY_SIGMAS`
#: sigma. It is the shift of a time zero set on the air-wave first break of a
#: trace 3 m from the transmitter (3 m / c = 10.0 ns, derived), a generous
#: bound for the nearest offsets of usual multi-offset surveys (common practice).
UNKNOWN_TIME_ZERO_NS = 3.0 / C_M_PER_NS

_NEEDS_INTERFACE = ("reflection", "refraction")

# variable -> (csv column, units, long_name, required)
_VARIABLES = {
    "offset": ("offset_m", "m", "antenna offset", True),
    "time": ("time_ns", "ns", "picked travel time", True),
    "sigma": ("sigma_ns", "ns", "pick time uncertainty (1 sigma)", True),
    "phase": ("phase", None, "picked phase", True),
    "interface": ("interface", "1", "interface number (1 = bottom of layer 1)", True),
    "amplitude": ("amplitude", "1", "picked amplitude", False),
    "amplitude_sigma": ("amplitude_sigma", "1", "amplitude uncertainty (1 sigma)", False),
    "survey_time": ("survey_time_h", "h", "elapsed survey time", False),
    "position": ("position_m", "m", "position along the profile", False),
}
_COLUMN_TO_VAR = {col: var for var, (col, *_rest) in _VARIABLES.items()}
_OPTIONAL = [v for v, spec in _VARIABLES.items() if not spec[3]]


# --- helpers -----------------------------------------------------------------------


def _history_line(step: str) -> str:
    from soilwave import __version__

    now = _dt.datetime.now(_dt.UTC).isoformat(timespec="seconds")
    return f"{now} soilwave {__version__} {step}"


def _append_history(attrs: dict, step: str) -> dict:
    attrs = dict(attrs)
    old = attrs.get("history", "")
    attrs["history"] = (old + "\n" if old else "") + _history_line(step)
    return attrs


class _Where:
    """Turns a pick index into 'file, row r (line l), column c' for messages."""

    def __init__(self, path=None, lines=None):
        self.path = path
        self.lines = lines

    def __call__(self, i, var) -> str:
        if self.lines is None:
            return f"pick index {i}, variable {var!r}"
        col = _VARIABLES[var][0] if var in _VARIABLES else var
        where = location(self.path, i + 1, col)
        return f"{where} (line {self.lines[i]})"


def default_sigma(frequency_mhz: float) -> float:
    """Default pick uncertainty, ns: :data:`DEFAULT_SIGMA_FRACTION` of ``1000/f``.

    Examples
    --------
    >>> default_sigma(250.0)
    0.4
    """
    return DEFAULT_SIGMA_FRACTION * 1000.0 / float(frequency_mhz)


def _check_frequency(frequency_mhz, where: str):
    if frequency_mhz is None:
        return None
    try:
        f = float(frequency_mhz)
    except (TypeError, ValueError):
        msg = f"{where}: frequency_mhz {frequency_mhz!r} is not a number; expected MHz > 0"
        raise PickTableError(msg) from None
    if not (math.isfinite(f) and f > 0):
        msg = f"{where}: frequency_mhz {f!r} is not a positive finite number of MHz"
        raise PickTableError(msg)
    return f


# --- validation ----------------------------------------------------------------------


def _validate_arrays(cols: dict, where: _Where, *, warn: bool = True) -> dict:
    """Check and normalise column arrays; return the normalised arrays."""
    n = len(cols["offset"])
    if n == 0:
        src = where.path if where.path is not None else "pick table"
        msg = f"{src}: no picks; expected at least one data row"
        raise PickTableError(msg)
    out = {}
    for var in ("offset", "time", "sigma"):
        a = np.asarray(cols[var], dtype=float)
        bad = ~np.isfinite(a)
        if bad.any():
            i = int(np.flatnonzero(bad)[0])
            msg = f"{where(i, var)}: value {float(a[i])!r} is not a finite number"
            raise PickTableError(msg)
        out[var] = a
    neg = out["offset"] < 0
    if neg.any():
        i = int(np.flatnonzero(neg)[0])
        msg = (
            f"{where(i, 'offset')}: offset {float(out['offset'][i])!r} m is negative; expected >= 0"
        )
        raise PickTableError(msg)
    nonpos = out["sigma"] <= 0
    if nonpos.any():
        i = int(np.flatnonzero(nonpos)[0])
        msg = f"{where(i, 'sigma')}: sigma {float(out['sigma'][i])!r} ns must be > 0"
        raise PickTableError(msg)
    phase = np.asarray(cols["phase"]).astype(str)
    phase = np.char.lower(np.char.strip(phase))
    unknown = ~np.isin(phase, PHASES)
    if unknown.any():
        i = int(np.flatnonzero(unknown)[0])
        msg = (
            f"{where(i, 'phase')}: unknown phase {str(phase[i])!r}; expected one of {list(PHASES)}"
        )
        raise PickTableError(msg)
    out["phase"] = phase
    itf = np.asarray(cols["interface"], dtype=float)
    needs = np.isin(phase, _NEEDS_INTERFACE)
    bad = needs & ~(np.isfinite(itf) & (itf >= 1) & (itf == np.round(itf)))
    if bad.any():
        i = int(np.flatnonzero(bad)[0])
        shown = "missing" if not np.isfinite(itf[i]) else repr(float(itf[i]))
        msg = (
            f"{where(i, 'interface')}: a {phase[i]} pick needs an integer interface >= 1 "
            f"(1 = bottom of layer 1); got {shown}"
        )
        raise PickTableError(msg)
    itf0 = np.where(np.isfinite(itf), itf, 0.0)
    simple = np.isin(phase, ("air", "ground"))
    bad = simple & (itf0 != 0)
    if bad.any():
        i = int(np.flatnonzero(bad)[0])
        msg = (
            f"{where(i, 'interface')}: an {phase[i]} pick has interface {float(itf0[i])!r}; "
            "expected 0 or empty (interfaces apply to reflection and refraction picks)"
        )
        raise PickTableError(msg)
    bad = ~needs & ~simple & ~((itf0 >= 0) & (itf0 == np.round(itf0)))
    if bad.any():
        i = int(np.flatnonzero(bad)[0])
        msg = f"{where(i, 'interface')}: interface {float(itf0[i])!r} is not an integer >= 0"
        raise PickTableError(msg)
    out["interface"] = itf0.astype(np.int64)
    for var in _OPTIONAL:
        if var not in cols or cols[var] is None:
            continue
        a = np.asarray(cols[var], dtype=float)
        bad = np.isinf(a)
        if bad.any():
            i = int(np.flatnonzero(bad)[0])
            msg = f"{where(i, var)}: value {float(a[i])!r} is infinite; expected a finite number"
            raise PickTableError(msg)
        if var == "amplitude_sigma":
            bad = a <= 0
            if bad.any():
                i = int(np.flatnonzero(bad)[0])
                msg = f"{where(i, var)}: amplitude_sigma {float(a[i])!r} must be > 0"
                raise PickTableError(msg)
        out[var] = a
    _check_physics(out, where)
    if warn:
        _warn_duplicates(out, where)
    return out


def _groups(cols: dict) -> np.ndarray:
    """Integer label of the (survey_time, position) group of each pick."""
    keys = []
    for var in ("survey_time", "position"):
        if var in cols:
            keys.append(np.where(np.isnan(cols[var]), -np.inf, cols[var]))
    if not keys:
        return np.zeros(len(cols["offset"]), dtype=int)
    _, label = np.unique(np.stack(keys, axis=1), axis=0, return_inverse=True)
    return label.ravel()


def _air_reference(c: dict, group: np.ndarray, slow: np.ndarray):
    """Earliest possible arrival of each subsurface pick: the air wave of its own survey.

    Returns ``(t_ref, sd_ref, allowance, how)`` per pick: the air-wave time at
    the pick's offset (ns), its standard deviation (ns), an extra allowance
    for an unknown time zero (ns) and a phrase saying where ``t_ref`` came from.
    """
    x, t, s, ph = c["offset"], c["time"], c["sigma"], c["phase"]
    n = x.size
    t_ref = x / C_M_PER_NS
    sd_ref = np.zeros(n)
    allowance = np.full(n, UNKNOWN_TIME_ZERO_NS)
    how = np.full(n, "the air wave x/c", dtype=object)
    for g in np.unique(group):
        in_g = group == g
        air = in_g & (ph == "air")
        if not air.any():
            continue
        # air-wave line t = x/c + t0 through the air picks (slope fixed by c),
        # t0 their inverse-variance weighted mean of t - x/c
        w = 1.0 / s[air] ** 2
        t0 = float(np.sum(w * (t[air] - x[air] / C_M_PER_NS)) / np.sum(w))
        n_air = int(air.sum())
        t_ref[in_g] = x[in_g] / C_M_PER_NS + t0
        sd_ref[in_g] = 1.0 / math.sqrt(float(np.sum(w)))
        allowance[in_g] = 0.0
        sign = "-" if t0 < 0 else "+"
        how[in_g] = (
            f"the air-wave line x/c {sign} {abs(t0):.3f} ns (time zero fitted to {n_air} "
            f"air pick{'s' if n_air > 1 else ''})"
        )
        ia = np.flatnonzero(air)
        for j in np.flatnonzero(in_g & slow):
            same = ia[x[ia] == x[j]]
            if same.size:
                k = same[np.argmin(t[same])]
                t_ref[j], sd_ref[j] = t[k], s[k]
                how[j] = "the air-wave pick at the same offset"
    return t_ref, sd_ref, allowance, how


def _check_physics(c: dict, where: _Where) -> None:
    x, t, s, ph = c["offset"], c["time"], c["sigma"], c["phase"]
    k = CONSISTENCY_SIGMAS
    group = _groups(c)
    # anything through the ground arriving before the air wave would need eps < 1
    slow = np.isin(ph, ("ground", "reflection", "refraction"))
    t_ref, sd_ref, allowance, how = _air_reference(c, group, slow)
    bad = slow & (t < t_ref - allowance - k * np.hypot(s, sd_ref))
    if bad.any():
        i = int(np.flatnonzero(bad)[0])
        head = f"{where(i, 'time')}: {ph[i]} pick at {float(t[i])!r} ns, offset {float(x[i])!r} m"
        if allowance[i] > 0:
            eps = (C_M_PER_NS * t[i] / x[i]) ** 2 if t[i] > 0 else 0.0
            msg = (
                f"{head}, is earlier than the air wave x/c = {t_ref[i]:.4f} ns by more than "
                f"{k:g} sigma plus {allowance[i]:.1f} ns allowed for an unknown time zero "
                "(no air picks to fix time zero); with time zero 0 it implies a relative "
                f"permittivity of about {eps:.3g} < 1; check time zero and the phase, or add "
                "the air-wave picks"
            )
        else:
            msg = (
                f"{head}, is earlier than {how[i]} at {t_ref[i]:.4f} ns by more than {k:g} "
                "combined sigma (implies a relative permittivity below 1); expected the "
                f"{ph[i]} wave to arrive after the air wave; check the phases and the air picks"
            )
        raise PickTableError(msg)
    ia = np.flatnonzero(ph == "ground")
    ib = np.flatnonzero(ph == "reflection")
    for j in ib if ia.size else ():
        same = ia[(x[ia] == x[j]) & (group[ia] == group[j])]
        if same.size == 0:
            continue
        ref_t = t[same].min()
        ref_s = s[same][np.argmin(t[same])]
        if t[j] < ref_t - k * math.hypot(s[j], ref_s):
            msg = (
                f"{where(int(j), 'time')}: reflection pick at {float(t[j])!r} ns is earlier "
                f"than the ground-wave pick at {float(ref_t)!r} ns, offset {float(x[j])!r} m, "
                f"by more than {k:g} combined sigma; expected the reflection to arrive after "
                "the ground wave"
            )
            raise PickTableError(msg)


def _warn_duplicates(c: dict, where: _Where) -> None:
    group = _groups(c)
    keys = {}
    for i, key in enumerate(zip(c["offset"], c["phase"], c["interface"], group, strict=True)):
        if key in keys:
            j = keys[key]
            msg = (
                f"{where(i, 'offset')}: duplicate pick (offset {float(c['offset'][i])!r} m, phase "
                f"{str(c['phase'][i])!r}, interface {int(c['interface'][i])}) repeats "
                f"{where(j, 'offset')}; both are kept and count as independent data"
            )
            warnings.warn(msg, SoilwaveWarning, stacklevel=4)
        else:
            keys[key] = i


def _build(cols: dict, attrs: dict) -> xr.Dataset:
    data = {}
    for var, (_col, units, long_name, _req) in _VARIABLES.items():
        if var not in cols:
            continue
        a = {"long_name": long_name}
        if units is not None:
            a["units"] = units
        data[var] = ("pick", np.asarray(cols[var]), a)
    return xr.Dataset(data, attrs=attrs)


def validate_picks(picks: xr.Dataset) -> xr.Dataset:
    """Check a pick table and return it normalised (a new Dataset).

    Parameters
    ----------
    picks : xarray.Dataset
        Pick table along ``pick`` (see the module documentation).

    Returns
    -------
    xarray.Dataset
        The same picks with normalised dtypes, lower-case phases, and ``units``
        and ``long_name`` on every variable.

    Raises
    ------
    PickTableError
        Naming the pick index, the variable, the value and what is expected.

    Warns
    -----
    SoilwaveWarning
        For picks repeating an offset, phase and interface.

    Examples
    --------
    >>> p = make_picks([1.0], [10.0], "ground", sigma=0.4)
    >>> validate_picks(p).sizes["pick"]
    1
    """
    return _validate_dataset(picks, warn=True)


def _validate_dataset(picks: xr.Dataset, *, warn: bool) -> xr.Dataset:
    if not isinstance(picks, xr.Dataset):
        msg = f"a pick table must be an xarray.Dataset; got {type(picks).__name__}"
        raise PickTableError(msg)
    missing = [v for v, spec in _VARIABLES.items() if spec[3] and v not in picks]
    if missing:
        msg = f"pick table lacks variable(s) {missing}; expected {list(_VARIABLES)[:5]}"
        raise PickTableError(msg)
    for name, var in picks.data_vars.items():
        if var.dims != ("pick",):
            msg = f"pick table variable {name!r} has dims {var.dims}; expected ('pick',)"
            raise PickTableError(msg)
    cols = {v: picks[v].values for v in _VARIABLES if v in picks}
    try:
        norm = _validate_arrays(cols, _Where(), warn=warn)
    except (TypeError, ValueError) as err:
        if isinstance(err, PickTableError):
            raise
        msg = f"pick table has a non-numeric value where a number is expected: {err}"
        raise PickTableError(msg) from None
    attrs = dict(picks.attrs)
    if "frequency_mhz" in attrs:
        attrs["frequency_mhz"] = _check_frequency(attrs["frequency_mhz"], "pick table attrs")
    out = _build(norm, attrs)
    extra = [v for v in picks.data_vars if v not in _VARIABLES]
    for v in extra:
        out[v] = picks[v].copy()
    return out


# --- building ---------------------------------------------------------------------------


def make_picks(
    offset,
    time,
    phase,
    *,
    interface=None,
    sigma=None,
    frequency_mhz=None,
    amplitude=None,
    amplitude_sigma=None,
    survey_time=None,
    position=None,
) -> xr.Dataset:
    """Build a pick table from arrays.

    Parameters
    ----------
    offset, time : array_like
        Offsets, m, and picked times, ns, shape ``(n,)``.
    phase : str or array_like of str
        Phase of each pick, or one phase for all.
    interface : int or array_like of int, optional
        Interface per pick (required for reflections and refractions); 0 elsewhere.
    sigma : float or array_like, optional
        Pick uncertainty, ns. Default: :data:`DEFAULT_SIGMA_FRACTION` of the
        period ``1000 / frequency_mhz`` (NaN entries get the default too).
    frequency_mhz : float, optional
        Antenna centre frequency, MHz, stored as an attribute.
    amplitude, amplitude_sigma, survey_time, position : array_like, optional
        Optional per-pick values (amplitude dimensionless, survey time h, position m).

    Returns
    -------
    xarray.Dataset
        Validated pick table.

    Examples
    --------
    >>> p = make_picks([1.0, 2.0], [3.34, 6.67], "air", frequency_mhz=250)
    >>> p["sigma"].values.tolist()
    [0.4, 0.4]
    """
    x = np.atleast_1d(np.asarray(offset, dtype=float))
    n = x.size

    def per_pick(value, name, dtype):
        a = np.asarray(value, dtype=dtype)
        if a.ndim == 0:
            return np.full(n, a.item(), dtype=a.dtype)
        if a.shape != (n,):
            msg = f"{name} has shape {a.shape}; expected ({n},) like offset, or a scalar"
            raise PickTableError(msg)
        return a

    try:
        cols = {
            "offset": x,
            "time": per_pick(time, "time", float),
            "phase": per_pick(phase, "phase", str),
        }
        cols["interface"] = (
            np.zeros(n) if interface is None else per_pick(interface, "interface", float)
        )
        for name, value in (
            ("amplitude", amplitude),
            ("amplitude_sigma", amplitude_sigma),
            ("survey_time", survey_time),
            ("position", position),
        ):
            if value is not None:
                cols[name] = per_pick(value, name, float)
        s = np.full(n, np.nan) if sigma is None else per_pick(sigma, "sigma", float)
    except (TypeError, ValueError) as err:
        if isinstance(err, PickTableError):
            raise
        msg = f"make_picks: an input is not numeric where a number is expected ({err})"
        raise PickTableError(msg) from None
    f = _check_frequency(frequency_mhz, "make_picks")
    s = _fill_sigma(s, f, _Where(), "frequency_mhz=")
    cols["sigma"] = s
    norm = _validate_arrays(cols, _Where())
    attrs = {"source": "arrays"}
    if f is not None:
        attrs["frequency_mhz"] = f
    attrs = _append_history(attrs, f"make_picks(n={n}, frequency_mhz={f})")
    return _build(norm, attrs)


def _fill_sigma(s: np.ndarray, f, where: _Where, how: str) -> np.ndarray:
    missing = np.isnan(s)
    if not missing.any():
        return s
    if f is None:
        i = int(np.flatnonzero(missing)[0])
        msg = (
            f"{where(i, 'sigma')}: no pick uncertainty and no antenna frequency to derive "
            f"the default from; give sigma, or the frequency ({how}) so that sigma = "
            f"{DEFAULT_SIGMA_FRACTION:g} x 1000/frequency_mhz ns"
        )
        raise PickTableError(msg)
    return np.where(missing, default_sigma(f), s)


# --- CSV -------------------------------------------------------------------------------


def _parse_number(text: str, required: bool, where: str) -> float:
    text = text.strip()
    if text == "":
        if required:
            msg = f"{where}: empty cell; expected a number"
            raise PickTableError(msg)
        return math.nan
    try:
        value = float(text)
    except ValueError:
        msg = f"{where}: {text!r} is not a number"
        raise PickTableError(msg) from None
    if required and not math.isfinite(value):
        msg = f"{where}: value {text!r} is not finite; expected a finite number"
        raise PickTableError(msg)
    return value


def read_picks(path, *, frequency_mhz=None) -> xr.Dataset:
    """Read a pick table from a CSV file (format in the module documentation).

    Parameters
    ----------
    path : str or path-like
        CSV file.
    frequency_mhz : float, optional
        Antenna centre frequency, MHz; overrides a ``# frequency_mhz:`` comment.
        Used for missing ``sigma_ns`` values.

    Returns
    -------
    xarray.Dataset
        Validated pick table; ``source`` is the file path.

    Raises
    ------
    PickTableError
        Naming the file, 1-based data row, column, the value and what is expected
        (also for a file that is not UTF-8 text).
    FileFormatError
        The file does not exist, is a directory or cannot be read (naming the path).
    InputError
        ``path`` is not a path.

    Examples
    --------
    >>> import pathlib, tempfile
    >>> f = pathlib.Path(tempfile.mkdtemp()) / "p.csv"
    >>> _ = f.write_text("# frequency_mhz: 500\\noffset_m,time_ns,phase\\n1.0,10.0,ground\\n")
    >>> float(read_picks(f)["sigma"][0])
    0.2
    """
    try:
        path = Path(path)
    except TypeError:
        msg = f"pick table path {path!r} is not a file path; expected a str or os.PathLike"
        raise InputError(msg) from None
    try:
        text = path.read_text(encoding="utf-8-sig")
    except UnicodeDecodeError as err:
        msg = (
            f"{path}: not a UTF-8 text file ({err.reason} at byte {err.start}); "
            "expected a CSV pick table"
        )
        raise PickTableError(msg) from None
    except FileNotFoundError:
        msg = f"{path}: no such file; expected a CSV pick table"
        raise FileFormatError(msg) from None
    except IsADirectoryError:
        msg = f"{path}: is a directory; expected a CSV pick table file"
        raise FileFormatError(msg) from None
    except (OSError, ValueError) as err:  # permissions, device errors, NUL in the name
        reason = getattr(err, "strerror", None) or str(err)
        msg = f"{path}: cannot be read ({reason}); expected a readable CSV pick table"
        raise FileFormatError(msg) from None
    lines = text.splitlines()
    attrs: dict = {}
    i = 0
    while i < len(lines) and (lines[i].strip() == "" or lines[i].lstrip().startswith("#")):
        body = lines[i].strip().lstrip("#").strip()
        if ":" in body:
            key, value = body.split(":", 1)
            key = key.strip()
            if key and key.replace("_", "").isalnum():
                value = value.strip()
                attrs[key] = attrs[key] + "\n" + value if key in attrs else value
        i += 1
    if i >= len(lines):
        msg = f"{path}: empty pick table; expected a header line such as 'offset_m,time_ns,phase'"
        raise PickTableError(msg)
    header_line = i + 1

    def split(line: str, lineno: int) -> list:
        try:
            return next(csv.reader([line]), [])
        except csv.Error as err:
            msg = f"{path} (line {lineno}): not valid CSV ({err})"
            raise PickTableError(msg) from None

    header = [h.strip() for h in split(lines[i], header_line)]
    unknown = [h for h in header if h not in _COLUMN_TO_VAR]
    if unknown:
        msg = (
            f"{location(path, None, unknown[0])} (line {header_line}): unknown column; "
            f"expected columns from {list(_COLUMN_TO_VAR)}"
        )
        raise PickTableError(msg)
    dup = sorted({h for h in header if header.count(h) > 1})
    if dup:
        msg = f"{path} (line {header_line}): column {dup[0]!r} appears more than once"
        raise PickTableError(msg)
    for need in ("offset_m", "time_ns", "phase"):
        if need not in header:
            msg = (
                f"{location(path, None, need)}: required column missing; header is {header}, "
                "expected at least offset_m, time_ns, phase"
            )
            raise PickTableError(msg)
    rows, line_numbers = [], []
    for lineno, line in enumerate(lines[i + 1 :], start=header_line + 1):
        row = split(line, lineno)
        if not row or all(cell.strip() == "" for cell in row):
            continue
        if len(row) != len(header):
            msg = (
                f"{location(path, len(rows) + 1)} (line {lineno}): {len(row)} fields; "
                f"expected {len(header)} like the header {header}"
            )
            raise PickTableError(msg)
        rows.append(row)
        line_numbers.append(lineno)
    if not rows:
        msg = f"{path}: no picks below the header (line {header_line}); expected data rows"
        raise PickTableError(msg)
    where = _Where(path, line_numbers)
    cols: dict = {}
    for col in header:
        var = _COLUMN_TO_VAR[col]
        j = header.index(col)
        cells = [r[j] for r in rows]
        if var == "phase":
            cols[var] = np.array([c.strip().lower() for c in cells])
            continue
        required = var in ("offset", "time")
        cols[var] = np.array(
            [_parse_number(c, required, where(r, var)) for r, c in enumerate(cells)]
        )
    n = len(rows)
    if "interface" not in cols:
        needs = np.isin(cols["phase"], _NEEDS_INTERFACE)
        if needs.any():
            r = int(np.flatnonzero(needs)[0])
            msg = (
                f"{location(path, r + 1, 'interface')} (line {line_numbers[r]}): column "
                f"missing but row is a {cols['phase'][r]} pick; add an 'interface' column "
                "(1 = bottom of layer 1)"
            )
            raise PickTableError(msg)
        cols["interface"] = np.zeros(n)
    f = _check_frequency(
        frequency_mhz if frequency_mhz is not None else attrs.get("frequency_mhz"),
        f"{path}: frequency_mhz",
    )
    if f is not None:
        attrs["frequency_mhz"] = f
    else:
        attrs.pop("frequency_mhz", None)
    s = cols.get("sigma", np.full(n, np.nan))
    cols["sigma"] = _fill_sigma(s, f, where, "a '# frequency_mhz: ...' line or frequency_mhz=")
    norm = _validate_arrays(cols, where)
    attrs.setdefault("source", str(path))
    attrs = _append_history(attrs, f"read_picks({str(path)!r}, frequency_mhz={f})")
    return _build(norm, attrs)


def _format(value, var: str) -> str:
    if var == "phase":
        return str(value)
    if var == "interface":
        return str(int(value))
    value = float(value)
    return "" if math.isnan(value) else repr(value)


def write_picks(picks: xr.Dataset, path, *, overwrite: bool = False) -> Path:
    """Write a pick table as CSV, atomically.

    Scalar dataset attributes become ``# key: value`` comment lines
    (multi-line values, like ``history``, one line each), so :func:`read_picks`
    restores them.

    Parameters
    ----------
    picks : xarray.Dataset
        Pick table; validated first.
    path : str or path-like
        Output file.
    overwrite : bool, default False
        Replace an existing file; otherwise :class:`OutputExistsError`.

    Returns
    -------
    pathlib.Path
        The written file.

    Examples
    --------
    >>> import pathlib, tempfile
    >>> f = pathlib.Path(tempfile.mkdtemp()) / "p.csv"
    >>> p = make_picks([1.0], [10.0], "ground", sigma=0.4)
    >>> write_picks(p, f).name
    'p.csv'
    """
    picks = validate_picks(picks)
    path = Path(path)
    if path.exists() and not overwrite:
        msg = f"{path}: output exists; pass overwrite=True to replace it"
        raise OutputExistsError(msg)
    lines = []
    for key, value in picks.attrs.items():
        if isinstance(value, str | int | float | np.integer | np.floating):
            for part in str(value).splitlines() or [""]:
                lines.append(f"# {key}: {part}")
    variables = [v for v in _VARIABLES if v in picks]
    columns = [_VARIABLES[v][0] for v in variables]
    values = {v: picks[v].values for v in variables}
    directory = path.parent if str(path.parent) else Path(".")
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=directory)
    try:
        with os.fdopen(fd, "w", encoding="utf-8", newline="") as fh:
            for line in lines:
                fh.write(line + "\n")
            w = csv.writer(fh, lineterminator="\n")
            w.writerow(columns)
            for i in range(picks.sizes["pick"]):
                w.writerow([_format(values[v][i], v) for v in variables])
        os.replace(tmp, path)
    except BaseException:
        if os.path.exists(tmp):
            os.unlink(tmp)
        raise
    return path


# --- combining and editing -------------------------------------------------------------


def merge_picks(*tables: xr.Dataset) -> xr.Dataset:
    """Concatenate pick tables along ``pick``.

    Optional variables missing from some tables are filled with NaN. The
    ``frequency_mhz`` attribute is kept when all tables agree and dropped
    otherwise; sources are joined with ``"; "``. Duplicates give a warning.

    Examples
    --------
    >>> a = make_picks([1.0], [3.34], "air", sigma=0.2)
    >>> b = make_picks([1.0], [10.0], "ground", sigma=0.4)
    >>> merge_picks(a, b)["phase"].values.tolist()
    ['air', 'ground']
    """
    if not tables:
        msg = "merge_picks needs at least one pick table"
        raise PickTableError(msg)
    tables = [_validate_dataset(t, warn=False) for t in tables]
    present = [v for v in _VARIABLES if any(v in t for t in tables)]
    cols = {}
    for v in present:
        parts = []
        for t in tables:
            if v in t:
                parts.append(np.asarray(t[v].values))
            else:
                parts.append(np.full(t.sizes["pick"], np.nan))
        cols[v] = np.concatenate(parts)
    norm = _validate_arrays(cols, _Where())
    freqs = {t.attrs.get("frequency_mhz") for t in tables}
    attrs = {}
    if len(freqs) == 1 and None not in freqs:
        attrs["frequency_mhz"] = freqs.pop()
    sources = [str(t.attrs.get("source", "?")) for t in tables]
    attrs["source"] = "; ".join(sources)
    attrs["history"] = "\n".join(t.attrs["history"] for t in tables if t.attrs.get("history"))
    sizes = ", ".join(str(t.sizes["pick"]) for t in tables)
    attrs = _append_history(attrs, f"merge_picks(sizes=[{sizes}])")
    return _build(norm, attrs)


def _indices(picks: xr.Dataset, index) -> np.ndarray:
    n = picks.sizes["pick"]
    idx = np.atleast_1d(np.asarray(index))
    if idx.dtype.kind not in "iu":
        msg = f"pick index {index!r} must be integer position(s) in 0..{n - 1}"
        raise PickTableError(msg)
    bad = (idx < -n) | (idx >= n)
    if bad.any():
        msg = f"pick index {int(idx[bad][0])} is out of range for a table of {n} picks"
        raise PickTableError(msg)
    return np.mod(idx, n)


def drop_picks(picks: xr.Dataset, index) -> xr.Dataset:
    """Return the table without the picks at positions ``index``.

    Examples
    --------
    >>> p = make_picks([1.0, 2.0], [10.0, 20.0], "ground", sigma=0.4)
    >>> drop_picks(p, 0)["offset"].values.tolist()
    [2.0]
    """
    picks = _validate_dataset(picks, warn=False)
    idx = _indices(picks, index)
    keep = np.setdiff1d(np.arange(picks.sizes["pick"]), idx)
    if keep.size == 0:
        msg = "drop_picks would remove every pick; a pick table needs at least one"
        raise PickTableError(msg)
    out = picks.isel(pick=keep)
    out.attrs = _append_history(picks.attrs, f"drop_picks(index={sorted(idx.tolist())})")
    return validate_picks(out)


def edit_pick(picks: xr.Dataset, index: int, *, offset=None, time=None, sigma=None) -> xr.Dataset:
    """Return the table with one pick moved (``offset``) or re-timed (``time``, ``sigma``).

    Examples
    --------
    >>> p = make_picks([1.0, 2.0], [10.0, 20.0], "ground", sigma=0.4)
    >>> edit_pick(p, 1, time=20.5)["time"].values.tolist()
    [10.0, 20.5]
    """
    picks = _validate_dataset(picks, warn=False)
    idx = _indices(picks, index)
    if idx.size != 1:
        msg = f"edit_pick edits one pick; got index {index!r}"
        raise PickTableError(msg)
    i = int(idx[0])
    cols = {v: picks[v].values.copy() for v in _VARIABLES if v in picks}
    changes = []
    for var, value in (("offset", offset), ("time", time), ("sigma", sigma)):
        if value is None:
            continue
        try:
            cols[var][i] = float(value)
        except (TypeError, ValueError):
            msg = f"pick index {i}, variable {var!r}: {value!r} is not a number"
            raise PickTableError(msg) from None
        changes.append(f"{var}={float(value)!r}")
    norm = _validate_arrays(cols, _Where())
    attrs = _append_history(picks.attrs, f"edit_pick(index={i}, {', '.join(changes)})")
    out = _build(norm, attrs)
    for v in picks.data_vars:
        if v not in _VARIABLES:
            out[v] = picks[v].copy()
    return out
