"""The parts every HTML report shares: the header that says where it came from (date, coilshift
version, the command line, the inputs with their SHA-256), embedded images (a report is one file
that can be mailed or filed), tables without empty columns, a "how to read this report" box and
the page style (nothing wider than the page at 1280 px: long cells wrap, wide tables scroll).
"""

from __future__ import annotations

import base64
import datetime as _dt
import hashlib
import html
import os
import shlex
import sys
from dataclasses import dataclass, field
from pathlib import Path

#: the command line of this process as the user typed it (set by the command line's main;
#: None: taken from sys.argv)
COMMAND_LINE: str | None = None

#: files of a run folder that an analysis reads (their checksums go in the header)
RUN_FILES = ("log.csv", "markers.csv", "run.json")

STYLE = ("body{font-family:sans-serif;max-width:1100px;margin:1em auto;padding:0 1em;color:#222;line-height:1.35}"
         "table{border-collapse:collapse;margin:0.5em 0;font-size:0.9em;display:block;max-width:100%;"
         "overflow-x:auto}"
         "td,th{border:1px solid #bbb;padding:3px 6px;text-align:left;vertical-align:top;overflow-wrap:break-word}"
         "th{background:#eee}td.num{text-align:right;white-space:nowrap}"
         "img{max-width:100%;height:auto;display:block;margin:0.5em 0}"
         "code{overflow-wrap:anywhere}"
         ".caution{background:#fff6e0;border-left:4px solid #e0a000;padding:0.5em 1em}"
         ".howto{background:#eef4fb;border-left:4px solid #3070b0;padding:0.5em 1em}"
         ".prov{font-size:0.85em;color:#444}.prov td{border-color:#ddd}")


@dataclass(frozen=True)
class Provenance:
    """Where a report came from: when, which coilshift, which command line, which inputs."""

    created_utc: str
    version: str
    command: str
    inputs: tuple[tuple[str, str], ...] = field(default=())  # (path, sha256) of each input file


def sha256_of(path: str | os.PathLike) -> str:
    """SHA-256 of a file, hex ('' when it cannot be read)."""
    h = hashlib.sha256()
    try:
        with open(path, "rb") as f:
            for block in iter(lambda: f.read(1 << 20), b""):
                h.update(block)
    except OSError:
        return ""
    return h.hexdigest()


def input_files(paths) -> list[Path]:
    """The files behind the inputs: a run folder's log, markers and run.json; a file itself."""
    out: list[Path] = []
    for p in paths:
        p = Path(p)
        if p.is_dir():
            out += [p / n for n in RUN_FILES if (p / n).is_file()]
        elif p.is_file():
            out.append(p)
    return out


def provenance(inputs=(), command: str | None = None) -> Provenance:
    """The provenance of a report made now from ``inputs`` (paths; run folders are expanded).

    ``command`` defaults to this process' command line (``coilshift analyze r1 -o out``). The
    date is now, or ``SOURCE_DATE_EPOCH`` when set (the reproducible-builds convention: two
    reports of the same inputs are then the same bytes)."""
    from coilshift.logger.runfolder.writer import software_version

    if command is None and COMMAND_LINE is not None:
        command = COMMAND_LINE
    if command is None:
        argv = list(sys.argv) or ["coilshift"]
        command = shlex.join(["coilshift" if Path(argv[0]).name in ("coilshift", "__main__.py", "main.py")
                              else argv[0], *argv[1:]])
    epoch = os.environ.get("SOURCE_DATE_EPOCH", "")
    stamp = (_dt.datetime.fromtimestamp(int(epoch), _dt.timezone.utc) if epoch.isdigit()
             else _dt.datetime.now(_dt.timezone.utc))
    when = stamp.strftime("%Y-%m-%d %H:%M:%S UTC")
    files = tuple((str(f), sha256_of(f)) for f in input_files(inputs))
    return Provenance(when, software_version(), command, files)


def provenance_html(p: Provenance) -> str:
    rows = [("made", p.created_utc), ("coilshift", p.version), ("command", p.command)]
    body = "".join(f"<tr><th>{html.escape(k)}</th><td><code>{html.escape(v)}</code></td></tr>" for k, v in rows)
    if p.inputs:
        body += "".join(f"<tr><th>input</th><td><code>{html.escape(path)}</code><br>sha256 "
                        f"<code>{html.escape(digest or 'unreadable')}</code></td></tr>" for path, digest in p.inputs)
    return f"<table class='prov'>{body}</table>"


def provenance_dict(p: Provenance) -> dict:
    return {"created_utc": p.created_utc, "coilshift_version": p.version, "command": p.command,
            "inputs": [{"path": a, "sha256": b} for a, b in p.inputs]}


def img(data: bytes, alt: str) -> str:
    """An image embedded as a data URI (the report stays one file)."""
    b64 = base64.b64encode(data).decode("ascii")
    return f'<p><img alt="{html.escape(alt)}" src="data:image/png;base64,{b64}"></p>'


def _empty(cell) -> bool:
    return str(cell).strip() in ("", "-", "nan", "nan±nan", "nan+-nan", "None")


def table(header, rows, numeric=()) -> str:
    """An HTML table; a column whose every cell is empty ('', '-', NaN) is left out, and so is a
    table with no rows. ``numeric``: header names shown right-aligned."""
    rows = [list(r) for r in rows]
    if not rows:
        return ""
    keep = [i for i in range(len(header)) if not all(_empty(r[i]) for r in rows)]
    th = "".join(f"<th>{html.escape(str(header[i]))}</th>" for i in keep)
    cls = {i: " class='num'" for i in keep if header[i] in numeric}
    body = "".join("<tr>" + "".join(f"<td{cls.get(i, '')}>{html.escape(str(r[i]))}</td>" for i in keep) + "</tr>"
                   for r in rows)
    return f"<table><thead><tr>{th}</tr></thead><tbody>{body}</tbody></table>"


def howto(items) -> str:
    """The "how to read this report" box: a short list of what each part says."""
    return ("<div class='howto'><b>How to read this report</b><ul>"
            + "".join(f"<li>{i}</li>" for i in items) + "</ul></div>")


def page(title: str, prov: Provenance, body: list[str]) -> str:
    """A whole report page: title, provenance header, then ``body`` (HTML fragments)."""
    return "\n".join([f"<!DOCTYPE html><html><head><meta charset='utf-8'><title>{html.escape(title)}</title>",
                      "<meta name='viewport' content='width=device-width, initial-scale=1'>",
                      f"<style>{STYLE}</style></head><body>", f"<h1>{html.escape(title)}</h1>",
                      provenance_html(prov), *body, "</body></html>"])
