"""Benchmark: ``coilshift track`` end to end against a plain spectrogram script, and how both scale.

1. Writes a 20-minute 48 kHz 16-bit WAV (a drifting 5 kHz oscillator with target dips, 40 dB SNR;
   the recording of ``track_memory.py``) and runs, as fresh processes taking turns, ``coilshift
   track REC -o RUN --quiet`` and ``plain_spectrogram.py REC OUT.csv`` (scipy.signal.spectrogram,
   argmax, parabola: what a new user would write first) ``--repeat`` times each. Prints the
   median wall times, their ratio, each process's CPU time and peak RSS. Goal: ``track`` takes at
   most 0.6 times the spectrogram script's time, with a peak RSS under 150 MB. The project's
   modules are byte-compiled first (:func:`compile_once`), as an installed copy is.

2. A scaling table: ``track`` on 1, 10 and 60 minutes (seconds per minute of audio should stay
   flat), and the whole stability analysis of 1e5, 1e6 and 1e7 points at 1 s spacing with a
   warm-up (the record of ``stability_speed.py``). Goal: 1e6 points under 2 s, cost linear in
   the points.

``track`` analyses each block's frames on up to two threads (``FrameTracker(workers=...)``,
``coilshift.logger.tracking.tracker.available_workers``); the CPU column shows the total over
all threads, so it can exceed the wall time.

Usage::

    python benchmarks/track_speed.py [--repeat 3] [--skip-scaling] [--json]
"""

from __future__ import annotations

import argparse
import json
import os
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))

import track_memory  # noqa: E402  (the same recording as the memory benchmark)

RATIO_GOAL = 0.6
RSS_GOAL_MB = 150.0
STABILITY_GOAL_S = 2.0


#: runs a module (like ``python -m``) or a script, then reports its own peak RSS (VmHWM) on stderr;
#: ru_maxrss of a fork+exec child can carry the parent's peak on Linux
WRAPPER = r"""
import runpy, sys
kind, target = sys.argv[1], sys.argv[2]
sys.argv = [target] + sys.argv[3:]
try:
    if kind == "module":
        runpy.run_module(target, run_name="__main__", alter_sys=True)
    else:
        runpy.run_path(target, run_name="__main__")
finally:
    with open("/proc/self/status") as fh:
        hwm = [int(line.split()[1]) for line in fh if line.startswith("VmHWM:")]
    sys.stderr.write("\nVmHWM_kB %d\n" % (hwm[0] if hwm else -1))
"""


