#!/usr/bin/env python3
"""Telephone-band audio: the 8 kHz starter adapted on 8 kHz copies, against the 16 kHz system.

Makes telephone-band copies of the demo's training and clean test recordings (resampled
to 8 kHz with soxr, whose anti-aliasing filter removes everything above 4 kHz), adapts
``starter-8k`` on the training copies and ``starter`` on the originals, and prints the
WER of each on its own kind of test audio, one word per file and in the word loop.
Also shows what the wideband model does with the telephone-band test copies.

    python tests/benchmarks/telephone_band.py [--keep DIR]
"""

from __future__ import annotations

import argparse
import csv
import sys
import tempfile
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
REPO = HERE.parents[1]


def narrow_copies(manifest: Path, out: Path) -> Path:
    """8 kHz FLAC copies of every file of ``manifest`` under ``out``, with a manifest beside them."""
    import soundfile as sf
    import soxr

    rows = list(csv.DictReader(open(manifest, newline="", encoding="utf-8")))
    out.mkdir(parents=True, exist_ok=True)
    for r in rows:
        src = manifest.parent / r["path"]
        dst = out / r["path"]
        if not dst.exists():
            x, rate = sf.read(src, dtype="float32", always_2d=True)
            dst.parent.mkdir(parents=True, exist_ok=True)
            sf.write(dst, soxr.resample(x[:, 0], rate, 8000), 8000, subtype="PCM_16")
    copy = out / manifest.name
    with open(copy, "w", newline="", encoding="utf-8") as f:
        w = csv.DictWriter(f, fieldnames=list(rows[0]))
        w.writeheader()
        w.writerows(rows)
    return copy


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--keep", type=Path, help="folder for the 8 kHz copies (default: a temporary one)")
    ap.add_argument("--jobs", type=int, default=2)
    args = ap.parse_args(argv)

    from wordspot.corpus import read_manifest
    from wordspot.decoding.decoder import DecoderSettings
    from wordspot.evaluation.run import evaluate_utterances
    from wordspot.language.lexicon import read_lexicon
    from wordspot.model import load_model
    from wordspot.training.adapt import AdaptationConfig, adapt

    rec = REPO / "recordings"
    lexicon = read_lexicon(REPO / "lexicon" / "bakery.txt")
    with tempfile.TemporaryDirectory(prefix="wordspot-8k-") as tmp:
        folder = args.keep or Path(tmp)
        t0 = time.monotonic()
        train8, test8 = (narrow_copies(rec / m, folder) for m in ("train.csv", "test.csv"))
        print(f"8 kHz copies in {folder} ({time.monotonic() - t0:.0f} s)", flush=True)
        cfg = AdaptationConfig(jobs=args.jobs)
        systems = {}
        for name, start, train, test in (("16 kHz", "starter", rec / "train.csv", rec / "test.csv"),
                                         ("8 kHz", "starter-8k", train8, test8)):
            t1 = time.monotonic()
            model, _ = adapt(read_manifest(train), lexicon, load_model(start), config=cfg)
            systems[name] = (model, test, time.monotonic() - t1)
        print("| system | test audio | one word WER | word loop WER | adaptation s |")
        print("| --- | --- | ---: | ---: | ---: |")
        runs = [("16 kHz", rec / "test.csv", "wideband"), ("8 kHz", test8, "telephone band"),
                ("16 kHz", test8, "telephone band")]
        for name, test, kind in runs:
            model, _, secs = systems[name]
            utts = read_manifest(test)
            wers = []
            for s in (DecoderSettings(single_word=True), DecoderSettings()):
                ev = evaluate_utterances(model, utts, settings=s, jobs=args.jobs, quiet=True)
                wers.append(ev.result.wer)
                narrow = sum(r.narrow_band for r in ev.recognitions)
            print(f"| {name} adapted | {kind} ({narrow} of {len(utts)} files named narrowband) | "
                  f"{100 * wers[0]:.1f}% | {100 * wers[1]:.1f}% | {secs:.1f} |", flush=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
