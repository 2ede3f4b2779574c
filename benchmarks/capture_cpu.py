"""Benchmark: CPU cost of live capture + tracking, and dropped blocks over a long run.

Runs the capture engine on the virtual audio device (a PulseAudio null sink, captured through
sounddevice -> PortAudio -> ALSA ``pulse``) while ``sox`` plays a steady tone into the sink from
a separate process, so only the capture side is measured:

1. CPU per second of audio at 48 kHz and 192 kHz (process CPU time of all our threads: the
   PortAudio callback, the worker's tracking and log writing) over ``--cpu-seconds`` each.
   Goal: under 4% of one core at 192 kHz (issue 15; it was 10%).
2. Dropped blocks over ``--minutes`` (default 10) at ``--rate`` (default 192 kHz): input
   overflows, queue overruns, lost samples, device errors, the deepest the queue got.

Start PulseAudio first (as in tests/logger/conftest.py), e.g.::

    pulseaudio --daemonize=true --exit-idle-time=-1 -n \\
        --load="module-null-sink sink_name=bench" --load=module-native-protocol-unix
    python benchmarks/capture_cpu.py [--sink bench] [--minutes 10] [--cpu-seconds 30] [--json]
"""

from __future__ import annotations

import argparse
import json
import os
import shutil
import signal
import subprocess
import sys
import tempfile
import threading
import time
from pathlib import Path

from coilshift.logger.capture.engine import CaptureEngine
from coilshift.logger.runfolder.folders import prepare_run_dir
from coilshift.logger.sources.soundcard import SoundcardSource
from coilshift.logger.tracking.tracker import TrackerSettings


def play_tone(sink: str, rate: int, seconds: float, freq_hz: float = 1000.0) -> subprocess.Popen:
    """sox synthesises the tone and paplay feeds the sink: both outside this process."""
    if shutil.which("sox") is None or shutil.which("paplay") is None:
        sys.exit("capture_cpu: needs sox and paplay (apt install sox pulseaudio-utils)")
    cmd = (f"sox -q -n -r {rate} -c 1 -b 16 -t wav - synth {seconds:.0f} sine {freq_hz} vol 0.5 "
           f"| paplay --device={sink}")
    return subprocess.Popen(cmd, shell=True, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
                            start_new_session=True)


def capture(device: str, rate: int, seconds: float, sink: str, settle_s: float = 2.0) -> dict:
    """Capture ``seconds`` of audio; CPU is counted after ``settle_s`` (stream and baseline start-up)."""
    player = play_tone(sink, rate, seconds + settle_s + 10)
    tmp = Path(tempfile.mkdtemp(prefix="coilshift-bench-"))
    try:
        time.sleep(0.5)
        eng = CaptureEngine(SoundcardSource(device, rate, 0), prepare_run_dir(tmp / "run"), TrackerSettings(),
                            baseline_s=1.0)
        eng.start()
        deepest = [0.0]
        stop_watch = threading.Event()

        def watch():  # sample the queue depth a few times a second
            while not stop_watch.wait(0.2):
                deepest[0] = max(deepest[0], eng.snapshot().queue_fill)

        watcher = threading.Thread(target=watch, daemon=True)
        watcher.start()
        while eng.elapsed_s < settle_s:
            time.sleep(0.05)
        cpu0, wall0, audio0 = time.process_time(), time.monotonic(), eng.elapsed_s
        while eng.elapsed_s < settle_s + seconds and not eng.finished.is_set():
            time.sleep(0.1)
        cpu1, wall1, audio1 = time.process_time(), time.monotonic(), eng.elapsed_s
        stop_watch.set()
        watcher.join()
        summary = eng.stop()
        snap = eng.snapshot()
        return {
            "rate_hz": rate,
            "audio_s": round(audio1 - audio0, 2),
            "wall_s": round(wall1 - wall0, 2),
            "cpu_s": round(cpu1 - cpu0, 3),
            "cpu_percent_of_one_core": round(100 * (cpu1 - cpu0) / (audio1 - audio0), 2),
            "rows": summary["rows"],
            "tone_hz_last": round(snap.freq_hz, 4),
            "overflows": summary["overflows"],
            "queue_overruns": summary["queue_overruns"],
            "dropped_blocks": summary["dropped_blocks"],
            "lost_samples": summary["lost_samples"],
            "device_errors": summary["device_errors"],
            "deepest_queue_percent": round(100 * deepest[0], 1),
            "input_latency_s": eng.source.describe().get("input_latency_s"),
            "delivered_rate_hz": summary.get("delivered_rate_hz"),
            "status": summary["status"],
        }
    finally:
        try:
            os.killpg(player.pid, signal.SIGTERM)  # the tone's own process group (sox | paplay)
        except ProcessLookupError:
            pass
        player.wait()
        shutil.rmtree(tmp, ignore_errors=True)


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sink", default="bench", help="null sink to play into (its monitor must be the default source)")
    ap.add_argument("--device", default="pulse", help="capture device (default: ALSA 'pulse')")
    ap.add_argument("--cpu-seconds", type=float, default=30.0, help="audio seconds per CPU measurement")
    ap.add_argument("--minutes", type=float, default=10.0, help="length of the dropped-block run")
    ap.add_argument("--rate", type=int, default=192000, help="sample rate of the dropped-block run")
    ap.add_argument("--json", action="store_true", help="print one JSON object")
    args = ap.parse_args(argv)
    subprocess.run(["pactl", "set-default-source", f"{args.sink}.monitor"], check=False)
    results = {"cpu": [capture(args.device, r, args.cpu_seconds, args.sink) for r in (48000, 192000)]}
    results["drops"] = capture(args.device, args.rate, args.minutes * 60, args.sink)
    results["goal"] = "CPU under 4% of one core at 192 kHz; no dropped blocks"
    if args.json:
        print(json.dumps(results, indent=2))
        return 0
    for r in results["cpu"]:
        print(f"{r['rate_hz'] / 1000:g} kHz: {r['cpu_percent_of_one_core']:.2f}% of one core "
              f"({r['cpu_s']:.2f} s CPU for {r['audio_s']:.1f} s of audio; {r['rows']} rows, "
              f"tone {r['tone_hz_last']} Hz)")
    d = results["drops"]
    print(f"{args.minutes:g} min at {d['rate_hz'] / 1000:g} kHz: {d['overflows']} overflows, "
          f"{d['dropped_blocks']} dropped blocks ({d['queue_overruns']} queue overruns), "
          f"{d['lost_samples']} samples lost, "
          f"{d['device_errors']} device errors; deepest queue {d['deepest_queue_percent']}%; "
          f"CPU {d['cpu_percent_of_one_core']:.2f}%; delivered rate {d['delivered_rate_hz']}")
    top = next(r for r in results["cpu"] if r["rate_hz"] == 192000)
    ok = top["cpu_percent_of_one_core"] < 4.0 and d["dropped_blocks"] == 0 and d["lost_samples"] == 0
    print(f"goal: {results['goal']}: {'PASS' if ok else 'FAIL'}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
