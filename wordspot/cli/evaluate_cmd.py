"""``wordspot evaluate``: word error rate of a model on held-out recordings."""

from __future__ import annotations

import argparse
import json
import sys
from pathlib import Path

from wordspot.cli.recognize_cmd import add_decoder_options, add_warp_option, scorer_note, settings_from_args, warp_note

__all__ = ["add_parser"]

_EPILOG = """\
examples (a bakery: commands called out with dough on your hands):
  wordspot evaluate --model bakery.model held-out/takes.csv
  wordspot evaluate --model bakery.model held-out/quiet.csv held-out/mixer-running.csv --json
  wordspot evaluate --model bakery.model held-out/takes.csv --report bakery-report
      writes index.html (open it in a browser: every error with a player and a picture),
      errors.csv, words.csv, speakers.csv, summary.json and confusions.png
  wordspot evaluate --model bakery.model held-out/new-words.csv --lexicon bakery-plus.txt
  wordspot evaluate --model bakery.model held-out/takes.csv held-out/mixer-running.csv --min-confidence 0.8
      what dropping words below 0.8 confidence costs in misses and saves in false accepts

Each manifest is a CSV file with columns path,transcript,speaker. The WER interval is a
95% bootstrap interval over recordings (Bisani and Ney, 2004). A row with an empty
transcript is a recording with no command in it (the mixer running, chatter): every word
recognised there is a false accept, counted per hour of such audio. The miss rate is the
share of said words deleted or substituted. With both kinds of row, --report also draws
det.png (misses against false accepts as a confidence threshold moves) and writes det.csv. Files that cannot be read
count as recognising nothing and are listed; the exit status is then 1. The reliability
table compares each confidence bin's mean confidence with its share of right words (every
word heard counts, those below --min-confidence too).
"""


def add_parser(sub, **options):
    p = sub.add_parser(
        "evaluate",
        **options,
        description="Recognise every recording of one or more manifests and compare the words with "
        "their transcripts: words heard as another word, missed, or heard but not said, the word "
        "error rate (WER) with the range it likely lies in (95% interval), "
        "and tables by word and by speaker.",
        epilog=_EPILOG,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    p.add_argument("manifests", nargs="+", metavar="MANIFEST", help="CSV files: path,transcript,speaker")
    p.add_argument("--model", "-m", required=True, metavar="MODEL", help="model file made by `wordspot train`")
    p.add_argument("--json", action="store_true", help="print one JSON object per manifest instead of tables")
    p.add_argument("--report", metavar="DIR",
                   help="write the errors, tables and a confusion picture to this folder "
                   "(one subfolder per manifest when there are several)")
    p.add_argument("--copy-audio", action="store_true",
                   help="with --report: copy the recordings with errors into the report folder, so that "
                   "index.html plays them after the folder is moved")
    p.add_argument("--bootstrap", type=int, default=1000, metavar="N",
                   help="resampling draws for the likely range of the WER (bootstrap; default 1000)")
    add_decoder_options(p)
    add_warp_option(p)
    p.set_defaults(func=_run)
    return p


def _run(args) -> int:
    from wordspot.audio.band import narrow_band_note
    from wordspot.evaluation.run import evaluate_manifest
    from wordspot.language.lexicon import read_lexicon
    from wordspot.model import load_model
    from wordspot.evaluation.html_report import write_html_report
    from wordspot.evaluation.report import render_result, write_report

    settings = settings_from_args(args)
    model = load_model(args.model)
    for note in (scorer_note(model, settings), warp_note(model, settings)):
        if note:
            print(f"wordspot: note: {note}", file=sys.stderr)
    lexicon = read_lexicon(args.lexicon) if args.lexicon else None
    failed = 0
    names = [Path(m).stem for m in args.manifests]
    for manifest, name in zip(args.manifests, names):
        ev = evaluate_manifest(model, manifest, settings=settings, lexicon=lexicon, prior=args.prior,
                               jobs=args.jobs, n_bootstrap=args.bootstrap, name=name,
                               quiet=args.quiet)
        failed += len(ev.failed)
        for path, error in ev.failed:
            print(f"wordspot: error: {error}", file=sys.stderr)
        narrow = sum(1 for r in ev.recognitions if r.narrow_band)
        if narrow:
            print(f"wordspot: note: {name}: {narrow_band_note(narrow, len(ev.recognitions), model.features.sample_rate)}",
                  file=sys.stderr)
        if args.json:
            print(json.dumps(ev.to_dict(), ensure_ascii=False))
        else:
            print(render_result(ev.result, title=f"{name} ({manifest})"))
            print(f"recognition took {ev.seconds:.1f} s for {ev.audio_seconds:.1f} s of sound"
                  + (f", {1 / ev.real_time_factor:.0f} times faster than the sound lasts"
                     if ev.real_time_factor > 0 else "")
                  + f" (real-time factor {ev.real_time_factor:.4f})\n")
        if args.report:
            folder = Path(args.report)
            if len(args.manifests) > 1:
                folder = folder / name
            files = write_report(ev.result, folder)
            page = write_html_report(ev, folder, copy_audio=args.copy_audio, confusions=files.confusions)
            if not args.json and not args.quiet:
                print(f"report written to {folder}/ (open {page} in a browser)")
    if failed:
        print(f"wordspot: {failed} file(s) could not be processed; they count as recognising nothing",
              file=sys.stderr)
        return 1
    return 0
