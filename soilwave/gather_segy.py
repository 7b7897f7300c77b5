"""SEG-Y gather files through the optional package segyio.

Samples are IEEE 32-bit floats (format code 5), so amplitudes round-trip to
float32 precision. SEG-Y time fields are in microseconds (sample interval)
and milliseconds (delay); GPR times are a million times shorter, so we follow
the common GPR practice of scaling times by 10^6: the binary-header sample
interval holds **picoseconds** and the trace-header delay holds **ns**.
Fields used:

* binary header: ``Interval`` (bytes 3217-3218, ps), ``Samples``
  (3221-3222), ``Format`` (3225-3226), ``ExtendedHeaders`` (3505-3506);
* trace header: ``offset`` (37-40), ``SourceGroupScalar`` (71-72; applied to
  the offset as well as to the coordinates, negative = divide, a common
  practice: the standard leaves the offset unscaled), ``SourceX`` (73-76),
  ``GroupX`` (81-84), ``DelayRecordingTime`` (109-110, ns),
  ``TRACE_SAMPLE_COUNT`` (115-116), ``TRACE_SAMPLE_INTERVAL`` (117-118, ps),
  ``CDP_X`` (181-184, the midpoint: the profile position).

Offsets and positions are written as integers with the smallest decimal
scalar (1 to 1/10000) that represents them to 1e-12 relative; finer values
are rounded to 0.1 mm. The textual header (40 card images) carries the values SEG-Y has
no exact field for, as ``KEY=VALUE`` tokens (values percent-encoded):
``DT_NS``, ``T0_NS``, ``FREQUENCY_MHZ``, ``GEOMETRY``, ``ANTENNA_SEPARATION_M``
and ``UNITS``. When present they take precedence over the binary fields and
must agree with them. The processing history and any further gather attrs are stored in
extended textual headers (one ``H`` card per history line, one ``A`` card per
attr as a TOML ``key = value`` line, ``+`` cards for continuations). Files from
other programs usually lack these tokens: pass ``frequency_mhz`` (and if
needed ``geometry`` and ``time_unit``) to :func:`read_gather`.

Read and write through :func:`soilwave.read_gather` and
:func:`soilwave.write_gather`.
"""

from __future__ import annotations

import math
import re
import tomllib
import urllib.parse
from pathlib import Path

import numpy as np
import xarray as xr

from soilwave.atomic import atomic_write
from soilwave.errors import FileFormatError, InputError
from soilwave.gather import GEOMETRIES, gather_from_array
from soilwave.gather_io import extra_attrs, finish_read
from soilwave.gather_text import toml_key, toml_value

__all__ = ["read_segy", "write_segy"]

# --- SEG-Y -----------------------------------------------------------------------------

_TIME_UNITS_PS = {"ps": 1.0, "ns": 1e3, "us": 1e6}
_TEXT_CARDS = 40
_CARD = 80
_MAX_SCALE_DIGITS = 4
_EXT_STANZA = "((soilwave: history and attrs))"


def _segyio():
    try:
        import segyio
    except ImportError:
        msg = (
            "reading or writing SEG-Y needs the optional package segyio; install it with "
            "pip install 'soilwave[segy]'"
        )
        raise ImportError(msg) from None
    return segyio


def _decimal_scalar(values: np.ndarray) -> tuple[int, np.ndarray]:
    """Smallest decimal scaling that turns ``values`` (m) into exact int32 integers."""
    for k in range(_MAX_SCALE_DIGITS + 1):
        ints = np.round(values * 10**k)
        # decimal values such as 0.15000000000000002 (from 3 * 0.05) count as exact
        if np.all(np.abs(ints / 10**k - values) <= 1e-12 * np.maximum(1.0, np.abs(values))):
            break
    if np.any(np.abs(ints) > 2**31 - 1):
        msg = (
            f"coordinates up to {float(np.max(np.abs(values)))!r} m do not fit SEG-Y 32-bit fields"
        )
        raise InputError(msg)
    scalar = -(10**k) if k else 1
    return scalar, ints.astype(np.int64)


def _apply_scalar(ints, scalar) -> np.ndarray:
    ints = np.asarray(ints, dtype=float)
    if scalar < 0:
        return ints / (-scalar)
    if scalar > 0:
        return ints * scalar
    return ints


def _encode_cards(tokens: dict) -> list[str]:
    cards = ["C01 SOILWAVE GPR GATHER  FORMAT=SOILWAVE-GATHER VERSION=1"]
    cards.append("C02 TIMES SCALED BY 1E6: BINARY INTERVAL IN PS, TRACE DELAY IN NS")
    cards.append("C03 SOURCEGROUPSCALAR ALSO APPLIES TO THE OFFSET FIELD (BYTES 37-40)")
    line = "C04"
    number = 4
    for key, value in tokens.items():
        token = f" {key}={urllib.parse.quote(str(value), safe='')}"
        if len(line) + len(token) > _CARD:
            cards.append(line)
            number += 1
            line = f"C{number:02d}"
            if len(line) + len(token) > _CARD:
                msg = f"SEG-Y textual header: value of {key} is too long ({value!r})"
                raise InputError(msg)
        line += token
    cards.append(line)
    cards.append(f"C{_TEXT_CARDS} END TEXTUAL HEADER")
    return cards


