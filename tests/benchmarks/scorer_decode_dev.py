#!/usr/bin/env python3
"""The starter with its state scorer mixed in, on dev material only, with no threshold.

A starter model (not adapted) recognises, with the bakery lexicon in the word loop and the
default filler, three dev sets of ``tune_filler.py``: the demo training recordings of the
dev voices (one command each: command WER), the starter corpus's dev voices saying words
and sentences with no bakery word ("other talk") and 60 noise-only clips of the training
recipes (every word heard in these two is a false accept: share of files with a command,
at threshold 0). Each scorer weight ``w`` and scale ``s`` (``DecoderSettings.scorer_weight``,
``scorer_scale``) gets one row.

    python tests/benchmarks/scorer_decode_dev.py --model starter --weights 0 0.5 1 --scales 0.3 0.6 1
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
REPO = HERE.parents[1]
sys.path.insert(0, str(HERE))

from compare_data import dev_voices  # noqa: E402
from tune_filler import _rows, noise_only  # noqa: E402


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--model", default="starter")
    ap.add_argument("--weights", type=float, nargs="+", default=[0.0, 0.5, 1.0])
    ap.add_argument("--scales", type=float, nargs="+", default=[0.3, 0.6, 1.0])
    ap.add_argument("--filler-penalties", type=float, nargs="+", default=[-100.0],
                    help="filler phone penalties to try with the scorer (log units)")
    ap.add_argument("--insertion-penalties", type=float, nargs="+", default=[-60.0])
    ap.add_argument("--most-talk", type=int, default=0, help="other-talk files at most (0: all)")
    args = ap.parse_args(argv)

    from wordspot.audio.features import compute_features
    from wordspot.audio.reading import load_audio
    from wordspot.decoding.decoder import DecoderSettings, build_recognizer
    from wordspot.evaluation.scoring import align_words
    from wordspot.language.lexicon import read_lexicon
    from wordspot.model import load_model

    model = load_model(args.model)
    rate = model.features.sample_rate
    rec = REPO / "recordings"
    bakery = read_lexicon(REPO / "lexicon" / "bakery.txt")
    held = set(dev_voices(rec / "voices.csv"))
    words = [(load_audio(rec / r["path"], sample_rate=rate), r["transcript"].split())
             for r in _rows(rec / "train.csv") if r["speaker"] in held]
    vocab = set(bakery.words) | {r["transcript"] for r in _rows(rec / "new-words.csv")}
    talk_rows = [r for r in _rows(rec / "starter" / "dev.csv") if not (set(r["transcript"].split()) & vocab)]
    if args.most_talk:
        talk_rows = talk_rows[:: max(1, len(talk_rows) // args.most_talk)][: args.most_talk]
    talk = [(load_audio(rec / "starter" / r["path"], sample_rate=rate), []) for r in talk_rows]
    noise = noise_only([(load_audio(rec / "starter" / r["path"], sample_rate=16000), [])
                        for r in talk_rows[:96]], np.random.default_rng(20261203))
    if rate != 16000:
        import soxr

        noise = [(soxr.resample(w, 16000, rate).astype(np.float32), ref) for w, ref in noise]
    sets = {"words": words, "other talk": talk, "noise only": noise}
    feats = {name: [(compute_features(w, model.features), ref) for w, ref in items] for name, items in sets.items()}
    print(f"{args.model}: dev commands {len(words)} files, other talk {len(talk)}, noise only {len(noise)}; "
          f"scorer {'none' if model.scorer is None else model.info.get('scorer', {}).get('hidden')}")
    print("| scorer weight | scale | filler penalty | insertion penalty | dev command WER "
          "| other talk: files with a command | noise only: files with a command | s |")
    print("| ---: | ---: | ---: | ---: | ---: | ---: | ---: | ---: |")
    grid = [(w, s, f, i) for w in args.weights for s in (args.scales if w > 0 else args.scales[:1])
            for f in args.filler_penalties for i in args.insertion_penalties]
    for w, s, fp, ip in grid:
        t0 = time.monotonic()
        settings = DecoderSettings(min_confidence=0.0, scorer_weight=w, scorer_scale=s,
                                   filler_penalty=fp, insertion_penalty=ip)
        recog = build_recognizer(model, settings=settings, lexicon=bakery)
        row = []
        for name, items in feats.items():
            errors = n_words = with_command = 0
            for x, ref in items:
                hyp = [seg.word for seg in recog.decode(x).segments]
                a = align_words(ref, hyp)
                errors += a.substitutions + a.deletions + a.insertions
                n_words += len(ref)
                with_command += bool(hyp)
            row.append(f"{100 * errors / n_words:.1f}%" if name == "words"
                       else f"{100 * with_command / len(items):.1f}% ({with_command} of {len(items)})")
        print(f"| {w:g} | {s if w > 0 else '-'} | {fp:g} | {ip:g} | " + " | ".join(row) + f" | {time.monotonic() - t0:.0f} |",
              flush=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
