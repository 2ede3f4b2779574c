"""Benchmark: simulator throughput and peak memory on a long render, and the demo's wall time.

1. Renders a ``--minutes`` long (default 30) 48 kHz recording with phase noise, hum and noise
   into a WAV file in a temporary folder and reports seconds of audio made per second of wall
   time and the process's peak RSS (VmHWM). Goal: peak RSS independent of the length (the render
   streams in 65536-sample blocks), at least 20x real time on one core.
2. Runs ``coilshift demo`` end to end in a temporary folder. Goal: under 20 s on a 2-core machine (issue 15).

Usage::

    python benchmarks/simulate_and_demo.py [--minutes 30] [--skip-demo] [--json]
"""

from __future__ import annotations

import argparse
import json
import sys
import tempfile
import time
from pathlib import Path

from coilshift.sim.render import plan, write_recording
from coilshift.sim.script import parse_script

#: issue 15: the whole demo under 20 s on this 2-core machine
GOAL_S = 20.0


def peak_rss_mb() -> float:
    for line in Path("/proc/self/status").read_text().splitlines():
        if line.startswith("VmHWM:"):
            return int(line.split()[1]) / 1024.0
    return float("nan")


def long_script(minutes: float) -> dict:
    return {
        "seed": 1,
        "recording": {"sample_rate_hz": 48000, "level_dbfs": -12, "noise_dbfs": -80, "clock_ppm": 20,
                      "hum": {"mains_hz": 50, "level_dbfs": -60}},
        "oscillator": {"freq_hz": 9000.0, "duty": 0.4, "edge_tau_us": 5, "warmup_hz": 1.0,
                       "white_fm_hz": 0.004, "random_walk_hz": 0.001,
                       "tempco_hz_per_c": -0.3, "temperature": {"rate_c_per_h": 1.0, "swing_c": 0.1}},
        "targets": {"steel": {"peak_shift_hz": -10.0, "coil_radius_mm": 60}},
        "session": {"steps": [{"target": "baseline", "hold_s": 30.0 * minutes},
                              {"target": "steel", "distance_mm": 30, "hold_s": 30.0 * minutes}]},
    }


def bench_render(minutes: float) -> dict:
    p = plan(parse_script(long_script(minutes), "benchmark"))
    rss0 = peak_rss_mb()
    with tempfile.TemporaryDirectory() as tmp:
        t0 = time.perf_counter()
        write_recording(p, Path(tmp) / "long.wav")
        wall = time.perf_counter() - t0
        size_mb = (Path(tmp) / "long.wav").stat().st_size / 1e6
    audio_s = p.n_samples / 48000.0
    return {"audio_s": audio_s, "wall_s": wall, "x_real_time": audio_s / wall, "file_mb": size_mb,
            "peak_rss_mb_before": rss0, "peak_rss_mb_after": peak_rss_mb()}


def bench_demo() -> dict:
    from coilshift.sim.demo import run_demo

    with tempfile.TemporaryDirectory() as tmp:
        t0 = time.perf_counter()
        summary = run_demo(Path(tmp) / "demo")
        wall = time.perf_counter() - t0
    return {"wall_s": wall, "all_classes_right": summary["all_classes_right"],
            "all_true_ranges_inside": summary.get("all_true_ranges_inside"), "goal_s": GOAL_S, "ok": wall < GOAL_S}


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--minutes", type=float, default=30.0)
    ap.add_argument("--skip-demo", action="store_true")
    ap.add_argument("--json", action="store_true")
    args = ap.parse_args()
    out = {"render": bench_render(args.minutes)}
    if not args.skip_demo:
        out["demo"] = bench_demo()
    if args.json:
        print(json.dumps(out, indent=2))
    else:
        r = out["render"]
        print(f"render: {r['audio_s']:.0f} s of audio in {r['wall_s']:.1f} s ({r['x_real_time']:.0f}x real time), "
              f"{r['file_mb']:.0f} MB file, peak RSS {r['peak_rss_mb_before']:.0f} -> {r['peak_rss_mb_after']:.0f} MB")
        if "demo" in out:
            d = out["demo"]
            print(f"demo: {d['wall_s']:.1f} s (goal < {d['goal_s']:.0f} s), all calls right: {d['all_classes_right']}, "
                  f"every true range inside its 95 % interval: {d['all_true_ranges_inside']}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