def _cards_to_text(cards: list[str]) -> str:
    padded = [c.ljust(_CARD)[:_CARD] for c in cards]
    padded += [" " * _CARD] * (_TEXT_CARDS - len(padded))
    return "".join(padded)


def _ext_headers(history: str, attrs: dict) -> list[str]:
    """Extended textual headers (3200 bytes each) holding history and attrs losslessly.

    Each history line becomes an ``H`` card and each extra attr an ``A`` card
    holding one TOML ``key = value`` line; text is escaped to ASCII
    (``unicode_escape``) and ends with a ``$`` marker so trailing blanks
    survive; ``+`` cards continue a line longer than one card.
    """
    lines = [("H", line) for line in history.split("\n")] if history else []
    lines += [("A", f"{toml_key(k)} = {toml_value(v, wrap=False)}") for k, v in attrs.items()]
    if not lines:
        return []
    cards = [_EXT_STANZA]
    width = _CARD - 2
    for kind, line in lines:
        enc = line.encode("unicode_escape").decode("ascii") + "$"
        chunks = [enc[i : i + width] for i in range(0, len(enc), width)]
        cards.append(f"{kind} " + chunks[0])
        cards.extend("+ " + c for c in chunks[1:])
    headers = []
    for i in range(0, len(cards), _TEXT_CARDS):
        headers.append(_cards_to_text(cards[i : i + _TEXT_CARDS]))
    return headers


def _parse_ext_headers(texts: list[str]) -> tuple[str, dict]:
    cards = []
    for text in texts:
        cards.extend(text[i : i + _CARD] for i in range(0, len(text), _CARD))
    if not cards or not cards[0].startswith(_EXT_STANZA):
        return "", {}
    lines: list[list[str]] = []
    for card in cards[1:]:
        if card[:2] in ("H ", "A "):
            lines.append([card[0], card[2:]])
        elif card.startswith("+ ") and lines:
            lines[-1][1] += card[2:]
        elif card.strip():
            msg = f"unexpected card {card.strip()[:20]!r} in the extended textual headers"
            raise ValueError(msg)
    history, attr_lines = [], []
    for kind, enc in lines:
        enc = enc.rstrip(" ")
        if not enc.endswith("$"):
            msg = "a line of the extended textual headers lacks its end marker (truncated?)"
            raise ValueError(msg)
        text = enc[:-1].encode("ascii").decode("unicode_escape")
        (history if kind == "H" else attr_lines).append(text)
    attrs = tomllib.loads("\n".join(attr_lines)) if attr_lines else {}
    return "\n".join(history), attrs


