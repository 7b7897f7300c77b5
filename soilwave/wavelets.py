"""Source wavelets for synthetic traces: the Ricker wavelet and its Hilbert transform.

Layer-1 kernels (pure numpy/scipy). Times in ns, frequencies in MHz.

The Ricker wavelet (Ricker 1953, Geophysics 18(1):10-40; value from memory
for the citation) with peak frequency ``f`` is the negative, normalised second
derivative of a Gaussian::

    w(t) = (1 - 2 pi^2 f^2 t^2) exp(-pi^2 f^2 t^2)

It is zero phase with its maximum 1 at ``t = 0``, zero crossings at
``t = +-1 / (sqrt(2) pi f)``, side-lobe minima ``-2 exp(-3/2)`` at
``t = +-sqrt(3/2) / (pi f)`` and amplitude spectrum proportional to
``(nu / f)^2 exp(-(nu / f)^2)``, which peaks at ``nu = f``.

Its Hilbert transform follows from ``H[exp(-u^2)] = (2 / sqrt(pi)) F(u)``
with ``F`` Dawson's integral (a standard table entry; derived here) and
``H[w] = -(1 / (2 a)) d^2/dt^2 H[exp(-a t^2)]``, ``a = pi^2 f^2``::

    H[w](t) = (2 u - (4 u^2 - 2) F(u)) / sqrt(pi),   u = pi f t

so a phase-rotated wavelet ``Re(A) w - Im(A) H[w]`` (a complex coefficient
``A``, e.g. a post-critical reflection) is also evaluated in closed form.
The Hilbert transform convention is that of :func:`scipy.signal.hilbert`
(``H[cos] = sin``).
"""

from __future__ import annotations

import numpy as np
from scipy import special

from soilwave.errors import InputError

__all__ = ["ricker", "ricker_hilbert", "shifted_wavelet_sum"]


def _freq(frequency_mhz) -> float:
    try:
        f = float(frequency_mhz)
    except (TypeError, ValueError):
        msg = f"frequency_mhz must be a number in MHz; got {frequency_mhz!r}"
        raise InputError(msg) from None
    if not (np.isfinite(f) and f > 0):
        msg = f"frequency_mhz must be finite and > 0 MHz; got {frequency_mhz!r}"
        raise InputError(msg)
    return f


def ricker(t_ns, frequency_mhz):
    """Ricker wavelet of peak frequency ``frequency_mhz`` at times ``t_ns``.

    Parameters
    ----------
    t_ns : float or array_like
        Time relative to the wavelet centre, ns.
    frequency_mhz : float
        Peak frequency of the amplitude spectrum, MHz, > 0.

    Returns
    -------
    float or numpy.ndarray
        ``(1 - 2 pi^2 f^2 t^2) exp(-pi^2 f^2 t^2)``, dimensionless, maximum 1 at 0.

    Examples
    --------
    >>> float(ricker(0.0, 250.0))
    1.0
    >>> round(float(ricker(1 / (np.sqrt(2) * np.pi * 0.25), 250.0)), 12)
    0.0
    """
    f = _freq(frequency_mhz) * 1e-3  # GHz = 1/ns
    t = np.asarray(t_ns, dtype=float)
    a = (np.pi * f * t) ** 2
    out = (1.0 - 2.0 * a) * np.exp(-a)
    return out[()] if out.ndim == 0 else out


def ricker_hilbert(t_ns, frequency_mhz):
    """Hilbert transform of the Ricker wavelet, in closed form.

    Parameters
    ----------
    t_ns : float or array_like
        Time relative to the wavelet centre, ns.
    frequency_mhz : float
        Peak frequency, MHz.

    Returns
    -------
    float or numpy.ndarray
        ``(2 u - (4 u^2 - 2) F(u)) / sqrt(pi)`` with ``u = pi f t`` and ``F``
        Dawson's integral (:func:`scipy.special.dawsn`); odd in ``t``.

    Examples
    --------
    >>> float(ricker_hilbert(0.0, 250.0))
    0.0
    """
    f = _freq(frequency_mhz) * 1e-3
    u = np.pi * f * np.asarray(t_ns, dtype=float)
    out = (2.0 * u - (4.0 * u * u - 2.0) * special.dawsn(u)) / np.sqrt(np.pi)
    return out[()] if out.ndim == 0 else out


