"""read_ahead: the blocks in order, a reader's error where it happened, an early stop that closes the source."""

import threading

import pytest

from coilshift.logger.errors import InputError
from coilshift.logger.pipeline.prefetch import read_ahead


def _reader_threads():
    return [t for t in threading.enumerate() if t.name == "coilshift-read-ahead"]


def test_items_come_in_order_and_the_thread_ends():
    assert list(read_ahead(iter(range(500)), depth=3)) == list(range(500))
    assert list(read_ahead(iter([]))) == []
    assert _reader_threads() == []


def test_an_error_while_reading_reaches_the_consumer_after_the_items_before_it():
    def blocks():
        yield 1
        yield 2
        raise InputError("rec.wav: truncated")

    got = []
    with pytest.raises(InputError, match="truncated"):
        for item in read_ahead(blocks()):
            got.append(item)
    assert got == [1, 2]
    assert _reader_threads() == []


def test_stopping_early_closes_the_source_on_its_thread():
    closed = threading.Event()
    produced = []

    def blocks():
        try:
            for i in range(10_000):
                produced.append(i)
                yield i
        finally:
            closed.set()  # the open file of a real source is closed here

    gen = read_ahead(blocks(), depth=2)
    with pytest.raises(RuntimeError):
        for item in gen:
            if item == 3:
                raise RuntimeError("the tracker failed")
    gen.close()
    assert closed.wait(2.0)
    assert len(produced) <= 3 + 1 + 2 + 1  # read at most depth (+ one in hand) ahead
    assert _reader_threads() == []
