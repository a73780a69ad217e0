"""The ``wordspot`` command line.

Each subcommand lives in its own module in this package and exposes
``add_parser(subparsers)``, which registers the subcommand and sets ``func`` (a callable
taking the parsed arguments and returning an exit status). No maths lives here.
"""

from __future__ import annotations

import argparse
import importlib
import sys
import warnings

from wordspot.errors import WordspotError

__all__ = ["main", "build_parser"]

# Subcommand modules, in the order ``wordspot --help`` lists them.
_COMMANDS = ("demo", "record", "train", "recognize", "evaluate", "lexicon")

_EPILOG = """\
examples (a bakery: bakers with dough on their hands call out commands):
  wordspot demo                                   train and evaluate on the shipped demo recordings
  wordspot record my-takes/ --takes 3             record takes in the browser, train, try
  wordspot lexicon suggest proof knead            pronunciations for two new command words
  wordspot train my-takes/train.csv --lexicon bakery.txt --out bakery.model
  wordspot recognize --model bakery.model oven-start.wav
  wordspot evaluate --model bakery.model my-takes/held-out.csv

Voice commands are a convenience, never a safety device: keep a physical stop within
reach for anything that can hurt someone (ovens, mixers, slicers), and follow local rules.
"""


def build_parser() -> argparse.ArgumentParser:
    """Build the argument parser with every subcommand registered."""
    parser = argparse.ArgumentParser(
        prog="wordspot",
        description="Train, run and measure a small-vocabulary spoken-command recognizer.",
        epilog=_EPILOG,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    parser.add_argument("--debug", action="store_true", help="show the full traceback on errors")
    parser.add_argument("--quiet", "-q", action="store_true", help="no progress bars or notes")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    for name in _COMMANDS:
        module = importlib.import_module(f"wordspot.cli.{name}_cmd")
        module.add_parser(sub)
    return parser


def _show_warning(message, category, filename, lineno, file=None, line=None):
    print(f"wordspot: warning: {message}", file=sys.stderr)


def main(argv: list[str] | None = None) -> int:
    """Run the command line; return the exit status."""
    parser = build_parser()
    args = parser.parse_args(argv)
    if args.command is None:
        parser.print_help()
        return 2
    if not args.debug:
        warnings.showwarning = _show_warning
    try:
        status = args.func(args)
    except WordspotError as exc:
        if args.debug:
            raise
        print(f"wordspot: error: {exc}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print("wordspot: interrupted", file=sys.stderr)
        return 130
    return int(status or 0)


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
