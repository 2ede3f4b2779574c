"""Live readout of a running capture: a terminal panel with keys, a plain line, an optional plot.

:class:`TerminalPanel` redraws a small panel a few times a second with plain ANSI codes
(frequency, or NO TONE while the latest frame has none, shift from the baseline, a level meter
with a clipping warning, SNR, elapsed time, faults, frames without a tone so far) and reads
single keys from the terminal: re-zero, add a marker (typed label, timed when the key was
pressed), start a baseline stretch, quit.
:class:`PlainLines` prints one line a second when stdout is not a terminal (a log file, a pipe).
:class:`LivePlot` shows frequency and shift in a matplotlib window when a display is available.

All of them only read :meth:`CaptureEngine.snapshot` and call its ``add_marker`` / ``rezero``;
none of them touches the audio path.
"""

from __future__ import annotations

import math
import os
import select
import sys
import time
from collections import deque

from coilshift.logger.errors import InputError
from coilshift.logger.runfolder import flags as _flags

KEY_REZERO = "z"
KEY_MARKER = "m"
KEY_QUIT = "q"
KEY_BASELINE = "b"
KEYS_HELP = (f"keys: [{KEY_REZERO}] re-zero baseline   [{KEY_MARKER}] marker   [{KEY_BASELINE}] baseline "
             f"stretch   [{KEY_QUIT}] quit")
MARKER_HELP = ("marker label: 'baseline', 'end', or target and distance in mm, e.g. 'coin 50' "
               "(the marker is timed when you pressed m)")
#: shown while target stretches are marked but no baseline stretch is
BASELINE_HINT = (f"to analyse this run, mark target-free stretches too: press {KEY_BASELINE} before and after "
                 "each target")

#: the level meter spans this many dB below full scale
METER_RANGE_DB = 60.0
METER_WIDTH = 30


def fmt_elapsed(t_s: float) -> str:
    t = max(0.0, t_s)
    h, rem = divmod(t, 3600)
    m, s = divmod(rem, 60)
    return f"{int(h):02d}:{int(m):02d}:{s:04.1f}"


def _num(x: float, fmt: str, unit: str, blank: str = "---") -> str:
    return f"{x:{fmt}} {unit}" if x is not None and math.isfinite(x) else f"{blank} {unit}"


def level_meter(peak_dbfs: float, width: int = METER_WIDTH, range_db: float = METER_RANGE_DB) -> str:
    """``[#####.....]`` bar for a peak level in dBFS (empty at -range_db, full at 0 dBFS)."""
    if not math.isfinite(peak_dbfs):
        filled = 0
    else:
        filled = int(round(width * min(1.0, max(0.0, (peak_dbfs + range_db) / range_db))))
    return "[" + "#" * filled + "." * (width - filled) + "]"


#: what the readout shows instead of a frequency while the latest frame has no tone
NO_TONE_TEXT = "NO TONE"


def no_tone(snap) -> bool:
    """True when the latest frame found no tone (its frequency is empty)."""
    return bool(snap.frame_flags & _flags.NO_TONE)


def unusable_words(snap) -> str:
    """The latest frame's flags that keep it out of analysis, other than no_tone ('' for none)."""
    return _flags.to_text(snap.frame_flags & _flags.UNUSABLE & ~_flags.NO_TONE)


def status_line(snap) -> str:
    """One line summing up a snapshot (for pipes, log files and the end of a run)."""
    parts = [f"t={fmt_elapsed(snap.elapsed_s)}",
             "f=" + (NO_TONE_TEXT if no_tone(snap) else _num(snap.freq_hz, ".3f", "Hz")),
             "shift=" + (_num(snap.shift_hz, "+.3f", "Hz") if not snap.baseline_pending or
                         math.isfinite(snap.shift_hz) else "(baseline pending)"),
             "level=" + _num(snap.peak_dbfs, ".1f", "dBFS", "-inf"),
             "snr=" + _num(snap.snr_db, ".1f", "dB"),
             f"faults={snap.faults}",
             f"no_tone_frames={snap.no_tone_frames}"]
    if unusable_words(snap):
        parts.append(f"unusable={unusable_words(snap)}")
    if snap.clipping:
        parts.append("CLIPPING")
    return "  ".join(parts)


