"""The comparison for ``track_speed.py``: a plain spectrogram frequency tracker, as a new user would write it.

scipy.signal.spectrogram with 4096-sample Hann frames overlapping by 2048, the strongest bin of
each frame, a parabola through the log magnitudes of it and its neighbours, one ``t_s,freq_hz``
row per frame written as CSV. No noise floor, no detection, no harmonics, no flags.

Usage::

    python benchmarks/plain_spectrogram.py RECORDING OUT.csv
"""

from __future__ import annotations

import sys

import numpy as np
import scipy.signal
import soundfile as sf


def main(path: str, out: str) -> None:
    x, fs = sf.read(path)
    f, t, mag = scipy.signal.spectrogram(x, fs, window="hann", nperseg=4096, noverlap=2048, mode="magnitude")
    k = 1 + np.argmax(mag[1:-1], axis=0)
    cols = np.arange(mag.shape[1])
    left, mid, right = (np.log(mag[k + d, cols]) for d in (-1, 0, 1))
    offset = 0.5 * (left - right) / (left - 2 * mid + right)
    freq = (k + offset) * fs / 4096
    np.savetxt(out, np.column_stack([t, freq]), fmt="%.6f", delimiter=",", header="t_s,freq_hz", comments="")


if __name__ == "__main__":
    main(sys.argv[1], sys.argv[2])
