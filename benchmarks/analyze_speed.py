"""Benchmark: wall time of ``coilshift analyze`` on the bundled sample run, end to end.

Tracks ``sample_data/calibration/recording.flac`` into a temporary run folder once, then runs
``coilshift analyze RUN -o OUT`` (plots and report) and ``coilshift analyze RUN`` (text only) as
fresh processes, ``--repeat`` times each (default 5), and prints the best and median wall times,
with the machine's load average before and after (other jobs on a shared machine slow every
number). The analysis draws its range intervals by Monte Carlo with no refits; with ``-o`` most
of the time goes to importing matplotlib and laying out and drawing the plots (analysis/report).
Goal: under 3 s with ``-o``, best and median.

Usage::

    python benchmarks/analyze_speed.py [--repeat 5] [--json]
"""

from __future__ import annotations

import argparse
import json
import os
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

SAMPLE = Path(__file__).resolve().parents[1] / "sample_data" / "calibration"


def _cli(*args: str) -> float:
    t0 = time.perf_counter()
    r = subprocess.run([sys.executable, "-m", "coilshift.cli.main", *args], capture_output=True, text=True)
    wall = time.perf_counter() - t0
    if r.returncode != 0:
        raise SystemExit(r.stderr)
    return wall


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=5)
    ap.add_argument("--json", action="store_true")
    a = ap.parse_args()
    load_before = os.getloadavg()[0]
    with tempfile.TemporaryDirectory() as tmp:
        run = Path(tmp) / "run"
        _cli("track", str(SAMPLE / "recording.flac"), "--markers", str(SAMPLE / "markers.csv"), "-o", str(run),
             "--quiet")
        with_report = [_cli("analyze", str(run), "-o", str(Path(tmp) / f"out{i}")) for i in range(a.repeat)]
        text_only = [_cli("analyze", str(run)) for _ in range(a.repeat)]
    out = {"with_report_s": {"best": min(with_report), "median": statistics.median(with_report)},
           "text_only_s": {"best": min(text_only), "median": statistics.median(text_only)}, "goal_s": 3.0,
           "repeat": a.repeat, "cores": os.cpu_count(), "load_1min": [load_before, os.getloadavg()[0]]}
    if a.json:
        print(json.dumps(out, indent=2))
    else:
        w, t = out["with_report_s"], out["text_only_s"]
        print(f"analyze -o (plots, report): best {w['best']:.2f} s, median {w['median']:.2f} s (goal < 3 s)")
        print(f"analyze (text only):        best {t['best']:.2f} s, median {t['median']:.2f} s")
        print(f"{a.repeat} runs each; load average {out['load_1min'][0]:.2f} before, {out['load_1min'][1]:.2f} after, "
              f"{out['cores']} cores")
    return 0 if out["with_report_s"]["median"] < 3.0 and out["with_report_s"]["best"] < 3.0 else 1


if __name__ == "__main__":
    sys.exit(main())
