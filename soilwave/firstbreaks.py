"""First breaks on multi-offset gathers: air and ground waves, noise level, pick sigma.

Layer 2 (xarray on top of pure numpy kernels at the bottom of this module).
:func:`first_breaks` picks the two direct waves of a multi-offset gather (CMP
or WARR); :func:`soilwave.auto_pick` starts from them. The kernels here
(characteristic functions, main-lobe extrema, pick uncertainty) are also used
by :mod:`soilwave.line_picks` and :mod:`soilwave.reflection_picks`.

1. **Air wave.** A characteristic function marks the first arrival on every
   trace: the energy ratio (Coppens 1985, Geophys. Prospect. 33:1212-1231) of
   the energy in one period after a sample to the energy recorded up to it
   (plus a stabilising constant), or the STA/LTA ratio (short-term over
   long-term average of the squared amplitude; Allen 1978, value from memory).
   The constant is at least the energy of one period of noise at the
   gather's overall amplitude level (``1.4826 MAD`` of all samples, dominated
   by noise), so that noise at the start of a weak far trace does not look
   like an onset.
   Its maximum is an onset; the largest extremum within 1.5 periods after it
   is the arrival's main lobe. These times are held to the linear moveout
   of the air wave, ``t = x / c + dt0``: ``dt0`` is the median of the densest
   cluster of misfits (the misfit with most others within a quarter period,
   robust where the air wave is lost in noise on many traces) and traces more
   than a quarter period off the line are outliers; at least a quarter of the
   traces (and three) must fit.
2. **Ground wave.** The same, after muting everything before the air wave's
   main lobe plus 0.75 period; the line ``t = dt0 + x / v_1`` (through the
   air wave's intercept) is fitted robustly (densest cluster of slownesses,
   then least squares on the traces within a quarter period of the line).
3. **Noise.** The noise level ``sigma_n`` is the scaled median absolute
   deviation (``1.4826 MAD``) of the amplitudes recorded before the air wave
   (more than one period before its main lobe). With fewer than 32 such
   samples the last tenth of every trace is used instead.

Picks where the air and ground waves lie within one period of each other
(near offsets) are left out.

Every pick sits on the main lobe (largest extremum) of its arrival, so all
phases refer to the same point of the wavelet. With ``align_air=True`` the
air-wave intercept ``dt0`` is subtracted from all times: the air wave then
arrives at ``x / c``, as the travel-time forward model assumes (time zero at
the transmitter firing).

Pick uncertainty (common practice, after the Cramer-Rao bound for timing a
wavelet of dominant period ``T`` in white noise)::

    sigma_t = max(T / (2 pi sqrt(SNR)), T / 10),   SNR = (A / sigma_n)^2

with ``A`` the envelope amplitude at the pick; ``T / 10`` is the optimistic end
of the usual one tenth to one quarter of a period (value from memory). The
envelope amplitude ``A`` is stored in the ``amplitude`` column and ``sigma_n``
in ``amplitude_sigma``.
"""

from __future__ import annotations

import numpy as np
from scipy import signal

from soilwave.errors import InputError
from soilwave.gather import sample_interval
from soilwave.picks import make_picks
from soilwave.provenance import history_line
from soilwave.semblance import _check_gather, _period_ns
from soilwave.wave import SPEED_OF_LIGHT

__all__ = ["first_breaks"]

#: Pick sigma floor as a fraction of the dominant period (common practice).
SIGMA_FLOOR_FRACTION = 0.1

#: Smallest noise level as a fraction of the largest amplitude (a dynamic range
#: of 80 dB), so that noise-free synthetic gathers have a finite SNR.
DYNAMIC_RANGE_FLOOR = 1e-4

_METHODS = ("energy_ratio", "sta_lta")


# --- xarray layer -----------------------------------------------------------------


def _prepare(gather, func, period_ns, method):
    g = _check_gather(gather, "offset", func)
    if method not in _METHODS:
        msg = f"{func}: method must be one of {list(_METHODS)}; got {method!r}"
        raise InputError(msg)
    x = np.asarray(g["offset"].values, dtype=float)
    if np.any(x < 0):
        msg = f"{func}: offsets must be >= 0 m; got {x.tolist()}"
        raise InputError(msg)
    t = np.asarray(g["time"].values, dtype=float)
    period = _period_ns(g, period_ns)
    return g, x, t, sample_interval(g), period


