"""Soundcard input through PortAudio (python-sounddevice): device list and a live block source.

The only module that imports :mod:`sounddevice`. Its callback copies the chosen channel of each
block and hands it, with the block's ADC time and the input-overflow flag, to the capture
engine, which queues it without waiting. Nothing else happens in the audio thread.
"""

from __future__ import annotations

import math

from coilshift.logger.errors import InputError, setting
from coilshift.logger.waiting import call_with_timeout

#: seconds to wait for each of stopping, aborting and closing the stream
CLOSE_TIMEOUT_S = 1.5
#: what to install when PortAudio itself is missing (the Python package is a dependency)
PORTAUDIO_HINT = ("the PortAudio library is not installed: install it with your package manager "
                  "(Debian/Ubuntu: apt install libportaudio2; Fedora: dnf install portaudio; "
                  "macOS: brew install portaudio)")


def _sd():
    """Import sounddevice, turning a missing PortAudio into one clear InputError."""
    try:
        import sounddevice
    except OSError:
        raise InputError(f"audio: {PORTAUDIO_HINT}") from None
    except ImportError:
        raise InputError("audio: the Python package 'sounddevice' is missing (pip install sounddevice)") from None
    return sounddevice


def list_input_devices() -> list[dict]:
    """Input-capable devices as dicts: index, name, host_api, max_input_channels, default_rate_hz, default.

    Raises InputError when there is no audio stack at all.
    """
    sd = _sd()
    try:
        devices = sd.query_devices()
        apis = sd.query_hostapis()
    except sd.PortAudioError as exc:
        raise InputError(f"audio: PortAudio cannot list devices ({exc})") from None
    try:
        default_in = sd.default.device[0]
    except Exception:
        default_in = -1
    out = []
    for d in devices:
        if d["max_input_channels"] <= 0:
            continue
        out.append({
            "index": int(d["index"]),
            "name": str(d["name"]),
            "host_api": str(apis[d["hostapi"]]["name"]),
            "max_input_channels": int(d["max_input_channels"]),
            "default_rate_hz": float(d["default_samplerate"]),
            "default": int(d["index"]) == default_in,
        })
    return out


def rescan_devices() -> None:
    """Make PortAudio list the devices again (it scans once, when it is initialised)."""
    sd = _sd()
    sd._terminate()
    sd._initialize()


def resolve_device(device: str | int | None) -> dict:
    """Find one input device by index, by (part of) its name, or the system default.

    Raises InputError naming the request when no single input device matches.
    """
    devices = list_input_devices()
    if not devices:
        raise InputError("audio: no input device found (is a soundcard connected, or a sound server running?)")
    if device is None or str(device).strip() == "":
        chosen = [d for d in devices if d["default"]] or devices[:1]
        return chosen[0]
    text = str(device).strip()
    if text.isdigit():
        idx = int(text)
        for d in devices:
            if d["index"] == idx:
                return d
        raise InputError(f"{setting('device')} {text}: no input device with that index (see 'coilshift devices')")
    exact = [d for d in devices if d["name"].lower() == text.lower()]
    if exact:
        return exact[0]
    part = [d for d in devices if text.lower() in d["name"].lower()]
    if len(part) == 1:
        return part[0]
    if not part:
        raise InputError(f"{setting('device')} {text}: no input device matches (see 'coilshift devices')")
    names = ", ".join(f"{d['index']}: {d['name']}" for d in part[:5])
    raise InputError(f"{setting('device')} {text}: matches several input devices ({names}); give the index")


#: audio per callback by default: every callback has a fixed cost (sound server client, PortAudio,
#: Python), and the host's own choice (320 frames at 48 kHz through ALSA ``pulse``) made it most of
#: the capture's CPU (docs/capture.md, Performance); the live view lags by at most this much
BLOCK_S = 0.04


