"""``wordspot demo``: train on the shipped bakery recordings and measure every test set."""

from __future__ import annotations

import argparse
import json
import sys
from pathlib import Path

__all__ = ["add_parser"]

_EPILOG = """\
The demo recordings are synthetic speech from text-to-speech voices, set in a bakery
where bakers call out commands to a recipe screen, the oven and the mixer. The test sets
use voices that training never heard. Your own recordings of your own voice are what you
should train on for real use (see README: "Train on your own recordings").

examples:
  wordspot demo                              train (a few minutes) and evaluate everything
  wordspot demo --json                       the results table as JSON keyed by set name
  wordspot demo --model wordspot-demo/bakery.model   evaluate a model trained earlier

Voice commands are a convenience, never a safety device: keep a physical stop within
reach for ovens, mixers and anything else that can hurt someone, and follow local rules.
"""

_SAFETY = ("Voice commands are a convenience, never a safety device: keep a physical stop within reach "
           "for the oven, the mixer and anything else that can hurt someone, and follow local rules.")


def add_parser(sub):
    p = sub.add_parser(
        "demo",
        help="train on the demo recordings and measure WER on every demo test set",
        description="Train a model on the shipped bakery demo recordings, evaluate it on every demo "
        "test set (clean, noisy at 20/10/5 dB, phrases, new words) and print one table.",
        epilog=_EPILOG,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    p.add_argument("--out", default="wordspot-demo", metavar="DIR",
                   help="folder for the model and the reports (default wordspot-demo)")
    p.add_argument("--model", metavar="MODEL", help="evaluate this model instead of training a new one")
    p.add_argument("--recordings", metavar="DIR", help="demo recordings folder (default: the checkout's recordings/)")
    p.add_argument("--jobs", "-j", type=int, default=2, metavar="N", help="processes for training and threads for recognition (default 2)")
    p.add_argument("--json", action="store_true", help="print the table as JSON keyed by set name")
    p.set_defaults(func=_run)
    return p


def _run(args) -> int:
    from wordspot.demo import find_recordings, render_table, run_demo

    folder = find_recordings(args.recordings)
    out_dir = Path(args.out)
    chatty = not (args.quiet or args.json)
    say = (lambda line: print(line, file=sys.stderr, flush=True)) if chatty else (lambda line: None)
    rows, model_file, _ = run_demo(folder, out_dir, model_path=args.model, jobs=args.jobs,
                                   quiet=not chatty, say=say)
    if args.json:
        print(json.dumps({r.name: r.to_dict() for r in rows}, indent=2))
        return 0
    print()
    print(render_table(rows))
    print()
    print(f"model:   {model_file}")
    print(f"reports: {out_dir / 'report'}/<set>/ (index.html, errors.csv, words.csv, speakers.csv, confusions.png)")
    print()
    print("try next:")
    print(f"  wordspot recognize --model {model_file} --times {folder / 'audio' / 'test-phrases'}/*/*.flac")
    print("  record your own takes, list them in a manifest (path,transcript,speaker) and run")
    print("  wordspot train my-takes/train.csv --lexicon lexicon/bakery.txt --out my.model")
    print()
    print(_SAFETY)
    return 0
