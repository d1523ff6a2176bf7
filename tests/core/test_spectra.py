"""Power spectra and the band of frequencies worth showing, against closed forms."""

import numpy as np
import pytest

from orbitdesk.analyses.spectra import power_spectrum, spectrum_extent


def test_a_sine_peaks_at_its_frequency_and_the_band_holds_it_inside():
    t = np.arange(0.0, 200.0, 0.01)  # frequencies up to 50
    freq, power = power_spectrum(t, np.sin(2 * np.pi * 0.5 * t))
    assert freq[np.argmax(power)] == pytest.approx(0.5, abs=1 / 200)
    top = spectrum_extent(freq, power)
    assert 0.5 / top >= 0.2 and top < 5  # not 0..50 with the peak squeezed at the left edge


def test_the_band_of_a_resonance_follows_its_closed_form():
    # |H(f)|^2 = 1 / ((k - w^2)^2 + c^2 w^2), w = 2 pi f: the response of a damped oscillator to white noise;
    # 30 dB below its peak (k = 4, c = 0.2: peak 1/(c^2 (k - c^2/4)) = 6.26) is where the denominator is
    # 160: w = 4.07, f = 0.648: the band ends 1.25 times beyond it (0.81), never before 2.5 times the peak's
    # frequency (0.79)
    f = np.linspace(0.001, 25.0, 20000)
    w = 2 * np.pi * f
    power = 1 / ((4 - w**2) ** 2 + 0.04 * w**2)
    peak = f[np.argmax(power)]
    assert peak == pytest.approx(np.sqrt(4 - 0.02) / (2 * np.pi), abs=1e-3)
    below = f[power >= 1e-3 * power.max()][-1]
    level = 1 / (1e-3 * power.max())  # (u - k)^2 + c^2 u = level with u = w^2
    u = ((8 - 0.04) + np.sqrt((8 - 0.04) ** 2 - 4 * (16 - level))) / 2
    assert below == pytest.approx(np.sqrt(u) / (2 * np.pi), abs=2e-3)
    assert spectrum_extent(f, power) == pytest.approx(max(1.25 * below, 2.5 * peak))
    assert 0.2 <= peak / spectrum_extent(f, power) <= 0.8


def test_a_flat_spectrum_is_shown_whole_and_nothing_finite_gives_none():
    f = np.linspace(0.1, 10.0, 100)
    assert spectrum_extent(f, np.ones_like(f)) == pytest.approx(10.0)
    assert spectrum_extent(f, np.full_like(f, np.nan)) is None
