"""Is it still the same wavelet? Main-lobe check and wavelet-change test along an event.

Layer 2 (pure numpy kernels). :mod:`soilwave.reflection_picks` follows a
reflection across offsets; the functions here check the picks of one event
(nearest offset first) against the event's own near-offset wavelet.

1. **Main lobe.** The mean wavelet of an event's first five picks (each
   trace, or group stack, times the event's polarity, ``-+ T / 2`` around its
   pick) must be largest at the picks. Where its largest absolute value is an
   opposite-signed lobe more than ``T / 5`` away, the picks follow a side
   lobe (the hyperbola of the semblance maximum can be a lobe off where
   arrivals overlap) and the event is followed again on that main lobe.
2. **Wavelet changes: post-critical reflections and interference.** Where
   the layer below is faster (``v_2 > v_1``, as under a wetting front), the
   reflection is total beyond the critical distance
   ``x_c = 2 z tan(asin(v_1 / v_2))`` (Snell's law; one layer of thickness
   ``z``): the reflection coefficient is complex with ``|R| = 1`` and a phase
   that grows with the angle (Fresnel equations, :mod:`soilwave.fresnel`),
   so the wavelet is rotated, ``cos(phi) w + sin(phi) H[w]``, and a head
   wave starts there. Both move the main lobe early, by up to about
   ``phi T / (2 pi)``; travel times are therefore taken from pre-critical
   reflections only and picking stops where the wavelet changes (common
   practice; post-critical phase shifts: Sheriff & Geldart 1995,
   Exploration Seismology, ch. 3, from memory). The same test catches the
   tail of the air or ground wave changing the wavelet (interference).
   Each pick's phase is measured against the event's near-offset template
   (the mean wavelet of its first five picks, ``-+ T / 2``): ``z(tau) =
   sum_u a(t_pick + tau + u) w(u)`` with ``a`` the analytic trace, ``|tau|
   <= T / 2``; the phase is ``arg z`` at the largest ``|z|``. A rotated
   wavelet gives ``arg z = -phi`` whatever its time shift (derived:
   ``a = exp(-i phi) (w + i H[w])``). Its noise is ``sigma_phi = kappa
   s / A``, with ``A`` the pick's envelope, ``s`` the noise level plus the
   air- and ground-wave tails weighted by the template's magnitude over the
   window, and ``kappa = 1 / sqrt(1 - <f>^2 / <f^2>)`` (moments of the
   template's power spectrum): the loss of phase precision when the delay
   is unknown too (derived from the Fisher information of a wavelet with
   unknown delay and phase). With six picks or more ``kappa`` is raised to
   the robust scatter (``1.4826`` times the median absolute value) of the
   normalised second differences of neighbouring phases, which a steady
   drift along the offsets leaves out. A self-starting two-sided CUSUM
   (Page 1954, Biometrika 41:100-115; Hawkins 1987, The Statistician
   36:299-316; both from memory) runs over the picks from the nearest
   offset: pick ``j`` is compared with the inverse-variance weighted mean
   of the picks before it, ``z_j = wrap(phi_j - m) / sqrt(sigma_j^2 +
   var(m))``, and ``S_j = max(0, S_j-1 + z_j - k)`` (and the same for
   ``-z_j``) with ``k = 0.75``. When ``S`` exceeds ``h = 4``, or a run of at
   least three picks still reaches 2 at the last pick, the wavelet has
   changed at the first pick of that run: that pick and all farther ones are
   dropped (``reflection_wavelet_change_offset_m`` of :func:`soilwave.auto_pick`
   gives its offset). On Gaussian phase noise of known ``sigma`` the test
   stops 4 to 6 % of 40-pick events that have not changed (they only lose
   picks) and places a lasting step of two ``sigma`` within two picks of its
   start in 88 % of cases (measured with the test suite's simulations).
   Limits: an event that is already post-critical at its nearest pick has
   no pre-critical template and is not recognised; a slowly growing change
   at the farthest picks may stay below the thresholds.
"""

from __future__ import annotations

import numpy as np

from soilwave.firstbreaks import _extremum, _subsample

__all__: list[str] = []

