"""Save the raw input of a live capture to WAV files, incrementally and crash-tolerantly.

Why WAV (32-bit float) and not FLAC: libsndfile rewrites a WAV header's sizes on every
``flush()``, so a file cut short by a crash still reads back up to the last flush, whereas a FLAC
stream killed mid-run leaves its length unknown and cannot be read back in one piece. Float
samples keep exactly what the stream delivered. A plain WAV cannot exceed 4 GiB, so a long run
continues in numbered files (``audio.wav``, ``audio-002.wav``, ...), each a valid WAV.
"""

from __future__ import annotations

import errno
import os
import shutil
import time
from pathlib import Path

import numpy as np

#: stay well under the 4 GiB limit of a RIFF WAV
DEFAULT_MAX_BYTES = 3_500_000_000


class AudioRecorder:
    """Append mono float blocks to WAV file(s) in ``folder``.

    Parameters
    ----------
    folder : run folder
    sample_rate_hz : stream's sample rate (integer rate written to the header)
    stem : base file name (``audio`` -> ``audio.wav``, ``audio-002.wav``, ...)
    flush_interval_s : how often the header and data are pushed to disk
    max_bytes : start a new file before one grows past this size
    """

    def __init__(self, folder: str | Path, sample_rate_hz: float, stem: str = "audio",
                 flush_interval_s: float = 1.0, max_bytes: int = DEFAULT_MAX_BYTES):
        import soundfile  # noqa: F401  (fail at start, not mid-run, when it is missing)

        self.folder = Path(folder)
        self.sample_rate_hz = int(round(sample_rate_hz))
        self.stem = stem
        self.flush_interval_s = flush_interval_s
        self.max_frames = max(1, (max_bytes - 100) // 4)
        self.files: list[dict] = []
        self.frames_written = 0
        self._fh = None
        self._failed = False
        self._in_file = 0
        self._last_flush = time.monotonic()
        self._open_next()

    def _open_next(self) -> None:
        import soundfile as sf

        if self._fh is not None:
            self._fh.close()
        n = len(self.files) + 1
        name = f"{self.stem}.wav" if n == 1 else f"{self.stem}-{n:03d}.wav"
        self._fh = sf.SoundFile(self.folder / name, "w", samplerate=self.sample_rate_hz, channels=1,
                                format="WAV", subtype="FLOAT")
        self.files.append({"file": name, "start_sample": self.frames_written})
        self._in_file = 0

    def write(self, block: np.ndarray) -> None:
        """Append samples (1-D float); zeros stand in for samples the stream lost.

        Raises OSError naming the file when the disk refuses the samples (libsndfile hides the
        system's reason; little free space left is reported as a full disk).
        """
        try:
            self._write(block)
        except (RuntimeError, OSError) as exc:  # soundfile's errors derive from RuntimeError
            self._failed = True
            raise self._as_oserror(exc) from None

    def _as_oserror(self, exc: BaseException) -> OSError:
        if isinstance(exc, OSError) and exc.filename:
            return exc
        path = str(self.folder / self.files[-1]["file"])
        try:
            full = shutil.disk_usage(self.folder).free < (1 << 20)
        except OSError:
            full = False
        if full:
            return OSError(errno.ENOSPC, os.strerror(errno.ENOSPC), path)
        return OSError(errno.EIO, f"cannot write audio ({exc})", path)

    def _write(self, block: np.ndarray) -> None:
        block = np.asarray(block, dtype=np.float32)
        while block.size:
            room = self.max_frames - self._in_file
            if room <= 0:
                self._open_next()
                continue
            part, block = block[:room], block[room:]
            self._fh.write(part)
            self._in_file += part.size
            self.frames_written += part.size
        now = time.monotonic()
        if now - self._last_flush >= self.flush_interval_s:
            self._fh.flush()  # libsndfile updates the WAV header here, so a crash keeps the data
            self._last_flush = now

    def write_silence(self, n_samples: int) -> None:
        """Fill ``n_samples`` lost samples with zeros so the file stays aligned with the log's t_s."""
        chunk = np.zeros(min(n_samples, 1 << 16), dtype=np.float32)
        left = n_samples
        while left > 0:
            k = min(left, chunk.size)
            self.write(chunk[:k])
            left -= k

    def close(self) -> None:
        if self._fh is not None:
            fh, self._fh = self._fh, None
            try:
                fh.close()
            except (RuntimeError, OSError) as exc:
                if not self._failed:  # after a failed write the error has been reported already
                    raise self._as_oserror(exc) from None

    def describe(self) -> dict:
        return {"files": self.files, "format": "WAV float32 mono", "sample_rate_hz": self.sample_rate_hz,
                "samples": self.frames_written, "lost_samples_as_zeros": True}
