"""Read ahead: the next block of a recording is decoded on a thread while the tracker works on this one.

Decoding a block (libsndfile through cffi, or a CSV parse) and tracking it use the processor one
after the other when done in turn; on two cores they can overlap. :func:`read_ahead` runs the
source's block iterator on its own thread, ``depth`` blocks ahead at most, and hands the blocks
over in order. An exception raised while reading (a truncated file, say) reaches the consumer at
the point in the stream where it happened, and stopping early (the consumer's own exception, or
closing the generator) stops the reader and closes the source's iterator on its thread.
"""

from __future__ import annotations

import queue
import threading
from typing import Iterable, Iterator, TypeVar

T = TypeVar("T")

#: how often a blocked reader looks whether the consumer has gone (s)
_POLL_S = 0.05
_END = object()


def read_ahead(blocks: Iterable[T], depth: int = 1) -> Iterator[T]:
    """Yield the items of ``blocks`` in order, reading up to ``depth`` items ahead on a thread."""
    hand: queue.Queue = queue.Queue(maxsize=max(1, int(depth)))
    gone = threading.Event()

    def offer(item) -> bool:
        while not gone.is_set():
            try:
                hand.put(item, timeout=_POLL_S)
                return True
            except queue.Full:
                continue
        return False

    def read() -> None:
        source = iter(blocks)
        try:
            for item in source:
                if not offer((item, None)):
                    break
            else:
                offer((_END, None))
        except BaseException as exc:  # handed over, raised where the consumer reads it
            offer((_END, exc))
        finally:
            close = getattr(source, "close", None)
            if close is not None:
                close()  # a generator's finally (the open file) runs here, on this thread

    reader = threading.Thread(target=read, name="coilshift-read-ahead", daemon=True)
    reader.start()
    try:
        while True:
            item, exc = hand.get()
            if exc is not None:
                raise exc
            if item is _END:
                return
            yield item
    finally:
        gone.set()
        reader.join()
