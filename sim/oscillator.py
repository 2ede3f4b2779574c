"""The oscillator: instantaneous frequency (schedule, settling, drift, phase noise) and its waveform.

Everything streams: :class:`PhaseNoise` and :class:`PulseSynth` keep their state between blocks,
so a recording of any length is made in fixed-size pieces, and the result does not depend on the
block size.
"""

from __future__ import annotations

import math

import numpy as np


class Schedule:
    """The target-driven frequency shift over time: holds joined by smooth moves.

    Parameters
    ----------
    starts_s, ends_s : each piece's start and end (s, true time), contiguous from 0
    from_hz, to_hz : shift at each piece's start and end (equal for a hold)
    moving : True for the pieces where a target is being moved (raised-cosine transition, plus
        the operator's hand bump ``hand_hz`` peaking half way)
    """

    def __init__(self, starts_s, ends_s, from_hz, to_hz, moving, hand_hz: float = 0.0):
        self.starts_s = np.asarray(starts_s, float)
        self.ends_s = np.asarray(ends_s, float)
        self.from_hz = np.asarray(from_hz, float)
        self.to_hz = np.asarray(to_hz, float)
        self.moving = np.asarray(moving, bool)
        self.hand_hz = float(hand_hz)

    def shift_hz(self, t_s: np.ndarray) -> np.ndarray:
        """Shift (Hz at the oscillator) at times ``t_s``."""
        t = np.asarray(t_s, float)
        i = np.clip(np.searchsorted(self.starts_s, t, side="right") - 1, 0, len(self.starts_s) - 1)
        span = np.maximum(self.ends_s[i] - self.starts_s[i], 1e-12)
        u = np.clip((t - self.starts_s[i]) / span, 0.0, 1.0)
        # raised cosine: the target arrives and leaves without a step in frequency slope
        w = 0.5 - 0.5 * np.cos(np.pi * u)
        out = self.from_hz[i] + (self.to_hz[i] - self.from_hz[i]) * w
        if self.hand_hz:
            out = out + np.where(self.moving[i], self.hand_hz * np.sin(np.pi * u) ** 2, 0.0)
        return out


def drift_hz(t_s: np.ndarray, osc) -> np.ndarray:
    """Warm-up settling plus temperature drift (Hz) for an :class:`~coilshift.sim.script.Oscillator`.

    Warm-up: ``warmup_hz exp(-t/warmup_tau_s)`` (first-order thermal settling after power-on).
    Temperature: ``T(t) = start + rate t + swing sin(2 pi t / period)``, frequency
    ``tempco (T(t) - start)``.
    """
    t = np.asarray(t_s, float)
    out = osc.warmup_hz * np.exp(-t / osc.warmup_tau_s)
    temp_c = osc.rate_c_per_h * t / 3600.0 + osc.swing_c * np.sin(2 * np.pi * t / osc.swing_period_s)
    return out + osc.tempco_hz_per_c * temp_c


class PhaseNoise:
    """Oscillator frequency noise: white FM plus random-walk FM, one value per sample.

    Parameters
    ----------
    sample_rate_hz : rate at which the noise is drawn (the card's true rate)
    white_fm_hz : white FM level as its Allan deviation at tau = 1 s; a white frequency
        sequence of standard deviation s at rate fs has sigma(tau) = s / sqrt(tau fs)
        (NIST SP 1065, white FM: sigma_y proportional to tau^-1/2), so s = white_fm_hz sqrt(fs)
    random_walk_hz : diffusion q of random-walk FM, Hz/sqrt(s); its Allan variance is
        q^2 tau / 3 (NIST SP 1065, random-walk FM: sigma_y proportional to tau^+1/2)
    seed : a numpy SeedSequence or int; two independent streams are spawned from it
    """

    def __init__(self, sample_rate_hz: float, white_fm_hz: float, random_walk_hz: float, seed):
        ss = seed if isinstance(seed, np.random.SeedSequence) else np.random.SeedSequence(seed)
        a, b = ss.spawn(2)
        self._white = np.random.default_rng(a)
        self._walk = np.random.default_rng(b)
        self.white_std_hz = white_fm_hz * math.sqrt(sample_rate_hz)
        self.step_std_hz = random_walk_hz / math.sqrt(sample_rate_hz)
        self._level_hz = 0.0

    def next(self, n: int) -> np.ndarray:
        """The next ``n`` samples of frequency noise (Hz)."""
        out = np.zeros(n)
        if self.white_std_hz:
            out += self.white_std_hz * self._white.standard_normal(n)
        if self.step_std_hz:
            walk = self._level_hz + np.cumsum(self.step_std_hz * self._walk.standard_normal(n))
            self._level_hz = float(walk[-1])
            out += walk
        return out