def timed(cmd: list[str]) -> dict:
    """Wall time, CPU time (user + system) and peak RSS of one child process."""
    t0 = time.perf_counter()
    proc = subprocess.Popen([sys.executable, "-c", WRAPPER, *cmd], stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
    err = proc.stderr.read().decode() if proc.stderr else ""
    _, status, usage = os.wait4(proc.pid, 0)
    wall = time.perf_counter() - t0
    proc.returncode = os.waitstatus_to_exitcode(status)
    if proc.returncode != 0:
        sys.exit(f"{' '.join(cmd)} failed: {err.strip()}")
    hwm = [int(line.split()[1]) for line in err.splitlines() if line.startswith("VmHWM_kB ")]
    return {"wall_s": wall, "cpu_s": usage.ru_utime + usage.ru_stime, "rss_mb": hwm[-1] / 1024.0 if hwm else float("nan")}


def track_cmd(rec: Path, run: Path) -> list[str]:
    if run.exists():
        shutil.rmtree(run)
    return ["module", "coilshift.cli.main", "track", str(rec), "-o", str(run), "--quiet"]


def spectrogram_cmd(rec: Path, out: Path) -> list[str]:
    return ["path", str(HERE / "plain_spectrogram.py"), str(rec), str(out)]


def side_by_side(work: Path, repeat: int) -> dict:
    rec = work / "rec20.wav"
    track_memory.write_wav(str(rec), 20.0, 48000.0)
    runs: dict[str, list[dict]] = {"track": [], "spectrogram": []}
    for _ in range(repeat):  # taking turns, so a change in the machine's load hits both
        runs["track"].append(timed(track_cmd(rec, work / "run20")))
        runs["spectrogram"].append(timed(spectrogram_cmd(rec, work / "plain.csv")))
    rec.unlink()
    return {name: {key: statistics.median(r[key] for r in rows) for key in rows[0]} | {"runs": rows}
            for name, rows in runs.items()}


def track_scaling(work: Path, minutes=(1.0, 10.0, 60.0)) -> list[dict]:
    rows = []
    for m in minutes:
        rec = work / f"rec{m:g}.wav"
        track_memory.write_wav(str(rec), m, 48000.0)
        r = timed(track_cmd(rec, work / "run"))
        rec.unlink()
        rows.append({"minutes": m, **r, "s_per_min": r["wall_s"] / m})
    return rows


def stability_scaling(points=(100_000, 1_000_000, 10_000_000)) -> list[dict]:
    import stability_speed

    from coilshift.analysis.stability.analyse import analyse_stability

    rows = []
    for n in points:
        t_s, freq_hz = stability_speed._warmup_slow_spacing(n)
        t0 = time.perf_counter()
        analyse_stability(t_s, freq_hz)
        rows.append({"points": n, "wall_s": time.perf_counter() - t0})
    return rows


def report(side: dict, scaling: list[dict] | None, stab: list[dict] | None) -> bool:
    tr, sp = side["track"], side["spectrogram"]
    ratio = tr["wall_s"] / sp["wall_s"]
    print("20 min of 48 kHz, median of", len(tr["runs"]), "runs each, fresh processes taking turns")
    print(f"  coilshift track          {tr['wall_s']:6.2f} s wall  {tr['cpu_s']:6.2f} s CPU  peak RSS {tr['rss_mb']:5.0f} MB")
    print(f"  plain spectrogram script {sp['wall_s']:6.2f} s wall  {sp['cpu_s']:6.2f} s CPU  peak RSS {sp['rss_mb']:5.0f} MB")
    print(f"  ratio track / spectrogram {ratio:.2f} (goal <= {RATIO_GOAL}); peak RSS goal < {RSS_GOAL_MB:.0f} MB")
    ok = ratio <= RATIO_GOAL and tr["rss_mb"] < RSS_GOAL_MB
    if scaling:
        print("track scaling (one run each)")
        for r in scaling:
            print(f"  {r['minutes']:4g} min  {r['wall_s']:6.2f} s wall  {r['cpu_s']:6.2f} s CPU  "
                  f"{r['s_per_min']:.3f} s per minute of audio  peak RSS {r['rss_mb']:4.0f} MB")
    if stab:
        print("stability analysis scaling (1 s spacing, warm-up)")
        for r in stab:
            print(f"  {r['points']:>10,d} points  {r['wall_s']:6.2f} s  ({1e6 * r['wall_s'] / r['points']:.2f} us per point)")
        one_m = [r for r in stab if r["points"] == 1_000_000]
        if one_m:
            print(f"  1e6 points: {one_m[0]['wall_s']:.2f} s (goal < {STABILITY_GOAL_S:g} s)")
            ok &= one_m[0]["wall_s"] < STABILITY_GOAL_S
    print("result", "PASS" if ok else "FAIL")
    return ok


def compile_once() -> None:
    """Byte-compile the project's modules once, as installing a package does (pip compiles them).

    An editable checkout run with PYTHONDONTWRITEBYTECODE=1 (as on the reference machine) would
    otherwise compile every module it imports in every run, about 0.2 s of each ``track`` that an
    installed copy never pays; the spectrogram script's libraries are compiled already.
    """
    import compileall

    root = HERE.parent
    for folder in ("api", "logger", "analysis", "cli", "sim"):
        compileall.compile_dir(str(root / folder), quiet=1)


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=3, help="runs of each program on the 20-minute file (default 3)")
    ap.add_argument("--skip-scaling", action="store_true", help="only the side-by-side comparison")
    ap.add_argument("--json", action="store_true", help="also print every number as one JSON object")
    args = ap.parse_args()
    compile_once()
    work = Path(tempfile.mkdtemp(prefix="coilshift-speed-"))
    try:
        side = side_by_side(work, args.repeat)
        scaling = None if args.skip_scaling else track_scaling(work)
        stab = None if args.skip_scaling else stability_scaling()
        ok = report(side, scaling, stab)
        if args.json:
            print(json.dumps({"side_by_side": side, "track_scaling": scaling, "stability_scaling": stab}))
        return 0 if ok else 1
    finally:
        shutil.rmtree(work, ignore_errors=True)


if __name__ == "__main__":
    sys.exit(main())