def panel_lines(snap, title: str, prompt: str | None, note: str, hint: str = "") -> list[str]:
    """The text of the terminal panel (without ANSI codes), one string per line."""
    if snap.baseline_pending and not math.isfinite(snap.baseline_hz):
        base = "measuring baseline..."
    elif snap.baseline_pending:
        base = f"re-zeroing... (was {snap.baseline_hz:.3f} Hz)"
    else:
        base = _num(snap.baseline_hz, ".3f", "Hz")
    clip = "   CLIPPING: lower the input level" if snap.clipping else ""
    if no_tone(snap):
        freq = f"{NO_TONE_TEXT:>15}   check the wiring and the input level"
    else:
        freq = _num(snap.freq_hz, '12.3f', 'Hz')
        if unusable_words(snap):
            freq += f"   not used by analysis: {unusable_words(snap)}"
    lines = [
        title,
        "",
        f"  elapsed    {fmt_elapsed(snap.elapsed_s)}",
        f"  frequency  {freq}",
        f"  shift      {_num(snap.shift_hz, '+12.3f', 'Hz')}   baseline {base}",
        f"  level      {_num(snap.peak_dbfs, '6.1f', 'dBFS', '  -inf')} {level_meter(snap.peak_dbfs)}{clip}",
        f"  SNR        {_num(snap.snr_db, '6.1f', 'dB')}   tone {_num(snap.amp_dbfs, '.1f', 'dBFS')}",
        f"  faults     {snap.faults}  (overflows {snap.overflows}, gaps {snap.gaps}, "
        f"lost {snap.lost_samples} samples, device errors {snap.device_errors})",
        f"  no tone    {snap.no_tone_frames} frames",
        f"  markers    {snap.markers}" + (f"   open: {snap.open_marker}" if snap.open_marker else ""),
        f"  log rows   {snap.rows}   queue {100 * snap.queue_fill:.0f}%",
        "",
    ]
    if snap.last_fault:
        lines.insert(-1, f"  last fault {snap.last_fault}")
    if snap.message:
        lines.insert(-1, f"  note       {snap.message}")
    if snap.events_status:  # the live event detector (logger/events/live.py)
        lines[-1:-1] = [f"  events     {snap.events_status}"] + [f"             {e}" for e in snap.events]
    if prompt is not None:
        lines.append(MARKER_HELP)
        lines.append(f"label (Enter to set, Esc to cancel): {prompt}_")
    else:
        lines.append(KEYS_HELP)
        lines.append(note)
    if hint:
        lines.append(hint)
    return lines


class PlainLines:
    """Print :func:`status_line` every ``interval_s`` seconds (stdout is not a terminal)."""

    def __init__(self, engine, out=None, interval_s: float = 1.0):
        self.engine = engine
        self.out = out or sys.stdout
        self.interval_s = interval_s

    def run(self, plot: "LivePlot | None" = None) -> str:
        next_t = time.monotonic() + self.interval_s
        while not self.engine.wait(0.05 if plot else min(0.25, self.interval_s)):
            if plot is not None:
                plot.update(self.engine.snapshot())
            if time.monotonic() >= next_t:
                self.out.write(status_line(self.engine.snapshot()) + "\n")
                self.out.flush()
                next_t += self.interval_s
        return "ended"


class TerminalPanel:
    """The interactive panel: redraws ``rate_hz`` times a second, handles keys until quit or the run ends.

    Parameters
    ----------
    engine : a started :class:`~coilshift.logger.capture.engine.CaptureEngine`
    title : first line of the panel (device, rate, run folder)
    inp, out : terminal streams (stdin / stdout by default)
    rate_hz : redraws per second
    note : first message shown under the keys
    """

    def __init__(self, engine, title: str, inp=None, out=None, rate_hz: float = 5.0, note: str = ""):
        self.engine = engine
        self.title = title
        self.inp = inp or sys.stdin
        self.out = out or sys.stdout
        self.period_s = 1.0 / rate_hz
        self.prompt: str | None = None
        self.note = note
        self._drawn = 0
        self._prompt_at: int | None = None  # sample position when the marker key was pressed
        self.targets_marked = 0
        self.baselines_marked = 0

    def run(self, plot: "LivePlot | None" = None) -> str:
        """Show the panel until the user quits ('quit') or the run ends by itself ('ended')."""
        import termios
        import tty

        fd = self.inp.fileno()
        saved = termios.tcgetattr(fd)
        try:
            tty.setcbreak(fd)  # keys arrive one by one; Ctrl-C still raises KeyboardInterrupt
            self.out.write("\x1b[?25l")  # hide the cursor while redrawing
            while True:
                self._draw()
                if self.engine.finished.is_set():
                    return "ended"
                deadline = time.monotonic() + self.period_s
                while True:
                    left = deadline - time.monotonic()
                    if left <= 0:
                        break
                    ready, _, _ = select.select([fd], [], [], min(left, 0.05 if plot else left))
                    if ready:
                        chars = os.read(fd, 64).decode("utf-8", "replace")
                        if self._keys(chars):
                            return "quit"
                        break
                    if plot is not None:
                        plot.update(self.engine.snapshot())
        finally:
            termios.tcsetattr(fd, termios.TCSADRAIN, saved)
            self.out.write("\x1b[?25h\n")
            self.out.flush()

    def _mark(self, label: str, at: int | None) -> None:
        """Add a marker timed at sample position ``at`` (the key press) when the engine can."""
        session = getattr(self.engine, "session", None)
        try:
            if at is not None and session is not None:
                t = session.add_marker(label, at=at)
            else:
                t = self.engine.add_marker(label)
        except InputError as exc:
            self.note = f"not set: {exc}"
            return
        word = label.strip().lower()
        if word == "baseline":
            self.baselines_marked += 1
        elif word != "end":
            self.targets_marked += 1
        self.note = f"marker '{label.strip()}' set at {t:.2f} s"

    def _position(self) -> int | None:
        session = getattr(self.engine, "session", None)
        return session.position_now() if session is not None else None

    def _keys(self, chars: str) -> bool:
        """Handle typed characters; True means quit."""
        for ch in chars:
            if self.prompt is not None:
                if ch in ("\r", "\n"):
                    label, self.prompt = self.prompt, None
                    self._mark(label, self._prompt_at)
                elif ch == "\x1b":
                    self.prompt, self.note = None, "marker cancelled"
                elif ch in ("\x7f", "\b"):
                    self.prompt = self.prompt[:-1]
                elif ch.isprintable():
                    self.prompt += ch
                continue
            key = ch.lower()
            if key == KEY_QUIT:
                return True
            if key == KEY_REZERO:
                t = self.engine.rezero()
                self.note = f"re-zero at {t:.2f} s: new baseline from the next {self.engine.baseline_s:g} s"
            elif key == KEY_MARKER:
                self._prompt_at = self._position()  # the moment of the key press, not of Enter
                self.prompt = ""
            elif key == KEY_BASELINE:
                self._mark("baseline", self._position())
        return False

    def _draw(self) -> None:
        hint = BASELINE_HINT if self.targets_marked and not self.baselines_marked else ""
        lines = panel_lines(self.engine.snapshot(), self.title, self.prompt, self.note, hint)
        # home the cursor, rewrite each line and clear its tail, then clear anything below
        buf = ["\x1b[H" if self._drawn else "\x1b[2J\x1b[H"]
        for line in lines:
            buf.append(line + "\x1b[K\r\n")
        buf.append("\x1b[J")
        self.out.write("".join(buf))
        self.out.flush()
        self._drawn += 1