def _first_break_picks(data, x, t, dt, period, method, min_snr):
    """Air and ground picks (numpy); returns a dict of arrays and fitted lines."""
    analytic = signal.hilbert(data, axis=-1)
    env = np.abs(analytic)
    air = _air_wave(data, x, t, dt, period, method, min_snr)
    noise = _noise_level(data, x, t, period, air["shift"] if air["found"] else None)
    ground = _ground_wave(data, x, t, dt, period, method, air, noise)
    out = {"air": air, "ground": ground, "noise": noise, "env": env, "analytic": analytic}
    if not air["found"]:
        return out
    # drop air and ground picks where the two arrivals are closer than a period
    if ground["found"]:
        sep = x * (ground["slowness"] - 1.0 / SPEED_OF_LIGHT)
    else:
        sep = np.full(x.size, np.inf)
    merged = sep < period
    for key in ("air", "ground"):
        ph = out[key]
        if not ph["found"]:
            continue
        ok = ph["ok"] & ~merged & np.isfinite(ph["time"])
        amp = _envelope_at(env, t, dt, ph["time"])
        ok &= amp >= min_snr * noise
        ph["ok"] = ok
        ph["amplitude"] = amp
    return out


def first_breaks(gather, *, method="energy_ratio", period_ns=None, min_snr=3.0, align_air=True):
    """Pick the air wave and the ground wave on a multi-offset gather.

    See the module notes for the method. Picks where the air and ground waves
    lie within one period of each other (near offsets) are left out.

    Parameters
    ----------
    gather : xarray.DataArray
        Multi-offset gather, dims ``(offset, time)`` (m, ns).
    method : {"energy_ratio", "sta_lta"}, optional
        Characteristic function for the onsets.
    period_ns : float, optional
        Dominant period, ns. Default: from the data spectrum.
    min_snr : float, optional
        Smallest envelope amplitude of a pick in noise levels.
    align_air : bool, optional
        Subtract the air-wave intercept so the air wave arrives at ``x / c``.

    Returns
    -------
    xarray.Dataset
        Pick table (:func:`soilwave.make_picks`) with phases ``air`` and
        ``ground``; attributes ``time_shift_ns`` (air-wave intercept removed
        or found), ``ground_velocity`` (m/ns, NaN if not found),
        ``noise_level`` and ``period_ns``.

    Examples
    --------
    >>> import numpy as np
    >>> from soilwave.gather import gather_from_array
    >>> x = np.arange(1.0, 4.01, 0.2); t = np.arange(0, 60, 0.1)
    >>> def ricker(tt): u = np.pi * 0.2 * (t - tt[:, None]); return (1 - 2*u**2) * np.exp(-u**2)
    >>> data = ricker(x / 0.2998) + ricker(x / 0.1)
    >>> p = first_breaks(gather_from_array(data, offsets=x, dt_ns=0.1, frequency_mhz=200.0))
    >>> round(float(p.attrs["ground_velocity"]), 3)
    0.1
    """
    g, x, t, dt, period = _prepare(gather, "first_breaks", period_ns, method)
    data = np.asarray(g.values, dtype=float)
    fb = _first_break_picks(data, x, t, dt, period, method, float(min_snr))
    if not fb["air"]["found"]:
        msg = (
            "first_breaks: no air wave found (the first arrivals do not follow t = x/c + "
            "constant on at least half of the traces); check the offsets and time axis"
        )
        raise InputError(msg)
    shift = fb["air"]["shift"] if align_air else 0.0
    rows = _table_rows([], fb, period, shift)
    picks = _to_table(rows, g, fb["noise"])
    picks.attrs.update(_diagnostics(fb, period, shift))
    picks.attrs["history"] = _with_step(
        g, picks, "first_breaks", method=method, align_air=bool(align_air)
    )
    return picks


