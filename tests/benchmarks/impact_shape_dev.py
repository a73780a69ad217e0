#!/usr/bin/env python3
"""Do the energy envelope's shape and level tell impacts from commands? A dev look.

Not a test (pytest does not collect it). The features are mean- and variance-normalised
per clip, so a knock in a quiet clip looks as strong as a syllable. This script asks
whether measures the normalisation hides would separate the words heard in impact clips
from right command words, in clean and noisy conditions, before any is built into the
decoder. From the waveform, with 25 ms frames every 10 ms (the features' frames), the
frame energy ``e`` in dB; for a recognised word (its first to last frame):

- ``level``: the word's mean ``e`` above the clip's floor (10th percentile of ``e``);
- ``peak``: the word's highest ``e`` above its median ``e`` (how peaky it is);
- ``onset``: the steepest rise of ``e`` over 20 ms from 30 ms before the word to its end;
- ``top3``: the share of the word's energy in its three loudest frames.

It reads what ``threshold_dev.py --variants ... --save DIR`` kept (each seed's model,
recognitions with word frames, calibration examples), fits the calibration of the
variant named (default: today's), rebuilds the same dev sets (``tune_filler.dev_sets``
with the no-command sets) and prints, per measure: the medians of right command words
kept at the default threshold (clean, 20 dB, 10 dB) and of words kept in each
no-command set; the ROC area of commands against words in impact clips (both kinds); and
the no-command files still given a command if words are also required to pass the cut
that keeps 99% of the right command words kept at the threshold (clean and noisy).

    OPENBLAS_NUM_THREADS=1 python tests/benchmarks/impact_shape_dev.py --load /tmp/ic/R2 --seeds 0 1 2

Record: docs/experiments/2026-12-03-impacts-no-command.md.
"""

from __future__ import annotations

import argparse
import pickle
import sys
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))

from threshold_dev import VARIANTS  # noqa: E402
from tune_filler import NO_COMMAND, dev_sets  # noqa: E402

__all__ = ["SHAPES", "frame_energy_db", "word_shape", "main"]

#: The measures, and whether commands lie above (+1) or below (-1) impacts (the cut's side).
SHAPES = {"level": +1, "peak": -1, "onset": -1, "top3": -1}
COMMAND_SETS = ("words", "noisy 20 dB", "noisy 10 dB")