def display_available() -> bool:
    """True when a GUI window can be opened (X11/Wayland on Linux; assumed elsewhere)."""
    if sys.platform.startswith("linux") or "bsd" in sys.platform:
        return bool(os.environ.get("DISPLAY") or os.environ.get("WAYLAND_DISPLAY"))
    return True


class LivePlot:
    """Frequency and shift of the last ``span_s`` seconds in a matplotlib window (interactive).

    Create it with :meth:`open`, which returns None (after saying why in one line) when no
    window can be shown; then call :meth:`update` from the main thread.
    """

    def __init__(self, plt, span_s: float = 60.0, refresh_s: float = 0.5):
        self.plt = plt
        self.span_s = span_s
        self.refresh_s = refresh_s
        self.t: deque = deque()
        self.f: deque = deque()
        self.d: deque = deque()
        self._last = 0.0
        self.fig, (self.ax_f, self.ax_d) = plt.subplots(2, 1, sharex=True, figsize=(8, 5))
        (self.line_f,) = self.ax_f.plot([], [], lw=1)
        (self.line_d,) = self.ax_d.plot([], [], lw=1, color="tab:red")
        self.ax_f.set_ylabel("frequency (Hz)")
        self.ax_d.set_ylabel("shift (Hz)")
        self.ax_d.set_xlabel("elapsed time (s)")
        self.ax_f.grid(True, alpha=0.3)
        self.ax_d.grid(True, alpha=0.3)
        self.fig.suptitle("coilshift live capture")
        plt.show(block=False)

    @classmethod
    def open(cls, err=None, span_s: float = 60.0) -> "LivePlot | None":
        err = err or sys.stderr
        if not display_available():
            err.write("coilshift: no display for --plot (DISPLAY is not set); continuing without the plot\n")
            return None
        try:
            import matplotlib

            if matplotlib.get_backend().lower() == "agg":
                for backend in ("QtAgg", "TkAgg", "GTK3Agg", "WXAgg"):
                    try:
                        matplotlib.use(backend, force=True)
                        break
                    except Exception:
                        continue
            import matplotlib.pyplot as plt

            if "agg" == matplotlib.get_backend().lower():
                raise RuntimeError("no interactive matplotlib backend (install tkinter or PyQt)")
            plt.ion()
            return cls(plt, span_s=span_s)
        except Exception as exc:  # any GUI toolkit failure: keep capturing without the window
            err.write(f"coilshift: cannot open the plot window ({exc}); continuing without the plot\n")
            return None

    def update(self, snap) -> None:
        if math.isfinite(snap.freq_hz) and (not self.t or snap.elapsed_s > self.t[-1]):
            self.t.append(snap.elapsed_s)
            self.f.append(snap.freq_hz)
            self.d.append(snap.shift_hz)
            while self.t and self.t[0] < snap.elapsed_s - self.span_s:
                self.t.popleft(), self.f.popleft(), self.d.popleft()
        now = time.monotonic()
        if now - self._last < self.refresh_s:
            self.fig.canvas.flush_events()
            return
        self._last = now
        if self.t:
            self.line_f.set_data(self.t, self.f)
            self.line_d.set_data(self.t, self.d)
            for ax in (self.ax_f, self.ax_d):
                ax.relim()
                ax.autoscale_view()
        self.fig.canvas.draw_idle()
        self.fig.canvas.flush_events()

    def close(self) -> None:
        self.plt.close(self.fig)
