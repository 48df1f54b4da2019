"""The ``tracecoil`` command line: parses arguments, calls the public API,
prints. No logic of its own lives here.

Each subcommand is a module ``tracecoil/cmd_<name>.py`` that defines
``add_parser(subparsers)`` and ``run(args) -> int``; add new ones to
``COMMANDS``. Heavy imports (matplotlib) stay inside ``run``.
"""

from __future__ import annotations

import argparse
import importlib
import importlib.util
import sys

from . import __version__

COMMANDS = ("new", "build", "predict", "check", "signal", "sweep", "size", "tolerance", "compare", "report")


def _modules():
    for name in COMMANDS:
        mod = f"tracecoil.cmd_{name}"
        if importlib.util.find_spec(mod) is not None:  # commands not yet written are simply absent
            yield importlib.import_module(mod)


def make_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="tracecoil",
        description="Design, export, check and predict printed-circuit-board coils for inductive sensors.",
    )
    parser.add_argument("--version", action="version", version=f"tracecoil {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    for mod in _modules():
        mod.add_parser(sub)
    return parser


def main(argv=None) -> int:
    parser = make_parser()
    args = parser.parse_args(argv)
    if not getattr(args, "command", None):
        parser.print_help()
        return 2
    try:
        return int(args.run(args) or 0)
    except ValueError as e:  # SpecError, GeometryError and friends: bad input
        print(f"tracecoil {args.command}: error: {e}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print("tracecoil: interrupted", file=sys.stderr)
        return 130
    except BrokenPipeError:  # output piped into a reader that stopped early (e.g. head)
        import os

        os.dup2(os.open(os.devnull, os.O_WRONLY), sys.stdout.fileno())
        return 141
    except OSError as e:  # a file or folder that cannot be read or written
        where = f": {e.filename}" if getattr(e, "filename", None) else ""
        print(f"tracecoil {args.command}: error: {e.strerror or e}{where}", file=sys.stderr)
        return 2


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
