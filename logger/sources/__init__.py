"""Signal sources, one module each: audio files, oscilloscope CSV exports, a synthetic oscillator and
the soundcard, behind two small interfaces. May import :mod:`coilshift.logger.errors`,
:mod:`coilshift.logger.textfile` (the regular-file check) and :mod:`coilshift.logger.waiting`,
nothing else from coilshift.

Two interfaces (:mod:`coilshift.logger.sources.protocol` documents them in full):

* :class:`~coilshift.logger.sources.protocol.Source`, a recording read at the reader's pace:
  ``sample_rate_hz``, ``channels``, ``channel``, ``n_frames``, ``duration_s``,
  ``blocks(block_frames)``, ``describe()``, ``start_time(duration_s)``, ``amp_offset_db`` and
  ``amp_reference``. :func:`open_source` opens an audio file
  (:class:`~coilshift.logger.sources.audiofile.AudioFileSource`) or a scope export
  (:class:`~coilshift.logger.sources.scopecsv.ScopeCsvSource`);
  :class:`~coilshift.logger.sources.synthetic.ToneSource` makes one up. Tests, replays and batch
  tracking run one code path over all of them.
* :class:`~coilshift.logger.sources.protocol.BlockSource`, a live stream that pushes blocks from
  its own real-time thread: ``open(deliver, fail)``, ``close()``, ``sample_rate_hz``,
  ``describe()``. :class:`~coilshift.logger.sources.soundcard.SoundcardSource` is one, and the
  only code that imports :mod:`sounddevice`.

Importing this package (or one source module) stays cheap: :mod:`soundfile`, :mod:`pandas` and
:mod:`sounddevice` are imported inside the functions that use them.

Channels are numbered from 0 (``channel=0`` is the first/left channel; for a scope export, the
first voltage column).
"""

from __future__ import annotations

from coilshift.logger.errors import InputError
from coilshift.logger.sources.protocol import (START_FROM_FILE, START_FROM_MTIME, START_FROM_NOW, BlockSource,
                                               PathOrFile, Source, display_name, is_path)

__all__ = ["Source", "BlockSource", "open_source", "START_FROM_FILE", "START_FROM_MTIME", "START_FROM_NOW"]


def open_source(path_or_file: PathOrFile, channel: int = 0) -> Source:
    """Open a recording for streaming, choosing the reader by extension and magic bytes.

    Parameters
    ----------
    path_or_file : path, or a binary file object (audio formats only; a scope CSV needs a path
        because it is read twice: once to validate the time axis, once to stream)
    channel : 0-based channel (audio) or voltage column (scope CSV) to deliver

    Returns
    -------
    AudioFileSource or ScopeCsvSource

    Raises
    ------
    InputError : one line naming the file, for any input that cannot be read as a recording.
    """
    # imported here, so that importing the package (say, for the soundcard) loads no file reader
    from coilshift.logger.sources.audiofile import AudioFileSource
    from coilshift.logger.sources.scopecsv import ScopeCsvSource
    from coilshift.logger.sources.sniff import sniff_format

    fmt = sniff_format(path_or_file)
    if fmt == "CSV":
        if not is_path(path_or_file):
            raise InputError(f"{display_name(path_or_file)}: a scope CSV export must be given as a path")
        return ScopeCsvSource(path_or_file, channel=channel)
    return AudioFileSource(path_or_file, channel=channel, container=fmt)
