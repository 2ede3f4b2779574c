"""RIFF/WAVE header checks done before libsndfile sees the file: truncation, a ``fmt`` chunk that
contradicts itself, and the Broadcast WAV (``bext``) start time.

Only the chunk headers are read (they sit at the start of the file, before ``data``); the samples
are never touched here. Layouts follow the Microsoft RIFF/WAVE specification (Multimedia
Programming Interface and Data Specifications 1.0, 1991) and EBU Tech 3285 (BWF).
"""

from __future__ import annotations

import datetime as _dt
import struct
from dataclasses import dataclass

from coilshift.logger.errors import InputError

#: years a recording's timestamp may carry; outside them it is a placeholder and is not used
PLAUSIBLE_YEARS = (1900, 2999)
#: bytes of a ``bext`` body up to the end of OriginationTime (EBU Tech 3285)
_BEXT_TIME_END = 338


@dataclass(frozen=True)
class RiffInfo:
    """What the chunk walk found.

    Attributes
    ----------
    data_declared : bytes the data chunk header promises (None when unknown)
    data_present : bytes of the data chunk actually in the file (None when unknown)
    bext_start : the BWF origination time, UTC (None without a readable ``bext`` chunk)
    data_offset : where the samples start in the file (None when unknown)
    wave_format : ``(format tag, channels, sample rate, bits per sample, block align)`` of the
        ``fmt`` chunk, the tag of WAVE_FORMAT_EXTENSIBLE replaced by its sub-format's (None when
        unknown)
    """

    data_declared: int | None
    data_present: int | None
    bext_start: _dt.datetime | None
    data_offset: int | None = None
    wave_format: tuple[int, int, int, int, int] | None = None

    @property
    def unfinished(self) -> bool:
        """The writer never filled in the data size (0) though samples follow: a recorder that
        was stopped before it could finish the header."""
        return self.data_declared == 0 and bool(self.data_present) and self.wave_format is not None


def check_riff(head: bytes, total_size: int, name: str) -> RiffInfo:
    """Walk a RIFF/WAVE file's chunk headers: find truncation and a BWF start time.

    Parameters
    ----------
    head : the file's first bytes (enough to hold the chunks before ``data``)
    total_size : the file's size in bytes
    name : the file's name, for messages

    Raises
    ------
    InputError : a truncated header or data chunk, data before ``fmt``, a lying ``fmt`` chunk.
    """
    if head[:4] != b"RIFF":
        return RiffInfo(None, None, None)  # RF64/BW64/RIFX: libsndfile's own checks apply
    if len(head) < 12:
        raise InputError(f"{name}: truncated WAV header ({len(head)} bytes)")
    pos = 12
    bext = None
    have_fmt = False
    wave_format = None
    while pos + 8 <= len(head):
        cid = head[pos:pos + 4]
        (size,) = struct.unpack("<I", head[pos + 4:pos + 8])
        body = pos + 8
        if cid == b"fmt ":
            have_fmt = True
            if body + 16 <= len(head):
                check_wave_format(head[body:body + 16], name)
                wave_format = _format_fields(head[body:body + min(size, 40)])
        elif cid == b"bext" and body + _BEXT_TIME_END <= len(head):
            bext = parse_bext_time(head[body:body + _BEXT_TIME_END])
        elif cid == b"data":
            if not have_fmt:
                raise InputError(f"{name}: damaged WAV header (data before its format chunk)")
            present = total_size - body
            if size not in (0, 0xFFFFFFFF) and size > present:
                raise InputError(f"{name}: truncated WAV: the header promises {size} data bytes, "
                                 f"the file holds {present}")
            return RiffInfo(size, present, bext, body, wave_format)
        pos = body + size + (size & 1)  # chunks are padded to even length
    if pos + 8 > total_size:
        raise InputError(f"{name}: truncated WAV header (no data chunk)")
    return RiffInfo(None, None, bext)  # data chunk beyond the first bytes read: leave to libsndfile


def _format_fields(fmt: bytes) -> tuple[int, int, int, int, int]:
    """(tag, channels, rate, bits, block align) of a ``fmt`` body; an EXTENSIBLE tag is replaced by
    the first two bytes of its SubFormat GUID (Microsoft WAVEFORMATEXTENSIBLE: the plain tag)."""
    tag, channels, rate, _byte_rate, block_align, bits = struct.unpack("<HHIIHH", fmt[:16])
    if tag == 0xFFFE and len(fmt) >= 26:
        (tag,) = struct.unpack("<H", fmt[24:26])
    return tag, channels, rate, bits, block_align


def check_wave_format(fmt: bytes, name: str) -> None:
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


def parse_bext_time(body: bytes) -> _dt.datetime | None:
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
    if not PLAUSIBLE_YEARS[0] <= y <= PLAUSIBLE_YEARS[1]:
        return None  # year 1 or 9999: a placeholder, not a date (and one the clock arithmetic overflows)
    return local.astimezone(_dt.timezone.utc)
