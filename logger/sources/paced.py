"""A live block source (:class:`~coilshift.logger.sources.protocol.BlockSource`, the interface the
capture engine takes) made of any block iterator: a recording or a synthetic tone, delivered at the
pace of its sample clock."""

from __future__ import annotations

import threading
import time

import numpy as np


class PacedSource:
    """Turn any block iterator (a recording, a synthetic tone) into a real-time source.

    A thread hands the blocks to ``deliver`` at the pace of the sample clock, like a soundcard
    would, so the capture engine runs exactly as it does live. Used by tests and demos.

    Parameters
    ----------
    source : object with ``sample_rate_hz``, ``blocks(block_frames)`` and optionally ``describe()``
    block_frames : samples per delivered block
    speed : 1.0 for real time; larger values deliver faster (tests)
    """

    def __init__(self, source, block_frames: int = 1024, speed: float = 1.0):
        self.inner = source
        self.sample_rate_hz = float(source.sample_rate_hz)
        self.block_frames = int(block_frames)
        self.speed = float(speed)
        self._thread: threading.Thread | None = None
        self._halt = threading.Event()
        self.delivered_samples = 0
        self.exhausted = False

    def open(self, deliver, fail) -> None:
        self._deliver, self._fail = deliver, fail
        self._thread = threading.Thread(target=self._run, name="coilshift-paced-source", daemon=True)
        self._thread.start()

    def _run(self) -> None:
        t0 = time.monotonic()
        try:
            for block in self.inner.blocks(self.block_frames):
                if self._halt.is_set():
                    return
                self.delivered_samples += len(block)
                due = t0 + self.delivered_samples / self.sample_rate_hz / self.speed
                delay = due - time.monotonic()
                if delay > 0 and self._halt.wait(delay):
                    return
                self._deliver(np.asarray(block, dtype=np.float32), time.monotonic(), False)
        except Exception as exc:  # reading the inner source failed: report it like a device error
            self._fail(f"source failed: {exc}")
            return
        self.exhausted = True

    def close(self) -> None:
        self._halt.set()
        if self._thread is not None:
            self._thread.join()

    def describe(self) -> dict:
        inner = self.inner.describe() if hasattr(self.inner, "describe") else {}
        return {"kind": "paced", "sample_rate_hz": self.sample_rate_hz, "block_frames": self.block_frames,
                "speed": self.speed, "inner": inner}
