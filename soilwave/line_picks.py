"""Air and ground waves on fixed-offset profiles, trace by trace.

Layer 2 (xarray on top of pure numpy kernels at the bottom of this module).
:func:`pick_line_arrivals` picks the air wave (at ``a / c`` on every trace,
``a`` the antenna separation) and the direct ground wave (at ``a / v_1``,
changing along the line with the near-surface water content) on every trace
of a fixed-offset profile; the method is in its docstring. The onset and
main-lobe kernels and the pick uncertainty are those of
:mod:`soilwave.firstbreaks`.
"""

from __future__ import annotations

import warnings

import numpy as np
from scipy import signal

from soilwave.errors import InputError, RangeWarning
from soilwave.firstbreaks import (
    _METHODS,
    DYNAMIC_RANGE_FLOOR,
    _densest,
    _envelope_at,
    _follow_line,
    _majority_sign,
    _onset_picks,
    _pick_sigma,
    _with_step,
)
from soilwave.gather import sample_interval
from soilwave.picks import make_picks
from soilwave.semblance import _check_gather, _period_ns
from soilwave.wave import SPEED_OF_LIGHT

__all__ = ["pick_line_arrivals"]


# --- xarray layer -----------------------------------------------------------------


_TIME_ZERO = ("line", "trace", "none")


