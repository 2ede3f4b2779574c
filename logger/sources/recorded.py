"""Recorded signal sources: audio files (WAV and friends) and oscilloscope CSV exports.

Every source has the same small interface, shared with the synthetic
:class:`coilshift.logger.sources.synthetic.ToneSource`, so tests, replays and live capture run one
code path:

* ``sample_rate_hz`` nominal sample rate (as written in the file, or derived from a scope's
  time column), ``channels``, ``channel`` (0-based, the one delivered), ``n_frames``,
  ``duration_s``;
* ``blocks(block_frames)`` yields mono float64 arrays of the chosen channel, streamed, so
  memory stays bounded however long the recording is;
* ``describe()`` returns a JSON-ready dict for run.json;
* ``start_time(duration_s)`` returns ``(datetime UTC, how)``: when the first sample was taken
  and how that was found out;
* ``amp_offset_db`` and ``amp_reference``: add ``amp_offset_db`` to the tracker's dBFS
  amplitudes to get the unit named by ``amp_reference``.

The reader is chosen from the file name's extension and the file's first bytes (magic
numbers), never by trying parsers in turn. Every bad input raises
:class:`~coilshift.logger.errors.InputError` with one line naming the file.

Channels are numbered from 0 (``channel=0`` is the first/left channel; for a scope export,
the first voltage column).
"""

from __future__ import annotations

import contextlib
import datetime as _dt
import math
import os
import re
import struct
from dataclasses import dataclass
from pathlib import Path
from typing import IO, Iterator, Protocol, Union

import numpy as np

from coilshift.logger.errors import InputError

PathOrFile = Union[str, os.PathLike, IO[bytes]]

#: start-time provenance words written to run.json
START_FROM_FILE = "file timestamp"
START_FROM_MTIME = "file modification time minus duration"
START_FROM_NOW = "time of processing (the file carries no usable timestamp)"

AUDIO_EXTENSIONS = {".wav": "WAV", ".wave": "WAV", ".bwf": "WAV", ".rf64": "WAV", ".w64": "W64",
                    ".flac": "FLAC", ".aif": "AIFF", ".aiff": "AIFF", ".aifc": "AIFF",
                    ".ogg": "OGG", ".oga": "OGG", ".au": "AU", ".snd": "AU", ".caf": "CAF"}
TEXT_EXTENSIONS = {".csv", ".txt", ".tsv", ".dat"}
# first bytes of the containers soundfile reads; the WAV family shares a check
_MAGIC = (
    (b"RIFF", "WAV"), (b"RIFX", "WAV"), (b"RF64", "WAV"), (b"BW64", "WAV"), (b"riff", "W64"),
    (b"fLaC", "FLAC"), (b"FORM", "AIFF"), (b"OggS", "OGG"), (b".snd", "AU"), (b"caff", "CAF"),
)


class Source(Protocol):
    """The interface every source offers (see the module docstring)."""

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


def _name(path_or_file) -> str:
    if isinstance(path_or_file, (str, os.PathLike)):
        return str(path_or_file)
    return str(getattr(path_or_file, "name", "<file object>"))


def sniff_format(path_or_file: PathOrFile) -> str:
    """Name the file's format from its extension and first bytes: ``"WAV"``, ``"FLAC"``, ... or ``"CSV"``.

    The extension says what the user expects; the magic bytes must agree. A file with an unknown
    extension is classified by its first bytes alone (audio magic, else plain text -> CSV).

    Raises
    ------
    InputError : missing or empty file, magic bytes contradicting the extension, binary junk.
    """
    name = _name(path_or_file)
    if isinstance(path_or_file, (str, os.PathLike)):
        path = Path(path_or_file)
        if not path.exists():
            raise InputError(f"{name}: no such file")
        if path.is_dir():
            raise InputError(f"{name}: is a folder, not a recording")
        try:
            with open(path, "rb") as fh:
                head = fh.read(4096)
        except OSError as exc:
            raise InputError(f"{name}: cannot read ({exc.strerror})") from None
        ext = path.suffix.lower()
    else:
        fh = path_or_file
        pos = fh.tell()
        head = fh.read(4096)
        fh.seek(pos)
        ext = Path(name).suffix.lower()
    if not head:
        raise InputError(f"{name}: empty file")
    by_magic = next((fmt for magic, fmt in _MAGIC if head.startswith(magic)), None)
    if by_magic == "WAV" and head[8:12] not in (b"WAVE",):
        by_magic = None  # RIFF but not a WAVE form (AVI, WebP, ...)
    if ext in AUDIO_EXTENSIONS:
        want = AUDIO_EXTENSIONS[ext]
        if by_magic is None:
            raise InputError(f"{name}: not a {want} file (its first bytes are not a {want} header)")
        if by_magic != want:
            raise InputError(f"{name}: named {ext} but holds {by_magic} data")
        return by_magic
    if head.startswith((b"\xff\xfe", b"\xfe\xff")):
        raise InputError(f"{name}: UTF-16 text is not supported; export or re-save it as ASCII/UTF-8 CSV")
    if ext in TEXT_EXTENSIONS:
        if by_magic is not None:
            raise InputError(f"{name}: named {ext} but holds {by_magic} data")
        if not _looks_like_text(head):
            raise InputError(f"{name}: named {ext} but is not a text file")
        return "CSV"
    if by_magic is not None:
        return by_magic
    if _looks_like_text(head):
        return "CSV"
    raise InputError(f"{name}: unrecognised file format (neither audio nor a text CSV export)")