def write_segy(gather, path: Path, *, overwrite: bool) -> None:
    segyio = _segyio()
    extra = {
        k: (v.tolist() if isinstance(v, np.ndarray) else v) for k, v in extra_attrs(gather).items()
    }
    dim = gather.dims[0]
    time = np.asarray(gather["time"].values, dtype=float)
    n_tr, n_s = gather.shape
    dt = (time[-1] - time[0]) / (n_s - 1)
    dt_ps = round(dt * 1e3)
    if not 1 <= dt_ps <= 32767:
        msg = f"sample interval {dt!r} ns is outside the SEG-Y range 0.001-32.767 ns"
        raise InputError(msg)
    if n_s > 32767:
        msg = f"{n_s} samples per trace exceed the SEG-Y limit of 32767"
        raise InputError(msg)
    delay = round(time[0])
    if abs(delay) > 32767:
        msg = f"first sample time {time[0]!r} ns is outside the SEG-Y delay range"
        raise InputError(msg)
    axis = np.asarray(gather[dim].values, dtype=float)
    if dim == "offset":
        offsets = axis
        mids = np.zeros(n_tr)
        if gather.attrs["geometry"] == "WARR":
            src, rec = np.zeros(n_tr), axis
        else:
            src, rec = -axis / 2, axis / 2
    else:
        sep = float(gather.attrs["antenna_separation_m"])
        offsets = np.full(n_tr, sep)
        mids = axis
        src, rec = axis - sep / 2, axis + sep / 2
    scalar, ints = _decimal_scalar(np.concatenate([offsets, mids, src, rec]))
    off_i, mid_i, src_i, rec_i = np.split(ints, 4)
    tokens = {
        "DT_NS": repr(float(dt)),
        "T0_NS": repr(float(time[0])),
        "FREQUENCY_MHZ": repr(float(gather.attrs["frequency_mhz"])),
        "GEOMETRY": gather.attrs["geometry"],
    }
    if dim == "position":
        tokens["ANTENNA_SEPARATION_M"] = repr(float(gather.attrs["antenna_separation_m"]))
    tokens["UNITS"] = gather.attrs["units"]
    text0 = _cards_to_text(_encode_cards(tokens))
    ext = _ext_headers(gather.attrs.get("history") or "", extra)
    data = np.asarray(gather.values, dtype=np.float32)
    if not np.all(np.isfinite(data)):
        msg = "gather amplitudes overflow 32-bit floats; scale them before writing SEG-Y"
        raise InputError(msg)
    tf = segyio.TraceField

    def writer(tmp):
        spec = segyio.spec()
        spec.samples = list(range(n_s))
        spec.format = 5
        spec.tracecount = n_tr
        spec.ext_headers = len(ext)
        with segyio.create(str(tmp), spec) as f:
            f.text[0] = text0
            for i, t in enumerate(ext, start=1):
                f.text[i] = t
            f.bin.update(
                {
                    segyio.BinField.Interval: dt_ps,
                    segyio.BinField.Samples: n_s,
                    segyio.BinField.Format: 5,
                    segyio.BinField.ExtendedHeaders: len(ext),
                    segyio.BinField.SEGYRevision: 1,
                }
            )
            for i in range(n_tr):
                f.header[i] = {
                    tf.TRACE_SEQUENCE_LINE: i + 1,
                    tf.TRACE_SEQUENCE_FILE: i + 1,
                    tf.offset: int(off_i[i]),
                    tf.SourceGroupScalar: scalar,
                    tf.SourceX: int(src_i[i]),
                    tf.GroupX: int(rec_i[i]),
                    tf.CDP_X: int(mid_i[i]),
                    tf.DelayRecordingTime: delay,
                    tf.TRACE_SAMPLE_COUNT: n_s,
                    tf.TRACE_SAMPLE_INTERVAL: dt_ps,
                }
                f.trace[i] = data[i]

    atomic_write([(path, writer)], overwrite=overwrite)


def _parse_tokens(text: str) -> dict:
    tokens = {}
    if "FORMAT=SOILWAVE-GATHER" not in text:
        return tokens
    for match in re.finditer(r"([A-Z0-9_]+)=(\S*)", text):
        tokens[match.group(1)] = urllib.parse.unquote(match.group(2))
    return tokens


def _token_float(path, tokens, key):
    try:
        x = float(tokens[key])
    except ValueError:
        msg = f"{path}: textual header {key}={tokens[key]!r} is not a number"
        raise FileFormatError(msg) from None
    return x


