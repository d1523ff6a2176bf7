"""Power spectra of sampled series: one series (Hann window, mean removed) or the average over the
realisations of a model with noise (the periodograms averaged, which is what makes a spectrum of a
noisy signal readable: one periodogram scatters by its own size at every frequency)."""

from __future__ import annotations

import numpy as np


def _uniform_step(time) -> float | None:
    time = np.asarray(time, dtype=float)
    if time.size < 8:
        return None
    dt = np.diff(time)
    step = float(np.median(dt))
    if step <= 0 or np.max(np.abs(dt - step)) > 1e-6 * step + 1e-12:
        return None
    return step


def power_spectrum(time: np.ndarray, values: np.ndarray):
    """(frequency, power) of a uniformly sampled series, Hann-windowed, mean removed; None if not uniform."""
    step = _uniform_step(time)
    if step is None:
        return None
    y = np.asarray(values, dtype=float)
    ok = np.isfinite(y)
    if not ok.all():
        y = y[: int(np.argmin(ok))]  # the finite stretch before a blow-up
    if y.size < 8:
        return None
    w = np.hanning(y.size)
    spec = np.fft.rfft((y - y.mean()) * w)
    power = (np.abs(spec) ** 2) / np.sum(w**2)
    freq = np.fft.rfftfreq(y.size, step)
    return freq[1:], power[1:]


def mean_power_spectrum(time: np.ndarray, realisations: np.ndarray):
    """(frequency, power, count): the power spectrum of each row of ``realisations`` (R, K) that stays
    finite, averaged; None when the samples are not evenly spaced or no realisation stays finite."""
    rows = [r for r in np.asarray(realisations, dtype=float) if np.all(np.isfinite(r))]
    spectra = [power_spectrum(time, r) for r in rows]
    spectra = [s for s in spectra if s is not None]
    if not spectra:
        return None
    return spectra[0][0], np.mean([s[1] for s in spectra], axis=0), len(spectra)


def spectrum_extent(freq, power, fraction: float = 1e-3, margin: float = 1.25) -> float | None:
    """The highest frequency worth showing of a spectrum: ``margin`` beyond the last frequency whose
    power reaches ``fraction`` of the peak (30 dB below it by default), and at least 2.5 times the
    peak's frequency, so the peak stands inside the axis and not at its left edge; never beyond the
    spectrum's last frequency. None when no power is finite and positive."""
    freq, power = np.asarray(freq, dtype=float), np.asarray(power, dtype=float)
    ok = np.isfinite(power) & (power > 0) & np.isfinite(freq)
    if not ok.any():
        return None
    peak = int(np.argmax(np.where(ok, power, -np.inf)))
    above = np.nonzero(ok & (power >= fraction * power[peak]))[0]
    top = max(margin * freq[above[-1]], 2.5 * freq[peak])
    return float(min(top, freq[ok][-1]))


__all__ = ["power_spectrum", "mean_power_spectrum", "spectrum_extent"]
