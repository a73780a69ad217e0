"""Choosing how the live listener reports commands from a stretch still in progress, on dev material only.

A command followed at once by other talk keeps the speech detector's stretch open until
the talk stops. The live listener therefore recognises the stretch in progress every
``early_every`` seconds and reports the commands already followed by ``split_pause +
early_hold`` seconds without a command word. This script glues the demo's dev voices'
commands (flite-awb, espeak-en-gb-m3, espeak-en-gb-x-gbclan-f5 from train.csv) each
followed 0.05-0.3 s after its speech ends by a kitchen sentence of the starter corpus's dev voices
(dev.csv, kind "sentence"; never a demo test voice), over a -45 dBFS bed, and scans it
with the live detector and each setting: hits, false accepts, and each command's delay
(stream time at which it is reported minus its labelled end, 20 ms pushes).

    python tests/benchmarks/tune_live_early.py --corpus /work/data/starter-corpus
"""

from __future__ import annotations

import argparse
import csv
import sys
import time
from pathlib import Path

import numpy as np
import soundfile as sf

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from long_audio import DEV_VOICES, RATE, _Bed, demo_items  # noqa: E402
from wordspot.evaluation.time_labels import LabelledRecording, TimedCommand  # noqa: E402


def _material(corpus: Path, seed: int, n: int = 120):
    rng = np.random.default_rng(seed)
    commands = demo_items("train.csv", DEV_VOICES)
    commands = [commands[i] for i in rng.permutation(len(commands))[:n]]
    with open(corpus / "dev.csv", newline="", encoding="utf-8") as f:
        talk = [corpus / r["path"] for r in csv.DictReader(f) if r["kind"] == "sentence"]
    placed, labels, pos = [], [], RATE
    for path, words, s0, s1 in commands:
        x, rate = sf.read(path, dtype="float64")
        assert rate == RATE
        labels.append(TimedCommand(round(pos / RATE + s0, 3), round(pos / RATE + s1, 3), words))
        y, rate = sf.read(talk[int(rng.integers(len(talk)))], dtype="float64")
        assert rate == RATE
        talk_at = pos + int((s1 + rng.uniform(0.05, 0.3)) * RATE)  # over the command file's own tail
        placed += [(pos, x), (talk_at, y)]
        pos = max(pos + x.size, talk_at + y.size) + int(rng.uniform(0.6, 4.0) * RATE)
    wave = _Bed(rng, -45.0).take(pos)
    for at, x in placed:
        wave[at : at + x.size] += x
    return np.clip(wave, -1, 1).astype(np.float32), labels


def _delays(recognizer, wave, labels, settings):
    from wordspot.stream.live import LiveListener

    listener = LiveListener(recognizer, input_rate=RATE, settings=settings)
    out = []
    for i in range(0, wave.size, 320):
        out += [((i + 320) / RATE, c) for c in listener.push(wave[i : i + 320])]
    out += [(wave.size / RATE, c) for c in listener.finish()]
    delays = []
    for c in labels:
        match = [t for t, o in out if o.start < c.end and c.start < o.end]
        if match:
            delays.append(match[0] - c.end)
    return [c for _, c in out], np.array(delays)


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--corpus", default="/work/data/starter-corpus", help="the built starter corpus (its dev.csv)")
    ap.add_argument("--model", default="starter")
    ap.add_argument("--lexicon", default=str(Path(__file__).resolve().parents[2] / "lexicon" / "bakery.txt"))
    ap.add_argument("--seeds", type=int, nargs="+", default=[20261202, 7, 11])
    args = ap.parse_args()
    from wordspot.decoding.decoder import build_recognizer
    from wordspot.evaluation.timed import score_timed
    from wordspot.language.lexicon import read_lexicon
    from wordspot.model import load_model
    from wordspot.stream.live import ListenSettings

    recognizer = build_recognizer(load_model(args.model), lexicon=read_lexicon(args.lexicon))
    variants = {"off (whole stretches)": ListenSettings(early_every=0.0),
                "every 0.2 s, hold 0.1 s, span 0": ListenSettings(early_every=0.2, early_hold=0.1, early_span=0.0),
                "every 0.2 s, hold 0.1 s, span 3 s": ListenSettings(early_every=0.2, early_hold=0.1, early_span=3.0),
                "every 0.2 s, hold 0.1 s, span 12 s": ListenSettings(early_every=0.2, early_hold=0.1, early_span=12.0)}
    for seed in args.seeds:
        wave, labels = _material(Path(args.corpus), seed)
        print(f"seed {seed}: {len(labels)} commands each followed by talk, {wave.size / RATE / 60:.1f} min")
        rec = LabelledRecording(Path("talk.wav"), tuple(labels))
        for name, settings in variants.items():
            began = time.process_time()
            found, d = _delays(recognizer, wave, labels, settings)
            cpu = time.process_time() - began
            score = score_timed([rec], {str(rec.path): [TimedCommand(c.start, c.end, c.words) for c in found]},
                                {str(rec.path): wave.size / RATE})
            print(f"  {name:36} hits {score.hits:3d}  false accepts {score.false_accepts:3d}  delay median "
                  f"{np.median(d):.2f} s  p95 {np.percentile(d, 95):.2f} s  max {d.max():.2f} s  CPU {cpu:.0f} s",
                  flush=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