def shifted_wavelet_sum(time, arrival_times, amplitudes, *, frequency_mhz=None, wavelet=None):
    """Sum of delayed, scaled (and phase-rotated) wavelets on a time axis.

    ``trace(t) = sum_k Re(A_k) w(t - tau_k) - Im(A_k) H[w](t - tau_k)``.

    Parameters
    ----------
    time : array_like, shape (n_samples,)
        Uniform sample times, ns.
    arrival_times : array_like, shape (n_traces, n_arrivals)
        Arrival (wavelet centre) times, ns; NaN entries are skipped.
    amplitudes : array_like, shape (n_traces, n_arrivals)
        Real or complex amplitudes ``A_k``.
    frequency_mhz : float, optional
        Ricker peak frequency, MHz (used when ``wavelet`` is None).
    wavelet : array_like, optional
        A sampled wavelet at the interval of ``time`` with its time zero at
        index ``len(wavelet) // 2``. Delays are applied exactly (for a
        band-limited wavelet) as phase shifts in the frequency domain, and the
        quadrature part via the FFT Hilbert transform.

    Returns
    -------
    numpy.ndarray, shape (n_traces, n_samples)

    Examples
    --------
    >>> t = np.arange(100) * 0.1
    >>> tr = shifted_wavelet_sum(t, [[5.0]], [[2.0]], frequency_mhz=250.0)
    >>> float(tr[0, 50])
    2.0
    """
    t = np.asarray(time, dtype=float)
    tau = np.atleast_2d(np.asarray(arrival_times, dtype=float))
    amp = np.atleast_2d(np.asarray(amplitudes, dtype=complex))
    if tau.shape != amp.shape:
        msg = f"arrival_times {tau.shape} and amplitudes {amp.shape} must have the same shape"
        raise InputError(msg)
    ok = np.isfinite(tau) & np.isfinite(amp)
    amp = np.where(ok, amp, 0.0)
    tau = np.where(ok, tau, 0.0)
    if wavelet is None:
        if frequency_mhz is None:
            msg = "give frequency_mhz (Ricker wavelet) or a sampled wavelet"
            raise InputError(msg)
        f_ghz = _freq(frequency_mhz) * 1e-3
        n = t.size
        dt = (t[-1] - t[0]) / (n - 1) if n > 1 else 1.0
        # the Ricker wavelet is below 1e-16 of its peak beyond |t| = 6.5 / (pi f):
        # evaluate its in-phase part only in that window (its Hilbert transform
        # decays algebraically and is evaluated everywhere)
        half = int(np.ceil(6.5 / (np.pi * f_ghz * dt))) + 1
        window = np.arange(-half, half + 1)
        out = np.zeros((tau.shape[0], n))
        for k in range(tau.shape[1]):
            a = amp[:, k]
            rows = np.flatnonzero(a.real)
            if rows.size and 2 * half + 1 < n:
                centre = np.round((tau[rows, k] - t[0]) / dt).astype(np.int64)
                idx = centre[:, None] + window[None, :]
                valid = (idx >= 0) & (idx < n)
                rr = np.broadcast_to(rows[:, None], idx.shape)[valid]
                ii = idx[valid]
                out[rr, ii] += a.real[rr] * ricker(t[ii] - tau[rr, k], frequency_mhz)
            elif rows.size:
                dtk = t[None, :] - tau[rows, k, None]
                out[rows] += a.real[rows, None] * ricker(dtk, frequency_mhz)
            if np.any(a.imag):
                dtk = t[None, :] - tau[:, k, None]
                out -= a.imag[:, None] * ricker_hilbert(dtk, frequency_mhz)
        return out
    w = np.asarray(wavelet, dtype=float)
    if w.ndim != 1 or w.size < 2 or not np.all(np.isfinite(w)):
        msg = f"wavelet must be a finite 1-D array of at least 2 samples; got shape {w.shape}"
        raise InputError(msg)
    dt = (t[-1] - t[0]) / (t.size - 1)
    n_fft = 1
    while n_fft < t.size + 2 * w.size:
        n_fft *= 2
    buf = np.zeros(n_fft)
    i0 = w.size // 2
    buf[: w.size - i0] = w[i0:]
    buf[n_fft - i0 :] = w[:i0]
    spec = np.fft.rfft(buf)
    freq = np.fft.rfftfreq(n_fft, d=dt)  # 1/ns
    half = (w.size + 1) * dt
    visible = (tau > t[0] - half) & (tau < t[-1] + half) & (amp != 0)
    amp = np.where(visible, amp, 0.0)
    delay = tau - t[0]
    # A on the positive-frequency half gives Re(A) w - Im(A) H[w]
    phase = np.exp(-2j * np.pi * freq[None, None, :] * delay[:, :, None])
    total = np.einsum("ik,ikf->if", amp, phase) * spec[None, :]
    # the Nyquist bin of a real signal cannot carry a quadrature part
    total[:, -1] = total[:, -1].real
    return np.fft.irfft(total, n=n_fft, axis=1)[:, : t.size]