def _with_step(gather, picks, step, **kwargs):
    """Gather history, then the pick table's own lines, then this step."""
    lines = [str(gather.attrs.get("history", "") or ""), str(picks.attrs.get("history", ""))]
    lines.append(history_line(step, **kwargs))
    return "\n".join(line for line in lines if line)


def _diagnostics(fb, period, shift):
    return {
        "time_shift_ns": float(fb["air"]["shift"]),
        "time_shift_removed": int(shift != 0.0),
        "ground_velocity": (
            float(1.0 / fb["ground"]["slowness"]) if fb["ground"]["found"] else float("nan")
        ),
        "noise_level": float(fb["noise"]),
        "period_ns": float(period),
    }


def _table_rows(events, fb, period, shift):
    """Concatenate air, ground and reflection picks into column lists."""
    keys = ("offset", "time", "phase", "interface", "sigma", "amplitude", "amplitude_sigma")
    cols = {k: [] for k in keys}
    noise = fb["noise"]

    def add(x, tt, amp, phase, interface, n_stack=1, timing_level=None, sigma_min=0.0):
        level = noise / np.sqrt(n_stack)
        cols["offset"].append(x)
        cols["time"].append(tt - shift)
        cols["phase"].append(np.full(x.size, phase))
        cols["interface"].append(np.full(x.size, interface))
        timing = level if timing_level is None else timing_level
        cols["sigma"].append(np.maximum(_pick_sigma(amp, timing, period), sigma_min))
        cols["amplitude"].append(amp)
        cols["amplitude_sigma"].append(np.full(x.size, level))

    for phase in ("air", "ground"):
        ph = fb[phase]
        if ph["found"] and np.any(ph["ok"]):
            ok = ph["ok"]
            add(ph["x"][ok], ph["time"][ok], ph["amplitude"][ok], phase, 0)
    for k, ev in enumerate(events, start=1):
        add(
            ev["x"],
            ev["time"],
            ev["amplitude"],
            "reflection",
            k,
            ev["n_stack"],
            ev.get("level"),
            ev.get("sigma_min", 0.0),
        )
    return cols


def _to_table(cols, g, noise):
    if not cols["offset"]:
        msg = "no air, ground or reflection arrival could be picked on this gather"
        raise InputError(msg)
    cat = {k: np.concatenate(v) for k, v in cols.items()}
    noise_sigma = cat["amplitude_sigma"]
    return make_picks(
        cat["offset"],
        cat["time"],
        cat["phase"],
        interface=cat["interface"].astype(int),
        sigma=cat["sigma"],
        frequency_mhz=float(g.attrs["frequency_mhz"]),
        amplitude=cat["amplitude"],
        amplitude_sigma=noise_sigma,
    )


# --- numpy kernels ----------------------------------------------------------------


def _envelope_at(env, t, dt, times):
    """Envelope of trace i at times[i] (nearest sample); NaN where times is NaN."""
    out = np.full(times.size, np.nan)
    ok = np.isfinite(times)
    k = np.clip(np.rint((times[ok] - t[0]) / dt), 0, t.size - 1).astype(int)
    out[ok] = env[np.flatnonzero(ok), k]
    return out


def _pick_sigma(amplitude, noise, period):
    """``max(T / (2 pi A / sigma_n), T / 10)`` (module notes), ns."""
    amp = np.asarray(amplitude, dtype=float)
    with np.errstate(divide="ignore"):
        s = period * noise / (2.0 * np.pi * amp)
    return np.maximum(np.where(np.isfinite(s), s, period), SIGMA_FLOOR_FRACTION * period)


