"""The tracker's output: per-frame arrays of one length, in SI units."""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np


@dataclass
class FrameTable:
    """Frames produced by the tracker, one entry per analysis frame.

    Attributes
    ----------
    t_s : seconds from the first sample of the recording to the frame centre
    freq_hz : tracked frequency (NaN when no tone); corrections already applied by the caller
    amp_dbfs : tone amplitude, dB relative to a full-scale sine (0 dBFS = peak 1.0)
    snr_db : tone power over the noise power in the frame's analysis bandwidth, dB
    flags : bit mask per frame (see :mod:`coilshift.logger.runfolder.flags`)
    """

    t_s: np.ndarray
    freq_hz: np.ndarray
    amp_dbfs: np.ndarray
    snr_db: np.ndarray
    flags: np.ndarray = field(default=None)  # type: ignore[assignment]

    def __post_init__(self) -> None:
        self.t_s = np.asarray(self.t_s, dtype=float)
        n = self.t_s.shape[0]
        self.freq_hz = np.asarray(self.freq_hz, dtype=float)
        self.amp_dbfs = np.asarray(self.amp_dbfs, dtype=float)
        self.snr_db = np.asarray(self.snr_db, dtype=float)
        if self.flags is None:
            self.flags = np.zeros(n, dtype=np.int64)
        self.flags = np.asarray(self.flags, dtype=np.int64)
        for name in ("freq_hz", "amp_dbfs", "snr_db", "flags"):
            if getattr(self, name).shape != (n,):
                raise ValueError(f"FrameTable.{name} has shape {getattr(self, name).shape}, expected ({n},)")

    def __len__(self) -> int:
        return int(self.t_s.shape[0])

    @classmethod
    def empty(cls) -> "FrameTable":
        z = np.zeros(0)
        return cls(z, z, z, z, np.zeros(0, dtype=np.int64))

    @classmethod
    def concat(cls, tables) -> "FrameTable":
        tables = [t for t in tables if len(t)]
        if not tables:
            return cls.empty()
        return cls(
            np.concatenate([t.t_s for t in tables]),
            np.concatenate([t.freq_hz for t in tables]),
            np.concatenate([t.amp_dbfs for t in tables]),
            np.concatenate([t.snr_db for t in tables]),
            np.concatenate([t.flags for t in tables]),
        )

    def select(self, index) -> "FrameTable":
        return FrameTable(self.t_s[index], self.freq_hz[index], self.amp_dbfs[index],
                          self.snr_db[index], self.flags[index])
