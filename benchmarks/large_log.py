"""Benchmark: analyse a very long log without loading more than it needs.

Writes a synthetic log.csv of N rows (default 10 million, about 0.8 GB) in chunks to a temp folder,
then, in a fresh process, reads only the columns the stability analysis needs and computes the
Allan deviation at a few averaging times. Prints rows, file size, seconds and peak RSS.

Goal: peak RSS well under what loading every column as text would take (the CSV's own size), i.e.
about 3 float64 columns (24 bytes a row) plus working arrays.

    python benchmarks/large_log.py [--rows 10000000] [--keep DIR]
"""

from __future__ import annotations

import argparse
import json
import os
import resource
import shutil
import subprocess
import sys
import tempfile
import time

import numpy as np
import pandas as pd

HEADER = "t_s,utc,freq_hz,shift_hz,amp_dbfs,snr_db,flags\n"


def write_log(path: str, rows: int, chunk: int = 1_000_000, seed: int = 1) -> None:
    rng = np.random.default_rng(seed)
    start = np.datetime64("2026-03-01T12:00:00.000")
    with open(path, "w") as fh:
        fh.write(HEADER)
        for k in range(0, rows, chunk):
            n = min(chunk, rows - k)
            idx = np.arange(k, k + n)
            t = 0.0425 + 0.02 * idx
            f = 10_000.0 + 0.05 * rng.standard_normal(n) + 1e-5 * t
            utc = np.datetime_as_string(start + (t * 1000).astype("timedelta64[ms]"), unit="ms")
            df = pd.DataFrame({"t_s": t, "utc": np.char.add(utc, "Z"), "freq_hz": f,
                               "shift_hz": f - 10_000.0, "amp_dbfs": -6.0, "snr_db": 45.0, "flags": ""})
            df.to_csv(fh, header=False, index=False, float_format="%.6f", lineterminator="\n")


CHILD = r"""
import json, resource, sys, time
t0 = time.perf_counter()
from coilshift.logger.runfolder.reader import read_log
log = read_log(sys.argv[1], columns=("t_s", "freq_hz", "flags"))
t1 = time.perf_counter()
out = {"rows": len(log.table), "read_s": t1 - t0}
try:
    from coilshift.analysis.stability.noise import noise_at_tau_hz
    ok = log.usable()
    out["adev_hz_at_1s"] = float(noise_at_tau_hz(log.t_s[ok], log.freq_hz[ok], 1.0))
    out["adev_hz_at_10s"] = float(noise_at_tau_hz(log.t_s[ok], log.freq_hz[ok], 10.0))
except ImportError:
    out["adev_hz_at_1s"] = None
out["analyse_s"] = time.perf_counter() - t1
# VmHWM is this process's own peak (ru_maxrss would include the parent's peak before exec)
hwm = [l for l in open("/proc/self/status") if l.startswith("VmHWM")]
out["peak_rss_mb"] = int(hwm[0].split()[1]) / 1024 if hwm else resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
print(json.dumps(out))
"""


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--rows", type=int, default=10_000_000)
    ap.add_argument("--keep", help="write the log here and keep it")
    args = ap.parse_args()
    folder = args.keep or tempfile.mkdtemp(prefix="coilshift-bench-")
    os.makedirs(folder, exist_ok=True)
    path = os.path.join(folder, "log.csv")
    try:
        t0 = time.perf_counter()
        write_log(path, args.rows)
        size_mb = os.path.getsize(path) / 2**20
        print(f"wrote {args.rows:,} rows, {size_mb:.0f} MB in {time.perf_counter() - t0:.1f} s")
        r = subprocess.run([sys.executable, "-c", CHILD, path], capture_output=True, text=True, check=True)
        res = json.loads(r.stdout)
        print(f"read {res['rows']:,} rows in {res['read_s']:.1f} s; analysis {res['analyse_s']:.1f} s; "
              f"peak RSS {res['peak_rss_mb']:.0f} MB (file {size_mb:.0f} MB; three float64 columns "
              f"{res['rows'] * 24 / 2**20:.0f} MB)")
        print(f"ADEV at 1 s: {res['adev_hz_at_1s']} Hz")
    finally:
        if not args.keep:
            shutil.rmtree(folder, ignore_errors=True)


if __name__ == "__main__":
    main()
