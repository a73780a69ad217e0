"""Choosing the speech detector's settings for ``wordspot scan`` on dev material only.

The dev voices of the demo's training set (flite-awb, espeak-en-gb-m3,
espeak-en-gb-x-gbclan-f5: never the test voices) are glued into long recordings over a
noise bed at three levels (tests/long_audio.py), with clatter bursts in the gaps. Stage 1
runs the detector alone over a grid and counts, per setting, the labelled commands whose
speech lies wholly inside one stretch ("whole"), those cut across stretches or missed, and
the stretches with no command. Stage 2 scans with a model adapted without the dev voices
(``--model``; make it with ``wordspot train`` on train.csv minus the dev voices) for the
best few settings and scores hits, false accepts per hour and boundary errors.

    python tests/benchmarks/tune_detector.py --model /tmp/bakery-nodev.model
"""

from __future__ import annotations

import argparse
import itertools
import sys
import tempfile
import time
from dataclasses import replace
from pathlib import Path

import numpy as np
import soundfile as sf

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from long_audio import DEV_VOICES, demo_items, glue  # noqa: E402
from wordspot.stream.detector import DetectorSettings, find_stretches  # noqa: E402

CONDITIONS = {"bed -60 dBFS": -60.0, "bed -45 dBFS": -45.0, "bed -38 dBFS": -38.0}


def _material(folder: Path, seed: int):
    rng = np.random.default_rng(seed)
    items = demo_items("train.csv", DEV_VOICES)
    out = {}
    for name, level in CONDITIONS.items():
        order = [items[i] for i in rng.permutation(len(items))[:120]]
        path = folder / f"dev{int(-level)}.wav"
        out[name] = glue(path, order, rng, gap=(0.6, 8.0), noise_dbfs=level, clatter=4.0)
    return out


def _detector_counts(rec, wave, settings):
    stretches = find_stretches(wave, 16000, settings)
    spans = [(s.start / 16000, s.end / 16000) for s in stretches]
    whole = sum(any(a <= c.start and c.end <= b for a, b in spans) for c in rec.commands)
    empty = sum(not any(c.start < b and a < c.end for c in rec.commands) for a, b in spans)
    return whole, len(rec.commands) - whole, empty, len(spans)


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--model", help="model adapted without the dev voices (stage 2 is skipped without it)")
    ap.add_argument("--top", type=int, default=4, help="settings taken to stage 2")
    ap.add_argument("--seed", type=int, default=20261202)
    args = ap.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        material = _material(Path(tmp), args.seed)
        waves = {name: sf.read(rec.path, dtype="float32")[0] for name, rec in material.items()}
        minutes = sum(w.size for w in waves.values()) / 16000 / 60
        print(f"dev material: {sum(len(r.commands) for r in material.values())} commands, {minutes:.1f} min")
        grid = itertools.product((6.0, 8.0, 10.0, 12.0, 15.0), (3.0, 5.0), (0.2, 0.4, 0.6), (0.1, 0.2))
        rows = []
        for onset, offset, hangover, min_speech in grid:
            if offset > onset:
                continue
            s = DetectorSettings(onset_db=onset, offset_db=offset, hangover=hangover, min_speech=min_speech)
            counts = [_detector_counts(material[n], waves[n], s) for n in CONDITIONS]
            rows.append((s, counts))
        print("\nstage 1: onset offset hangover min_speech | per condition: cut-or-missed / empty stretches / stretches")
        rows.sort(key=lambda r: (sum(c[1] for c in r[1]), sum(c[2] for c in r[1])))
        for s, counts in rows:
            cells = "  ".join(f"{c[1]:3d}/{c[2]:3d}/{c[3]:3d}" for c in counts)
            print(f"  {s.onset_db:4.0f} {s.offset_db:4.0f} {s.hangover:4.1f} {s.min_speech:4.1f} | {cells}")
        if not args.model:
            return 0
        from wordspot.decoding.decoder import build_recognizer
        from wordspot.evaluation.scan_run import evaluate_scan
        from wordspot.evaluation.timed import format_timed_score
        from wordspot.model import load_model
        from wordspot.stream.scan import ScanSettings

        recognizer = build_recognizer(load_model(args.model))
        candidates = [s for s, _ in rows[: args.top]]
        if DetectorSettings() not in candidates:
            candidates.append(DetectorSettings())
        print("\nstage 2 (with the model):")
        for s in candidates:
            for padding in (0.15, 0.25, 0.35):
                settings = ScanSettings(detector=replace(s, padding=padding))
                began = time.perf_counter()
                ev = evaluate_scan(recognizer, list(material.values()), settings=settings)
                print(f"- onset {s.onset_db:g} offset {s.offset_db:g} hangover {s.hangover:g} min_speech "
                      f"{s.min_speech:g} padding {padding:g} ({time.perf_counter() - began:.0f} s)")
                print("  " + format_timed_score(ev.score).replace("\n", "\n  "))
    return 0


if __name__ == "__main__":
    sys.exit(main())
