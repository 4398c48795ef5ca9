"""`precess devices`: the sound devices, serial ports and VISA resources a rig file can name."""

from __future__ import annotations

import argparse
import warnings

from controller.errors import DriverError


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("devices", help="list sound devices, serial ports and VISA resources for a rig file")
    p.set_defaults(handler=run)


def sound_device_lines() -> list[str]:
    from drivers.soundcard import import_sounddevice

    try:
        sd = import_sounddevice()
    except DriverError as exc:
        return [f"  (none: {exc})"]
    apis = [a["name"] for a in sd.query_hostapis()]
    lines = []
    for index, d in enumerate(sd.query_devices()):
        lines.append(f"  {index:3d}  {d['name']!r} on {apis[d['hostapi']]!r}: {d['max_input_channels']} in, "
                     f"{d['max_output_channels']} out, default {d['default_samplerate']:g} Hz")
    return lines or ["  (none found)"]


def serial_port_lines() -> list[str]:
    from serial.tools import list_ports

    lines = [f"  {p.device}  {p.description}" + (f" [{p.hwid}]" if p.hwid and p.hwid != "n/a" else "")
             for p in sorted(list_ports.comports(), key=lambda p: p.device)]
    return lines or ["  (none found)"]


def visa_resource_lines() -> list[str]:
    try:
        import pyvisa

        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            rm = pyvisa.ResourceManager("@py")
            found = rm.list_resources()
            rm.close()
    except Exception as exc:  # noqa: BLE001 - discovery is best effort, one line
        return [f"  (cannot list: {type(exc).__name__}: {exc})"]
    lines = [f"  {r}" for r in found] or ["  (none found)"]
    return lines + ["  raw-socket instruments are not discoverable: write TCPIP0::<address>::<port>::SOCKET"]


def run(args: argparse.Namespace) -> int:
    for title, lines in (("sound devices (transceiver.soundcard.device = name or index)", sound_device_lines()),
                         ("serial ports (board.serial.port)", serial_port_lines()),
                         ("VISA resources (supply.scpi.resource, transceiver.scpi_daq.*)", visa_resource_lines())):
        print(title)
        for line in lines:
            print(line)
    return 0
