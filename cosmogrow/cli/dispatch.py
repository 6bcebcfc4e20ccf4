"""The command line. The only module that reads argv, prints for the user or sets exit codes.

Each subcommand lives in `cosmogrow.cli.commands.<name>` and exposes ``register(subparsers)``, which
adds its parser and sets ``run`` (a function of the parsed arguments returning an exit code).
"""

import argparse
import atexit
import contextlib
import importlib
import os
import signal
import sys
import threading
import warnings

from .. import __version__
from ..errors import CosmogrowError

# Exit codes, documented in the README.
EXIT_OK = 0
EXIT_BAD_INPUT = 2
EXIT_NOT_CONVERGED = 3

#: The subcommands and their one-line summaries (`cosmogrow --help` lists these without importing
#: any command module; each module's own parser repeats its line, tests/test_cli_speed.py checks).
COMMANDS = {
    "init": "write a commented run configuration for catalogues",
    "fit": "fit k to catalogues of black-hole and host masses",
    "simulate": "simulate catalogues of a population, with selection",
    "inject": "injection-recovery campaign: calibrate the k measurement of a design",
    "nulltest": "null tests of a k measurement",
    "challenge": "test a claimed k against mocks of the data's own design",
    "forecast": "predict the precision of k for planned observations",
    "budget": "density today of coupled stellar-remnant black holes against dark energy",
    "remnants": "birth masses of stellar-mass black holes under coupled growth",
    "report": "collect results folders into one self-contained HTML page",
    "demo": "run every stage on the bundled demo data",
}


class OneLineParser(argparse.ArgumentParser):
    """An argument parser whose errors are one line (and exit code 2), like every other error."""

    def error(self, message):
        self.exit(EXIT_BAD_INPUT, f"{self.prog}: error: {message} (see {self.prog} --help)\n")


def build_parser(only=None):
    """The argument parser: with `only`, that subcommand's full parser (only its module is
    imported); without, every subcommand's summary line, for the top-level help (no module imported)."""
    parser = OneLineParser(
        prog="cosmogrow",
        description="Measure and calibrate coupled black-hole growth, M_BH ∝ a^k.")
    parser.add_argument("--version", action="version", version=f"cosmogrow {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    if only is None:
        for name, summary in COMMANDS.items():
            sub.add_parser(name, help=summary)
        return parser
    for name in (only,):
        try:
            module = importlib.import_module(f".commands.{name}", __package__)
        except ModuleNotFoundError as exc:
            if exc.name == f"{__package__}.commands.{name}":
                continue  # command not built yet
            raise
        module.register(sub)
    return parser


def _requested_command(argv):
    for token in argv:
        if not token.startswith("-"):
            return token if token in COMMANDS else None
    return None


def main(argv=None):
    argv = sys.argv[1:] if argv is None else list(argv)
    parser = build_parser(_requested_command(argv))
    args = parser.parse_args(argv)
    if not getattr(args, "run", None):
        parser.print_help()
        return EXIT_BAD_INPUT
    args.invoke = main  # lets a command run other commands (the demo) without importing this module
    try:
        with _quiet_library_warnings(), _terminate_as_exception():
            return int(args.run(args) or EXIT_OK)
    except CosmogrowError as exc:
        print(f"cosmogrow {args.command}: error: {exc}", file=sys.stderr)
        return EXIT_BAD_INPUT
    except KeyboardInterrupt:
        print(f"cosmogrow {args.command}: interrupted", file=sys.stderr)
        return 130


def console():
    """The `cosmogrow` script: `main`, then end the process without tearing the interpreter down.

    Freeing the thousands of modules and objects of numpy, scipy, astropy, pandas and matplotlib at
    exit takes 0.3-0.7 s, a tenth of a small fit. Every output is written and closed when `main`
    returns, so the streams are flushed, the exit handlers run and the process ends at once (unless
    a non-daemon thread is still running: then the usual exit waits for it).
    """
    code = main()
    others = [t for t in threading.enumerate() if t is not threading.main_thread() and not t.daemon]
    if others or not hasattr(os, "_exit"):
        sys.exit(code)
    run_exit_handlers = getattr(atexit, "_run_exitfuncs", None)
    if run_exit_handlers is not None:
        run_exit_handlers()
    sys.stdout.flush()
    sys.stderr.flush()
    os._exit(code)


@contextlib.contextmanager
def _quiet_library_warnings():
    """numpy/scipy RuntimeWarnings (overflow, invalid value) are not for the user: inputs are
    validated up front and non-finite results are reported as such."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        yield


@contextlib.contextmanager
def _terminate_as_exception():
    """SIGTERM raises SystemExit(143), so staging folders are removed as on any other failure."""
    if threading.current_thread() is not threading.main_thread():
        yield
        return

    def terminate(signum, frame):
        raise SystemExit(128 + signum)

    previous = signal.signal(signal.SIGTERM, terminate)
    try:
        yield
    finally:
        signal.signal(signal.SIGTERM, previous)


if __name__ == "__main__":  # pragma: no cover
    console()
