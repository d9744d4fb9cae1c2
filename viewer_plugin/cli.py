"""The ``stackdepth`` command line: drives kernels and io, with no GUI.

Exit statuses: 0 success (for ``stackdepth bleaching``: the whole 95 %
interval of the loss within the tolerance); 1 unexpected internal failure;
2 bad input or usage (one line on stderr starting ``stackdepth: error:``);
3 a check found the data outside the tolerance (the whole interval above
it); 4 a check was inconclusive (the interval spans the tolerance).
"""

from __future__ import annotations

import argparse
import importlib
import logging
import re
import sys
from typing import Sequence

from . import __version__
from .commands._common import EXIT_FAILURE, EXIT_USAGE, CommandError, compute_scheduler

#: Sub-command modules in :mod:`viewer_plugin.commands`, in help order.
SUBCOMMANDS = ("view", "demo", "project", "figures", "movie", "attenuation", "bleaching", "convert")


class _Parser(argparse.ArgumentParser):
    """argparse that reports usage errors in the project's one-line form."""

    def error(self, message: str) -> "NoReturn":  # type: ignore[name-defined]  # noqa: F821
        raise CommandError(message)


def build_parser() -> argparse.ArgumentParser:
    parser = _Parser(
        prog="stackdepth",
        description=(
            "Depth analysis of fluorescence microscopy z-stacks: depth-coded projections, "
            "turning movies, depth attenuation and photobleaching checks. A research tool, not "
            "for clinical or diagnostic decisions."
        ),
        epilog="Exit status: 0 ok, 2 bad input, 3 outside tolerance (bleaching), 4 inconclusive "
               "against the tolerance (bleaching), 1 internal error.",
    )
    parser.add_argument("--version", action="version", version=f"stackdepth {__version__}")
    parser.add_argument("-v", "--verbose", action="store_true", help="log details to stderr")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    for name in SUBCOMMANDS:
        try:
            module = importlib.import_module(f".commands.{name}", __package__)
        except ModuleNotFoundError as exc:
            if exc.name != f"{__package__}.commands.{name}":
                raise
            continue
        module.register(sub)
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    """Entry point of the ``stackdepth`` console script; returns the exit status."""
    parser = build_parser()
    held = _HeldWarnings()
    try:
        args = parser.parse_args(argv)
        held.install(verbose=args.verbose)
        if not getattr(args, "func", None):
            parser.print_help(sys.stderr)
            return EXIT_USAGE
        with compute_scheduler(args):
            status = int(args.func(args) or 0)
        held.show()  # a command that finished shows what the readers warned about
        return status
    except CommandError as exc:
        return _error(str(exc), EXIT_USAGE)
    except (ValueError, OSError) as exc:
        return _error(_option_words(str(exc) or type(exc).__name__, parser), EXIT_USAGE)
    except KeyboardInterrupt:
        return _error("interrupted", 130)
    except Exception as exc:  # noqa: BLE001 - never show a traceback to a user
        if "--verbose" in (argv or sys.argv) or "-v" in (argv or sys.argv):
            logging.exception("internal error")
        return _error(f"internal error ({type(exc).__name__}: {exc}); rerun with -v for details",
                      EXIT_FAILURE)
    finally:
        logging.getLogger().removeHandler(held)


class _HeldWarnings(logging.Handler):
    """Keep log warnings until the command has finished, so an error stays one line.

    Readers log odd metadata (e.g. an unusable voxel size) as warnings; they are
    printed as notes after a successful run and dropped when the run ends with
    an error line (which names what went wrong).
    """

    def __init__(self) -> None:
        super().__init__(logging.WARNING)
        self.records: list[logging.LogRecord] = []

    def emit(self, record: logging.LogRecord) -> None:
        self.records.append(record)

    def install(self, *, verbose: bool) -> None:
        root = logging.getLogger()
        root.setLevel(logging.INFO if verbose else logging.WARNING)
        if verbose:  # details go out as they come
            logging.basicConfig(format="stackdepth: %(levelname)s: %(message)s")
            return
        root.addHandler(self)

    def show(self) -> None:
        for record in self.records:
            print(f"stackdepth: note: {record.getMessage()}", file=sys.stderr)
        self.records.clear()


def _option_words(message: str, parser: argparse.ArgumentParser) -> str:
    """Name a kernel parameter as the command-line option that set it ("z_step:" -> "--z-step:")."""
    match = re.match(r"([a-z][a-z_]*)(\[\d+\])?:", message)
    if match is None:
        return message
    option = "--" + match.group(1).replace("_", "-")
    known = {opt for action in _all_actions(parser) for opt in action.option_strings}
    return option + message[len(match.group(1)):] if option in known else message


def _all_actions(parser: argparse.ArgumentParser) -> list[argparse.Action]:
    actions = list(parser._actions)
    for action in parser._actions:
        if isinstance(action, argparse._SubParsersAction):
            for sub in action.choices.values():
                actions += sub._actions
    return actions


def _error(message: str, status: int) -> int:
    first_line = " ".join(message.split())
    print(f"stackdepth: error: {first_line}", file=sys.stderr)
    return status


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
