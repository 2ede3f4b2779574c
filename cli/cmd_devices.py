"""``coilshift devices``: list the audio inputs a live capture can use."""

from __future__ import annotations

from coilshift.cli.options import add_json_option

ORDER = 10


def register(subparsers) -> None:
    p = subparsers.add_parser(
        "devices",
        help="list audio input devices (index, name, host API, channels, default rate)",
        description="List the audio input devices PortAudio can see. Use the index (or part of the "
                    "name) with 'coilshift capture --device'.",
    )
    add_json_option(p, "print one JSON object instead of a table")
    p.set_defaults(func=run)


def run(args) -> int:
    from coilshift.cli.common import print_json
    from coilshift.logger.errors import InputError
    from coilshift.logger.sources.soundcard import list_input_devices

    devices = list_input_devices()
    if not devices:
        raise InputError("audio: no input device found (is a soundcard connected, or a sound server running?)")
    if args.json:
        print_json({"devices": devices})
        return 0
    name_w = max(4, max(len(d["name"]) for d in devices))
    api_w = max(8, max(len(d["host_api"]) for d in devices))
    print(f"  {'index':>5}  {'name':<{name_w}}  {'host API':<{api_w}}  {'inputs':>6}  {'default rate':>12}")
    for d in devices:
        mark = "*" if d["default"] else " "
        print(f"{mark} {d['index']:>5}  {d['name']:<{name_w}}  {d['host_api']:<{api_w}}  "
              f"{d['max_input_channels']:>6}  {d['default_rate_hz']:>9.0f} Hz")
    print("(* = system default input)")
    return 0
