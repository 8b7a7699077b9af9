"""The ``magretina`` command: a thin dispatcher over the library.

Each subcommand lives in its own module under :mod:`renderer.commands` and exposes
``register(subparsers)``, which adds its parser and sets ``func(args) -> int``.
Adding a subcommand is one new module and one line in ``COMMANDS``.  All capability
is in the library; nothing here computes.  User errors (:class:`MagretinaError`)
become one line on stderr and exit status 2, never a traceback.
"""

from __future__ import annotations

import argparse
import importlib
import sys

from .commands._common import MagretinaParser
from .errors import MagretinaError
from .version import __version__

#: Subcommand modules, in the order they appear in ``magretina --help``.
COMMANDS = [
    "demo",
    "field",
    "render",
    "response",
    "spin-rf",
    "predict",
    "orient",
    "report",
    "run",
    "new-study",
    "presets",
]


def build_parser() -> argparse.ArgumentParser:
    parser = MagretinaParser(
        prog="magretina",
        description="Hypothesis stimuli and predictions for a light-dependent radical-pair "
                    "magnetic compass. Outputs are model predictions, not observations of "
                    "animal perception.")
    parser.add_argument("--version", action="version", version=f"magretina {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    sub.required = True
    for name in COMMANDS:
        importlib.import_module(f".commands.{name.replace('-', '_')}", __package__).register(sub)
    return parser


def main(argv=None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    try:
        rc = args.func(args)
    except MagretinaError as exc:
        print(f"magretina {args.command}: error: {exc}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print(f"magretina {args.command}: interrupted", file=sys.stderr)
        return 130
    return int(rc or 0)


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