def _characteristic(data, dt, period, method, noise=0.0):
    """Energy ratio or STA/LTA of every trace (same shape as data).

    The stabilising constant added to the denominator is the larger of 1e-3 of
    the trace's mean energy per window and the energy of noise of standard
    deviation ``noise`` over one window (so that a muted or quiet stretch
    followed by noise does not look like an arrival). ``noise`` is a scalar or
    one value per trace.
    """
    noise = np.asarray(noise, dtype=float)
    if noise.ndim == 1:
        noise = noise[:, None]
    e = data**2
    n = data.shape[-1]
    c = np.concatenate([np.zeros((e.shape[0], 1)), np.cumsum(e, axis=-1)], axis=-1)
    k = np.arange(n)
    if method == "energy_ratio":
        w = max(2, round(period / dt))
        post = c[:, np.minimum(k + w, n)] - c[:, k]
        prior = c[:, k + 1]
        beta = np.maximum(1e-3 * c[:, -1:] / n * w, np.maximum(w * noise**2, 1e-300))
        return post / (prior + beta)
    ns = max(2, round(period / dt))
    nl = 5 * ns
    sta = (c[:, np.minimum(k + ns, n)] - c[:, k]) / ns
    lta = (c[:, k + 1] - c[:, np.maximum(k + 1 - nl, 0)]) / np.minimum(k + 1, nl)
    beta = np.maximum(1e-3 * c[:, -1:] / n, np.maximum(noise**2, 1e-300))
    return sta / (lta + beta)


def _subsample(y, k):
    """Sub-sample offset of the extremum of y at k (parabola through 3 samples)."""
    if 0 < k < y.size - 1:
        y0, y1, y2 = y[k - 1], y[k], y[k + 1]
        den = y0 - 2.0 * y1 + y2
        if den != 0:
            return float(np.clip(0.5 * (y0 - y2) / den, -0.5, 0.5))
    return 0.0


def _extremum(trace, lo, hi, sign=0):
    """Largest extremum (of ``sign * trace``; ``|trace|`` when sign is 0) in [lo, hi].

    Returns (fractional index, sign) or None when the largest value sits on
    the window edge (no interior extremum).
    """
    n = trace.size
    lo, hi = max(int(lo), 0), min(int(hi), n - 1)
    if hi - lo < 2:
        return None
    seg = trace[lo : hi + 1]
    y = np.abs(seg) if sign == 0 else sign * seg
    k = int(np.argmax(y))
    if k == 0 or k == seg.size - 1:
        return None
    s = sign if sign != 0 else (1 if seg[k] >= 0 else -1)
    return lo + k + _subsample(s * seg, k), s


def _onset_picks(data, t, dt, period, method, start_idx, noise=0.0, sign=0):
    """Main-lobe times after the characteristic-function onset, per trace (NaN if none).

    The main lobe is the largest extremum (of ``sign * trace`` when ``sign`` is
    +1 or -1) within 1.5 periods after the onset.
    """
    m, n = data.shape
    d = data.copy()
    for i in range(m):
        d[i, : max(0, min(n, int(start_idx[i])))] = 0.0
    cf = _characteristic(d, dt, period, method, noise)
    for i in range(m):
        cf[i, : max(0, min(n, int(start_idx[i])))] = 0.0
    onset = np.argmax(cf, axis=-1)
    w = round(1.5 * period / dt)
    times = np.full(m, np.nan)
    signs = np.zeros(m, dtype=int)
    for i in range(m):
        ex = _extremum(d[i], onset[i], onset[i] + w, sign)
        if ex is not None:
            times[i] = t[0] + ex[0] * dt
            signs[i] = ex[1]
    return times, signs


def _follow_line(data, t, dt, period, pred, sign):
    """Same-sign extremum within a quarter period of the predicted times."""
    m = data.shape[0]
    half = max(1, round(0.25 * period / dt))
    times = np.full(m, np.nan)
    for i in range(m):
        c = round((pred[i] - t[0]) / dt)
        ex = _extremum(data[i], c - half, c + half, sign)
        if ex is not None:
            times[i] = t[0] + ex[0] * dt
    return times


def _densest(values, half_width):
    """Centre of the densest cluster: the value with most others within half_width."""
    v = np.sort(np.asarray(values, dtype=float))
    counts = np.searchsorted(v, v + half_width, side="right") - np.searchsorted(
        v, v - half_width, side="left"
    )
    k = int(np.argmax(counts))
    best = v[np.abs(v - v[k]) <= half_width]
    return float(np.median(best))


def _majority_sign(signs):
    s = int(np.sign(np.sum(signs)))
    return s if s != 0 else 1