def pick_line_arrivals(
    profile,
    *,
    antenna_separation=None,
    method="energy_ratio",
    period_ns=None,
    min_snr=3.0,
    time_zero="line",
    min_separation=1.0,
    survey_time=None,
):
    """Pick the air and ground wave on every trace of a fixed-offset profile.

    The air wave arrives at ``a / c`` after the transmitter fires (``a`` the
    antenna separation), the same on every trace; the direct ground wave at
    ``a / v_1``, which changes along the line with the near-surface water
    content. On each trace:

    1. **Air wave.** The characteristic-function onset (energy ratio or
       STA/LTA, as in :func:`first_breaks`) and the largest extremum within 1.5
       periods after it (the main lobe). The misfits ``t - a / c`` are held to
       their running median over 11 traces (densest cluster first, so traces
       where the air wave is lost do not pull it): a trace whose air pick is
       more than a quarter period off is not used. The polarity is the
       majority one; the final pick is the extremum of that sign within a
       quarter period of the running median.
    2. **Overlap test.** The median air wavelet of the line (one period
       around the main lobe) is the template; a trace whose air window differs
       from the scaled template by more than a quarter of the template's
       energy (plus four times the energy noise alone would leave) carries
       another arrival inside its air wave, usually a ground wave less than
       about one period behind, and is skipped.
    3. **Ground wave.** Onset after the air wave's main lobe plus 0.75
       period, then the largest extremum of the ground wave's majority
       polarity within 1.5 periods after the onset. No continuity along the
       line is imposed, so the ground wave may move by several periods from
       trace to trace (wet and dry patches).
    4. **Checks.** Both picks need an envelope of at least ``min_snr`` noise
       levels; the ground pick, sought over the rest of the trace, also at
       least the level noise alone exceeds there with probability 0.01
       (envelope of Gaussian noise: Rayleigh distributed, ``P(E > k sigma_n) =
       exp(-k^2 / 2)``, with about two independent values per period; about 4
       noise levels for 30 periods). The ground wave must arrive at least ``min_separation``
       periods after the air wave (the arrivals are taken as separable from
       one period on, common practice; see
       :func:`soilwave.groundwave_min_separation`). A trace failing any test
       gives no picks at all (neither air nor ground), and a
       :class:`~soilwave.errors.RangeWarning` names the skipped positions.

    The noise level of every trace is the scaled median absolute deviation
    (``1.4826 MAD``) of its samples before the air wave (more than one period
    before the main lobe); with fewer than 32 such samples, the pooled
    pre-air samples of all traces, else the last tenth of the traces. Pick
    uncertainty as in :func:`auto_pick`: ``sigma = max(T / (2 pi A /
    sigma_n), T / 10)``.

    Parameters
    ----------
    profile : xarray.DataArray
        Fixed-offset profile, dims ``(position, time)`` (m, ns).
    antenna_separation : float, optional
        Transmitter-receiver separation, m. Default the profile's
        ``antenna_separation_m`` attribute.
    method : {"energy_ratio", "sta_lta"}, optional
        Characteristic function for the onsets.
    period_ns : float, optional
        Dominant period, ns. Default: peak of the data's power spectrum.
    min_snr : float, optional
        Smallest envelope amplitude of a pick, in noise levels.
    time_zero : {"line", "trace", "none"}, optional
        ``"line"``: subtract one line-wide shift (median of the air-wave
        misfits ``t_air - a / c``), so the air wave arrives at ``a / c`` on
        average; ``"trace"``: subtract each trace's own air-wave misfit (time
        zero per trace; the air picks are then all ``a / c`` and keep their
        sigma); ``"none"``: times as recorded.
    min_separation : float, optional
        Smallest ground-minus-air arrival difference, in periods.
    survey_time : float, optional
        Elapsed time of the survey, h, stored in the ``survey_time`` column.

    Returns
    -------
    xarray.Dataset
        Pick table (:func:`soilwave.make_picks`) with one ``air`` and one
        ``ground`` pick per usable position: ``position`` (m), ``offset`` (the
        separation, m), ``time`` (ns), ``sigma`` (ns), ``amplitude``
        (envelope) and ``amplitude_sigma`` (noise level). Attributes
        ``time_shift_ns`` (line median of the air misfits), ``time_zero``,
        ``period_ns``, ``antenna_separation_m``, ``noise_level`` (median),
        ``skipped_positions`` (m) and ``history``.

    Warns
    -----
    RangeWarning
        When traces are skipped (overlapping arrivals, no air or ground wave).

    Examples
    --------
    >>> import numpy as np
    >>> from soilwave.gather import gather_from_array
    >>> pos = np.arange(0.0, 5.0, 0.5); t = np.arange(-5.0, 40.0, 0.1); c = 0.299792458
    >>> t_ground = np.sqrt(np.linspace(6.0, 20.0, pos.size)) / c  # 1 m separation
    >>> def ricker(tt): u = np.pi * 0.5 * (t - tt[:, None]); return (1 - 2*u**2) * np.exp(-u**2)
    >>> data = ricker(np.full(pos.size, 1.0 / c)) + 0.7 * ricker(t_ground)
    >>> prof = gather_from_array(data, positions=pos, dt_ns=0.1, t0_ns=-5.0,
    ...                          frequency_mhz=500.0, antenna_separation_m=1.0)
    >>> p = pick_line_arrivals(prof)
    >>> ground = p.time.values[p.phase.values == "ground"]
    >>> bool(np.all(np.abs(ground - t_ground) < 0.05))
    True
    """
    g = _check_gather(profile, "position", "pick_line_arrivals")
    if method not in _METHODS:
        msg = f"pick_line_arrivals: method must be one of {list(_METHODS)}; got {method!r}"
        raise InputError(msg)
    if time_zero not in _TIME_ZERO:
        msg = f"pick_line_arrivals: time_zero must be one of {list(_TIME_ZERO)}; got {time_zero!r}"
        raise InputError(msg)
    a = antenna_separation
    if a is None:
        a = g.attrs.get("antenna_separation_m")
        if a is None:
            msg = (
                "pick_line_arrivals: the profile has no 'antenna_separation_m' attribute; "
                "pass antenna_separation= (transmitter-receiver distance, m)"
            )
            raise InputError(msg)
    try:
        a = float(a)
    except (TypeError, ValueError):
        a = float("nan")
    if not (np.isfinite(a) and a > 0):
        msg = f"pick_line_arrivals: antenna separation must be > 0 m; got {a!r}"
        raise InputError(msg)
    for name, value in (("min_snr", min_snr), ("min_separation", min_separation)):
        if not (np.isfinite(float(value)) and float(value) >= 0):
            msg = f"pick_line_arrivals: {name} must be a number >= 0; got {value!r}"
            raise InputError(msg)
    pos = np.asarray(g["position"].values, dtype=float)
    t = np.asarray(g["time"].values, dtype=float)
    dt = sample_interval(g)
    period = _period_ns(g, period_ns)
    data = np.asarray(g.values, dtype=float)
    res = _line_arrivals(data, t, dt, a, period, method, float(min_snr), float(min_separation))
    if res is None:
        msg = (
            "pick_line_arrivals: no air wave found (the first arrivals are not at one time "
            f"near a/c = {a / SPEED_OF_LIGHT:.2f} ns plus a constant on at least a quarter of "
            "the traces); check the antenna separation and the time axis"
        )
        raise InputError(msg)
    ok = res["ok"]
    _warn_skipped(pos, res["reason"], period, min_separation)
    if not np.any(ok):
        msg = (
            f"pick_line_arrivals: no trace of {pos.size} has separable air and ground waves "
            "above the noise; see the warnings"
        )
        raise InputError(msg)
    shift_line = float(np.median(res["t_air"][ok] - a / SPEED_OF_LIGHT))
    if time_zero == "line":
        shift = np.full(pos.size, shift_line)
    elif time_zero == "trace":
        shift = res["t_air"] - a / SPEED_OF_LIGHT
    else:
        shift = np.zeros(pos.size)
    n = int(ok.sum())
    noise = res["noise"][ok]
    times = np.r_[res["t_air"][ok] - shift[ok], res["t_ground"][ok] - shift[ok]]
    amps = np.r_[res["a_air"][ok], res["a_ground"][ok]]
    picks = make_picks(
        np.full(2 * n, a),
        times,
        np.array(["air"] * n + ["ground"] * n),
        interface=0,
        sigma=_pick_sigma(amps, np.r_[noise, noise], period),
        frequency_mhz=float(g.attrs["frequency_mhz"]),
        amplitude=amps,
        amplitude_sigma=np.r_[noise, noise],
        position=np.r_[pos[ok], pos[ok]],
        survey_time=None if survey_time is None else float(survey_time),
    )
    picks.attrs.update(
        {
            "time_shift_ns": shift_line,
            "time_zero": time_zero,
            "period_ns": float(period),
            "antenna_separation_m": a,
            "noise_level": float(np.median(noise)),
            "skipped_positions": pos[~ok],
        }
    )
    picks.attrs["history"] = _with_step(
        g,
        picks,
        "pick_line_arrivals",
        antenna_separation=a,
        method=method,
        time_zero=time_zero,
        min_separation=float(min_separation),
    )
    return picks


