"""Choosing the live (causal) detector's hangover and padding on dev material only.

The same dev material as ``tune_detector.py`` (the demo's dev voices flite-awb,
espeak-en-gb-m3 and espeak-en-gb-x-gbclan-f5 from train.csv, never a test voice, glued over
noise beds at -60, -45 and -38 dBFS with clatter), fed to the detector 10 ms at a time as
live audio arrives. Stage 1, the detector alone, per setting: commands cut across
stretches or missed, stretches with no command, and the detector's delay: the stream time
at which the stretch holding a command is complete minus the command's labelled end
(median and 95th percentile; recognition time comes on top and is measured by
``listen_bench.py``). Stage 2 scans with a model (``--model``, default the shipped
starter, whose corpus holds no demo voice) and scores hits, false accepts per hour and
boundaries for the same settings; ``wordspot scan`` with the same detector settings gives
the same commands as ``wordspot listen`` (tests/cli/test_cli_listen.py checks it).

    python tests/benchmarks/tune_live_detector.py [--model M] [--lexicon lexicon/bakery.txt]
"""

from __future__ import annotations

import argparse
import sys
import tempfile
import time
from dataclasses import replace
from pathlib import Path

import numpy as np
import soundfile as sf

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
sys.path.insert(0, str(Path(__file__).resolve().parent))

from tune_detector import CONDITIONS, _material  # noqa: E402
from wordspot.stream.detector import DetectorSettings, SpeechDetector  # noqa: E402

RATE = 16000
STEP = 160  # 10 ms pushes, as live audio arrives


def _live_counts(rec, wave, settings):
    """Cut-or-missed, empty stretches, stretches, and each whole command's delay (s)."""
    d = SpeechDetector(RATE, settings)
    done = []  # (start s, end s, stream time when complete)
    for i in range(0, wave.size, STEP):
        for st in d.push(wave[i : i + STEP]):
            done.append((st.start / RATE, st.end / RATE, min(i + STEP, wave.size) / RATE))
    for st in d.finish():
        done.append((st.start / RATE, st.end / RATE, wave.size / RATE))
    delays = []
    for c in rec.commands:
        inside = [t for a, b, t in done if a <= c.start and c.end <= b]
        if inside:
            delays.append(inside[0] - c.end)
    empty = sum(not any(c.start < b and a < c.end for c in rec.commands) for a, b, _ in done)
    return len(rec.commands) - len(delays), empty, len(done), delays


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--model", default="starter", help="model for stage 2 (default: the shipped starter)")
    ap.add_argument("--lexicon", help="vocabulary for stage 2 (default: the model's)")
    ap.add_argument("--no-model", action="store_true", help="stage 1 only")
    ap.add_argument("--seed", type=int, default=20261202)
    args = ap.parse_args()
    base = DetectorSettings(floor_ahead=0.0)
    grid = [replace(base, hangover=h, padding=p) for h in (0.2, 0.3, 0.4, 0.6) for p in (0.15, 0.25)]
    with tempfile.TemporaryDirectory() as tmp:
        material = _material(Path(tmp), args.seed)
        waves = {name: sf.read(rec.path, dtype="float32")[0] for name, rec in material.items()}
        minutes = sum(w.size for w in waves.values()) / RATE / 60
        print(f"dev material: {sum(len(r.commands) for r in material.values())} commands, {minutes:.1f} min")
        print("\nstage 1 (detector alone, 10 ms pushes): hangover padding | per condition: cut-or-missed / empty / "
              "stretches | detector delay median, p95 (s)")
        for s in [DetectorSettings()] + grid:
            counts = [_live_counts(material[n], waves[n], s) for n in CONDITIONS]
            delays = np.concatenate([c[3] for c in counts])
            cells = "  ".join(f"{c[0]:3d}/{c[1]:3d}/{c[2]:3d}" for c in counts)
            label = "file default (ahead 1 s)" if s == DetectorSettings() else f"{s.hangover:4.2f} {s.padding:4.2f}"
            print(f"  {label:>24} | {cells} | {np.median(delays):.2f} {np.percentile(delays, 95):.2f}")
        if args.no_model:
            return 0
        from wordspot.decoding.decoder import build_recognizer
        from wordspot.evaluation.scan_run import evaluate_scan
        from wordspot.evaluation.timed import format_timed_score
        from wordspot.language.lexicon import read_lexicon
        from wordspot.model import load_model
        from wordspot.stream.scan import ScanSettings

        lexicon = read_lexicon(args.lexicon) if args.lexicon else None
        recognizer = build_recognizer(load_model(args.model), lexicon=lexicon)
        print(f"\nstage 2 (model {args.model}):")
        for s in [DetectorSettings()] + grid:
            began = time.process_time()
            ev = evaluate_scan(recognizer, list(material.values()), settings=ScanSettings(detector=s))
            print(f"- floor_ahead {s.floor_ahead:g} hangover {s.hangover:g} padding {s.padding:g} "
                  f"({time.process_time() - began:.0f} CPU s)")
            print("  " + format_timed_score(ev.score).replace("\n", "\n  "))
    return 0


if __name__ == "__main__":
    sys.exit(main())
