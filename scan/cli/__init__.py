"""The ``zetascan`` command line: argparse verbs, the only place that prints.

Each verb lives in its own module ``scan/cli/<verb>.py`` exposing

* ``add_parser(subparsers) -> argparse.ArgumentParser`` — register the verb (with an
  example in its epilog), and
* ``run(args: argparse.Namespace) -> int`` — do the work and return an exit code.

Exit codes: 0 success, 2 bad input or an output that cannot be written (one line naming
the file, line or key and the fix), 1 internal error (a bug: one line says which log file
holds the traceback, see :mod:`scan.cli.failure`).  What verbs print goes through
:mod:`scan.cli.output` (``--json``, ``--quiet``, ``-v``, progress on stderr).
"""
from __future__ import annotations

import argparse
import importlib
import sys
import textwrap
from collections.abc import Sequence

from scan.cli import failure
from scan.cli.output import strict_json
from scan.constants import ZETASCAN_VERSION as __version__
from scan.errors import ZetascanError

#: Said by ``zetascan --help`` and the help of every verb that runs a config.
PLUGIN_NOTE = ("Running a config that names a plug-in (model.potential_function, "
               "model.potential_derivative, model.kinetic_function) imports and executes "
               "that Python code: run only configs you trust. Reading result files (plot, "
               "summary) never imports code.")


def with_plugin_note(epilog: str) -> str:
    """A verb's epilog followed by :data:`PLUGIN_NOTE` (for verbs that run a config)."""
    return epilog.rstrip("\n") + "\n\n" + textwrap.fill(PLUGIN_NOTE, 88) + "\n"


#: Verb modules, in the order ``zetascan --help`` lists them.
VERBS: tuple[str, ...] = ("solve", "tune", "observe", "curves", "train", "sample", "evidence",
                          "verify", "summary", "grid", "plot", "demo")


def build_parser() -> argparse.ArgumentParser:
    """The top-level parser with one sub-command per verb module."""
    parser = argparse.ArgumentParser(
        prog="zetascan",
        description="Exact inflationary spectra, induced GWs and PBH abundances, "
                    "confronted with bound curves.",
        epilog=PLUGIN_NOTE)
    parser.add_argument("--version", action="version", version=f"zetascan {__version__}")
    sub = parser.add_subparsers(dest="verb", metavar="VERB")
    for name in VERBS:
        module = importlib.import_module(f"scan.cli.{name}")
        verb_parser = module.add_parser(sub)
        verb_parser.set_defaults(_run=module.run)
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    """Run the command line; return the exit code (0 ok, 2 bad input, 1 internal error)."""
    argv = list(sys.argv[1:] if argv is None else argv)
    parser = build_parser()
    args = parser.parse_args(argv)
    if getattr(args, "_run", None) is None:
        parser.print_help()
        return 0
    try:
        return int(args._run(args) or 0)
    except ZetascanError as err:
        print(f"zetascan {args.verb}: error: {err}", file=sys.stderr)
        if getattr(args, "json", False):  # a script reading stdout still gets JSON
            print(strict_json({"error": str(err), "exit_code": 2}), flush=True)
        return 2
    except KeyboardInterrupt:
        print(f"zetascan {args.verb}: interrupted", file=sys.stderr)
        return 130
    except Exception as err:  # noqa: BLE001 -- the one place that ends every failure
        message = failure.user_message(err)
        if message is not None:
            print(f"zetascan {args.verb}: error: {message}", file=sys.stderr)
            if getattr(args, "json", False):
                print(strict_json({"error": message, "exit_code": 2}), flush=True)
            return 2
        failure.report_internal(args.verb, err, argv)
        return 1