_SKIP_REASONS = {
    "no_air": "no air wave above {snr} noise levels at the line's air-wave time",
    "overlap_air": "another arrival inside the air wave (air and ground waves overlap)",
    "no_ground": "no ground wave above {snr} noise levels after the air wave",
    "overlap": "ground wave less than {sep:g} period(s) after the air wave (overlap)",
}


def _warn_skipped(pos, reason, period, min_separation):
    for key in ("no_air", "overlap_air", "overlap", "no_ground"):
        bad = pos[reason == key]
        if bad.size == 0:
            continue
        shown = ", ".join(f"{p:g}" for p in bad[:12]) + (" ..." if bad.size > 12 else "")
        why = _SKIP_REASONS[key].format(snr="min_snr", sep=min_separation)
        msg = (
            f"pick_line_arrivals: skipped {bad.size} trace(s) ({why}; period {period:.3g} ns) "
            f"at positions [{shown}] m; they get no air or ground pick"
        )
        warnings.warn(msg, RangeWarning, stacklevel=3)


# --- numpy kernels ----------------------------------------------------------------


def _running_nanmedian(values, half):
    """Median of the finite values within ``half`` traces on each side (NaN if none)."""
    v = np.asarray(values, dtype=float)
    padded = np.concatenate([np.full(half, np.nan), v, np.full(half, np.nan)])
    win = np.lib.stride_tricks.sliding_window_view(padded, 2 * half + 1)
    out = np.full(v.size, np.nan)
    have = np.isfinite(win).any(axis=1)
    out[have] = np.nanmedian(win[have], axis=1)
    return out


