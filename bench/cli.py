"""The ``rxbench`` command line: thin argparse over the command modules in :mod:`bench.commands`.

``main(argv) -> int`` exists so tests can call it in-process; the console script calls
:func:`run_console`, which exits with its return value.
"""

from __future__ import annotations

import argparse
import re
import gc
import importlib
import os
import sys
import traceback
import warnings

from rxbench import __version__, interrupts
from rxbench.errors import MeasurementError, RxbenchError, describe_foreign
from rxbench import files

#: Exit codes: the input is valid but the captures do not give the number; bad input; interrupted
#: (Ctrl-C; other signals give 128 + their number, :mod:`rxbench.interrupts`).
EXIT_MEASUREMENT, EXIT_BAD_INPUT, EXIT_INTERRUPTED = 1, 2, 130
#: Environment variable that turns on --debug.
DEBUG_ENV = "RXBENCH_DEBUG"

#: Command modules, in the order ``rxbench --help`` lists them.
COMMANDS = (
    "inspect",
    "loss",
    "ladder",
    "nf",
    "predict",
    "excess",
    "swr",
    "compare",
    "level",
    "capture",
    "analyze",
    "synth",
    "demo",
)


class _Parser(argparse.ArgumentParser):
    """An ArgumentParser whose errors are one line on stderr and exit code 2, and which takes a
    negative number in exponent form (``--near -60e3``, ``--noise-band -110e3 -20e3``) as a value:
    argparse's own pattern for negative numbers knows only ``-60000`` and ``-6.0``, and reads
    ``-60e3`` as an unknown option."""

    def __init__(self, *args, **kwargs):
        super().__init__(*args, **kwargs)
        self._negative_number_matcher = re.compile(r"^-(\d+\.?\d*|\.\d+)([eE][-+]?\d+)?$")

    def error(self, message):  # noqa: D102 - argparse hook
        self.exit(2, f"{self.prog}: error: {message}\n")


def _command_modules(names):
    for name in names:
        yield importlib.import_module(f"rxbench.commands.{name}")


def _chosen_command(argv: list[str]) -> str | None:
    """The command named in ``argv`` (first word that is one), so only its module is imported."""
    for word in argv:
        if word in COMMANDS:
            return word
        if not word.startswith("-"):
            return None
    return None


def build_parser(argv: list[str] | None = None) -> argparse.ArgumentParser:
    """The argument parser; given ``argv``, only the named command's module is imported (fast start)."""
    chosen = _chosen_command(argv) if argv is not None else None
    parser = _Parser(
        prog="rxbench",
        description="Measure what a passive device in the receive path costs, with an SDR dongle.",
    )
    parser.add_argument("--version", action="version", version=f"rxbench {__version__}")
    parser.add_argument("--debug", action="store_true", help=DEBUG_HELP)
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    sub.required = True
    for module in _command_modules(COMMANDS if chosen is None else (chosen,)):
        module.add_parser(sub)
    for command_parser in sub.choices.values():  # also after the command: rxbench loss ... --debug
        command_parser.add_argument("--debug", action="store_true", default=argparse.SUPPRESS, help=DEBUG_HELP)
    return parser


DEBUG_HELP = f"on an error, print the traceback before the one-line message (or set {DEBUG_ENV}=1)"


def debugging(args: argparse.Namespace) -> bool:
    """--debug given, or RXBENCH_DEBUG set to anything but empty or 0."""
    return bool(getattr(args, "debug", False)) or os.environ.get(DEBUG_ENV, "") not in ("", "0")


def main(argv: list[str] | None = None) -> int:
    """Run one rxbench command; return its exit code (0 ok, 1 the captures do not give the number,
    2 bad input, 130 interrupted)."""
    argv = sys.argv[1:] if argv is None else list(argv)
    parser = build_parser(argv)
    if not argv:  # ``rxbench`` alone: the command list
        parser.print_help()
        return 0
    try:
        args = parser.parse_args(argv)
    except SystemExit as exc:  # --help, --version and usage errors
        return int(exc.code or 0)
    files.begin_run()
    try:
        with warnings.catch_warnings():
            # numpy's floating-point RuntimeWarnings are not for the user: the numerics turn the
            # cases that matter into warnings of their own, on the number concerned.
            warnings.simplefilter("ignore", RuntimeWarning)
            return int(args.func(args) or 0)
    except BaseException as exc:
        code, line = _one_line(exc)
        if line is None:
            raise
        if debugging(args):  # --debug: the traceback the one line stands for, first
            traceback.print_exc(file=sys.stderr)
        print(f"rxbench {args.command}: {line}", file=sys.stderr)
        return code
    finally:
        files.end_run()


def _one_line(exc: BaseException) -> tuple[int, str | None]:
    """(exit code, the one stderr line) for an exception that ends a command; (0, None) for one
    that must keep its traceback (a defect)."""
    if isinstance(exc, KeyboardInterrupt) or (interrupts.received() is not None and isinstance(exc, Exception)):
        word, status = interrupts.describe(exc)  # a signal, perhaps surfaced as another exception
        return status, word
    if isinstance(exc, MeasurementError):  # valid input; what the captures hold does not give the number
        return EXIT_MEASUREMENT, f"error: {exc}"
    if isinstance(exc, (RxbenchError, ValueError)):  # ValueError: a value the numerics refuse
        return EXIT_BAD_INPUT, f"error: {exc}"
    if isinstance(exc, OSError):  # disk full, permission denied, device gone: no traceback
        where = f"{exc.filename}: " if exc.filename else ""
        return 2, f"error: {where}{exc.strerror or exc}"
    text = describe_foreign(exc) if isinstance(exc, Exception) else None
    return (2, f"error: {text}") if text is not None else (0, None)


def run_console() -> None:
    interrupts.install()  # first: a signal from here on is one line and its own exit status
    try:
        code = main(sys.argv[1:])
        interrupts.finished()
    except BaseException as exc:  # a signal during start-up (imports) or while parsing
        if interrupts.received() is None and not isinstance(exc, KeyboardInterrupt):
            raise
        word, code = interrupts.describe(exc)
        print(f"rxbench: {word}", file=sys.stderr)
    # The process ends here: spare the garbage collector its sweeps over every object numpy and
    # friends created (10 ms of each run). Files are closed by their own ``with`` blocks.
    gc.freeze()
    sys.exit(code)


if __name__ == "__main__":  # pragma: no cover
    run_console()
