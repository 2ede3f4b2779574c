"""Regenerate the guide's images (docs/images/*.png) from a fresh run of ``coilshift demo``.

Usage::

    python docs/make_images.py            # runs the demo in a temporary folder
    python docs/make_images.py DEMO_DIR   # reuse the output of an earlier ``coilshift demo -o DEMO_DIR``

The demo is deterministic (fixed seeds), so the images only change when the code does.
"""

from __future__ import annotations

import shutil
import sys
import tempfile
from pathlib import Path

HERE = Path(__file__).resolve().parent
IMAGES = HERE / "images"
#: demo output file -> image name used in docs/guide.md
PICKS = {
    "calibration/B-200/timeseries.png": "calibration-timeseries.png",
    "calibration/B-200/curves.png": "calibration-curves.png",
    "calibration/B-200/residuals.png": "calibration-residuals.png",
    "calibration/compare.png": "coil-comparison.png",
    "stability/sigma_tau.png": "stability-sigma-tau.png",
    "stability/drift.png": "stability-drift.png",
}


def copy_images(demo_dir: Path) -> list[Path]:
    IMAGES.mkdir(exist_ok=True)
    out = []
    for src, name in PICKS.items():
        path = demo_dir / src
        if not path.is_file():
            raise SystemExit(f"{path}: missing; is {demo_dir} the output of 'coilshift demo'?")
        shutil.copyfile(path, IMAGES / name)
        out.append(IMAGES / name)
    return out


def main(argv: list[str]) -> int:
    if argv:
        written = copy_images(Path(argv[0]))
    else:
        from coilshift.sim.demo import run_demo

        with tempfile.TemporaryDirectory() as tmp:
            run_demo(Path(tmp) / "demo", say=lambda s: print(s, file=sys.stderr))
            written = copy_images(Path(tmp) / "demo")
    for p in written:
        print(p)
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
