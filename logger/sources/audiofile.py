"""Audio-file source: WAV and the other containers libsndfile reads, streamed block by block.

:mod:`soundfile` is imported inside the functions that need it, so importing this module stays
cheap. A WAV header is checked here (:mod:`coilshift.logger.sources.riff`) before libsndfile
opens the file, because libsndfile silently reads a truncated or lying header.
"""

from __future__ import annotations

import contextlib
import datetime as _dt
import io
import os
from pathlib import Path
from typing import Iterator

import numpy as np

from coilshift.logger.errors import InputError
from coilshift.logger.sources.protocol import (START_FROM_FILE, PathOrFile, display_name, is_path, mtime_start,
                                               one_line)
from coilshift.logger.sources.riff import check_riff
from coilshift.logger.sources.sniff import sniff_format

#: sample encodings accepted (libsndfile subtype names)
SUPPORTED_SUBTYPES = {"PCM_U8", "PCM_S8", "PCM_16", "PCM_24", "PCM_32", "FLOAT", "DOUBLE",
                      "ULAW", "ALAW", "VORBIS", "OPUS", "MPEG_LAYER_III"}
#: bytes read from the start of a WAV file for the chunk walk
_HEADER_BYTES = 1 << 16


class AudioFileSource:
    """A recording read through libsndfile (:mod:`soundfile`): WAV 8/16/24/32-bit PCM and float,
    BWF, RF64, FLAC, AIFF, OGG..., any channel count and sample rate.

    Samples arrive as float64 scaled so that full scale is 1.0 (libsndfile's normalisation:
    integer PCM divided by 2^(bits-1); 8-bit unsigned WAV re-centred first). Offers the
    :class:`~coilshift.logger.sources.protocol.Source` interface.

    Parameters
    ----------
    path_or_file : path, or a binary file object
    channel : 0-based channel to deliver (0 is the first/left channel)
    container : the format :func:`~coilshift.logger.sources.sniff.sniff_format` named, if known
    """

    amp_offset_db = 0.0
    amp_reference = "dB re full-scale sine (0 dBFS = peak 1.0)"

    def __init__(self, path_or_file: PathOrFile, channel: int = 0, container: str | None = None):
        import soundfile as sf

        self.name = display_name(path_or_file)
        self._file = path_or_file
        self.container = container or sniff_format(path_or_file)
        self._bext_start = None
        self._raw = None  # (offset, bytes, libsndfile subtype) of an unfinished WAV's samples
        self.warnings: list[str] = []
        if self.container == "WAV":
            head, total = self._head_and_size()
            riff = check_riff(head, total, self.name)
            self._bext_start = riff.bext_start
            stale = _stale_data_size(self._file, riff)
            if riff.unfinished or stale:
                self._raw = _unfinished_samples(riff, self.name)
        try:
            with self._open() as snd:
                self.sample_rate_hz = float(snd.samplerate)
                self.channels = int(snd.channels)
                self.n_frames = int(snd.frames)
                self.subtype = str(snd.subtype)
                self.format = str(snd.format)
        except (sf.SoundFileError, RuntimeError, ValueError, TypeError) as exc:
            raise InputError(f"{self.name}: cannot read as audio ({one_line(exc)})") from None
        self._check_header(channel)
        self.channel = int(channel)
        if self._raw is not None:
            what = (f"data size {riff.data_declared}, but samples go on after it" if stale else "data size 0")
            self.warnings.append(f"warning: {self.name}: unfinished WAV header ({what}: the recorder did not "
                                 f"finish the file); read the {self.n_frames} samples to the end of the file")

    def _check_header(self, channel: int) -> None:
        """Refuse what libsndfile accepted but the tracker cannot use."""
        if self.subtype not in SUPPORTED_SUBTYPES:
            raise InputError(f"{self.name}: unsupported sample encoding {self.subtype} "
                             f"(supported: {', '.join(sorted(SUPPORTED_SUBTYPES))})")
        if not self.sample_rate_hz > 0:
            raise InputError(f"{self.name}: header gives a sample rate of {self.sample_rate_hz:g} Hz")
        if self.n_frames <= 0:
            raise InputError(f"{self.name}: the recording holds no samples")
        if not 0 <= channel < self.channels:
            raise InputError(f"{self.name}: channel {channel} requested but the file has "
                             f"{self.channels} channel(s), numbered from 0")

    def _head_and_size(self) -> tuple[bytes, int]:
        if is_path(self._file):
            with open(self._file, "rb") as fh:
                head = fh.read(_HEADER_BYTES)
            return head, os.path.getsize(self._file)
        fh = self._file
        pos = fh.tell()
        head = fh.read(_HEADER_BYTES)
        fh.seek(0, os.SEEK_END)
        total = fh.tell() - pos
        fh.seek(pos)
        return head, total

    @contextlib.contextmanager
    def _open(self):
        import soundfile as sf

        if not is_path(self._file):
            self._file.seek(0)
        if self._raw is None:
            with sf.SoundFile(self._file, "r") as snd:
                yield snd
            return
        # the header says no samples: read the bytes after it as they are, to the end of the file
        offset, length, subtype, rate, channels = self._raw
        with contextlib.ExitStack() as stack:
            fh = stack.enter_context(open(self._file, "rb")) if is_path(self._file) else self._file
            window = _Window(fh, offset, length)
            yield stack.enter_context(sf.SoundFile(window, "r", format="RAW", subtype=subtype, samplerate=rate,
                                                   channels=channels, endian="LITTLE"))

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
            raise InputError(f"{self.name}: read failed after {got} samples ({one_line(exc)})") from None
        if got < self.n_frames:
            raise InputError(f"{self.name}: truncated: header promises {self.n_frames} samples, "
                             f"only {got} could be read")

    def describe(self) -> dict:
        extra = {"header_note": self.warnings[0]} if self.warnings else {}
        return {**extra,
            "kind": "audio file",
            "path": self.name if is_path(self._file) else None,
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
        return mtime_start(self._file, self.duration_s if duration_s is None else duration_s)


def _stale_data_size(file, riff) -> bool:
    """Whether more samples follow the data chunk than its header counts: a recorder that rewrites
    the sizes now and then and stopped between two rewrites.

    What follows a finished data chunk is another chunk (an ASCII id and a size that fits the
    file) or nothing; zero bytes (padding, space reserved) are not taken for samples.
    """
    declared, present = riff.data_declared, riff.data_present
    if not declared or declared == 0xFFFFFFFF or riff.wave_format is None or not present:
        return False
    end = riff.data_offset + declared + (declared & 1)
    if present - declared - (declared & 1) < max(8, riff.wave_format[4]):
        return False  # nothing after it, or less than a sample frame and a chunk header
    if is_path(file):
        with open(file, "rb") as fh:
            fh.seek(end)
            after = fh.read(1 << 16)
    else:
        pos = file.tell()
        file.seek(end)
        after = file.read(1 << 16)
        file.seek(pos)
    if not after.strip(b"\0"):
        return False
    size = int.from_bytes(after[4:8], "little")
    chunk = all(32 <= c < 127 for c in after[:4]) and size <= riff.data_offset + present - end - 8
    return not chunk


#: (WAVE format tag, bits per sample) -> the libsndfile subtype that reads such samples raw
_RAW_SUBTYPES = {(1, 8): "PCM_U8", (1, 16): "PCM_16", (1, 24): "PCM_24", (1, 32): "PCM_32",
                 (3, 32): "FLOAT", (3, 64): "DOUBLE"}


def _unfinished_samples(riff, name: str) -> tuple[int, int, str, int, int]:
    """Where the samples of a WAV whose header was never finished lie, and how to read them.

    Raises InputError when they cannot be read without the header (a compressed encoding).
    """
    tag, channels, rate, bits, block_align = riff.wave_format
    subtype = _RAW_SUBTYPES.get((tag, bits))
    if subtype is None or not rate or not block_align:
        raise InputError(f"{name}: unfinished WAV header (the writer did not finish the file) "
                         f"in an encoding that cannot be read without it")
    length = riff.data_present - riff.data_present % block_align  # whole sample frames only
    return riff.data_offset, length, subtype, rate, channels


class _Window(io.RawIOBase):
    """A read-only, seekable view of ``length`` bytes of ``fh`` starting at ``offset``."""

    def __init__(self, fh, offset: int, length: int):
        self._fh, self._offset, self._length, self._pos = fh, offset, length, 0

    def readable(self) -> bool:
        return True

    def seekable(self) -> bool:
        return True

    def seek(self, pos: int, whence: int = os.SEEK_SET) -> int:
        base = {os.SEEK_SET: 0, os.SEEK_CUR: self._pos, os.SEEK_END: self._length}[whence]
        self._pos = max(0, min(self._length, base + pos))
        return self._pos

    def tell(self) -> int:
        return self._pos

    def readinto(self, buf) -> int:
        n = min(len(buf), self._length - self._pos)
        if n <= 0:
            return 0
        self._fh.seek(self._offset + self._pos)
        data = self._fh.read(n)
        buf[: len(data)] = data
        self._pos += len(data)
        return len(data)