def pulse_harmonics(duty: float, n_max: int) -> np.ndarray:
    """Cosine-series amplitudes a_1..a_n of a unit rectangular pulse train of duty ``duty``.

    A pulse of height 1 lasting ``duty`` of each period, centred on phase 0, is
    ``D + sum_n (2/(n pi)) sin(n pi D) cos(n w t)`` (Fourier series of a rectangular pulse train;
    the DC term is removed here, as the line-in's coupling capacitor does).
    """
    n = np.arange(1, n_max + 1)
    return 2.0 / (n * np.pi) * np.sin(n * np.pi * duty)


class PulseSynth:
    """Pulse-wave synthesis by harmonic sums driven by a phase accumulator.

    Parameters
    ----------
    out_freq_hz : nominal frequency at the line-in (after any prescaler), for choosing harmonics
        and the RC edge response
    duty : pulse duty cycle (a divided output is 0.5: a divide-by-N counter's top bit)
    edge_tau_us : RC time constant of the edges; harmonic n is multiplied by
        1/(1 + j 2 pi n f tau) (first-order low-pass)
    amplitude : fundamental amplitude at the line-in (full scale = 1)
    sample_rate_hz : the card's true rate
    anti_alias : keep only harmonics below 0.45 of the sample rate (the card's filter), else keep
        up to ``max_harmonic`` and let those above Nyquist alias as they would without a filter
    prescaler : the oscillator's phase is divided by this before shaping
    """

    def __init__(self, out_freq_hz: float, duty: float, edge_tau_us: float, amplitude: float,
                 sample_rate_hz: float, anti_alias: bool, max_harmonic: int, prescaler: int = 1):
        self.prescaler = int(prescaler)
        n_max = max_harmonic
        if anti_alias:
            n_max = max(1, min(n_max, int(0.45 * sample_rate_hz / out_freq_hz)))
        a = pulse_harmonics(duty, n_max)
        n = np.arange(1, n_max + 1)
        h = 1.0 / (1.0 + 2j * np.pi * n * out_freq_hz * edge_tau_us * 1e-6)
        c = a * h
        keep = np.abs(c) > 1e-12 * abs(c[0]) if abs(c[0]) > 0 else np.ones(n_max, bool)
        self.orders = n[keep]
        self.coefs = c[keep] * (amplitude / abs(c[0]))
        self._acc_cycles = 0.0  # oscillator phase, kept modulo the prescaler ratio

    def next(self, osc_freq_hz: np.ndarray, sample_rate_hz: float) -> np.ndarray:
        """Waveform samples for the given instantaneous oscillator frequency per sample."""
        inc = np.asarray(osc_freq_hz, float) / sample_rate_hz
        total = np.cumsum(inc)
        # phase of sample k is the integral of the frequency up to (not including) sample k
        phase = self._acc_cycles + total - inc
        self._acc_cycles = math.fmod(self._acc_cycles + float(total[-1]), self.prescaler)
        out_phase = 2 * np.pi * np.mod(phase, self.prescaler) / self.prescaler
        x = np.zeros_like(out_phase)
        for order, c in zip(self.orders, self.coefs):
            x += c.real * np.cos(order * out_phase) - c.imag * np.sin(order * out_phase)
        return x


def apparent_freq_hz(freq_hz, prescaler: int, clock_ppm: float, sample_rate_hz: float):
    """The frequency a raw tracker reports for an oscillator at ``freq_hz``.

    The line-in sees ``freq_hz / prescaler``; a card whose clock runs ``clock_ppm`` fast stamps
    every cycle short, so the file shows ``f / (1 + ppm 1e-6)`` at the nominal rate; anything
    above the Nyquist frequency folds back (sampling theorem: f -> |f - k fs|).
    Returns ``(apparent_hz, nyquist_zone)``; zone 1 is 0..fs/2, zone 2 is fs/2..fs, ...
    """
    f = np.asarray(freq_hz, float) / prescaler / (1.0 + clock_ppm * 1e-6)
    zone = np.floor(f / (sample_rate_hz / 2.0)).astype(int) + 1
    r = np.mod(f, sample_rate_hz)
    folded = np.where(r > sample_rate_hz / 2.0, sample_rate_hz - r, r)
    return folded, zone
