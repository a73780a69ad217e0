"""The ``wordspot`` command line.

Each subcommand lives in its own module in this package and exposes
``add_parser(subparsers, **options)``, which registers the subcommand (``options``, the
one-line help and the parent parser of the global options, go on to
``subparsers.add_parser``) and sets ``func`` (a callable taking the parsed arguments and
returning an exit status). Only the chosen
subcommand's module is imported, so ``wordspot recognize`` never loads the training stack
and ``wordspot --help`` loads none. No maths lives here.
"""

from __future__ import annotations

import argparse
import importlib
import sys
import warnings

from wordspot.errors import WordspotError

__all__ = ["main", "build_parser", "chosen_command"]

# Subcommands (module ``wordspot.cli.<name>_cmd``) and their one-line help, in the order
# ``wordspot --help`` lists them.
_COMMANDS = {
    "demo": "compare the starter, adapted and from-scratch models on every demo test set",
    "record": "record takes of every word in the browser, then train and try the model",
    "train": "train an acoustic model from recordings and their transcripts",
    "recognize": "recognise the words spoken in audio files",
    "scan": "find the commands said in long recordings, with their times",
    "listen": "print each command as it is said in live audio from a recorder's pipe",
    "evaluate": "measure word error rate on held-out recordings",
    "lexicon": "check a lexicon file or suggest pronunciations for new words",
}
# Options without a value that may stand before or after the subcommand.
_GLOBAL_FLAGS = ("--debug", "--quiet", "-q")

_EPILOG = """\
examples (a bakery: bakers with dough on their hands call out commands):
  wordspot demo                                   starter, adapted and from-scratch models on the demo sets
  wordspot record my-takes/ --takes 3             record takes in the browser, train, try
  wordspot lexicon suggest proof knead            pronunciations for two new command words
  wordspot train my-takes/train.csv --lexicon bakery.txt --out bakery.model
  wordspot recognize --model bakery.model oven-start.wav
  wordspot scan --model bakery.model morning.flac  commands in a long recording, with times
  arecord -q -f S16_LE -r 16000 -c 1 -t raw | wordspot listen --model bakery.model --rate 16000 -
  wordspot evaluate --model bakery.model my-takes/held-out.csv

Voice commands are a convenience, never a safety device: keep a physical stop within
reach for anything that can hurt someone (ovens, mixers, slicers), and follow local rules.
A misheard command can also start something: let nothing dangerous start on voice alone.
"""


def _global_options(parser: argparse.ArgumentParser, default) -> None:
    parser.add_argument("--debug", action="store_true", default=default, help="show the full traceback on errors")
    parser.add_argument("--quiet", "-q", action="store_true", default=default, help="no progress bars or notes")


def chosen_command(argv: list[str]) -> str | None:
    """The subcommand named in ``argv`` (the first word that is not a global option)."""
    for word in argv:
        if word not in _GLOBAL_FLAGS:
            return word if word in _COMMANDS else None
    return None


def build_parser(command: str | None = None) -> argparse.ArgumentParser:
    """Build the argument parser; only ``command`` (if given) gets its full options.

    The other subcommands are listed with their one-line help, without importing their
    modules. The global options are accepted before and after the subcommand.
    """
    parser = argparse.ArgumentParser(
        prog="wordspot",
        description="Train, run and measure a small-vocabulary spoken-command recognizer.",
        epilog=_EPILOG,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    _global_options(parser, default=False)
    # After the subcommand: a flag given there is set, one left out keeps the value from
    # before the subcommand (SUPPRESS leaves it alone).
    after = argparse.ArgumentParser(add_help=False)
    _global_options(after, default=argparse.SUPPRESS)
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    for name, summary in _COMMANDS.items():
        if name == command:
            module = importlib.import_module(f"wordspot.cli.{name}_cmd")
            module.add_parser(sub, help=summary, parents=[after])
        else:
            sub.add_parser(name, help=summary, add_help=False)
    return parser


def _show_warning(message, category, filename, lineno, file=None, line=None):
    print(f"wordspot: warning: {message}", file=sys.stderr)


def main(argv: list[str] | None = None) -> int:
    """Run the command line; return the exit status."""
    argv = sys.argv[1:] if argv is None else list(argv)
    parser = build_parser(chosen_command(argv))
    args = parser.parse_args(argv)
    if args.command is None:
        parser.print_help()
        return 2
    if not args.debug:
        warnings.showwarning = _show_warning
    from wordspot.util.threads import one_blas_thread  # after parsing: --help loads nothing more

    try:
        with one_blas_thread():
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
