"""Render a script: audio blocks through a modelled soundcard, then the WAV/FLAC, markers and truth.

Timeline: the script's steps run back to back in true time; before every step but the first the
target is moved for ``move_s`` (raised-cosine transition); the recording runs on for
:data:`TAIL_S` after the last step. Markers cover each step's hold in true seconds (the session's
clock, the time axis a clock-corrected track uses); a card clock that is off by ``clock_ppm``
stretches the file by at most a few milliseconds against them, which the tail absorbs.

The soundcard chain, in order: hum is added at the input, then white noise, then the converter
clips at full scale and quantises to 16 or 24 bits.
"""

from __future__ import annotations

import math
import os
from dataclasses import dataclass
from pathlib import Path
from typing import Iterator

import numpy as np

from coilshift.logger.runfolder.atomic import write_json_atomic, write_text_atomic
from coilshift.logger.runfolder.markers import BASELINE, Marker, markers_to_csv

from coilshift.sim.oscillator import PhaseNoise, PulseSynth, Schedule, apparent_freq_hz, drift_hz
from coilshift.sim.response import build_responses
from coilshift.sim.script import Script, coil_inductance_uh

TRUTH_FORMAT = "coilshift-sim-truth"
TRUTH_VERSION = 1
BLOCK_FRAMES = 65536
#: the recording continues this long after the last step, so markers fit either time axis
TAIL_S = 0.5
#: full scale of a 16-bit converter read back as float (soundfile divides by 2^15)
_FULL = {16: 2 ** 15, 24: 2 ** 23}


@dataclass
class Plan:
    """Everything fixed before the first sample: timeline, responses, sizes."""

    script: Script
    schedule: Schedule
    step_starts_s: np.ndarray  # true time at which each step's hold begins
    step_ends_s: np.ndarray
    step_shift_hz: np.ndarray  # oscillator shift for each step
    responses: dict
    true_rate_hz: float
    n_samples: int

    def osc_freq_hz(self, t_true_s: np.ndarray) -> np.ndarray:
        """Deterministic oscillator frequency (no noise) at true times."""
        osc = self.script.oscillator
        return osc.freq_hz + drift_hz(t_true_s, osc) + self.schedule.shift_hz(t_true_s)


def plan(script: Script) -> Plan:
    """Lay out the session's timeline and build the target responses."""
    responses = build_responses(script)
    starts, ends, f0, f1, moving = [], [], [], [], []
    hold_start, hold_end, hold_shift = [], [], []
    t = 0.0
    prev = 0.0
    for st in script.steps:
        value = 0.0 if st.target == BASELINE else float(responses[st.target].shift_hz(np.array([st.distance_mm]))[0])
        if st.move_s > 0:
            starts.append(t); ends.append(t + st.move_s); f0.append(prev); f1.append(value); moving.append(True)
            t += st.move_s
        starts.append(t); ends.append(t + st.hold_s); f0.append(value); f1.append(value); moving.append(False)
        hold_start.append(t); hold_end.append(t + st.hold_s); hold_shift.append(value)
        t += st.hold_s
        prev = value
    sched = Schedule(starts, ends, f0, f1, moving, script.hand_hz)
    rec = script.recording
    true_rate = rec.sample_rate_hz * (1.0 + rec.clock_ppm * 1e-6)
    n = int(round((t + TAIL_S) * true_rate))
    return Plan(script, sched, np.array(hold_start), np.array(hold_end), np.array(hold_shift),
                responses, true_rate, n)