def frame_energy_db(wave: np.ndarray, rate: int = 16000, window_ms: float = 25.0, hop_ms: float = 10.0):
    """Energy (dB, mean square) of the frames the features use (frame t starts at t * hop)."""
    w, h = int(rate * window_ms / 1000), int(rate * hop_ms / 1000)
    x = np.asarray(wave, dtype=np.float64)
    n = 1 + max(0, (len(x) - w) // h)
    x = np.pad(x, (0, max(0, (n - 1) * h + w - len(x))))
    frames = np.lib.stride_tricks.sliding_window_view(x, w)[::h][:n]
    return 10 * np.log10(np.mean(frames**2, axis=1) + 1e-12)


def word_shape(e: np.ndarray, first: int, last: int) -> dict:
    """The four measures (module docstring) of frames ``first``..``last`` of energies ``e``."""
    a, b = max(0, min(first, len(e) - 1)), max(0, min(last, len(e) - 1))
    seg = e[a:b + 1]
    lo = max(2, a - 3)
    rise = e[lo:b + 1] - e[lo - 2:b - 1] if b + 1 > lo else np.zeros(1)
    p = 10 ** (seg / 10)
    return {"level": float(seg.mean() - np.percentile(e, 10)), "peak": float(seg.max() - np.median(seg)),
            "onset": float(rise.max()) if rise.size else 0.0,
            "top3": float(np.sort(p)[-3:].sum() / p.sum())}


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--load", type=Path, required=True, help="the folder threshold_dev.py --save wrote")
    ap.add_argument("--seeds", type=int, nargs="+", default=[0, 1, 2])
    ap.add_argument("--variant", default="held-out only (before)", choices=sorted(VARIANTS))
    ap.add_argument("--threshold", type=float, default=None, help="default: DEFAULT_MIN_CONFIDENCE")
    args = ap.parse_args(argv)

    from wordspot.decoding.confidence import DEFAULT_MIN_CONFIDENCE, MEASURE_NAMES
    from wordspot.evaluation.calibrate import CalibrationConfig, fit_calibration
    from wordspot.model import load_model

    t = DEFAULT_MIN_CONFIDENCE if args.threshold is None else args.threshold
    sets = None
    rows = {}  # (set, seed) -> list of (file index, right?, kept?, shape dict)
    for seed in args.seeds:
        with open(args.load / f"seed{seed}.pickle", "rb") as fh:
            heard, ex = pickle.load(fh)
        model = load_model(args.load / f"seed{seed}.model")
        if sets is None:
            sets = dev_sets(model, 100, snrs=(20.0, 10.0), no_command=True)
        sub = ex.subset(np.isin(ex.source, VARIANTS[args.variant]))
        cal = fit_calibration(sub, config=CalibrationConfig(seed=seed))
        cols = [MEASURE_NAMES.index(n) for n in cal.names]
        for name in COMMAND_SETS + NO_COMMAND:
            if name not in heard:
                continue
            out = []
            for k, ((ref, segs), (wave, _)) in enumerate(zip(heard[name], sets[name])):
                if not segs:
                    continue
                conf = cal.predict(np.array([g.measures for g in segs])[:, cols])
                e = frame_energy_db(wave, model.features.sample_rate)
                for g, c in zip(segs, conf):
                    out.append((k, g.word in ref, c >= t, word_shape(e, g.first_frame, g.last_frame)))
            rows[name, seed] = out
    print(f"threshold {t:g}, calibration '{args.variant}', seeds {args.seeds}; words kept at the threshold\n")
    print("| measure | " + " | ".join(f"{n} (right)" for n in COMMAND_SETS) + " | "
          + " | ".join(n for n in NO_COMMAND) + " | ROC area, commands vs impact words | cut keeping 99% of "
          "commands | files with a command after the cut: " + ", ".join(NO_COMMAND) + " |")
    print("| --- |" + " ---: |" * (len(COMMAND_SETS) + len(NO_COMMAND) + 3))
    for m, side in SHAPES.items():
        cells, aucs, cuts, after = [], [], [], {n: [] for n in NO_COMMAND}
        for name in COMMAND_SETS:
            v = [s[m] for seed in args.seeds for _, r, kept, s in rows.get((name, seed), []) if r and kept]
            cells.append(f"{np.median(v):.2f}" if v else "-")
        for name in NO_COMMAND:
            v = [s[m] for seed in args.seeds for _, _, kept, s in rows.get((name, seed), []) if kept]
            cells.append(f"{np.median(v):.2f} ({len(v)})" if v else "- (0)")
        for seed in args.seeds:
            good = np.array([side * s[m] for name in COMMAND_SETS for _, r, kept, s in rows.get((name, seed), [])
                             if r and kept])
            bad = np.array([side * s[m] for name in ("impacts", "other impacts")
                            for _, _, kept, s in rows.get((name, seed), []) if kept])
            if good.size and bad.size:
                aucs.append(float(np.mean(good[:, None] > bad[None, :]) + 0.5 * np.mean(good[:, None] == bad[None, :])))
            cut = np.quantile(good, 0.01) if good.size else -np.inf
            cuts.append(side * cut)
            for name in NO_COMMAND:
                files = {}
                for k, _, kept, s in rows.get((name, seed), []):
                    files[k] = files.get(k, False) or (kept and side * s[m] >= cut)
                n_files = len(sets[name]) if sets and name in sets else 0
                after[name].append(100 * sum(files.values()) / n_files if n_files else float("nan"))
        print(f"| {m} | " + " | ".join(cells) + f" | {np.mean(aucs):.2f} ({min(aucs):.2f}-{max(aucs):.2f}) | "
              + ", ".join(f"{c:.2f}" for c in cuts) + " | "
              + ", ".join(f"{np.mean(after[n]):.1f}%" for n in NO_COMMAND) + " |")
    before = []
    for name in NO_COMMAND:
        per = []
        for seed in args.seeds:
            files = {k for k, _, kept, _ in rows.get((name, seed), []) if kept}
            per.append(100 * len(files) / len(sets[name]) if sets and name in sets else float("nan"))
        before.append(f"{name} {np.mean(per):.1f}%")
    print("\nfiles with a command at the threshold without a cut: " + ", ".join(before))
    return 0


if __name__ == "__main__":
    sys.exit(main())
