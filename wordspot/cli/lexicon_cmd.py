"""``wordspot lexicon``: check a lexicon file, or suggest pronunciation lines for new words."""

from __future__ import annotations

import argparse
import sys

from wordspot.errors import LexiconError
from wordspot.language.lexicon import (
    ARPABET_PHONES,
    check_word,
    format_entry,
    read_lexicon,
    suggest_pronunciations,
)

__all__ = ["add_parser"]

_EPILOG = """\
examples (a bakery: commands called out with dough on your hands):
  wordspot lexicon check lexicon/bakery.txt     count words and units, catch typos
  wordspot lexicon suggest knead proof          lines to paste into the lexicon:
                                                  knead  N IY D
                                                  proof  P R UW F

lexicon format: one pronunciation a line, the word then its phones, e.g. `oven  AH V AH N`;
`#` starts a comment; a second line for the same word is an alternative pronunciation.
"""


def add_parser(sub, **options):
    p = sub.add_parser(
        "lexicon",
        **options,
        description="Check a pronunciation lexicon, or suggest lines for new words from the open "
        "CMU pronouncing dictionary.",
        epilog=_EPILOG,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    actions = p.add_subparsers(dest="lexicon_action", metavar="ACTION")
    parents = options.get("parents", [])  # the global options work after the action too

    check = actions.add_parser(
        "check",
        parents=parents,
        help="summarise a lexicon file and report errors with their line numbers",
        description="Read a lexicon file and print how many words, pronunciations and phones it "
        "uses, and which of the 39 phones it never uses.",
        epilog="example:\n  wordspot lexicon check lexicon/bakery.txt",
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    check.add_argument("file", metavar="FILE", help="the lexicon text file")
    check.add_argument(
        "--any-units",
        action="store_true",
        help="accept units outside the 39 ARPAbet phones (only for custom unit sets)",
    )
    check.set_defaults(func=_run_check)

    suggest = actions.add_parser(
        "suggest",
        parents=parents,
        help="print lexicon lines for words from the CMU pronouncing dictionary",
        description="Print one lexicon line per pronunciation found in the open CMU pronouncing "
        "dictionary (stress marks removed), ready to paste into your lexicon.",
        epilog="example:\n  wordspot lexicon suggest knead proof >> my-lexicon.txt",
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    suggest.add_argument("words", metavar="WORD", nargs="+", help="words to look up")
    suggest.set_defaults(func=_run_suggest)

    p.set_defaults(func=lambda args: _no_action(p))
    return p


def _no_action(parser: argparse.ArgumentParser) -> int:
    parser.print_help(sys.stderr)
    return 2


def _run_check(args) -> int:
    inventory = None if args.any_units else ARPABET_PHONES
    lex = read_lexicon(args.file, inventory=inventory)
    if len(lex) == 0:
        raise LexiconError(f"{args.file}: holds no pronunciations; add lines like `knead  N IY D`")
    used = lex.units_used()
    unused = [u for u in ARPABET_PHONES if u not in used]
    extra = sorted(used - set(ARPABET_PHONES))
    phones_used = len(used) - len(extra)
    print(f"{args.file}: {len(lex)} words, {lex.n_pronunciations} pronunciations, "
          f"{phones_used} of {len(ARPABET_PHONES)} phones used")
    print(f"sounds used ({len(used)}): {' '.join(sorted(used))}")
    if extra:
        print(f"sounds that are not among the 39 ARPAbet phones ({len(extra)}): {' '.join(extra)}")
    print(f"phones never used ({len(unused)}): {' '.join(unused) if unused else '(none)'}")
    return 0


def _run_suggest(args) -> int:
    missing: list[str] = []
    lines: list[str] = []
    words: list[str] = []
    for word in args.words:
        try:
            words.append(check_word(word))
        except LexiconError as exc:
            print(f"wordspot: {exc}", file=sys.stderr)
            missing.append(word)
    found = suggest_pronunciations(words)
    width = max((len(w) for w in words if found.get(w)), default=0)
    for word in words:
        prons = found.get(word, [])
        if not prons:
            missing.append(word)
            print(
                f"wordspot: {word!r} is not in the CMU pronouncing dictionary; write its line by hand: "
                f"`{word}` then its phones, chosen from {' '.join(ARPABET_PHONES)} "
                f"(tip: suggest a word that sounds alike and adapt its phones)",
                file=sys.stderr,
            )
            continue
        lines.extend(format_entry(word, pron, width=width) for pron in prons)
    for line in lines:
        print(line)
    return 1 if missing else 0