def _air_wave(data, x, t, dt, period, method, min_snr):
    m = x.size
    # the gather's overall amplitude level (1.4826 MAD of all samples, dominated
    # by noise in a gather of arrivals) stabilises the characteristic function,
    # so that noise at the start of a far trace does not look like an onset
    level = 1.4826 * float(np.median(np.abs(data - np.median(data))))
    times, signs = _onset_picks(data, t, dt, period, method, np.zeros(m), level)
    res = times - x / SPEED_OF_LIGHT
    ok = np.isfinite(res)
    out = {"found": False, "x": x, "shift": 0.0, "ok": np.zeros(m, bool), "time": times}
    need = max(3, m // 4)
    if ok.sum() < need:
        return out
    shift = _densest(res[ok], 0.25 * period)
    inl = ok & (np.abs(res - shift) < 0.25 * period)
    if inl.sum() < need:
        return out
    sign = _majority_sign(signs[inl])
    shift = float(np.median(res[inl]))
    pred = x / SPEED_OF_LIGHT + shift
    tt = _follow_line(data, t, dt, period, pred, sign)
    ok = np.isfinite(tt) & (np.abs(tt - pred) < 0.25 * period)
    # an air wave must stand out of the gather's overall amplitude level
    k = np.clip(np.rint((tt[ok] - t[0]) / dt), 0, t.size - 1).astype(int)
    if ok.sum() < need or np.median(np.abs(data[np.flatnonzero(ok), k])) < min_snr * level:
        return out
    return {"found": True, "x": x, "shift": shift, "ok": ok, "time": tt, "sign": sign}


def _ground_wave(data, x, t, dt, period, method, air, noise):
    m = x.size
    out = {
        "found": False,
        "x": x,
        "slowness": np.nan,
        "ok": np.zeros(m, bool),
        "time": np.full(m, np.nan),
    }
    if not air["found"]:
        return out
    shift = air["shift"]
    start = np.ceil((x / SPEED_OF_LIGHT + shift + 0.75 * period - t[0]) / dt)
    times, signs = _onset_picks(data, t, dt, period, method, start, noise)
    pos = np.isfinite(times) & (x > 0)
    if pos.sum() < 2:
        return out
    s_i = (times[pos] - shift) / x[pos]
    s = _densest(s_i, 0.25 * period / max(float(np.max(x[pos])), 1e-9))
    res = times - (shift + s * x)
    inl = pos & (np.abs(res) < 0.25 * period)
    if inl.sum() < max(2, m // 4):
        return out
    s = float(np.sum(x[inl] * (times[inl] - shift)) / np.sum(x[inl] ** 2))
    if s <= 1.0 / SPEED_OF_LIGHT:
        return out
    sign = _majority_sign(signs[inl])
    pred = shift + s * x
    tt = _follow_line(data, t, dt, period, pred, sign)
    ok = np.isfinite(tt) & (np.abs(tt - pred) < 0.25 * period)
    if ok.sum() >= 2:
        s = float(np.sum(x[ok] * (tt[ok] - shift)) / np.sum(x[ok] ** 2))
    return {"found": True, "x": x, "slowness": s, "ok": ok, "time": tt, "sign": sign}


def _noise_level(data, x, t, period, shift):
    """Robust noise standard deviation (1.4826 MAD) from pre-arrival samples.

    Floored at ``DYNAMIC_RANGE_FLOOR`` times the largest amplitude, so noise-free
    synthetic data behave like a recording with a finite dynamic range.
    """
    floor = DYNAMIC_RANGE_FLOOR * max(float(np.max(np.abs(data))), 1e-300)
    if shift is not None:
        limit = x / SPEED_OF_LIGHT + shift - period
        pre = data[t[None, :] < limit[:, None]]
        if pre.size >= 32:
            return max(1.4826 * float(np.median(np.abs(pre - np.median(pre)))), floor)
    n = data.shape[1]
    tail = data[:, n - max(4, n // 10) :].ravel()
    return max(1.4826 * float(np.median(np.abs(tail - np.median(tail)))), floor)