#: Half-length of the wavelet window of the phase test, periods.
_PHASE_WINDOW = 0.5
#: Largest lag searched by the phase test, periods.
_PHASE_LAGS = 0.5
#: Picks (nearest offsets first) whose mean wavelet is the event's template.
_TEMPLATE_PICKS = 5
#: Fewest picks of an event for the wavelet-change test.
_MIN_TEST_PICKS = 3
#: Sigma floor, in periods, of the picks of an event with fewer picks: the
#: cautious end of the usual tenth to quarter of a period (value from memory).
UNCHECKED_SIGMA_FRACTION = 0.25
#: Fewest picks for the scatter of neighbouring phases to set their noise.
_MIN_SCATTER_PICKS = 6
#: Reference value and decision interval of the CUSUM, standard deviations.
_CUSUM_K = 0.75
_CUSUM_H = 4.0
#: A run of at least ``_END_RUN`` picks reaching ``_CUSUM_END_H`` at the last pick.
_CUSUM_END_H = 2.0
_END_RUN = 3


def _side_lobe_shift(traces, t_first, dt, centres, sign, period):
    """Lag (ns) from the picks to the main lobe of the near-offset wavelet; 0 if on it.

    ``traces`` (one row per pick, sampled every ``dt`` from ``t_first``) with
    picks at ``centres``, nearest offsets first. The mean of ``sign`` times
    the first ``_TEMPLATE_PICKS`` rows around their picks (``-+ T / 2``)
    should be largest at the picks (the main lobe). When its largest absolute
    value lies at an opposite-signed lobe more than ``T / 5`` away, the picks
    sit on a side lobe and that lag is returned.
    """
    k = min(_TEMPLATE_PICKS, len(centres))
    if k == 0:
        return 0.0
    u = np.arange(-0.5 * period, 0.5 * period + 0.5 * dt, dt)
    axis = t_first + dt * np.arange(np.shape(traces)[-1])
    tmpl = sign * np.mean([np.interp(centres[j] + u, axis, traces[j]) for j in range(k)], axis=0)
    ex = _extremum(tmpl, 0, u.size - 1)
    if ex is None or ex[1] > 0:
        return 0.0
    lag = float(np.interp(ex[0], np.arange(u.size), u))
    return lag if abs(lag) > 0.2 * period else 0.0


def _wavelet_phases(traces, analytic, t_first, dt, centres, sign, period, n_template):
    """Phase (rad) of every pick's wavelet relative to the event's near-offset template.

    ``traces[j]`` (real) and ``analytic[j]`` (its analytic signal) are sampled
    every ``dt`` from ``t_first[j]``; the pick is at ``centres[j]``. The
    template is the mean of ``sign`` times the first ``n_template`` windows
    ``centres[j] -+ _PHASE_WINDOW`` periods. For each pick the complex
    correlation ``z(tau) = sum_u a(c + tau + u) w(u)`` of the analytic trace
    with the template is formed for lags ``|tau| <= _PHASE_LAGS`` periods; the
    phase is ``arg z`` at the largest ``|z|`` (parabolic sub-sample lag). A
    wavelet rotated by ``phi`` (``cos phi w + sin phi H[w]``) gives
    ``arg z = -phi`` there, whatever the time shift. Also returns the
    delay-phase coupling factor ``kappa = 1 / sqrt(1 - <f>^2 / <f^2>)`` of the
    template's power spectrum, the window offsets ``u`` (ns) and the template.
    """
    u = np.arange(-_PHASE_WINDOW * period, _PHASE_WINDOW * period + 0.5 * dt, dt)
    taus = np.arange(-_PHASE_LAGS * period, _PHASE_LAGS * period + 0.5 * dt, dt)
    m = len(centres)
    k = min(n_template, m)

    def at(j, arr, times):
        axis = t_first[j] + dt * np.arange(arr.shape[-1])
        return np.interp(times, axis, arr, left=0.0, right=0.0)

    tmpl = sign * np.mean([at(j, traces[j], centres[j] + u) for j in range(k)], axis=0)
    nfft = int(2 ** np.ceil(np.log2(max(8 * u.size, 256))))
    power = np.abs(np.fft.rfft(tmpl, nfft)) ** 2
    f = np.fft.rfftfreq(nfft, dt)
    total = max(float(power.sum()), 1e-300)
    ratio = (float(f @ power) / total) ** 2 / max(float(f**2 @ power) / total, 1e-300)
    kappa = 1.0 / np.sqrt(max(1.0 - ratio, 1e-3))
    grid = (taus[:, None] + u[None, :]).ravel()
    phases = np.zeros(m)
    for j in range(m):
        times = centres[j] + grid
        a = at(j, analytic[j].real, times) + 1j * at(j, analytic[j].imag, times)
        z = sign * (a.reshape(taus.size, u.size) @ tmpl)
        q = int(np.argmax(np.abs(z)))
        d = _subsample(np.abs(z), q)
        lo = min(max(q + int(np.floor(d)), 0), z.size - 1)
        hi = min(lo + 1, z.size - 1)
        frac = d - np.floor(d)
        phases[j] = float(np.angle((1.0 - frac) * z[lo] + frac * z[hi]))
    return phases, kappa, u, tmpl


