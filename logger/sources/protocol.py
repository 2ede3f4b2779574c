"""The two interfaces a signal source offers, the start-time provenance words, and small helpers
that every source shares.

:class:`Source` is a file-like source read at the reader's pace (audio file, scope CSV export,
synthetic tone): batch tracking pulls ``blocks`` from it. :class:`BlockSource` is a live source
that pushes blocks from its own real-time thread (the soundcard, a paced replay) into the capture
engine. Both are :class:`typing.Protocol` classes: nothing inherits from them, a source only has
to offer the attributes and methods below.
"""

from __future__ import annotations

import datetime as _dt
import os
from typing import IO, TYPE_CHECKING, Callable, Iterator, Protocol, Union

if TYPE_CHECKING:  # only for annotations: importing this module stays free of numpy
    import numpy as np

PathOrFile = Union[str, os.PathLike, IO[bytes]]

#: start-time provenance words written to run.json
START_FROM_FILE = "file timestamp"
START_FROM_MTIME = "file modification time minus duration"
START_FROM_NOW = "time of processing (the file carries no usable timestamp)"


class Source(Protocol):
    """A recording (or a synthetic one) read block by block at the reader's pace.

    Attributes
    ----------
    sample_rate_hz : nominal sample rate, Hz (as written in the file, or derived from a scope's
        time column)
    channels : number of channels (voltage columns for a scope export)
    channel : the 0-based channel that ``blocks`` delivers
    n_frames : samples per channel
    amp_offset_db : add this to the tracker's dBFS amplitudes to get the unit named by
        ``amp_reference``
    amp_reference : what the amplitudes mean once ``amp_offset_db`` is added

    Methods
    -------
    duration_s : ``n_frames / sample_rate_hz`` (a property), s
    blocks(block_frames) : yields mono float64 arrays of the chosen channel, streamed, so memory
        stays bounded however long the recording is; the last block may be shorter
    describe() : a JSON-ready dict for run.json
    start_time(duration_s=None) : ``(datetime UTC, how)``: when the first sample was taken and
        how that was found out (one of the ``START_FROM_*`` words, or a longer form of one)
    """

    sample_rate_hz: float
    channels: int
    channel: int
    n_frames: int
    amp_offset_db: float
    amp_reference: str

    @property
    def duration_s(self) -> float: ...

    def blocks(self, block_frames: int) -> Iterator[np.ndarray]: ...

    def describe(self) -> dict: ...

    def start_time(self, duration_s: float | None = None) -> tuple[_dt.datetime, str]: ...


#: ``deliver(block, adc_time_s, overflow)``: one block of the chosen channel (1-D float array,
#: owned by the receiver), its ADC time in seconds, and whether the input overflowed before it
Deliver = Callable[["np.ndarray", float, bool], None]
#: ``fail(message)``: the stream has stopped for good, for the reason given in one line
Fail = Callable[[str], None]


class BlockSource(Protocol):
    """A live source that pushes blocks from its own real-time thread (soundcard, paced replay).

    Attributes
    ----------
    sample_rate_hz : the rate the stream actually runs at, Hz (valid after ``open``)

    Methods
    -------
    open(deliver, fail) : start streaming and return once it has started; then call ``deliver``
        from the real-time thread for every block and ``fail`` on a fatal stream error
    close() : stop streaming; no ``deliver`` call may follow its return
    describe() : what the stream actually delivered (device, rate, latency, ...), for run.json
    """

    sample_rate_hz: float

    def open(self, deliver: Deliver, fail: Fail) -> None: ...

    def close(self) -> None: ...

    def describe(self) -> dict: ...


def display_name(path_or_file: PathOrFile) -> str:
    """The name to show in messages: the path as given, or a file object's ``name``."""
    if isinstance(path_or_file, (str, os.PathLike)):
        return str(path_or_file)
    return str(getattr(path_or_file, "name", "<file object>"))


def is_path(path_or_file: PathOrFile) -> bool:
    """True for a path (str or os.PathLike), False for an open file object."""
    return isinstance(path_or_file, (str, os.PathLike))


def mtime_start(path_or_file: PathOrFile, duration_s: float) -> tuple[_dt.datetime, str]:
    """Start time of a recording without a timestamp: its modification time minus its duration,
    or now when it is a file object or its mtime cannot be read."""
    if is_path(path_or_file):
        try:
            mtime = os.path.getmtime(path_or_file)
        except OSError:
            mtime = None
        try:
            end = _dt.datetime.fromtimestamp(mtime, tz=_dt.timezone.utc) if mtime is not None else None
            if end is not None and 1900 <= end.year <= 2999:  # else a placeholder time, not a date
                return end - _dt.timedelta(seconds=duration_s), START_FROM_MTIME
        except (OverflowError, OSError, ValueError):
            pass
    return _dt.datetime.now(tz=_dt.timezone.utc), START_FROM_NOW


def one_line(exc: BaseException) -> str:
    """The first line of an exception's text (a library message can span several), or its type."""
    text = str(exc).strip().splitlines()
    return text[0] if text else type(exc).__name__
