#!/usr/bin/env python3
"""Commands joined by pauses of other backgrounds: do the pauses stay pauses?

Joins 2-4 single-word demo test recordings of one voice with gaps of 0.3-1 s filled with
one background (white noise, pink noise, mains hum with harmonics, or digital silence
with faint dither) at -70 to -40 dBFS, and counts the files whose recognised words are
exactly the joined words (word loop). Seeded; nothing is written to the repository.

    python tests/benchmarks/joined_pauses.py MODEL [MODEL ...] [--files 100]
"""

from __future__ import annotations

import argparse
import csv
import sys
import tempfile
from collections import defaultdict
from pathlib import Path

import numpy as np

from wordspot.audio.augment import background

HERE = Path(__file__).resolve().parent
REPO = HERE.parents[1]
RATE = 16000
KINDS = ("white", "pink", "hum", "dither")


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("models", nargs="+")
    ap.add_argument("--files", type=int, default=100)
    ap.add_argument("--jobs", type=int, default=2)
    args = ap.parse_args(argv)

    import soundfile as sf

    from wordspot.audio.reading import load_audio
    from wordspot.corpus import Utterance
    from wordspot.evaluation.run import evaluate_utterances
    from wordspot.model import load_model

    rng = np.random.default_rng(20261202)
    rows = list(csv.DictReader(open(REPO / "recordings" / "test.csv", newline="", encoding="utf-8")))
    by_voice = defaultdict(list)
    for r in rows:
        by_voice[r["speaker"]].append(r)
    voices = sorted(by_voice)
    with tempfile.TemporaryDirectory(prefix="wordspot-joined-") as tmp:
        utts, kinds = [], []
        for i in range(args.files):
            voice = voices[i % len(voices)]
            picks = [by_voice[voice][k] for k in rng.choice(len(by_voice[voice]), size=rng.integers(2, 5),
                                                             replace=False)]
            kind = KINDS[i % len(KINDS)]
            level = rng.uniform(-70, -40)
            parts = [background(kind, int(0.3 * RATE), level, rng)]
            for j, r in enumerate(picks):
                parts.append(load_audio(REPO / "recordings" / r["path"], sample_rate=RATE))
                gap = int(rng.uniform(0.3, 1.0) * RATE)
                parts.append(background(kind, gap if j < len(picks) - 1 else int(0.3 * RATE), level, rng))
            path = Path(tmp) / f"joined-{i:03d}.wav"
            sf.write(path, np.concatenate(parts).astype(np.float32), RATE)
            utts.append(Utterance(path, tuple(r["transcript"] for r in picks), voice, i + 2))
            kinds.append(kind)
        print(f"{len(utts)} joined files, {sum(len(u.words) for u in utts)} words; one voice a file; "
              f"backgrounds {', '.join(KINDS)} at -70 to -40 dBFS")
        print("| model | files exactly right | " + " | ".join(KINDS) + " | WER |")
        print("| --- | ---: |" + " ---: |" * (len(KINDS) + 1))
        for m in args.models:
            ev = evaluate_utterances(load_model(m), utts, jobs=args.jobs, quiet=True)
            right = [tuple(r.words) == u.words for r, u in zip(ev.recognitions, utts)]
            per = [np.mean([ok for ok, k in zip(right, kinds) if k == kind]) for kind in KINDS]
            print(f"| {m} | {100 * np.mean(right):.0f}% | " + " | ".join(f"{100 * p:.0f}%" for p in per)
                  + f" | {100 * ev.result.wer:.1f}% |", flush=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
