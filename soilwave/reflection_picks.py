"""Reflections on multi-offset gathers: following semblance events across offsets.

Layer 2 (pure numpy kernels; :func:`soilwave.auto_pick` calls them with the
first breaks of :mod:`soilwave.firstbreaks` and the semblance maxima of
:mod:`soilwave.semblance`).

1. **Following.** The semblance spectrum (:mod:`soilwave.semblance`) of the
   gather with everything above the ground wave muted gives candidate events
   ``(t0, V_rms)``. Each is followed across offsets phase-consistently: the
   largest extremum, within one period, of the stack of the first five traces
   where the event is separated from the other arrivals (summed along the
   predicted hyperbola) fixes the lobe and its polarity; on every next trace
   the extremum of the same sign is sought within a quarter period of the
   previous pick moved by the predicted moveout increment. Following stops
   where the event comes within ``merge_fraction`` periods of the ground
   wave, the air wave or another candidate event (the arrivals merge), where
   it is lost (more than ``max_gap`` traces in a row without an extremum
   above ``min_snr`` local noise levels) or where its lag behind the hyperbola
   changes by more than half a period. The local noise level is
   ``sqrt(sigma_n^2 + leak^2)``: ``leak`` is the envelope the air and ground
   waves still have at that time, their envelope amplitudes times the
   wavelet's normalised envelope at that lag (measured on the leading half of
   the strongest air-wave picks, taken as symmetric). Near offsets, where the
   ground wave is hundreds of noise levels strong, its tail would otherwise
   pass for a reflection; the semblance of the muted gather also has maxima
   there (the truncated ground wave). Events repeating another event's
   picks are dropped. The first ``max_interfaces`` events in time are
   numbered 1, 2, ... (the inversion numbers interfaces from the top, so a
   deeper event never takes the place of a shallower one).
2. **Weak reflections.** An event too weak to give ``min_traces`` picks trace
   by trace (below ``min_snr`` noise levels on most traces) is picked on
   partial stacks. The clear traces (as above) are summed along the
   hyperbola; if the stack's envelope reaches ``min_snr`` times its noise
   level ``sigma_n sqrt(n)``, the event's mean amplitude per trace ``a`` fixes
   the group size ``n_b = (1.5 min_snr sigma_n / a)^2`` (at least 2, at most
   all clear traces) at which a group stack is expected to reach 1.5
   ``min_snr`` noise levels. Each group of ``n_b`` neighbouring clear traces
   is stacked along the hyperbola, the extremum of the event's polarity is
   sought within a quarter period of the previous group's lag, and a group
   stack reaching ``min_snr`` local noise levels (``sqrt(n) sigma_n`` plus the
   summed ``leak`` of its traces) gives one pick at the group's mean
   offset (time: the hyperbola there plus the lag). Stacking ``n`` traces of
   white noise raises the signal-to-noise ratio by ``sqrt(n)`` (common
   practice), so such a pick's noise level is ``sigma_n / sqrt(n)`` and its
   amplitude the stack's envelope over ``n``. The semblance maximum (at
   least ``min_semblance``) is the detection; the stack test only drops
   events too weak to time (with ``min_semblance`` lowered well below its
   default, semblance maxima of noise can give single stacked picks).
3. **Main lobe and wavelet changes** (:mod:`soilwave.wavelet_change`). An
   event found on a side lobe is followed again on its main lobe; picking
   stops where the wavelet changes from the event's near-offset wavelet:
   beyond the critical distance under a faster layer (post-critical
   reflections come out early) or where the tails of the direct waves
   interfere. An event left with fewer than three picks cannot be checked;
   their sigma is at least ``T / 4`` (the cautious end of the usual tenth to
   quarter of a period, value from memory) instead of ``T / 10``.

Pick uncertainty: as in :mod:`soilwave.firstbreaks`, ``sigma_t = max(T s /
(2 pi A), T / 10)``, but with ``s = sqrt(sigma_n^2 + leak^2)``, the local
noise level including the tails of the air and ground waves at the pick
(for partial stacks of ``n`` traces ``s = sigma_n / sqrt(n)`` plus the mean
``leak``): picks close behind a strong ground wave get a larger sigma.
"""

from __future__ import annotations

import warnings

import numpy as np
from scipy import signal

from soilwave.firstbreaks import _envelope_at, _extremum, _subsample
from soilwave.wave import SPEED_OF_LIGHT
from soilwave.wavelet_change import (
    _MIN_TEST_PICKS,
    _TEMPLATE_PICKS,
    UNCHECKED_SIGMA_FRACTION,
    _side_lobe_shift,
    _wavelet_change,
)

__all__: list[str] = []