class SoundcardSource:
    """A live soundcard input as a block source for :class:`coilshift.logger.capture.engine.CaptureEngine`
    (the :class:`~coilshift.logger.sources.protocol.BlockSource` interface).

    Parameters
    ----------
    device : index, (part of) a name, or None for the default input
    sample_rate_hz : requested rate; None uses the device's default rate
    channel : 0-based input channel to track
    latency : PortAudio latency hint; ``"high"`` gives the largest buffers (fewest overflows)
    blocksize : frames per callback; 0 lets the host choose; None (default): the power of two
        nearest :data:`BLOCK_S` of audio (2048 at 48 kHz, 8192 at 192 kHz)
    """

    def __init__(self, device: str | int | None = None, sample_rate_hz: float | None = None, channel: int = 0,
                 latency: str | float = "high", blocksize: int | None = None):
        self.info = resolve_device(device)
        if channel < 0:
            raise InputError(f"{setting('channel')} {channel}: channels count from 0")
        if channel >= self.info["max_input_channels"]:
            raise InputError(f"{setting('channel')} {channel}: device {self.info['name']!r} has "
                             f"{self.info['max_input_channels']} input channel(s) (0..{self.info['max_input_channels'] - 1})")
        self.channel = int(channel)
        self.requested_rate_hz = float(sample_rate_hz) if sample_rate_hz else self.info["default_rate_hz"]
        if not (self.requested_rate_hz > 0 and math.isfinite(self.requested_rate_hz)):
            raise InputError(f"{setting('sample_rate_hz')} {sample_rate_hz}: must be a positive sample rate")
        self.latency = latency
        self.blocksize = int(blocksize) if blocksize is not None else \
            2 ** round(math.log2(BLOCK_S * self.requested_rate_hz))
        self.sample_rate_hz = self.requested_rate_hz
        self._stream = None
        self._closing = False
        self.abandoned = False  # the stream would not stop (a hung driver) and was left behind
        self.input_latency_s: float | None = None

    def open(self, deliver, fail) -> None:
        sd = _sd()
        ch = self.channel

        def callback(indata, frames, time_info, status):
            # audio thread: copy the channel, pass it on, return; nothing that can block
            deliver(indata[:, ch].copy(), time_info.inputBufferAdcTime, bool(status.input_overflow))

        def finished():
            if not self._closing:
                fail("the audio stream stopped by itself (device removed or driver error)")

        try:
            sd.check_input_settings(device=self.info["index"], channels=ch + 1, dtype="float32",
                                    samplerate=self.requested_rate_hz)
            # keep the stream object (and so its CFFI callback) alive for the stream's lifetime
            self._stream = sd.InputStream(device=self.info["index"], channels=ch + 1, dtype="float32",
                                          samplerate=self.requested_rate_hz, latency=self.latency,
                                          blocksize=self.blocksize, callback=callback,
                                          finished_callback=finished)
            self._stream.start()
        except (sd.PortAudioError, ValueError) as exc:
            self._stream = None
            raise InputError(f"device {self.info['index']} ({self.info['name']}): cannot open input at "
                             f"{self.requested_rate_hz:g} Hz, {ch + 1} channel(s): {exc}") from None
        self.sample_rate_hz = float(self._stream.samplerate)
        self.input_latency_s = float(self._stream.latency)  # what the stream really runs with

    def close(self) -> None:
        """Stop and close the stream, waiting at most :data:`CLOSE_TIMEOUT_S` for each step.

        A driver whose device has died can block in stop() for many seconds or for ever: then
        the stream is aborted (pending buffers dropped), and if even that blocks it is abandoned
        (``abandoned`` is set) and PortAudio is not shut down at exit, which would block too.
        """
        self._closing = True
        stream, self._stream = self._stream, None
        if stream is None:
            return
        # the device may already be gone (errors ignored); closing is still required
        if not call_with_timeout(stream.stop, CLOSE_TIMEOUT_S, name="coilshift-stream-stop")[0]:
            if not call_with_timeout(stream.abort, CLOSE_TIMEOUT_S, name="coilshift-stream-abort")[0]:
                self.abandoned = True
                self._skip_portaudio_exit()
                return
        call_with_timeout(stream.close, CLOSE_TIMEOUT_S, name="coilshift-stream-close")

    @staticmethod
    def _skip_portaudio_exit() -> None:
        # sounddevice stops and terminates PortAudio at exit; with a hung stream that never returns
        try:
            import atexit

            import sounddevice

            atexit.unregister(sounddevice._exit_handler)
        except Exception:  # an older or newer sounddevice without it: nothing to undo
            pass

    def describe(self) -> dict:
        d = {"kind": "soundcard", "device_index": self.info["index"], "device_name": self.info["name"],
             "host_api": self.info["host_api"], "channel": self.channel,
             "device_channels": self.info["max_input_channels"],
             "requested_rate_hz": self.requested_rate_hz, "sample_rate_hz": self.sample_rate_hz,
             "dtype": "float32", "latency_hint": self.latency}
        if self.input_latency_s is not None:
            d["input_latency_s"] = self.input_latency_s
            d["blocksize"] = self.blocksize or "variable (host's choice)"
        return d