def _looks_like_text(head: bytes) -> bool:
    if b"\x00" in head:
        return False
    # allow a cut multi-byte character at the end of the sample; latin-1 exports are text too
    printable = sum(1 for b in head if b >= 32 or b in (9, 10, 13))
    return printable >= 0.98 * len(head)


def open_source(path_or_file: PathOrFile, channel: int = 0) -> "Source":
    """Open a recording for streaming, choosing the reader by extension and magic bytes.

    Parameters
    ----------
    path_or_file : path, or a binary file object (audio formats only; a scope CSV needs a path
        because it is read twice: once to validate the time axis, once to stream)
    channel : 0-based channel (audio) or voltage column (scope CSV) to deliver

    Returns
    -------
    AudioFileSource or ScopeCsvSource
    """
    fmt = sniff_format(path_or_file)
    if fmt == "CSV":
        if not isinstance(path_or_file, (str, os.PathLike)):
            raise InputError(f"{_name(path_or_file)}: a scope CSV export must be given as a path")
        return ScopeCsvSource(path_or_file, channel=channel)
    return AudioFileSource(path_or_file, channel=channel, container=fmt)


# --------------------------------------------------------------------------- audio files


@dataclass(frozen=True)
class _RiffInfo:
    data_declared: int | None  # bytes the data chunk header promises (None when unknown)
    data_present: int | None
    bext_start: _dt.datetime | None


def _check_riff(head: bytes, total_size: int, name: str) -> _RiffInfo:
    """Walk a RIFF/WAVE file's chunk headers: find truncation and a BWF start time.

    Only the chunk headers are read (they sit at the start of the file, before ``data``);
    the samples are never touched here.
    """
    if head[:4] != b"RIFF":
        return _RiffInfo(None, None, None)  # RF64/BW64/RIFX: libsndfile's own checks apply
    if len(head) < 12:
        raise InputError(f"{name}: truncated WAV header ({len(head)} bytes)")
    pos = 12
    bext = None
    have_fmt = False
    while pos + 8 <= len(head):
        cid = head[pos:pos + 4]
        (size,) = struct.unpack("<I", head[pos + 4:pos + 8])
        body = pos + 8
        if cid == b"fmt ":
            have_fmt = True
            if body + 16 <= len(head):
                _check_wave_format(head[body:body + 16], name)
        elif cid == b"bext" and body + 338 <= len(head):
            bext = _parse_bext_time(head[body:body + 338])
        elif cid == b"data":
            if not have_fmt:
                raise InputError(f"{name}: damaged WAV header (data before its format chunk)")
            present = total_size - body
            if size not in (0, 0xFFFFFFFF) and size > present:
                raise InputError(f"{name}: truncated WAV: the header promises {size} data bytes, "
                                 f"the file holds {present}")
            return _RiffInfo(size, present, bext)
        pos = body + size + (size & 1)  # chunks are padded to even length
    if pos + 8 > total_size:
        raise InputError(f"{name}: truncated WAV header (no data chunk)")
    return _RiffInfo(None, None, bext)  # data chunk beyond the first bytes read: leave to libsndfile