def _mute_above(data, x, t, fb, period):
    """Zero every sample before the ground wave plus 0.75 period (and the air wave)."""
    air, gr = fb["air"], fb["ground"]
    line = np.maximum(air["shift"] + gr["slowness"] * x, air["shift"] + x / SPEED_OF_LIGHT)
    keep = t[None, :] >= (line + 0.75 * period)[:, None]
    return np.where(keep, data, 0.0)


def _track_events(data, x, t, dt, period, fb, cand, min_snr, merge, max_gap, n_min):
    """Follow every candidate hyperbola; return accepted events (dicts)."""
    env = fb["env"]
    analytic = fb["analytic"]
    noise = fb["noise"]
    shift = fb["air"]["shift"]
    air_line = x / SPEED_OF_LIGHT + shift
    ground_line = shift + fb["ground"]["slowness"] * x
    t0c = np.asarray(cand["t0"].values, dtype=float)
    vc = np.asarray(cand["v_rms"].values, dtype=float)
    sc = np.asarray(cand["semblance"].values, dtype=float)
    hyper = [np.sqrt(t0c[k] ** 2 + (x / vc[k]) ** 2) for k in range(t0c.size)]
    leak = _leak_function(env, t, dt, period, noise, fb["air"], air_line, ground_line)
    events = []
    for k in range(t0c.size):
        h = hyper[k]
        others = [hyper[j] for j in range(t0c.size) if j != k]

        def clear(i, tt, others=others):
            """Is time tt on trace i clear of the air, ground and other events?"""
            d = min(abs(tt - ground_line[i]), abs(tt - air_line[i]))
            for o in others:
                d = min(d, abs(tt - o[i]))
            return d >= merge * period

        start = [i for i in range(x.size) if clear(i, h[i])]
        if not start:
            continue
        args = (data, env, t, dt, period, h, start, clear, noise, leak, min_snr, max_gap)
        picks, sign = _follow_event(*args)
        first = sorted(picks)[:_TEMPLATE_PICKS]
        shift_lobe = _side_lobe_shift(
            data[first], t[0], dt, np.array([picks[i] for i in first]), sign, period
        )
        if shift_lobe != 0.0:
            # the near-offset picks sit on a side lobe: follow the main lobe
            lag = picks[first[0]] - h[first[0]] + shift_lobe
            picks, sign = _follow_event(*args, lobe=(lag, -sign))
        if len(picks) >= n_min:
            idx = np.array(sorted(picks))
            tt = np.array([picks[i] for i in idx])
            amp = _envelope_at(env[idx], t, dt, tt)
            level = np.array([np.hypot(noise, leak(i, ti)) for i, ti in zip(idx, tt, strict=True)])

            def level_at(j, offsets, idx=idx, tt=tt):
                return np.hypot(noise, [leak(idx[j], tt[j] + d) for d in offsets])

            keep = _wavelet_change(
                data[idx],
                analytic[idx],
                np.full(idx.size, t[0]),
                dt,
                tt,
                sign,
                period,
                amp,
                level_at,
            )
            ev = {
                "x": x[idx[:keep]],
                "idx": idx[:keep],
                "time": tt[:keep],
                "amplitude": amp[:keep],
                "level": level[:keep],
                "n_stack": 1,
                "change_offset": float(x[idx[keep]]) if keep < idx.size else np.nan,
            }
        else:
            # too weak to follow trace by trace: pick on partial stacks
            ev = _stacked_event(
                data, x, t, dt, period, h, start, clear, noise, leak, min_snr, max_gap
            )
        if ev is not None and ev["x"].size:
            ev.update(t0=float(t0c[k]), v_rms=float(vc[k]), semblance=float(sc[k]))
            if ev["x"].size < _MIN_TEST_PICKS:
                # too few picks to check the wavelet: the cautious sigma floor
                ev["sigma_min"] = UNCHECKED_SIGMA_FRACTION * period
            events.append(ev)
    return _drop_duplicates(events, period)


