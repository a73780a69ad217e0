"""``wordspot demo``: the starter alone, adapted and trained from scratch, on every demo test set."""

from __future__ import annotations

import argparse
import json
import sys
from pathlib import Path

__all__ = ["add_parser"]

#: The demo's systems (``wordspot.demo.SYSTEMS``, not imported here so that the parser stays light).
SYSTEM_NAMES = ("starter", "starter-no-scorer", "adapted", "adapted-no-scorer", "scratch", "scratch-no-scorer")

_EPILOG = """\
The demo recordings are synthetic speech from text-to-speech voices, set in a bakery
where bakers call out commands to a recipe screen, the oven and the mixer. The test sets
use voices that training never heard. Your own recordings of your own voice are what you
should train on for real use (see README: "Quick tour: train on your own recordings").

examples:
  wordspot demo                              three systems side by side (about 6 minutes)
  wordspot demo --side-by-side               also each system without its sound scorer
                                             (the mixtures alone; 4 to 7 minutes more)
  wordspot demo --systems starter adapted    skip training from scratch
  wordspot demo --json                       the results as JSON keyed by system and set name
  wordspot demo --model wordspot-demo/bakery-adapted.model   evaluate a model made earlier

Voice commands are a convenience, never a safety device: keep a physical stop within
reach for ovens, mixers and anything else that can hurt someone, and follow local rules.
A misheard command can also start something: let nothing dangerous start or speed up on
voice alone.
"""

_SAFETY = ("Voice commands are a convenience, never a safety device: keep a physical stop within reach "
           "for the oven, the mixer and anything else that can hurt someone, and follow local rules. "
           "A misheard command can also start something: let nothing dangerous start or speed up on voice alone.")


def add_parser(sub, **options):
    p = sub.add_parser(
        "demo",
        **options,
        description="Build three models of the bakery commands (the shipped starter alone, the starter "
        "adapted on the demo's training recordings, and one trained from scratch), evaluate each on "
        "every demo test set (clean, noisy at 20/10/5 dB, phrases, new words) and print one table, then the "
        "test commands among recordings with no command (miss rate, false accepts, equal error rate) and the "
        "long recordings; the trade-offs of every system in one picture (report/det.png). With --side-by-side "
        "also the starter and the adapted model without their sound scorer (the mixtures alone).",
        epilog=_EPILOG,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    p.add_argument("--out", default="wordspot-demo", metavar="DIR",
                   help="folder for the model and the reports (default wordspot-demo)")
    p.add_argument("--model", metavar="MODEL", help="evaluate this model instead of training a new one")
    p.add_argument("--recordings", metavar="DIR", help="demo recordings folder (default: the checkout's recordings/)")
    p.add_argument("--jobs", "-j", type=int, default=2, metavar="N", help="processes for training and threads for recognition (default 2)")
    p.add_argument("--systems", nargs="+", default=None, choices=list(SYSTEM_NAMES), metavar="NAME",
                   help="which systems to build and compare: starter (the shipped starter alone), "
                   "adapted (starter adapted on the bakery recordings), scratch (trained from scratch, "
                   "about 2 minutes), starter-no-scorer, adapted-no-scorer and scratch-no-scorer (the same "
                   "without the sound scorer: the mixtures alone, each with its calibration fitted without it); "
                   "default starter, adapted and scratch, all six with --side-by-side")
    p.add_argument("--side-by-side", action="store_true",
                   help="add every system without its sound scorer (starter-no-scorer: its calibration fitted "
                   "again on the starter corpus's dev split, under a minute, kept in --out for the next run; "
                   "adapted-no-scorer: adapted again, 2-3 minutes; scratch-no-scorer: trained again, about 2 "
                   "minutes)")
    p.add_argument("--starter-dev", metavar="MANIFEST",
                   help="the starter corpus's dev manifest for starter-no-scorer (default: starter/dev.csv in "
                   "the recordings folder, made by `python recordings/starter.py build`)")
    p.add_argument("--json", action="store_true", help="print the results as JSON keyed by system and set name")
    p.set_defaults(func=_run)
    return p


def _run(args) -> int:
    from wordspot import api
    from wordspot.demo import DEFAULT_SYSTEMS, SYSTEMS, WITH_SCORER, find_recordings, render_table, run_demo

    folder = find_recordings(args.recordings)
    out_dir = Path(args.out)
    chatty = not (args.quiet or args.json)
    say = (lambda line: print(line, file=sys.stderr, flush=True)) if chatty else (lambda line: None)
    systems = tuple(args.systems) if args.systems else DEFAULT_SYSTEMS
    if args.side_by_side:
        systems = tuple(dict.fromkeys(systems + ("starter-no-scorer", "adapted-no-scorer", "scratch-no-scorer")))
    results, files, _, seconds = run_demo(folder, out_dir, model_path=args.model, systems=systems,
                                          jobs=args.jobs, quiet=not chatty, say=say,
                                          starter_dev=Path(args.starter_dev) if args.starter_dev else None)
    if args.json:
        print(json.dumps({name: {r.name: r.to_dict() for r in rows} for name, rows in results.items()}, indent=2))
        return 0
    print()
    if args.model is None:
        scored = [n for n in results if n in WITH_SCORER]
        alone = [n for n in results if n not in WITH_SCORER]
        print("word confidence with the sound scorer: " + (", ".join(scored) or "none") + "; the mixtures alone: "
              + (", ".join(alone) or "none") + " (the search uses the mixtures alone in every system)")
        print()
    print(render_table(results))
    print()
    width = max(len(n) for n in files)
    for name, path in files.items():
        what = SYSTEMS.get(name, "the given model")
        took = f", {seconds[name]:.0f} s" if seconds.get(name) else ""
        print(f"{name:{max(width, 8)}s} {path}  ({what}{took})")
    print(f"reports: {out_dir / 'report'}/<system>/<set>/ (index.html, errors.csv, words.csv, speakers.csv, confusions.png)")
    det = out_dir / "report" / "det.png"
    if det.is_file():
        print(f"trade-offs of every system on test+distractors (miss rate against false-accept rate): {det} "
              f"and {det.with_suffix('.csv')}")
    print()
    model_file = files.get("adapted") or next(iter(files.values()))
    print("try next:")
    print(f"  wordspot recognize --model {model_file} --times {folder / 'audio' / 'test-phrases'}/*/*.flac")
    print("  record your own takes, list them in a manifest (path,transcript,speaker) and run")
    print("  wordspot train my-takes/train.csv --lexicon lexicon/bakery.txt --out my.model")
    print('  (README: "Quick tour: train on your own recordings")')
    print()
    print(_SAFETY)
    return 0