def read_segy(path: Path, *, frequency_mhz, geometry, time_unit) -> xr.DataArray:
    segyio = _segyio()
    tf = segyio.TraceField
    try:
        with segyio.open(str(path), "r", ignore_geometry=True) as f:
            n_tr = f.tracecount
            text0 = bytes(f.text[0]).decode("ascii", errors="replace")
            ext_texts = [
                bytes(f.text[i]).decode("ascii", errors="replace")
                for i in range(1, f.ext_headers + 1)
            ]
            interval = int(f.bin[segyio.BinField.Interval])
            n_s = int(f.bin[segyio.BinField.Samples])
            fields = (
                tf.offset,
                tf.SourceGroupScalar,
                tf.SourceX,
                tf.GroupX,
                tf.CDP_X,
                tf.DelayRecordingTime,
                tf.TRACE_SAMPLE_COUNT,
                tf.TRACE_SAMPLE_INTERVAL,
            )
            heads = np.array([[h[k] for k in fields] for h in f.header], dtype=np.int64)
            data = np.array(f.trace.raw[:], dtype=float)
    except (OSError, RuntimeError, ValueError, KeyError, IndexError) as exc:
        msg = f"{path}: cannot be read as SEG-Y (corrupt or truncated?): {exc}"
        raise FileFormatError(msg) from None
    if n_tr < 1 or data.shape != (n_tr, n_s):
        msg = f"{path}: expected {n_tr} traces of {n_s} samples; read shape {data.shape}"
        raise FileFormatError(msg)
    off, scal, sx, gx, cdpx, delay, counts, intervals = heads.T
    bad = np.flatnonzero(counts != n_s)
    if bad.size:
        i = int(bad[0])
        msg = (
            f"{path}, trace {i + 1}: trace header gives {counts[i]} samples but the binary "
            f"header gives {n_s}"
        )
        raise FileFormatError(msg)
    bad = np.flatnonzero((intervals != interval) & (intervals != 0))
    if bad.size:
        i = int(bad[0])
        msg = (
            f"{path}, trace {i + 1}: trace header sample interval {intervals[i]} differs from "
            f"the binary header's {interval}"
        )
        raise FileFormatError(msg)
    if np.any(delay != delay[0]):
        i = int(np.flatnonzero(delay != delay[0])[0])
        msg = (
            f"{path}, trace {i + 1}: delay {delay[i]} differs from trace 1's {delay[0]}; "
            "a gather needs one common time axis"
        )
        raise FileFormatError(msg)
    if interval <= 0:
        msg = f"{path}: binary header sample interval is {interval}; expected > 0"
        raise FileFormatError(msg)
    if not np.all(np.isfinite(data)):
        i, j = (int(k) for k in np.argwhere(~np.isfinite(data))[0])
        msg = f"{path}, trace {i + 1}, sample {j + 1}: non-finite amplitude {float(data[i, j])!r}"
        raise FileFormatError(msg)
    tokens = _parse_tokens(text0)
    try:
        history, extra = _parse_ext_headers(ext_texts)
    except (ValueError, UnicodeDecodeError, tomllib.TOMLDecodeError) as exc:
        msg = f"{path}: extended textual headers: {exc}"
        raise FileFormatError(msg) from None
    # time axis
    unit_ps = _TIME_UNITS_PS[time_unit]
    dt_bin = interval * unit_ps * 1e-3
    t0_bin = float(delay[0]) * unit_ps
    if "DT_NS" in tokens:
        dt = _token_float(path, tokens, "DT_NS")
        if round(dt * 1e3) != interval:
            msg = (
                f"{path}: textual header DT_NS={dt!r} disagrees with the binary header "
                f"sample interval {interval} ps"
            )
            raise FileFormatError(msg)
    else:
        dt = dt_bin
    if "T0_NS" in tokens:
        t0 = _token_float(path, tokens, "T0_NS")
        if round(t0) != delay[0]:
            msg = (
                f"{path}: textual header T0_NS={t0!r} disagrees with the trace delay {delay[0]} ns"
            )
            raise FileFormatError(msg)
    else:
        t0 = t0_bin
    # frequency and geometry
    freq = _token_float(path, tokens, "FREQUENCY_MHZ") if "FREQUENCY_MHZ" in tokens else None
    if frequency_mhz is not None:
        if freq is not None and not math.isclose(float(frequency_mhz), freq):
            msg = (
                f"{path}: frequency_mhz={frequency_mhz!r} disagrees with the file's "
                f"FREQUENCY_MHZ={freq!r}"
            )
            raise InputError(msg)
        freq = frequency_mhz
    if freq is None:
        msg = (
            f"{path}: the file does not give the antenna frequency; pass "
            "read_gather(..., frequency_mhz=...) in MHz"
        )
        raise FileFormatError(msg)
    file_geom = tokens.get("GEOMETRY")
    if geometry is not None and file_geom is not None and geometry != file_geom:
        msg = f"{path}: geometry={geometry!r} disagrees with the file's GEOMETRY={file_geom!r}"
        raise InputError(msg)
    geom = geometry or file_geom
    scal = np.where(scal == 0, 1, scal)
    offsets = np.array([_apply_scalar(o, s) for o, s in zip(off, scal, strict=True)])
    if np.any(cdpx != 0):
        mids = np.array([_apply_scalar(c, s) for c, s in zip(cdpx, scal, strict=True)])
    else:
        mids = np.array([_apply_scalar(a + b, s) / 2 for a, b, s in zip(sx, gx, scal, strict=True)])
    if geom is None:
        profile = n_tr > 1 and np.all(offsets == offsets[0]) and np.unique(mids).size == n_tr
        geom = "fixed-offset" if profile else "CMP"
    if geom not in GEOMETRIES:
        msg = f"{path}: geometry must be one of {list(GEOMETRIES)}; got {geom!r}"
        raise FileFormatError(msg)
    kwargs = {}
    if geom == "fixed-offset":
        if "ANTENNA_SEPARATION_M" in tokens:
            sep = _token_float(path, tokens, "ANTENNA_SEPARATION_M")
        else:
            sep = float(offsets[0])
        if np.any(offsets != offsets[0]):
            msg = f"{path}: a fixed-offset profile needs one offset; trace offsets vary"
            raise FileFormatError(msg)
        kwargs = {"positions": mids, "antenna_separation_m": sep}
    else:
        kwargs = {"offsets": offsets}
    try:
        da = gather_from_array(
            data,
            dt_ns=dt,
            t0_ns=t0,
            frequency_mhz=freq,
            geometry=geom,
            units=tokens.get("UNITS", "1"),
            history=history,
            **kwargs,
        )
    except InputError as exc:
        msg = f"{path}: inconsistent SEG-Y headers: {exc}"
        raise FileFormatError(msg) from None
    da.attrs = {**da.attrs, **extra}
    return finish_read(path, da)
