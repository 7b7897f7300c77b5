"""Provenance: the ``history`` attribute and the software version.

Every processing step and every product appends one line to the ``history``
attribute of what it returns (NetCDF/CF convention): an ISO 8601 UTC time
stamp, ``soilwave <version>`` and the step with its arguments. This module is
the single place that formats those lines (layer 0: standard library and
numpy only).
"""

from __future__ import annotations

import datetime as _dt
from importlib.metadata import PackageNotFoundError
from importlib.metadata import version as _pkg_version

import numpy as np

__all__ = ["append_history", "history_line", "software_version"]


def software_version() -> str:
    """Installed soilwave version (``"0+unknown"`` when run from a bare source tree).

    Examples
    --------
    >>> isinstance(software_version(), str)
    True
    """
    try:
        return _pkg_version("soilwave")
    except PackageNotFoundError:  # pragma: no cover - running from a source tree
        return "0+unknown"


def _format_arg(value) -> str:
    if isinstance(value, float | np.floating):
        return repr(float(value))
    if isinstance(value, np.integer):
        return repr(int(value))
    if isinstance(value, list | tuple | np.ndarray):
        return "[" + ", ".join(_format_arg(v) for v in value) + "]"
    return repr(value)


def history_line(step: str, **kwargs) -> str:
    """One history line, ``"<ISO time> soilwave <version> <step>(<args>)"``.

    Parameters
    ----------
    step : str
        Name of the step, e.g. ``"dewow"``.
    **kwargs
        Arguments of the step, written as ``name=value``.

    Examples
    --------
    >>> history_line("dewow", window_ns=6.0).split(" ", 3)[3]
    'dewow(window_ns=6.0)'
    """
    now = _dt.datetime.now(_dt.UTC).isoformat(timespec="seconds").replace("+00:00", "Z")
    args = ", ".join(f"{k}={_format_arg(v)}" for k, v in kwargs.items())
    return f"{now} soilwave {software_version()} {step}({args})"


def append_history(attrs: dict, step: str, **kwargs) -> dict:
    """Return a copy of ``attrs`` with one history line appended.

    The input mapping is not modified.

    Examples
    --------
    >>> a = append_history({}, "agc", window_ns=10.0)
    >>> a["history"].endswith("agc(window_ns=10.0)")
    True
    """
    out = dict(attrs)
    old = out.get("history") or ""
    line = history_line(step, **kwargs)
    out["history"] = f"{old}\n{line}" if old else line
    return out