def _follow_event(
    data, env, t, dt, period, h, start, clear, noise, leak, min_snr, max_gap, lobe=None
):
    """Follow one hyperbola trace by trace from its first clear trace.

    Returns ``({trace: time}, sign)`` with the polarity of the lobe followed.
    ``lobe = (lag, sign)`` imposes the starting lobe (lag behind the
    hyperbola, ns).
    """
    half = max(1, round(0.25 * period / dt))
    i0 = start[0]
    # lobe and polarity from a partial stack of the first clear traces along
    # the hyperbola (more robust in noise than one trace)
    lag_sign = _stack_lobe(data, t, h, start[:5], period, dt) if lobe is None else lobe
    if lag_sign is None:
        return {}, 0
    lag, sign = lag_sign
    c = round((h[i0] + lag - t[0]) / dt)
    ex = _extremum(data[i0], c - half, c + half, sign)
    if ex is None:
        return {}, 0
    picks = {}
    tp = t[0] + ex[0] * dt
    if clear(i0, tp) and env[i0, round(ex[0])] >= min_snr * np.hypot(noise, leak(i0, tp)):
        picks[i0] = tp
    prev_i, prev_t = i0, tp
    lag0 = tp - h[i0]  # semblance t0 may be off by a constant: follow the drift
    gap = 0
    for i in range(i0 + 1, data.shape[0]):
        pred = prev_t + (h[i] - h[prev_i])
        if not clear(i, pred) or abs(pred - h[i] - lag0) > 0.5 * period:
            break
        cc = round((pred - t[0]) / dt)
        ex = _extremum(data[i], cc - half, cc + half, sign)
        good = ex is not None
        if good:
            tp = t[0] + ex[0] * dt
            good = env[i, round(ex[0])] >= min_snr * np.hypot(noise, leak(i, tp))
        if not good:
            gap += 1
            if gap > max_gap:
                break
            continue
        gap = 0
        picks[i] = tp
        prev_i, prev_t = i, tp
    return picks, sign


def _stack_level(noise, leak, h, traces, lag):
    """Noise level of a stack along ``h + lag``: ``sqrt(n) sigma_n`` plus the
    summed tails of the air and ground waves (coherent, so added in amplitude)."""
    return np.sqrt(len(traces)) * noise + sum(leak(i, h[i] + lag) for i in traces)


def _leak_function(env, t, dt, period, noise, air, air_line, ground_line):
    """``leak(i, tt)``: envelope the air and ground waves of trace i leave at time tt.

    The wavelet's normalised envelope ``e(tau)`` is the median, over the five
    strongest air-wave picks (where recorded), of the envelope before the main lobe (where
    nothing but noise precedes the air wave; the noise's mean square envelope
    ``2 sigma_n^2`` removed) divided by its value at the lobe; it is taken as
    symmetric, ``e(tau) = e(-|tau|)``, and zero beyond three periods. On
    trace i the air and ground waves of envelope amplitudes ``A_a`` and
    ``A_g`` (at their fitted lines) leave
    ``sqrt((A_a e(tt - t_a))^2 + (A_g e(tt - t_g))^2)``.
    """
    lags = np.arange(-3.0 * period, 0.5 * dt, dt)
    ok = np.flatnonzero(air["ok"] & np.isfinite(air["time"]))
    if ok.size == 0:
        return lambda i, tt: 0.0
    amp = _envelope_at(env, t, dt, air["time"])
    # the strongest air waves measure the faint tail best; lags before a
    # trace's first sample are NaN there (the other traces fill them)
    top = ok[np.argsort(-amp[ok])[:5]]
    # the noise's own envelope (mean square 2 sigma_n^2) is removed; lags
    # before the record's start carry no information (NaN, then 0)
    rows = [
        np.sqrt(
            np.maximum(
                np.interp(air["time"][i] + lags, t, env[i], left=np.nan) ** 2 - 2 * noise**2, 0
            )
        )
        / max(amp[i], 1e-300)
        for i in top
    ]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)  # all-NaN lags
        shape = np.nan_to_num(np.minimum(np.nanmedian(rows, axis=0), 1.0), nan=0.0)
    a_air = _envelope_at(env, t, dt, air_line)
    a_ground = _envelope_at(env, t, dt, ground_line)

    def leak(i, tt):
        ea = np.interp(-abs(tt - air_line[i]), lags, shape, left=0.0)
        eg = np.interp(-abs(tt - ground_line[i]), lags, shape, left=0.0)
        return float(np.hypot(a_air[i] * ea, a_ground[i] * eg))

    return leak


def _stack(data, t, h, traces, lags):
    """Sum of the traces interpolated at ``h[i] + lags`` (zero outside the record)."""
    out = np.zeros(lags.size)
    for i in traces:
        out += np.interp(h[i] + lags, t, data[i], left=0.0, right=0.0)
    return out