def blocks(p: Plan, block_frames: int = BLOCK_FRAMES) -> Iterator[np.ndarray]:
    """Yield the recording as integer sample blocks (int64 codes of the converter).

    Memory is bounded by ``block_frames`` whatever the length; the output does not depend on the
    block size (each noise source has its own random stream).
    """
    s = p.script
    rec, osc = s.recording, s.oscillator
    root = np.random.SeedSequence(s.seed)
    phase_seed, card_seed = root.spawn(2)
    noise = PhaseNoise(p.true_rate_hz, osc.white_fm_hz, osc.random_walk_hz, phase_seed)
    card = np.random.default_rng(card_seed)
    out_hz = osc.freq_hz / osc.prescaler
    synth = PulseSynth(out_hz, 0.5 if osc.prescaler > 1 else osc.duty, osc.edge_tau_us,
                       10 ** (rec.level_dbfs / 20.0), p.true_rate_hz, rec.anti_alias,
                       rec.max_harmonic, osc.prescaler)
    noise_rms = 10 ** (rec.noise_dbfs / 20.0)
    hum = 0.0 if rec.hum_dbfs is None else 10 ** (rec.hum_dbfs / 20.0)
    full = _FULL[rec.bits]
    for k0 in range(0, p.n_samples, block_frames):
        n = min(block_frames, p.n_samples - k0)
        t = (k0 + np.arange(n)) / p.true_rate_hz
        f = p.osc_freq_hz(t) + noise.next(n)
        x = synth.next(f, p.true_rate_hz)
        if hum:
            # mains hum with its third harmonic at half the level (rectifier and transformer fields)
            w = 2 * np.pi * rec.hum_hz * t
            x += hum * (np.sin(w) + 0.5 * np.sin(3 * w + 0.7))
        if noise_rms:
            x += noise_rms * card.standard_normal(n)
        # the converter: round to the nearest code, clip at the rails
        yield np.clip(np.rint(x * full), -full, full - 1).astype(np.int64)


def render_array(script: Script, block_frames: int = BLOCK_FRAMES) -> np.ndarray:
    """The whole recording as floats in [-1, 1), as soundfile reads it back (for tests and plots)."""
    p = plan(script)
    full = _FULL[script.recording.bits]
    return np.concatenate(list(blocks(p, block_frames))) / full


def markers_for(p: Plan) -> list[Marker]:
    """One marker per step's hold, in true seconds."""
    out = []
    for st, a, b in zip(p.script.steps, p.step_starts_s, p.step_ends_s):
        out.append(Marker(float(a), float(b), st.target,
                          math.nan if st.target == BASELINE else st.distance_mm))
    return out


def truth_for(p: Plan) -> dict:
    """The known truth of the recording: per-step frequency and shift, per-target class and ranges."""
    s = p.script
    rec, osc = s.recording, s.oscillator
    fs = rec.sample_rate_hz

    def app(f):
        a, z = apparent_freq_hz(f, osc.prescaler, rec.clock_ppm, fs)
        return float(a), int(z)

    base_app, zone = app(osc.freq_hz)
    segments = []
    for st, a, b, shift in zip(s.steps, p.step_starts_s, p.step_ends_s, p.step_shift_hz):
        tt = np.linspace(a, b, 2001)
        mean_f = float(np.mean(p.osc_freq_hz(tt)))
        fa, _ = app(mean_f)
        sa, _ = app(osc.freq_hz + shift)
        segments.append({
            "start_s": float(a), "end_s": float(b), "target": st.target,
            "distance_mm": None if st.target == BASELINE else st.distance_mm,
            "shift_hz": float(shift),
            "apparent_shift_hz": sa - base_app,
            "freq_hz": mean_f, "apparent_freq_hz": fa,
        })
    targets = {}
    for name, r in p.responses.items():
        dists = [st.distance_mm for st in s.steps if st.target == name]
        nearest = min(dists) if dists else 0.0
        ranges = {}
        for thr in s.thresholds_hz:
            d = r.range_mm(thr)
            ranges[f"{thr:g}"] = None if not math.isfinite(d) else d
        targets[name] = {
            "class": r.expected_class(nearest, s.class_floor_hz),
            "model": r.params,
            "ranges_mm": ranges,
            "distances_mm": dists,
            "shift_hz_at_distances": [float(v) for v in r.shift_hz(np.array(dists, float))] if dists else [],
        }
    return {
        "format": TRUTH_FORMAT, "format_version": TRUTH_VERSION,
        "synthetic": True, "seed": s.seed,
        "sample_rate_hz": fs, "true_sample_rate_hz": p.true_rate_hz,
        "n_samples": p.n_samples, "duration_s": p.n_samples / fs,
        "true_duration_s": p.n_samples / p.true_rate_hz,
        "time_note": "segment and marker times are true seconds (the session's clock); the file's "
                     "own time axis (sample / nominal rate) runs (1 + clock_ppm 1e-6) times longer",
        "oscillator": {
            "freq_hz": osc.freq_hz, "prescaler": osc.prescaler, "line_in_freq_hz": osc.freq_hz / osc.prescaler,
            "apparent_freq_hz": base_app, "nyquist_zone": zone, "clock_ppm": rec.clock_ppm,
            "coil": osc.coil,
            "inductance_uh": _inductance_uh(s),
        },
        "shift_units": "shift_hz is at the oscillator; apparent_shift_hz is what a raw tracker sees in the file",
        "classes_note": "class is the sign of the modelled shift at the nearest scripted distance "
                        f"(indeterminate when |shift| <= {s.class_floor_hz:g} Hz)",
        "targets": targets,
        "segments": segments,
        "script": s.raw,
    }


