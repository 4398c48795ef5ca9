"""Entry point of the `precess` command.

Each subcommand lives in its own module `controller/cli/cmd_<name>.py` with
`register(subparsers)` (found automatically); the handler returns an exit code.  A PrecessError becomes one line on stderr and its exit code; nothing prints a
traceback to a user (set PRECESS_DEBUG=1 to see one).
"""

from __future__ import annotations

import argparse
import os
import signal
import sys

# The arrays here are small (a few hundred columns at most): BLAS threads cost more in start-up
# and contention than they save, and a second core is better left to the engine's thread.
# Set before numpy loads; an explicit setting in the environment wins.
for _threads in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_threads, "1")

from controller import __version__  # noqa: E402
from controller.errors import PrecessError  # noqa: E402

EXIT_INTERRUPTED = 130


class _ArgumentParser(argparse.ArgumentParser):
    def error(self, message: str) -> None:  # one line, exit 2
        self.exit(2, f"precess: error: {message} (see `{self.prog} --help`)\n")


def build_parser() -> argparse.ArgumentParser:
    import importlib
    import pkgutil

    import controller.cli as cli_package

    parser = _ArgumentParser(prog="precess", description="Controller for low-field and Earth's-field NMR instruments.")
    parser.add_argument("--version", action="version", version=f"precess {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_ArgumentParser)
    sub.required = True
    for info in sorted(pkgutil.iter_modules(cli_package.__path__), key=lambda m: m.name):
        if info.name.startswith("cmd_"):
            importlib.import_module(f"controller.cli.{info.name}").register(sub)
    return parser


def _raise_interrupt(signum: int, frame: object) -> None:
    raise KeyboardInterrupt


def main(argv: list[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    signal.signal(signal.SIGTERM, _raise_interrupt)
    try:
        return int(args.handler(args) or 0)
    except PrecessError as exc:
        print(f"precess: error: {exc}", file=sys.stderr)
        return exc.exit_code
    except KeyboardInterrupt:
        print("precess: interrupted; the rig was made safe", file=sys.stderr)
        return EXIT_INTERRUPTED
    except BrokenPipeError:
        return 0
    except Exception as exc:  # noqa: BLE001 - last resort: one line, not a traceback
        if os.environ.get("PRECESS_DEBUG"):
            raise
        print(f"precess: internal error: {type(exc).__name__}: {exc} (set PRECESS_DEBUG=1 for details)",
              file=sys.stderr)
        return 1


if __name__ == "__main__":
    sys.exit(main())
