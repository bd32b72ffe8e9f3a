"""The command line: ``workbench [COMMAND] ...``.

Each command lives in its own module of this package with two functions::

    def add_parser(subparsers) -> argparse.ArgumentParser   # registers the sub-command
    def run(args) -> int                                    # does the work, returns the exit status

Bad input (files, settings, numbers) raises :class:`workbench.errors.WorkbenchError`; ``main``
prints ``error: <message>`` on one line and exits with status 2, never a traceback.
"""
from __future__ import annotations

import argparse
import importlib
import sys

from ..errors import WorkbenchError

# command modules, in the order ``workbench --help`` lists them; a module that does not exist yet
# is simply not offered
COMMANDS = ("gui", "info", "jacobian", "run", "export", "report", "bench")


class _Parser(argparse.ArgumentParser):
    def error(self, message):  # argparse usage errors: one line, exit 2
        sys.stderr.write(f"error: {message} (see '{self.prog} --help')\n")
        raise SystemExit(2)


def build_parser() -> argparse.ArgumentParser:
    from .. import __version__

    parser = _Parser(prog="workbench", description="Manipulability Workbench: map Jacobian measures of "
                     "robot arms over joint space, cell slices, mount spots and paths. Without a command "
                     "it opens the desktop workbench on the built-in demo.")
    parser.add_argument("--version", action="version", version=f"workbench {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    for name in COMMANDS:
        try:
            mod = importlib.import_module(f"{__name__}.{name}")
        except ModuleNotFoundError as exc:
            if exc.name == f"{__name__}.{name}":
                continue
            raise
        p = mod.add_parser(sub)
        p.set_defaults(_run=mod.run)
    return parser


def main(argv=None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    if getattr(args, "_run", None) is None:
        if args.command is None and "gui" in COMMANDS:
            try:
                gui = importlib.import_module(f"{__name__}.gui")
            except ModuleNotFoundError:
                parser.print_help()
                return 0
            args = parser.parse_args(["gui"] + list(argv or []))
            return _call(gui.run, args)
        parser.print_help()
        return 0
    return _call(args._run, args)


def _call(fn, args) -> int:
    try:
        return int(fn(args) or 0)
    except WorkbenchError as exc:
        sys.stderr.write(f"error: {exc}\n")
        return 2
    except KeyboardInterrupt:
        sys.stderr.write("error: interrupted\n")
        return 130
    except OSError as exc:  # files we could not read or write
        where = f" {exc.filename}" if getattr(exc, "filename", None) else ""
        sys.stderr.write(f"error:{where} {exc.strerror or exc}\n")
        return 2


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
