"""Benchmark: peak memory while tracking a long recording into a run folder.

Writes a synthetic recording in chunks to a temp folder (default: 2 hours, 48 kHz, 16-bit mono
WAV, about 690 MB; or a scope CSV export with ``--kind csv``), then, in a fresh process, runs the
full ``track_source`` pipeline on it (stream -> tracker -> corrections -> baseline -> run folder)
and reports the child's peak RSS. A Python process with numpy/scipy/pandas imported is also
measured, so the pipeline's own share is visible.

Goal: peak RSS < 300 MB for the 2-hour WAV (the recording itself must never be loaded whole).

    python benchmarks/track_memory.py [--minutes 120] [--rate 48000] [--kind wav|csv] [--keep DIR]
"""

from __future__ import annotations

import argparse
import json
import os
import shutil
import subprocess
import sys
import tempfile
import time

GOAL_MB = 300.0

PEAK = r"""
import resource

def peak_mb():
    # VmHWM is this process's own peak; ru_maxrss in a fork+exec child can carry the parent's
    # pre-exec peak on Linux
    try:
        with open("/proc/self/status") as fh:
            for line in fh:
                if line.startswith("VmHWM:"):
                    return int(line.split()[1]) / 1024.0
    except OSError:
        pass
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0
"""

CHILD = PEAK + r"""
import json, sys, time
from coilshift.logger.pipeline.corrections import Corrections
from coilshift.logger.pipeline.batch import track_source
from coilshift.logger.sources import open_source
from coilshift.logger.tracking.tracker import TrackerSettings
t0 = time.perf_counter()
src = open_source(sys.argv[1])
t1 = time.perf_counter()
s = track_source(src, TrackerSettings(), Corrections(), sys.argv[2])
t2 = time.perf_counter()
print(json.dumps({"open_s": t1 - t0, "track_s": t2 - t1, "frames": s["frames"],
                  "duration_s": s["duration_s"], "baseline_hz": s["baseline_hz"],
                  "peak_rss_mb": peak_mb()}))
"""

IMPORTS_ONLY = PEAK + r"""
import json
import numpy, pandas, soundfile
import coilshift.logger.pipeline.batch, coilshift.logger.tracking.tracker
import coilshift.logger.sources.audiofile, coilshift.logger.sources.scopecsv
print(json.dumps({"peak_rss_mb": peak_mb()}))
"""


def make_source(minutes: float, rate: float):
    from coilshift.logger.sources.synthetic import ToneSource

    # a slowly drifting oscillator with a target pass every 10 minutes (a 0.5 Hz dip for 20 s)
    def freq(t):
        dip = ((t % 600.0) > 300.0) & ((t % 600.0) < 320.0)
        return 5000.0 + 1e-4 * t - 0.5 * dip

    return ToneSource(freq, minutes * 60.0, rate, amplitude=0.3, snr_db=40.0, seed=1, bits=16)


def write_wav(path: str, minutes: float, rate: float) -> None:
    import soundfile as sf

    src = make_source(minutes, rate)
    with sf.SoundFile(path, "w", samplerate=int(rate), channels=1, subtype="PCM_16") as out:
        for block in src.blocks(1 << 20):
            out.write(block)


def write_csv(path: str, minutes: float, rate: float) -> None:
    import numpy as np

    src = make_source(minutes, rate)
    with open(path, "w") as fh:
        fh.write("Instrument,synthetic bench scope\nRecord length,%d\n\nTime (s),CH1 (V)\n" % src.n_frames)
        n0 = 0
        for block in src.blocks(1 << 18):
            t = (n0 + np.arange(len(block))) / rate
            np.savetxt(fh, np.column_stack([t, 1.2 * block]), fmt=["%.9f", "%.5f"], delimiter=",")
            n0 += len(block)


def child(code: str, *argv: str) -> dict:
    r = subprocess.run([sys.executable, "-c", code, *argv], capture_output=True, text=True)
    if r.returncode != 0:
        sys.exit(f"child failed: {r.stderr.strip()}")
    return json.loads(r.stdout.strip().splitlines()[-1])


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--minutes", type=float, default=120.0, help="length of the recording (default 120)")
    ap.add_argument("--rate", type=float, default=48000.0, help="sample rate in Hz (default 48000)")
    ap.add_argument("--kind", choices=("wav", "csv"), default="wav", help="recording format (default wav)")
    ap.add_argument("--keep", metavar="DIR", help="write into DIR and keep the files")
    args = ap.parse_args()

    work = args.keep or tempfile.mkdtemp(prefix="coilshift-bench-")
    os.makedirs(work, exist_ok=True)
    rec = os.path.join(work, "recording." + args.kind)
    run_dir = os.path.join(work, "run")
    try:
        t0 = time.perf_counter()
        (write_wav if args.kind == "wav" else write_csv)(rec, args.minutes, args.rate)
        write_s = time.perf_counter() - t0
        base = child(IMPORTS_ONLY)
        res = child(CHILD, rec, run_dir)
        size_mb = os.path.getsize(rec) / 1e6
        log_mb = os.path.getsize(os.path.join(run_dir, "log.csv")) / 1e6
        print(f"recording      {args.kind.upper()} {args.minutes:g} min at {args.rate:g} Hz, {size_mb:.0f} MB "
              f"(written in {write_s:.1f} s)")
        print(f"tracking       {res['track_s']:.1f} s ({res['duration_s'] / res['track_s']:.0f}x real time), "
              f"open {res['open_s']:.1f} s, {res['frames']} frames, log.csv {log_mb:.1f} MB")
        print(f"baseline       {res['baseline_hz']:.4f} Hz")
        print(f"peak RSS       {res['peak_rss_mb']:.0f} MB (imports alone {base['peak_rss_mb']:.0f} MB; "
              f"goal < {GOAL_MB:.0f} MB)")
        ok = res["peak_rss_mb"] < GOAL_MB
        print("result         " + ("PASS" if ok else "FAIL"))
        return 0 if ok else 1
    finally:
        if not args.keep:
            shutil.rmtree(work, ignore_errors=True)


if __name__ == "__main__":
    sys.exit(main())