def _stacked_event(
    data, x, t, dt, period, h, clear_idx, clear, noise, leak, min_snr, max_gap, lobe=None
):
    """Pick a weak event on partial stacks of neighbouring traces (module notes).

    ``lobe = (lag, sign)`` imposes the lobe (lag behind the hyperbola, ns).
    """
    n_c = len(clear_idx)
    if n_c < 2:
        return None
    lags = np.arange(-2.0 * period, 2.0 * period + 0.5 * dt, dt)
    inner = np.abs(lags) <= period
    full = _stack(data, t, h, clear_idx, lags)
    env_full = np.abs(signal.hilbert(full))
    if lobe is None:
        ex = _extremum(np.where(inner, full, 0.0), 0, lags.size - 1)
        if ex is None:
            return None
        k0 = round(ex[0])
        sign = ex[1]
        start_lag = float(lags[k0] + _subsample(sign * full, k0) * dt)
    else:
        start_lag, sign = lobe
        k0 = int(np.clip(round((start_lag - lags[0]) / dt), 0, lags.size - 1))
    snr_trace = env_full[k0] / (noise * n_c)  # mean amplitude per trace over noise
    if snr_trace * np.sqrt(n_c) < min_snr:
        return None
    target = 1.5 * min_snr
    n_b = int(min(n_c, max(2, np.ceil((target / max(snr_trace, 1e-12)) ** 2))))
    groups = [clear_idx[j : j + n_b] for j in range(0, n_c, n_b)]
    if len(groups) > 1 and len(groups[-1]) < 0.5 * n_b:
        groups[-2] = groups[-2] + groups[-1]
        groups.pop()
    prev_lag = start_lag
    quarter = max(1, round(0.25 * period / dt))
    rows = []
    gap = 0
    for grp in groups:
        st = _stack(data, t, h, grp, lags)
        env = np.abs(signal.hilbert(st))
        c = round((prev_lag - lags[0]) / dt)
        ex = _extremum(st, c - quarter, c + quarter, sign)
        good = ex is not None
        if good:
            lag = float(lags[0] + ex[0] * dt)
            good = env[round(ex[0])] >= min_snr * _stack_level(noise, leak, h, grp, lag)
        if good:
            xc = float(np.mean(x[grp]))
            i_c = int(grp[int(np.argmin(np.abs(x[grp] - xc)))])
            tp = float(np.interp(xc, x[grp], h[grp])) + lag
            good = clear(i_c, tp)
        if not good:
            gap += 1
            if gap > max_gap:
                break
            continue
        gap = 0
        prev_lag = lag
        n = len(grp)
        level = _stack_level(noise, leak, h, grp, lag)
        rows.append(
            {
                "x": xc,
                "time": tp,
                "amplitude": env[round(ex[0])] / n,
                "idx": i_c,
                "n": n,
                "level": level / n,
                "grp": grp,
                "stack": st,
                "lag": lag,
            }
        )
    if not rows:
        return None
    col = {k: np.array([r[k] for r in rows]) for k in ("x", "time", "amplitude", "idx", "n")}
    col["level"] = np.array([r["level"] for r in rows])
    stacks = np.array([r["stack"] for r in rows]) / col["n"][:, None]
    centres = np.array([r["lag"] for r in rows])
    shift_lobe = _side_lobe_shift(stacks, lags[0], dt, centres, sign, period)
    if lobe is None and shift_lobe != 0.0:
        # the first groups sit on a side lobe: pick the main lobe instead
        return _stacked_event(
            data,
            x,
            t,
            dt,
            period,
            h,
            clear_idx,
            clear,
            noise,
            leak,
            min_snr,
            max_gap,
            lobe=(centres[0] + shift_lobe, -sign),
        )
    keep = _wavelet_change(
        stacks,
        signal.hilbert(stacks, axis=-1),
        np.full(len(rows), lags[0]),
        dt,
        centres,
        sign,
        period,
        col["amplitude"],
        lambda j, offsets: (
            np.array(
                [_stack_level(noise, leak, h, rows[j]["grp"], rows[j]["lag"] + d) for d in offsets]
            )
            / rows[j]["n"]
        ),
    )
    return {
        "x": col["x"][:keep],
        "idx": col["idx"][:keep],
        "time": col["time"][:keep],
        "amplitude": col["amplitude"][:keep],
        "level": col["level"][:keep],
        "n_stack": int(col["n"][:keep].min()) if keep else int(col["n"].min()),
        "change_offset": float(col["x"][keep]) if keep < len(rows) else np.nan,
    }


def _stack_lobe(data, t, h, traces, period, dt):
    """(lag ns, sign) of the largest extremum of the stack along ``h + lag``, |lag| <= T."""
    lags = np.arange(-period, period + 0.5 * dt, dt)
    stack = np.zeros(lags.size)
    for i in traces:
        stack += np.interp(h[i] + lags, t, data[i], left=0.0, right=0.0)
    ex = _extremum(stack, 0, lags.size - 1)
    if ex is None:
        return None
    return float(np.interp(ex[0], np.arange(lags.size), lags)), ex[1]


def _drop_duplicates(events, period):
    """Keep one of two events that follow the same lobe on most common traces."""
    events = sorted(events, key=lambda e: -e["semblance"])
    kept = []
    for ev in events:
        dup = False
        for other in kept:
            common, ia, ib = np.intersect1d(ev["idx"], other["idx"], return_indices=True)
            if (
                common.size
                and np.mean(np.abs(ev["time"][ia] - other["time"][ib]) < 0.5 * period) > 0.5
            ):
                dup = True
                break
        if not dup:
            kept.append(ev)
    return kept