def _inductance_uh(s: Script) -> float | None:
    """The simulator's own inductance of the script's coil (uH; the L behind the tone's frequency
    and the targets' responses), None when the script gives ``freq_hz`` instead of a coil."""
    if s.oscillator.coil is None:
        return None
    return coil_inductance_uh(s.oscillator.coil, f"{s.name}: oscillator.coil")


def write_recording(p: Plan, path: str | os.PathLike, block_frames: int = BLOCK_FRAMES, progress=None) -> None:
    """Stream the audio into ``path`` (WAV or FLAC by the script), via a temp file and a rename.

    ``progress(done_s, total_s)``, when given, hears the seconds of audio written after each block.
    """
    import soundfile as sf

    rec = p.script.recording
    path = Path(path)
    tmp = path.with_name(f".{path.name}.tmp")
    subtype = "PCM_16" if rec.bits == 16 else "PCM_24"
    shift = 0 if rec.bits == 16 else 8  # soundfile takes 24-bit codes in the top of an int32
    try:
        with sf.SoundFile(tmp, "w", samplerate=int(round(rec.sample_rate_hz)), channels=1,
                          subtype=subtype, format=rec.encoding.upper()) as fh:
            done, rate, total_s = 0, float(rec.sample_rate_hz), p.n_samples / float(rec.sample_rate_hz)
            for b in blocks(p, block_frames):
                fh.write((b << shift).astype(np.int16 if rec.bits == 16 else np.int32))
                done += b.shape[0]
                if progress is not None:
                    progress(done / rate, total_s)
        fd = os.open(tmp, os.O_RDONLY)  # on disk before the rename makes it the recording
        try:
            os.fsync(fd)
        finally:
            os.close(fd)
        os.replace(tmp, path)
    except BaseException:
        if tmp.exists():
            tmp.unlink()
        raise


def simulate(script: Script, out_dir: str | os.PathLike, progress=None) -> dict:
    """Write ``recording.wav`` (or ``.flac``), ``markers.csv`` and ``truth.json`` into ``out_dir``.

    Returns a small summary dict (paths, duration, frequencies). ``progress(done_s, total_s)``
    hears the seconds of audio rendered (:func:`write_recording`).
    """
    rec = script.recording
    out_dir = Path(out_dir)
    p = plan(script)
    audio = out_dir / f"recording.{rec.encoding}"
    write_recording(p, audio, progress=progress)
    write_text_atomic(out_dir / "markers.csv", markers_to_csv(markers_for(p)))
    truth = truth_for(p)
    write_json_atomic(out_dir / "truth.json", truth)
    return {"recording": str(audio), "markers": str(out_dir / "markers.csv"),
            "truth": str(out_dir / "truth.json"), "duration_s": truth["duration_s"],
            "sample_rate_hz": rec.sample_rate_hz,
            "oscillator_freq_hz": script.oscillator.freq_hz,
            "apparent_freq_hz": truth["oscillator"]["apparent_freq_hz"],
            "steps": len(script.steps), "targets": sorted(script.targets)}