def _change_point(phases, sigmas, *, k=_CUSUM_K, h=_CUSUM_H, end_h=_CUSUM_END_H):
    """Index of the first pick of a lasting phase change; ``len(phases)`` if none.

    Self-starting two-sided CUSUM (Hawkins 1987, The Statistician 36:299-316;
    Page 1954, Biometrika 41:100-115; both from memory): pick j is compared
    with the inverse-variance weighted mean ``m`` of all picks before it,
    ``z_j = wrap(phi_j - m) / sqrt(sigma_j^2 + var(m))``, and
    ``S+_j = max(0, S+_{j-1} + z_j - k)`` (``S-`` likewise with ``-z_j``); when
    either exceeds ``h``, or ends at ``end_h`` or more after a run of at least
    ``_END_RUN`` picks, the change is placed at the first pick of that run
    (the pick after the sum last stood at zero).
    """
    n = len(phases)
    if n < _MIN_TEST_PICKS:
        return n
    mean, weight = float(phases[0]), 1.0 / sigmas[0] ** 2
    s_pos = s_neg = 0.0
    run_pos = run_neg = 1
    for j in range(1, n):
        d = float(np.angle(np.exp(1j * (phases[j] - mean))))
        z = d / np.sqrt(sigmas[j] ** 2 + 1.0 / weight)
        if s_pos == 0.0:
            run_pos = j
        if s_neg == 0.0:
            run_neg = j
        s_pos = max(0.0, s_pos + z - k)
        s_neg = max(0.0, s_neg - z - k)
        if s_pos > h:
            return run_pos
        if s_neg > h:
            return run_neg
        w = 1.0 / sigmas[j] ** 2
        mean += d * w / (weight + w)
        weight += w
    # a run still growing at the last picks (the far offsets, where the
    # change sets in) is not given the picks to reach h
    for s_end, run in ((s_pos, run_pos), (s_neg, run_neg)):
        if s_end >= end_h and n - run >= _END_RUN:
            return run
    return n


def _wavelet_change(traces, analytic, t_first, dt, centres, sign, period, amplitude, level_at):
    """Number of picks (in offset order) before the event's wavelet changes (module notes).

    ``level_at(j, offsets)`` gives the noise level plus the air- and
    ground-wave tails of pick j at ``centres[j] + offsets`` (ns).
    """
    n = len(centres)
    if n < _MIN_TEST_PICKS:
        return n
    phases, kappa, u, tmpl = _wavelet_phases(
        traces, analytic, t_first, dt, centres, sign, period, _TEMPLATE_PICKS
    )
    # the level the phase estimate sees: weighted by the template's magnitude
    step = max(1, round(0.1 * period / dt))
    weights = np.abs(tmpl[::step])
    weights = weights / max(float(weights.sum()), 1e-300)
    level = np.array([float(np.asarray(level_at(j, u[::step])) @ weights) for j in range(n)])
    rel = level / np.maximum(amplitude, 1e-300)
    if n >= _MIN_SCATTER_PICKS:
        # scatter from second differences of neighbouring picks: a steady
        # drift of the phase along the offsets cancels, noise does not
        w = np.angle(np.exp(1j * (phases - phases[0])))
        d2 = np.angle(np.exp(1j * (w[2:] - 2.0 * w[1:-1] + w[:-2])))
        scale = np.sqrt(rel[2:] ** 2 + 4.0 * rel[1:-1] ** 2 + rel[:-2] ** 2)
        kappa = max(kappa, 1.4826 * float(np.median(np.abs(d2) / scale)))
    sigmas = kappa * rel
    return _change_point(phases, np.maximum(sigmas, 1e-6))
