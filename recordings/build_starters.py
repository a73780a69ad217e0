#!/usr/bin/env python3
"""Rebuild wordspot's starter models from the starter corpus, with one command.

    python recordings/build_starters.py            # corpus (if missing) + both starters
    python recordings/build_starters.py --rates 16000 --jobs 2

Steps:

1. If ``recordings/starter/train.csv`` is missing, make the starter corpus with
   ``recordings/starter.py build`` (synthetic speech from Debian's text-to-speech engines;
   the demo's test voices and new words are left out on purpose, see recordings/README.md).
2. Train one model per rate from scratch on the corpus's train split, with the settings
   below. The dev split's voices (flite awb and two espeak-ng voices) stay out, so that
   the dev measures of the starter and of adaptation (docs/experiments/2026-12-02-starter-corpus.md,
   docs/experiments/2026-12-02-adaptation.md) stay fair; add
   ``--manifests recordings/starter/train.csv recordings/starter/dev.csv`` to use them too.
3. Record in each model file how it was made (corpus, voices, what was left out, date,
   this command) and write it into ``wordspot/starters/`` (atomically).
"""

from __future__ import annotations

import argparse
import csv
import datetime as dt
import subprocess
import sys
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
REPO = HERE.parent
CORPUS = HERE / "starter"
LEXICON = HERE / "starter-text" / "pronunciations.txt"
OUT = REPO / "wordspot" / "starters"

#: Final Gaussians per state and passes, chosen on the starter corpus's dev split.
MIXTURES = 16
FIRST_PASSES = 5
PASSES_PER_SPLIT = 3
NOISE_COPIES = 1
SPEED_FACTORS = (1.0,)
NAMES = {16000: "starter", 8000: "starter-8k"}


def _voices(manifest: Path) -> list[str]:
    with open(manifest, newline="", encoding="utf-8") as f:
        return sorted({row["speaker"] for row in csv.DictReader(f)})


def build_corpus(jobs: int) -> None:
    if (CORPUS / "train.csv").exists():
        return
    print("starter corpus missing: building it (recordings/starter.py build)", flush=True)
    subprocess.run([sys.executable, str(HERE / "starter.py"), "build", "--jobs", str(jobs)], check=True)


def train_one(rate: int, jobs: int, mixtures: int, quiet: bool, manifests: list[Path], out: Path | None) -> Path:
    import numpy as np

    from wordspot.audio.features import FeatureSettings
    from wordspot.corpus import read_manifest
    from wordspot.language.grammar import BigramCounts
    from wordspot.language.lexicon import read_lexicon
    from wordspot.model import save_model
    from wordspot.starters import starter_path
    from wordspot.training.trainer import TrainingConfig, train

    steps = [1]
    while steps[-1] * 2 <= mixtures:
        steps.append(steps[-1] * 2)
    config = TrainingConfig(mixtures=tuple(steps), first_passes=FIRST_PASSES, passes_per_split=PASSES_PER_SPLIT,
                            jobs=jobs, noise_copies=NOISE_COPIES, speed_factors=SPEED_FACTORS)
    t0 = time.monotonic()
    utterances = [u for m in manifests for u in read_manifest(m)]
    model, summary = train(utterances, read_lexicon(LEXICON),
                           settings=FeatureSettings(sample_rate=rate), config=config, manifest=manifests[0],
                           quiet=quiet, report=None if quiet else print)
    name = NAMES[rate]
    # No word-pair counts: the starter corpus's word order says nothing about anyone's
    # commands, and a dense table over its 3,300 words would take 87 MB. Recognising with
    # the starter's own vocabulary then uses a uniform prior; adaptation counts the user's.
    model.bigrams = BigramCounts((), np.zeros((1, 1), dtype=np.int64))
    model.info.update({
        "name": name,
        "method": "starter (trained from scratch on the starter corpus)",
        "made_from": {
            "corpus": "wordspot starter corpus: synthetic speech from Debian's espeak-ng, flite and "
                      "festival voices (recordings/starter.py)",
            "manifests": [str(m.relative_to(REPO)) if m.is_relative_to(REPO) else str(m) for m in manifests],
            "voices": sorted({v for m in manifests for v in _voices(m)}),
            "left_out": "the demo's test voices (source talkers rms and ked, espeak-ng accents "
                        "en-gb-scotland, en-029, en-gb-x-gbcwmd and variants f2, m4, f4) and the demo's "
                        "new words (dough, bread, proof, faster, slower)",
            "built": dt.date.today().isoformat(),
            "command": "python recordings/build_starters.py " + " ".join(sys.argv[1:]),
            "train_seconds": round(time.monotonic() - t0, 1),
        },
    })
    path = save_model(model, out / f"{name}.model" if out else starter_path(name))
    print(f"{name}: {summary.used} utterances, {summary.n_frames} frames, {mixtures} Gaussians a state, "
          f"{time.monotonic() - t0:.0f} s -> {path}", flush=True)
    return path


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0],
                                 formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--rates", type=int, nargs="+", default=[16000, 8000], choices=sorted(NAMES))
    ap.add_argument("--jobs", type=int, default=2)
    ap.add_argument("--mixtures", type=int, default=MIXTURES, help=f"Gaussians a state (default {MIXTURES})")
    ap.add_argument("--manifests", type=Path, nargs="+", default=[CORPUS / "train.csv"],
                    help="training manifests (default: the starter corpus's train split)")
    ap.add_argument("--out", type=Path, default=None,
                    help="write NAME.model files into this folder instead of wordspot/starters/ (dev runs)")
    ap.add_argument("--quiet", action="store_true")
    args = ap.parse_args(argv)
    if any(m.parent == CORPUS for m in args.manifests):
        build_corpus(args.jobs)
    (args.out or OUT).mkdir(parents=True, exist_ok=True)
    t0 = time.monotonic()
    for rate in args.rates:
        train_one(rate, args.jobs, args.mixtures, args.quiet, args.manifests, args.out)
    print(f"starters rebuilt in {time.monotonic() - t0:.0f} s")
    return 0


if __name__ == "__main__":
    sys.exit(main())
