"""The live inputs of capture and calibrate: the soundcard, or the hidden paced synthetic tone
(``--synthetic``) that tests and demonstrations use in its place."""

from __future__ import annotations


def synthetic_source(spec: str, rate: float | None, seconds: float | None):
    """A paced synthetic tone: 'F' or 'F,F2@T2,F3@T3' (Hz, step times in s).

    A hidden test input: it drives the capture engine in real time, as a device would.
    """
    from coilshift.logger.sources.paced import PacedSource
    from coilshift.logger.errors import InputError
    from coilshift.logger.sources.synthetic import ToneSource

    steps = []
    try:
        for i, part in enumerate(spec.split(",")):
            f, _, t = part.partition("@")
            steps.append((float(t) if t else 0.0 if i == 0 else float("nan"), float(f)))
    except ValueError:
        raise InputError(f"--synthetic {spec}: expected F or F,F2@T2,...") from None
    if any(t != t for t, _ in steps):
        raise InputError(f"--synthetic {spec}: every step after the first needs @T")
    fs = rate or 48000.0
    if not all(0 <= t < 1e8 and 0 < f < fs / 2 for t, f in steps):
        raise InputError(f"--synthetic {spec}: tones must lie between 0 and {fs / 2:g} Hz, times from 0 s")
    duration = (seconds + 5.0) if seconds else 1e7
    return PacedSource(ToneSource(steps, duration, fs, amplitude=0.5, snr_db=50.0, seed=1), block_frames=512)


def live_source(args, seconds: float | None):
    """The source the live options ask for: ``--synthetic SPEC``, else the soundcard input
    (``--device``, ``--rate``, ``--channel``)."""
    if args.synthetic:
        return synthetic_source(args.synthetic, args.rate, seconds)
    from coilshift.logger.sources.soundcard import SoundcardSource

    return SoundcardSource(args.device, args.rate, args.channel)
