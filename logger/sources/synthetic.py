"""A synthetic oscillator recording with the same interface as the file sources
(:class:`~coilshift.logger.sources.protocol.Source`).

:class:`ToneSource` produces, block by block, what a soundcard would record from a search-coil
oscillator: a sine or a pulse wave whose frequency follows a script, plus white noise at a chosen
SNR, a DC offset, optional mains hum, full-scale clipping and optional quantisation. The same
seed gives the same samples whatever block size the reader asks for, so tests and replays are
repeatable.
"""

from __future__ import annotations

import datetime as _dt
import math
from typing import Callable, Iterator, Sequence, Union

import numpy as np

from coilshift.logger.sources.protocol import START_FROM_NOW

FreqScript = Union[float, Sequence[tuple[float, float]], Callable[[np.ndarray], np.ndarray]]


def _step_function(steps: Sequence[tuple[float, float]]) -> Callable[[np.ndarray], np.ndarray]:
    pts = sorted((float(t), float(f)) for t, f in steps)
    if not pts:
        raise ValueError("a frequency step script needs at least one (t_s, freq_hz) pair")
    starts = np.array([p[0] for p in pts])
    freqs = np.array([p[1] for p in pts])

    def f(t_s: np.ndarray) -> np.ndarray:
        idx = np.searchsorted(starts, t_s, side="right") - 1
        return freqs[np.clip(idx, 0, len(freqs) - 1)]

    return f


