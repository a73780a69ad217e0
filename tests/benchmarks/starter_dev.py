#!/usr/bin/env python3
"""Score starter-model candidates on dev material only (how the starter settings were chosen).

Two dev measures, neither touching the demo's test sets:

* ``starter-dev``: the starter corpus's dev split (voices held out of starter training),
  its single-word recordings recognised one word per file among every word the dev split
  says (a vocabulary of several hundred words);
* ``bakery-dev``: the demo's training voices marked ``dev_candidate`` saying the bakery
  commands, recognised with the bakery lexicon, one word per file and in the word loop.

    python tests/benchmarks/starter_dev.py MODEL [MODEL ...]

``--thresholds 0 0.05`` adds, for ``starter-dev``, the WER at those confidence thresholds
(each model's own calibration; the plain columns use the default settings). Caveat: the
starter's own calibration is fitted on the same dev split, so these are not unseen figures;
compare the models with each other.
"""

from __future__ import annotations

import argparse
import sys
import time
from dataclasses import replace
from pathlib import Path

HERE = Path(__file__).resolve().parent
REPO = HERE.parents[1]
sys.path.insert(0, str(HERE))

from compare_data import dev_voices  # noqa: E402


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("models", nargs="+")
    ap.add_argument("--jobs", type=int, default=2)
    ap.add_argument("--most", type=int, default=600, help="starter-dev files to score at the most (spread evenly)")
    ap.add_argument("--thresholds", type=float, nargs="*", default=[],
                    help="also the starter-dev WER at these confidence thresholds (e.g. 0 0.05)")
    args = ap.parse_args(argv)

    from wordspot.corpus import read_manifest
    from wordspot.decoding.decoder import DecoderSettings
    from wordspot.evaluation.run import evaluate_utterances
    from wordspot.language.lexicon import read_lexicon
    from wordspot.model import load_model

    starter_lex = read_lexicon(REPO / "recordings" / "starter-text" / "pronunciations.txt")
    dev = [u for u in read_manifest(REPO / "recordings" / "starter" / "dev.csv") if len(u.words) == 1]
    dev = dev[:: max(1, len(dev) // args.most)][: args.most]
    dev_lex = starter_lex.restricted_to(sorted({u.words[0] for u in dev}))
    bakery = read_lexicon(REPO / "lexicon" / "bakery.txt")
    held = set(dev_voices(REPO / "recordings" / "voices.csv"))
    bakery_dev = [u for u in read_manifest(REPO / "recordings" / "train.csv") if u.speaker in held]
    one, loop = DecoderSettings(single_word=True), DecoderSettings()
    print(f"starter-dev: {len(dev)} files, {len(dev_lex)} words; bakery-dev: {len(bakery_dev)} files "
          f"({', '.join(sorted(held))})")
    extra = "".join(f" starter-dev at {t:g} |" for t in args.thresholds)
    print(f"| model | starter-dev one word | bakery-dev one word | bakery-dev loop |{extra} scoring s |")
    print("| --- | ---: | ---: | ---: |" + " ---: |" * len(args.thresholds) + " ---: |")
    for path in args.models:
        model = load_model(path)
        t0 = time.monotonic()
        a = evaluate_utterances(model, dev, name="starter-dev", settings=one, lexicon=dev_lex, jobs=args.jobs,
                                quiet=True).result.wer
        b = evaluate_utterances(model, bakery_dev, name="bakery-dev", settings=one, lexicon=bakery,
                                jobs=args.jobs, quiet=True).result.wer
        c = evaluate_utterances(model, bakery_dev, name="bakery-dev", settings=loop, lexicon=bakery,
                                jobs=args.jobs, quiet=True).result.wer
        at = [evaluate_utterances(model, dev, name="starter-dev", settings=replace(one, min_confidence=t),
                                  lexicon=dev_lex, jobs=args.jobs, quiet=True).result.wer for t in args.thresholds]
        cells = "".join(f" {100 * w:.1f}% |" for w in at)
        print(f"| {path} | {100 * a:.1f}% | {100 * b:.1f}% | {100 * c:.1f}% |{cells} {time.monotonic() - t0:.0f} |",
              flush=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
