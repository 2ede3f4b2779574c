"""Audio-file source: WAV and the other containers libsndfile reads, streamed block by block.

:mod:`soundfile` is imported inside the functions that need it, so importing this module stays
cheap. A WAV header is checked here (:mod:`coilshift.logger.sources.riff`) before libsndfile
opens the file, because libsndfile silently reads a truncated or lying header.
"""

from __future__ import annotations

import datetime as _dt
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
        if self.container == "WAV":
            head, total = self._head_and_size()
            self._bext_start = check_riff(head, total, self.name).bext_start
        try:
            info = self._open()
            with info as snd:
                self.sample_rate_hz = float(snd.samplerate)
                self.channels = int(snd.channels)
                self.n_frames = int(snd.frames)
                self.subtype = str(snd.subtype)
                self.format = str(snd.format)
        except (sf.SoundFileError, RuntimeError, ValueError, TypeError) as exc:
            raise InputError(f"{self.name}: cannot read as audio ({one_line(exc)})") from None
        self._check_header(channel)
        self.channel = int(channel)

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

    def _open(self):
        import soundfile as sf

        if not is_path(self._file):
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
            raise InputError(f"{self.name}: read failed after {got} samples ({one_line(exc)})") from None
        if got < self.n_frames:
            raise InputError(f"{self.name}: truncated: header promises {self.n_frames} samples, "
                             f"only {got} could be read")

    def describe(self) -> dict:
        return {
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