def _trace_noise(data, t, t_air, period):
    """Per-trace noise level (1.4826 MAD) before the air wave; fallbacks in the docstring."""
    m, n = data.shape
    floor = DYNAMIC_RANGE_FLOOR * max(float(np.max(np.abs(data))), 1e-300)
    fill = float(np.median(t_air[np.isfinite(t_air)])) if np.any(np.isfinite(t_air)) else t[0]
    ref = np.where(np.isfinite(t_air), t_air, fill)
    pre = t[None, :] < (ref - period)[:, None]
    noise = np.full(m, np.nan)
    for i in range(m):
        if pre[i].sum() >= 32:
            d = data[i, pre[i]]
            noise[i] = 1.4826 * float(np.median(np.abs(d - np.median(d))))
    if np.any(~np.isfinite(noise)):
        pooled = data[pre]
        if pooled.size < 32:
            pooled = data[:, n - max(4, n // 10) :].ravel()
        fill = 1.4826 * float(np.median(np.abs(pooled - np.median(pooled))))
        noise = np.where(np.isfinite(noise), noise, fill)
    return np.maximum(noise, floor)


def _air_template_misfit(data, t, t_air, period, noise, usable):
    """Relative misfit of each trace's air window to the line's median air wavelet.

    Returns ``(misfit, allowed)``: the residual energy after fitting the scaled
    template, over the scaled template's energy, and the largest acceptable
    value (0.25 plus four times the ratio noise alone would give).
    """
    dt = t[1] - t[0]
    tau = np.arange(-0.5 * period, 0.5 * period + 0.5 * dt, dt)
    m = data.shape[0]
    win = np.full((m, tau.size), np.nan)
    for i in np.flatnonzero(np.isfinite(t_air)):
        win[i] = np.interp(t_air[i] + tau, t, data[i], left=0.0, right=0.0)
    misfit = np.full(m, np.inf)
    allowed = np.zeros(m)
    if not np.any(usable):
        return misfit, allowed
    tmpl = np.median(win[usable], axis=0)
    tt = float(tmpl @ tmpl)
    if tt <= 0:
        return misfit, allowed
    for i in np.flatnonzero(np.isfinite(t_air)):
        amp = float(win[i] @ tmpl) / tt
        fit_e = amp**2 * tt
        if fit_e <= 0:
            continue
        r = win[i] - amp * tmpl
        misfit[i] = float(r @ r) / fit_e
        allowed[i] = 0.25 + 4.0 * tau.size * noise[i] ** 2 / fit_e
    return misfit, allowed


def _false_alarm_level(n_periods, probability=0.01):
    """Envelope level, in noise levels, that noise alone exceeds with ``probability``.

    The envelope of Gaussian noise of standard deviation ``s`` is Rayleigh
    distributed, ``P(E > k s) = exp(-k^2 / 2)``; a search window of
    ``n_periods`` periods holds about ``2 n_periods`` independent envelope values
    (common practice: the envelope decorrelates over about half a period), so
    ``k = sqrt(2 ln(2 n_periods / probability))``.
    """
    n = np.maximum(2.0 * np.asarray(n_periods, dtype=float), 1.0)
    return np.sqrt(2.0 * np.log(n / probability))


def _line_arrivals(data, t, dt, a, period, method, min_snr, min_sep):
    """Air and ground picks on every trace of a fixed-offset profile (numpy).

    Returns None when no air wave is found, else a dict of per-trace arrays:
    ``t_air``, ``t_ground`` (ns, as recorded), ``a_air``, ``a_ground``
    (envelope), ``noise``, ``ok`` and ``reason`` (skip reason, '' if kept).
    """
    m = data.shape[0]
    env = np.abs(signal.hilbert(data, axis=-1))
    t_direct = a / SPEED_OF_LIGHT
    # 1. air wave: onsets, line-consistent misfits, majority polarity; the
    # line's overall amplitude level (1.4826 MAD of all samples, dominated by
    # noise where arrivals are short) stabilises the characteristic function
    # so that noise at the start of a record does not look like an onset
    level = 1.4826 * float(np.median(np.abs(data - np.median(data))))
    times, signs = _onset_picks(data, t, dt, period, method, np.zeros(m), level)
    res = times - t_direct
    fin = np.isfinite(res)
    need = max(3, m // 4)
    if fin.sum() < need:
        return None
    centre = _densest(res[fin], 0.25 * period)
    inl = fin & (np.abs(res - centre) < 0.25 * period)
    if inl.sum() < need:
        return None
    trend = _running_nanmedian(np.where(inl, res, np.nan), 5)
    trend = np.where(np.isfinite(trend), trend, float(np.median(res[inl])))
    inl = fin & (np.abs(res - trend) < 0.25 * period)
    sign = _majority_sign(signs[inl])
    t_air = _follow_line(data, t, dt, period, t_direct + trend, sign)
    noise = _trace_noise(data, t, t_air, period)
    a_air = _envelope_at(env, t, dt, t_air)
    reason = np.full(m, "", dtype=object)
    air_ok = np.isfinite(t_air) & (a_air >= min_snr * noise)
    # the air wave must also stand out of the line's overall amplitude level
    if air_ok.sum() < need or np.median(a_air[air_ok]) < min_snr * level:
        return None
    reason[~air_ok] = "no_air"
    # 2. overlap: air window unlike the line's median air wavelet
    misfit, allowed = _air_template_misfit(data, t, t_air, period, noise, air_ok)
    overlap_air = air_ok & (misfit > allowed)
    reason[overlap_air] = "overlap_air"
    # 3. ground wave after the air wave's main lobe plus 0.75 period
    ref = np.where(np.isfinite(t_air), t_air, t_direct + trend)
    start = np.ceil((ref + 0.75 * period - t[0]) / dt)
    tg, sg = _onset_picks(data, t, dt, period, method, start, noise)
    strong = np.isfinite(tg) & (_envelope_at(env, t, dt, tg) >= min_snr * noise)
    g_sign = _majority_sign(sg[strong & (reason == "")]) if np.any(strong) else 1
    tg, _ = _onset_picks(data, t, dt, period, method, start, noise, sign=g_sign)
    a_ground = _envelope_at(env, t, dt, tg)
    detect = np.maximum(min_snr, _false_alarm_level((t[-1] - start * dt - t[0]) / period))
    no_ground = (reason == "") & ~(np.isfinite(tg) & (a_ground >= detect * noise))
    reason[no_ground] = "no_ground"
    close = (reason == "") & (tg - t_air < min_sep * period)
    reason[close] = "overlap"
    ok = reason == ""
    return {
        "t_air": t_air,
        "t_ground": tg,
        "a_air": a_air,
        "a_ground": a_ground,
        "noise": noise,
        "ok": ok,
        "reason": reason.astype(str),
    }