class ToneSource:
    """Scripted synthetic tone: sine or band-limited pulse wave, noise, DC, hum.

    Parameters
    ----------
    freq_hz : the frequency script: a constant, a list of ``(t_start_s, freq_hz)`` steps
        (piecewise constant; before the first step the first frequency holds), or a callable
        mapping sample times (s) to frequencies (Hz).
    duration_s : length of the recording.
    sample_rate_hz : nominal sample rate.
    wave : ``"sine"`` or ``"pulse"``.
    duty : fraction of each period a pulse wave spends high (0 < duty < 1).
    amplitude : half the peak-to-peak swing, full scale = 1. A pulse wave is AC-coupled like a
        line input: it sits at ``2 amplitude (1 - duty)`` for the high part and at
        ``-2 amplitude duty`` otherwise (zero mean).
    snr_db : signal power over white-noise power across the whole band 0..fs/2; ``None`` for no
        noise. Signal power is the ideal wave's AC power: ``amplitude**2 / 2`` for a sine,
        ``4 amplitude**2 duty (1 - duty)`` for a pulse wave.
    dc_offset : constant added to every sample.
    hum_hz, hum_amplitude : a mains-hum sine (e.g. 50 or 60 Hz) of the given peak amplitude.
    seed : seed of the noise generator (numpy PCG64).
    clip : clamp to [-1, 1] like a soundcard's converter.
    bits : quantise to this many bits (e.g. 16) after clipping; ``None`` keeps float precision.
    start_utc : timestamp of the first sample (default: now).

    Notes
    -----
    The phase is the running sum of the scripted frequency, so the wave stays continuous across
    frequency steps and across blocks: sample n has phase ``2 pi sum_{m<n} f(t_m) / fs``.
    The pulse wave is synthesised from its Fourier series (pulse high on [0, duty) of each
    period: ``p = d + sum_k 2 sin(pi k d)/(pi k) cos(k theta - pi k d)``), keeping only the
    harmonics below fs/2, as an anti-aliased converter would record it; a naive sampled pulse
    would fold harmonics back next to the fundamental and bias any frequency estimate.
    """

    channels = 1
    channel = 0
    amp_offset_db = 0.0
    amp_reference = "dB re full-scale sine (0 dBFS = peak 1.0)"

    def __init__(self, freq_hz: FreqScript, duration_s: float, sample_rate_hz: float = 48000.0, *,
                 wave: str = "sine", duty: float = 0.5, amplitude: float = 0.5,
                 snr_db: float | None = None, dc_offset: float = 0.0, hum_hz: float | None = None,
                 hum_amplitude: float = 0.0, seed: int = 0, clip: bool = True, bits: int | None = None,
                 start_utc: _dt.datetime | None = None):
        if wave not in ("sine", "pulse"):
            raise ValueError(f"wave must be 'sine' or 'pulse', not {wave!r}")
        if not 0.0 < duty < 1.0:
            raise ValueError("duty must lie strictly between 0 and 1")
        if not sample_rate_hz > 0 or not duration_s > 0:
            raise ValueError("sample rate and duration must be positive")
        self._script_text: object
        if callable(freq_hz):
            self._freq = freq_hz
            self._script_text = "callable"
        elif np.isscalar(freq_hz):
            value = float(freq_hz)  # type: ignore[arg-type]
            self._freq = lambda t, v=value: np.full(np.shape(t), v)
            self._script_text = value
        else:
            self._freq = _step_function(freq_hz)  # type: ignore[arg-type]
            self._script_text = [[float(t), float(f)] for t, f in sorted(freq_hz)]  # type: ignore[arg-type]
        self.sample_rate_hz = float(sample_rate_hz)
        self.n_frames = int(round(duration_s * self.sample_rate_hz))
        self.wave = wave
        self.duty = float(duty)
        self.amplitude = float(amplitude)
        self.snr_db = snr_db
        self.dc_offset = float(dc_offset)
        self.hum_hz = hum_hz
        self.hum_amplitude = float(hum_amplitude)
        self.seed = int(seed)
        self.clip = bool(clip)
        self.bits = bits
        self._start_utc = start_utc

    # -- what the script says --------------------------------------------------------------
    def frequency_at(self, t_s) -> np.ndarray:
        """The scripted frequency (Hz) at times ``t_s`` (the truth a tracker should find)."""
        return np.asarray(self._freq(np.asarray(t_s, dtype=float)), dtype=float)

    @property
    def signal_power(self) -> float:
        """AC power of the ideal wave (full scale = 1), the numerator of ``snr_db``."""
        a = self.amplitude
        return a * a / 2.0 if self.wave == "sine" else 4.0 * a * a * self.duty * (1.0 - self.duty)

    @property
    def noise_std(self) -> float:
        """Standard deviation of the added white noise (0 when ``snr_db`` is None)."""
        if self.snr_db is None:
            return 0.0
        return math.sqrt(self.signal_power / 10.0 ** (self.snr_db / 10.0))

    @property
    def duration_s(self) -> float:
        return self.n_frames / self.sample_rate_hz

    # -- samples -----------------------------------------------------------------------------
    def _wave(self, cycles: np.ndarray, f_max: float) -> np.ndarray:
        two_pi = 2.0 * np.pi
        if self.wave == "sine":
            return self.amplitude * np.sin(two_pi * cycles)
        d = self.duty
        n_harm = max(1, int(math.floor(0.5 * self.sample_rate_hz / max(f_max, 1e-12) * (1 - 1e-9))))
        z = np.exp(1j * two_pi * cycles)
        zk = np.ones_like(z)
        out = np.zeros(cycles.shape)
        for k in range(1, n_harm + 1):
            zk *= z  # z**k by repeated products: one complex multiply per harmonic
            ck = 2.0 * math.sin(math.pi * k * d) / (math.pi * k)
            rot = complex(math.cos(math.pi * k * d), -math.sin(math.pi * k * d))
            out += ck * (zk * rot).real
        return 2.0 * self.amplitude * out  # zero-mean: the constant term d is AC-coupled away

    def blocks(self, block_frames: int) -> Iterator[np.ndarray]:
        """Yield the recording in blocks of ``block_frames`` samples (the last may be shorter)."""
        block_frames = int(block_frames)
        if block_frames <= 0:
            raise ValueError("block_frames must be positive")
        rng = np.random.default_rng(self.seed)
        fs = self.sample_rate_hz
        carry = 0.0  # cycles completed before the block, kept modulo 1 for precision
        sigma = self.noise_std
        for n0 in range(0, self.n_frames, block_frames):
            m = min(block_frames, self.n_frames - n0)
            t = (n0 + np.arange(m)) / fs
            f = self.frequency_at(t)
            if f.shape != t.shape or not np.all(np.isfinite(f)):
                raise ValueError("the frequency script must return one finite frequency per time")
            steps = f / fs
            cum = np.cumsum(steps)
            cycles = carry + cum - steps
            carry = float((carry + cum[-1]) % 1.0)
            x = self._wave(cycles % 1.0, float(np.max(np.abs(f))))
            if sigma > 0:
                x += sigma * rng.standard_normal(m)
            if self.dc_offset:
                x += self.dc_offset
            if self.hum_hz and self.hum_amplitude:
                x += self.hum_amplitude * np.sin(2.0 * np.pi * self.hum_hz * t)
            if self.clip:
                np.clip(x, -1.0, 1.0, out=x)
            if self.bits:
                q = float(2 ** (int(self.bits) - 1))
                x = np.round(x * q) / q
            yield x

    def read_all(self) -> np.ndarray:
        """The whole recording as one array (for short test signals only)."""
        return np.concatenate(list(self.blocks(1 << 16)))

    def describe(self) -> dict:
        return {
            "kind": "synthetic tone",
            "wave": self.wave,
            "duty": self.duty if self.wave == "pulse" else None,
            "freq_script_hz": self._script_text,
            "amplitude": self.amplitude,
            "snr_db": self.snr_db,
            "dc_offset": self.dc_offset,
            "hum_hz": self.hum_hz,
            "hum_amplitude": self.hum_amplitude,
            "seed": self.seed,
            "clip": self.clip,
            "bits": self.bits,
            "channels": 1,
            "channel": 0,
            "sample_rate_hz": self.sample_rate_hz,
            "frames": self.n_frames,
            "duration_s": self.duration_s,
            "amplitude_reference": self.amp_reference,
        }

    def start_time(self, duration_s: float | None = None) -> tuple[_dt.datetime, str]:
        if self._start_utc is not None:
            return self._start_utc.astimezone(_dt.timezone.utc), "given with the synthetic source"
        return _dt.datetime.now(tz=_dt.timezone.utc), START_FROM_NOW
