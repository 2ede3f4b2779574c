"""Name a recording's format from its file-name extension and its first bytes (magic numbers).

The reader is chosen from what the file is, never by trying parsers in turn until one does not
raise. Every bad input raises :class:`~coilshift.logger.errors.InputError` with one line naming
the file.
"""

from __future__ import annotations

from pathlib import Path

from coilshift.logger.errors import InputError
from coilshift.logger.sources.protocol import PathOrFile, display_name, is_path
from coilshift.logger.textfile import require_regular_file

AUDIO_EXTENSIONS = {".wav": "WAV", ".wave": "WAV", ".bwf": "WAV", ".rf64": "WAV", ".w64": "W64",
                    ".flac": "FLAC", ".aif": "AIFF", ".aiff": "AIFF", ".aifc": "AIFF",
                    ".ogg": "OGG", ".oga": "OGG", ".au": "AU", ".snd": "AU", ".caf": "CAF", ".mp3": "MP3"}
TEXT_EXTENSIONS = {".csv", ".txt", ".tsv", ".dat"}
# first bytes of the containers soundfile reads; the WAV family shares a check
_MAGIC = (
    (b"RIFF", "WAV"), (b"RIFX", "WAV"), (b"RF64", "WAV"), (b"BW64", "WAV"), (b"riff", "W64"),
    (b"fLaC", "FLAC"), (b"FORM", "AIFF"), (b"OggS", "OGG"), (b".snd", "AU"), (b"caff", "CAF"),
)
#: bytes read from the start of a file to classify it
_SNIFF_BYTES = 4096


def _read_head(path_or_file: PathOrFile, name: str) -> tuple[bytes, str]:
    """The file's first bytes and its lower-case extension; a file object's position is kept."""
    if is_path(path_or_file):
        path = Path(path_or_file)
        if not path.exists():
            raise InputError(f"{name}: no such file")
        if path.is_dir():
            raise InputError(f"{name}: is a folder, not a recording")
        require_regular_file(path, "recording")  # a pipe or device would block or never end
        try:
            with open(path, "rb") as fh:
                head = fh.read(_SNIFF_BYTES)
        except OSError as exc:
            raise InputError(f"{name}: cannot read ({exc.strerror})") from None
        return head, path.suffix.lower()
    fh = path_or_file
    pos = fh.tell()
    head = fh.read(_SNIFF_BYTES)
    fh.seek(pos)
    return head, Path(name).suffix.lower()


def sniff_format(path_or_file: PathOrFile) -> str:
    """Name the file's format from its extension and first bytes: ``"WAV"``, ``"FLAC"``, ... or ``"CSV"``.

    The extension says what the user expects; the magic bytes must agree. A file with an unknown
    extension is classified by its first bytes alone (audio magic, else plain text -> CSV).

    Raises
    ------
    InputError : missing or empty file, magic bytes contradicting the extension, binary junk.
    """
    name = display_name(path_or_file)
    head, ext = _read_head(path_or_file, name)
    if not head:
        raise InputError(f"{name}: empty file")
    by_magic = next((fmt for magic, fmt in _MAGIC if head.startswith(magic)), None) or _mp3_magic(head)
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


def _mp3_magic(head: bytes) -> str | None:
    """``"MP3"`` for an ID3v2 tag or an MPEG audio frame header (11 sync bits set, layer III:
    ISO/IEC 11172-3), else None."""
    if head.startswith(b"ID3"):
        return "MP3"
    if len(head) >= 2 and head[0] == 0xFF and (head[1] & 0xE0) == 0xE0 and (head[1] & 0x06) == 0x02:
        return "MP3"
    return None


def _looks_like_text(head: bytes) -> bool:
    if b"\x00" in head:
        return False
    # allow a cut multi-byte character at the end of the sample; latin-1 exports are text too
    printable = sum(1 for b in head if b >= 32 or b in (9, 10, 13))
    return printable >= 0.98 * len(head)