def _check_wave_format(fmt: bytes, name: str) -> None:
    """Refuse a WAVE ``fmt`` chunk whose fields contradict each other (a lying header).

    For PCM (tag 1), IEEE float (3) and WAVE_FORMAT_EXTENSIBLE (0xFFFE) the Microsoft WAVE
    layout fixes ``block_align = channels * ceil(bits / 8)`` and
    ``byte_rate = sample_rate * block_align``; a header that breaks them would be read with the
    wrong channel count or sample size, silently.
    """
    tag, channels, rate, byte_rate, block_align, bits = struct.unpack("<HHIIHH", fmt)
    if channels == 0:
        raise InputError(f"{name}: damaged WAV header (zero channels)")
    if tag not in (1, 3, 0xFFFE):
        return  # compressed encodings have their own rules; libsndfile judges them
    want = channels * ((bits + 7) // 8)
    if bits == 0 or block_align != want:
        raise InputError(f"{name}: inconsistent WAV header: {channels} channel(s) of {bits} bits need "
                         f"{want}-byte frames, the header says {block_align}")
    if rate and byte_rate != rate * block_align:
        raise InputError(f"{name}: inconsistent WAV header: byte rate {byte_rate} is not "
                         f"{rate} Hz x {block_align} bytes")


def _parse_bext_time(body: bytes) -> _dt.datetime | None:
    """Origination date and time of an EBU Tech 3285 (Broadcast WAV) ``bext`` chunk.

    Layout (EBU Tech 3285): Description 256 bytes, Originator 32, OriginatorReference 32,
    OriginationDate 10 (``yyyy-mm-dd``; any separator), OriginationTime 8 (``hh:mm:ss``).
    The standard gives no time zone; the recorder's local time is assumed (this machine's zone).
    """
    try:
        date = body[320:330].decode("ascii")
        tod = body[330:338].decode("ascii")
        y, mo, d = int(date[0:4]), int(date[5:7]), int(date[8:10])
        h, mi, s = int(tod[0:2]), int(tod[3:5]), int(tod[6:8])
        local = _dt.datetime(y, mo, d, h, mi, s)
    except (UnicodeDecodeError, ValueError):
        return None
    return local.astimezone(_dt.timezone.utc)


class AudioFileSource:
    """A recording read through libsndfile (:mod:`soundfile`): WAV 8/16/24/32-bit PCM and float,
    BWF, RF64, FLAC, AIFF, OGG..., any channel count and sample rate.

    Samples arrive as float64 scaled so that full scale is 1.0 (libsndfile's normalisation:
    integer PCM divided by 2^(bits-1); 8-bit unsigned WAV re-centred first).
    """

    amp_offset_db = 0.0
    amp_reference = "dB re full-scale sine (0 dBFS = peak 1.0)"

    def __init__(self, path_or_file: PathOrFile, channel: int = 0, container: str | None = None):
        import soundfile as sf

        self.name = _name(path_or_file)
        self._file = path_or_file
        self.container = container or sniff_format(path_or_file)
        self._bext_start = None
        if self.container == "WAV":
            head, total = self._head_and_size()
            self._bext_start = _check_riff(head, total, self.name).bext_start
        try:
            info = self._open()
            with info as snd:
                self.sample_rate_hz = float(snd.samplerate)
                self.channels = int(snd.channels)
                self.n_frames = int(snd.frames)
                self.subtype = str(snd.subtype)
                self.format = str(snd.format)
        except (sf.SoundFileError, RuntimeError, ValueError, TypeError) as exc:
            raise InputError(f"{self.name}: cannot read as audio ({_one_line(exc)})") from None
        if self.subtype not in _SUPPORTED_SUBTYPES:
            raise InputError(f"{self.name}: unsupported sample encoding {self.subtype} "
                             f"(supported: {', '.join(sorted(_SUPPORTED_SUBTYPES))})")
        if not self.sample_rate_hz > 0:
            raise InputError(f"{self.name}: header gives a sample rate of {self.sample_rate_hz:g} Hz")
        if self.n_frames <= 0:
            raise InputError(f"{self.name}: the recording holds no samples")
        if not 0 <= channel < self.channels:
            raise InputError(f"{self.name}: channel {channel} requested but the file has "
                             f"{self.channels} channel(s), numbered from 0")
        self.channel = int(channel)

    def _head_and_size(self) -> tuple[bytes, int]:
        if isinstance(self._file, (str, os.PathLike)):
            with open(self._file, "rb") as fh:
                head = fh.read(1 << 16)
            return head, os.path.getsize(self._file)
        fh = self._file
        pos = fh.tell()
        head = fh.read(1 << 16)
        fh.seek(0, os.SEEK_END)
        total = fh.tell() - pos
        fh.seek(pos)
        return head, total

    def _open(self):
        import soundfile as sf

        if not isinstance(self._file, (str, os.PathLike)):
            self._file.seek(0)
        return sf.SoundFile(self._file, "r")

    @property
    def duration_s(self) -> float:
        return self.n_frames / self.sample_rate_hz

    def blocks(self, block_frames: int) -> Iterator[np.ndarray]:
        """Yield the chosen channel in blocks of ``block_frames`` samples (last one shorter).

        Raises InputError when the file delivers fewer samples than its header promised.
        """
        import soundfile as sf

        block_frames = int(block_frames)
        if block_frames <= 0:
            raise ValueError("block_frames must be positive")
        got = 0
        try:
            with self._open() as snd:
                while True:
                    data = snd.read(block_frames, dtype="float64", always_2d=True)
                    if data.shape[0] == 0:
                        break
                    got += data.shape[0]
                    # copy: a column view would keep the whole multichannel block alive
                    yield np.ascontiguousarray(data[:, self.channel])
        except (sf.SoundFileError, RuntimeError) as exc:
            raise InputError(f"{self.name}: read failed after {got} samples ({_one_line(exc)})") from None
        if got < self.n_frames:
            raise InputError(f"{self.name}: truncated: header promises {self.n_frames} samples, "
                             f"only {got} could be read")

    def describe(self) -> dict:
        return {
            "kind": "audio file",
            "path": self.name if isinstance(self._file, (str, os.PathLike)) else None,
            "name": Path(self.name).name,
            "container": self.container,
            "encoding": self.subtype,
            "channels": self.channels,
            "channel": self.channel,
            "channel_numbering": "0-based",
            "sample_rate_hz": self.sample_rate_hz,
            "frames": self.n_frames,
            "duration_s": self.duration_s,
            "amplitude_reference": self.amp_reference,
        }

    def start_time(self, duration_s: float | None = None) -> tuple[_dt.datetime, str]:
        """When the first sample was taken: the BWF origination stamp, else mtime minus duration."""
        if self._bext_start is not None:
            return self._bext_start, START_FROM_FILE + " (BWF bext origination date/time, local time assumed)"
        return _mtime_start(self._file, self.duration_s if duration_s is None else duration_s)


_SUPPORTED_SUBTYPES = {"PCM_U8", "PCM_S8", "PCM_16", "PCM_24", "PCM_32", "FLOAT", "DOUBLE",
                       "ULAW", "ALAW", "VORBIS", "OPUS", "MPEG_LAYER_III"}


def _mtime_start(path_or_file, duration_s: float) -> tuple[_dt.datetime, str]:
    if isinstance(path_or_file, (str, os.PathLike)):
        try:
            mtime = os.path.getmtime(path_or_file)
        except OSError:
            mtime = None
        if mtime is not None:
            end = _dt.datetime.fromtimestamp(mtime, tz=_dt.timezone.utc)
            return end - _dt.timedelta(seconds=duration_s), START_FROM_MTIME
    return _dt.datetime.now(tz=_dt.timezone.utc), START_FROM_NOW


def _one_line(exc: BaseException) -> str:
    text = str(exc).strip().splitlines()
    return text[0] if text else type(exc).__name__


# --------------------------------------------------------------------------- scope CSV

_TIME_NAME = re.compile(r"(^|[^a-z])(time|t|x-axis|x|sec|secs|second|seconds|s)([^a-z]|$)", re.I)
_INDEX_NAME = re.compile(r"^(index|sample|samples|sequence|no\.?|n|#)$", re.I)
_UNIT_IN_NAME = re.compile(r"[\(\[]\s*([a-zµμ]+)\s*[\)\]]", re.I)
_TIME_UNITS = {"s": 1.0, "sec": 1.0, "second": 1.0, "seconds": 1.0, "ms": 1e-3, "us": 1e-6, "µs": 1e-6,
               "μs": 1e-6, "ns": 1e-9}
_VOLT_UNITS = {"v": 1.0, "volt": 1.0, "volts": 1.0, "mv": 1e-3, "uv": 1e-6, "µv": 1e-6, "μv": 1e-6, "kv": 1e3}
_HEAD_BYTES = 1 << 18
_SETTLE_ROWS = 16  # consecutive numeric rows that mark the start of the data
_CSV_CHUNK_ROWS = 1 << 17


@dataclass(frozen=True)
class CsvLayout:
    """Where the samples are in a scope export, found by reading its first lines.

    Attributes
    ----------
    data_line : 1-based line number of the first data row
    sep : field separator (``","``, ``";"``, ``"\\t"`` or ``None`` for runs of whitespace)
    decimal : decimal mark (``"."`` or ``","``)
    n_fields : fields per data row (trailing empty fields included)
    time_col : 0-based field index of time
    volt_cols : 0-based field indices of the voltage columns, in file order
    names : header names of all fields ('' when the file has no header)
    time_scale : multiply the time column by this to get seconds (from a unit like ``(ms)``)
    volt_scales : same for each voltage column, to volts
    """

    data_line: int
    sep: str | None
    decimal: str
    n_fields: int
    time_col: int
    volt_cols: tuple[int, ...]
    names: tuple[str, ...]
    time_scale: float
    volt_scales: tuple[float, ...]


def _split(line: str, sep: str | None) -> list[str]:
    fields = line.split() if sep is None else [c.strip() for c in line.split(sep)]
    return [c.strip().strip('"').strip("'").strip() for c in fields]


def _is_number(cell: str, decimal: str) -> bool:
    if not cell:
        return False
    if decimal == ",":
        cell = cell.replace(",", ".")
    try:
        float(cell)
    except ValueError:
        return False
    return True


def _choose_separator(lines: list[str]) -> tuple[str | None, str]:
    """Pick the separator and decimal mark that make the most of the sample's last lines numeric."""
    tail = [ln for ln in lines if ln.strip()][-40:]
    best: tuple[int, int, str | None, str] | None = None
    for rank, (sep, dec) in enumerate(((",", "."), ("\t", "."), (";", "."), (None, "."),
                                       (";", ","), ("\t", ","), (None, ","))):
        score = 0
        for ln in tail:
            cells = [c for c in _split(ln, sep) if c]
            if len(cells) >= 2 and all(_is_number(c, dec) for c in cells):
                score += 1
        if best is None or score > best[0]:
            best = (score, -rank, sep, dec)
    assert best is not None
    return best[2], best[3]


def _unit_scale(name: str, table: dict[str, float]) -> float | None:
    m = _UNIT_IN_NAME.search(name)
    if m:
        return table.get(m.group(1).lower())
    return None


def _column_unit(header: str, table: dict[str, float], what: str, known: str, name: str) -> float:
    """Scale factor of a column's bracketed unit; no unit means s or V; an unknown unit is refused."""
    m = _UNIT_IN_NAME.search(header)
    if not m:
        return 1.0
    scale = table.get(m.group(1).lower())
    if scale is None:
        raise InputError(f"{name}: unknown {what} unit {m.group(1)!r} in column {header!r} (known: {known})")
    return scale


def detect_csv_layout(lines: list[str], name: str) -> CsvLayout:
    """Find the data start, separator, and the time and voltage columns from a file's first lines.

    The rules, applied in order:

    1. the separator and decimal mark are the ones under which the last lines of the sample
       split into all-numeric cells;
    2. the data columns are the fields that are numeric in all of those last lines;
    3. the data start is the first line from which :data:`_SETTLE_ROWS` consecutive lines are
       numeric in all the data columns (scope preambles of ``key,value`` lines come before it);
    4. the nearest non-blank line above the data, if it has text in the data columns, names
       them: a name like ``Time``, ``t``, ``x-axis`` or ``second`` (optionally with a unit
       such as ``(ms)``) marks the time column; ``Index``/``Sequence``/``Sample`` columns are
       sample counters, not time; the remaining data columns carry voltages;
    5. without a header, the time column is the first whose values strictly increase in the
       sample and the others are voltages.

    Raises InputError naming the file when no time or no voltage column can be found.
    """
    if not any(ln.strip() for ln in lines):
        raise InputError(f"{name}: no data lines")
    sep, dec = _choose_separator(lines)
    split = [_split(ln, sep) if ln.strip() else None for ln in lines]
    # the data block is what follows the last line without a single number (header/preamble);
    # a stray bad cell inside the data must not hide its column, hence the 75 % vote
    rows = [s for s in split if s is not None]
    last_text = max((k for k, s in enumerate(rows) if not any(_is_number(c, dec) for c in s)), default=-1)
    tail = rows[last_text + 1:][-40:]
    if not tail:
        raise InputError(f"{name}: no numeric data rows found (not a scope CSV export?)")
    width = max(len(s) for s in tail)
    data_cols = [j for j in range(width)
                 if sum(j < len(s) and _is_number(s[j], dec) for s in tail) >= 0.75 * len(tail)]
    if len(data_cols) == 0:
        raise InputError(f"{name}: no numeric data rows found (not a scope CSV export?)")
    if len(data_cols) == 1:
        raise InputError(f"{name}: only one numeric column; a scope export needs a time column "
                         f"and a voltage column")

    def numeric_row(s):
        return s is not None and all(j < len(s) and _is_number(s[j], dec) for j in data_cols)

    start = None
    for i, s in enumerate(split):
        if s is None:
            continue
        window = [t for t in split[i:] if t is not None][:_SETTLE_ROWS]
        if numeric_row(s) and sum(numeric_row(t) for t in window) >= 0.75 * len(window):
            start = i
            break
    if start is None:  # pragma: no cover - the tail itself satisfies the rule
        raise InputError(f"{name}: cannot find where the data starts")
    header: list[str] = []
    for s in reversed(split[:start]):
        if s is None:
            continue
        if any(j < len(s) and s[j] and not _is_number(s[j], dec) for j in data_cols):
            header = s
        break
    names = tuple((header[j] if j < len(header) else "") for j in range(width))
    time_col = None
    if header:
        for j in data_cols:
            label = _UNIT_IN_NAME.sub(" ", names[j]).strip()
            if _INDEX_NAME.match(label):
                continue
            if _TIME_NAME.search(label) or _unit_scale(names[j], _TIME_UNITS) is not None:
                time_col = j
                break
        if time_col is None:
            shown = ", ".join(names[j] or "?" for j in data_cols)
            raise InputError(f"{name}: no time column (header names the data columns: {shown})")
        volt_cols = [j for j in data_cols if j != time_col and not _INDEX_NAME.match(names[j].strip())]
    else:
        sample = [s for s in split[start:] if s is not None]
        for j in data_cols:
            # a stray bad cell is skipped here; the full scan then names its line
            vals = np.array([float(s[j].replace(",", ".") if dec == "," else s[j]) for s in sample
                             if j < len(s) and _is_number(s[j], dec)])
            if len(vals) >= 2 and np.all(np.diff(vals) > 0):
                time_col = j
                break
        if time_col is None:
            raise InputError(f"{name}: no time column (no header, and no column increases steadily)")
        volt_cols = [j for j in data_cols if j != time_col]
    if not volt_cols:
        raise InputError(f"{name}: no voltage column (only a time column was found)")
    time_scale = _column_unit(names[time_col], _TIME_UNITS, "time", "s, ms, us, ns", name)
    volt_scales = tuple(_column_unit(names[j], _VOLT_UNITS, "voltage", "V, mV, uV, kV", name)
                        for j in volt_cols)
    return CsvLayout(data_line=start + 1, sep=sep, decimal=dec, n_fields=width, time_col=time_col,
                     volt_cols=tuple(volt_cols), names=names, time_scale=time_scale,
                     volt_scales=volt_scales)


def _full_scale_v(peak_v: float) -> float:
    """The 1-2-5 step at or above ``peak_v`` with 1 % headroom, so no sample sits at full scale."""
    if not peak_v > 0:
        return 1.0
    target = peak_v * 1.01
    decade = 10.0 ** math.floor(math.log10(target))
    for step in (1.0, 2.0, 5.0, 10.0):
        if step * decade >= target:
            return step * decade
    return 10.0 * decade  # pragma: no cover


class ScopeCsvSource:
    """An oscilloscope waveform exported as CSV/text: a time column and voltage column(s).

    Opening reads the file once, in chunks, to validate it: every cell numeric and finite, time
    strictly increasing with a uniform step (within 25 % of the first step; a missing or repeated
    sample is an error naming the line). The sample rate is (rows - 1) / (last time - first time).

    Voltages are scaled to [-1, 1] by a full scale ``full_scale_v`` chosen as the 1-2-5 step just
    above the largest |voltage| in the file. The tracker's dBFS amplitudes are then re-referenced
    to 1 V peak by adding ``amp_offset_db = 20 log10(full_scale_v)``: amp_dbfs in the log of a
    scope run is dB re 1 V peak (dBV peak), and run.json says so. Clipping flags mean nothing here
    (the scope's own range clipping cannot be seen after export).
    """

    amp_reference = "dB re 1 V peak (scope voltages; the amp_dbfs column keeps its name)"

    def __init__(self, path: str | os.PathLike, channel: int = 0):
        self.path = Path(path)
        self.name = str(path)
        try:
            with open(self.path, "rb") as fh:
                head = fh.read(_HEAD_BYTES)
                at_eof = not fh.read(1)
        except OSError as exc:
            raise InputError(f"{self.name}: cannot read ({exc.strerror})") from None
        text = head.decode("latin-1")  # latin-1 never fails; data rows are plain ASCII anyway
        lines = text.splitlines()
        if not at_eof and lines:
            lines = lines[:-1]  # the last line of the sample may be cut
        self.layout = detect_csv_layout(lines, self.name)
        self.channels = len(self.layout.volt_cols)
        if not 0 <= channel < self.channels:
            raise InputError(f"{self.name}: channel {channel} requested but the export has "
                             f"{self.channels} voltage column(s), numbered from 0")
        self.channel = int(channel)
        self._scan()
        self.full_scale_v = _full_scale_v(self._peak_v)
        self.amp_offset_db = 20.0 * math.log10(self.full_scale_v)

    # pandas streams the numbers; the layout decides what it is told to read
    def _chunks(self):
        import pandas as pd

        lay = self.layout
        vcol = lay.volt_cols[self.channel]
        kw = dict(header=None, skiprows=lay.data_line - 1, usecols=[lay.time_col, vcol],
                  names=list(range(lay.n_fields)), chunksize=_CSV_CHUNK_ROWS, decimal=lay.decimal,
                  encoding="latin-1", skip_blank_lines=False, na_filter=False, engine="c")
        if lay.sep is None:
            kw["sep"] = r"\s+"
        else:
            kw["sep"] = lay.sep
        try:
            with pd.read_csv(self.path, **kw) as reader:
                row0 = 0
                for chunk in reader:
                    tcells, vcells = chunk[lay.time_col].to_numpy(), chunk[vcol].to_numpy()
                    # blank lines are kept by the parser so that line numbers stay exact; drop them here
                    # clean chunks arrive as numbers from the C parser; any odd cell makes a column text
                    if tcells.dtype.kind not in "fiu" or vcells.dtype.kind not in "fiu":
                        keep = np.flatnonzero((tcells.astype(str) != "") | (vcells.astype(str) != ""))
                        tcells, vcells = tcells[keep].astype(str), vcells[keep].astype(str)
                    else:
                        keep = np.arange(len(tcells))
                    yield lay.data_line + row0 + keep, tcells, vcells
                    row0 += len(chunk)
        except (pd.errors.ParserError, ValueError) as exc:
            raise InputError(f"{self.name}: malformed data ({_one_line(exc)})") from None

    def _numbers(self, lines: np.ndarray, cells: np.ndarray, what: str) -> np.ndarray:
        import pandas as pd

        if cells.dtype.kind in "fiu":
            vals = cells.astype(float)
        else:
            if self.layout.decimal == ",":
                cells = np.char.replace(cells.astype(str), ",", ".")
            vals = pd.to_numeric(pd.Series(cells), errors="coerce").to_numpy(float)
        bad = ~np.isfinite(vals)
        if bad.any():
            k = int(np.argmax(bad))
            cell = str(cells[k]).strip()
            line = int(lines[k])
            if not cell:
                why = "empty cell"
            elif np.isnan(vals[k]) and cell.lower().lstrip("+-") not in ("nan",):
                why = f"non-numeric cell {cell[:20]!r}"
            else:
                why = f"non-finite value {cell[:20]!r}"
            raise InputError(f"{self.name}: line {line}: {why} in the {what} column")
        return vals

    def _scan(self) -> None:
        with contextlib.closing(self._chunks()) as chunks:
            self._scan_chunks(chunks)

    def _scan_chunks(self, chunks) -> None:
        lay = self.layout
        n = 0
        t_first = t_last = math.nan
        dt0 = math.nan
        peak = 0.0
        for lines, tcells, vcells in chunks:
            t = self._numbers(lines, tcells, "time") * lay.time_scale
            v = self._numbers(lines, vcells, "voltage") * lay.volt_scales[self.channel]
            if len(t) == 0:
                continue
            if n == 0:
                t_first = t[0]
                d_start = np.diff(t[: min(len(t), 1025)])
                if len(d_start):
                    dt0 = float(np.median(d_start))
            steps = np.diff(np.concatenate(([t_last], t)) if n else t)
            offset = 0 if n else 1  # row index of steps[0]'s later sample within this chunk
            if len(steps):
                back = steps <= 0
                if back.any():
                    k = int(np.argmax(back))
                    line = int(lines[k + offset])
                    prev = t_last if (n and k == 0) else t[k + offset - 1]
                    word = "repeats" if steps[k] == 0 else "goes backwards"
                    raise InputError(f"{self.name}: line {line}: time {word} "
                                     f"({t[k + offset]:.9g} s after {prev:.9g} s)")
                if np.isfinite(dt0):
                    off = np.abs(steps - dt0) > 0.25 * dt0
                    if off.any():
                        k = int(np.argmax(off))
                        line = int(lines[k + offset])
                        raise InputError(f"{self.name}: line {line}: non-uniform time step "
                                         f"{steps[k]:.6g} s (the file starts with {dt0:.6g} s steps)")
            t_last = float(t[-1])
            peak = max(peak, float(np.max(np.abs(v))))
            n += len(t)
        if n == 0:
            raise InputError(f"{self.name}: no data rows")
        if n < 2:
            raise InputError(f"{self.name}: only one data row; a sample rate needs two")
        self.n_frames = n
        self.t_first_s = float(t_first)
        self.sample_rate_hz = float((n - 1) / (t_last - t_first))
        self._peak_v = peak

    @property
    def duration_s(self) -> float:
        return self.n_frames / self.sample_rate_hz

    def blocks(self, block_frames: int) -> Iterator[np.ndarray]:
        """Yield the chosen voltage column divided by ``full_scale_v``, ``block_frames`` at a time."""
        block_frames = int(block_frames)
        if block_frames <= 0:
            raise ValueError("block_frames must be positive")
        scale = self.layout.volt_scales[self.channel] / self.full_scale_v
        pending: list[np.ndarray] = []
        have = 0
        with contextlib.closing(self._chunks()) as chunks:
            for lines, _t, vcells in chunks:
                v = self._numbers(lines, vcells, "voltage") * scale
                pending.append(v)
                have += len(v)
                if have >= block_frames:
                    buf = np.concatenate(pending)
                    cut = (have // block_frames) * block_frames
                    for k in range(0, cut, block_frames):
                        yield buf[k:k + block_frames]
                    pending, have = [buf[cut:]], have - cut
        if have:
            yield np.concatenate(pending)

    def describe(self) -> dict:
        lay = self.layout
        return {
            "kind": "oscilloscope CSV export",
            "path": self.name,
            "name": self.path.name,
            "data_starts_at_line": lay.data_line,
            "separator": {None: "whitespace", "\t": "tab"}.get(lay.sep, lay.sep),
            "decimal_mark": lay.decimal,
            "time_column": {"index": lay.time_col, "name": lay.names[lay.time_col],
                            "to_seconds": lay.time_scale},
            "voltage_columns": [lay.names[j] or f"field {j}" for j in lay.volt_cols],
            "channel": self.channel,
            "channel_numbering": "0-based, among the voltage columns",
            "channels": self.channels,
            "sample_rate_hz": self.sample_rate_hz,
            "sample_rate_from": "time column: (rows - 1) / (last time - first time)",
            "frames": self.n_frames,
            "duration_s": self.duration_s,
            "first_sample_time_in_file_s": self.t_first_s,
            "full_scale_v": self.full_scale_v,
            "normalisation": "voltage / full_scale_v (1-2-5 step above the largest |voltage|)",
            "amplitude_reference": self.amp_reference,
        }

    def start_time(self, duration_s: float | None = None) -> tuple[_dt.datetime, str]:
        """Scope exports carry no reliable absolute time: mtime minus duration."""
        return _mtime_start(self.path, self.duration_s if duration_s is None else duration_s)
