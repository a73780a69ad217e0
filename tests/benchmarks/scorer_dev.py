#!/usr/bin/env python3
"""Choose the state scorer's size and context on the starter corpus's dev split.

The starter model aligns the starter corpus's train split (plus background-only items) and
its dev split (voices held out of starter training); each candidate network is fitted on
the train alignment and scored by its frame accuracy on the dev alignment (share of frames
whose most probable mixture id is the aligned one; also on the dev frames the alignment
puts in a pause state and in a phone state apart). Nothing of the demo's test sets is used.

    python tests/benchmarks/scorer_dev.py --model starter --try 512x512:5 256x256:5 512x512:8 \\
        --seeds 0 1 --align-cache /tmp/align

A candidate is ``HIDDENxHIDDEN...:CONTEXT`` (``:CONTEXT`` may be left out: 5), optionally
``@FRAMES`` for the training frames at most (default: the build's).
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
REPO = HERE.parents[1]
sys.path.insert(0, str(REPO / "recordings"))

import build_starters as build  # noqa: E402


def parse_candidate(text: str) -> tuple[tuple[int, ...], int, int]:
    frames = build.SCORER_MAX_FRAMES
    if "@" in text:
        text, f = text.split("@", 1)
        frames = int(f)
    context = build.SCORER_CONTEXT
    if ":" in text:
        text, c = text.split(":", 1)
        context = int(c)
    return tuple(int(h) for h in text.split("x")), context, frames


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--model", default="starter", help="starter name or model file (default starter)")
    ap.add_argument("--try", dest="candidates", nargs="+", default=["512x512:5"])
    ap.add_argument("--seeds", type=int, nargs="+", default=[0])
    ap.add_argument("--jobs", type=int, default=2)
    ap.add_argument("--align-cache", type=Path, default=None, help="keep / reuse the alignments here")
    args = ap.parse_args(argv)

    import numpy as np

    from wordspot.acoustic.units import GAP_UNIT, PAUSE_UNIT
    from wordspot.model import load_model
    from wordspot.training.scorer_fit import ScorerConfig, fit_scorer_with_report

    model = load_model(args.model)
    if args.align_cache:
        args.align_cache.mkdir(parents=True, exist_ok=True)
    train = build.aligned(model, [build.CORPUS / "train.csv"], jobs=args.jobs,
                          background_share=build.SCORER_BACKGROUND_SHARE, seed=0, quiet=True, cache=args.align_cache)
    dev = build.aligned(model, [build.DEV], jobs=args.jobs, background_share=0.0, seed=0, quiet=True,
                        cache=args.align_cache, tag="dev")
    units = model.units
    pause = set()
    for name in (PAUSE_UNIT, GAP_UNIT):
        u = units.index(name)
        pause |= set(units.state_mixture[u, : units.n_states[u]].tolist())
    dev_y = np.concatenate(dev[1])
    is_pause = np.isin(dev_y, sorted(pause))
    p = model.mixtures.n_mixtures
    print(f"{args.model}: train {sum(len(y) for y in train[1])} frames in {len(train[1])} items, "
          f"dev {dev_y.size} frames ({100 * is_pause.mean():.0f}% pause), {p} mixtures")
    print("| hidden | context | frames | seed | epochs | held-out acc | dev acc | dev phone acc | dev pause acc "
          "| weights | fit s |")
    print("| --- | ---: | ---: | ---: | ---: | ---: | ---: | ---: | ---: | ---: | ---: |")
    # the mixtures themselves as a frame classifier: most likely mixture (plus the frames' log prior)
    from wordspot.acoustic.gmm import log_likelihoods
    from wordspot.training.scorer_fit import label_log_prior

    prior = label_log_prior(train[1], p)
    guess = np.concatenate([(log_likelihoods(x, model.mixtures) + prior).argmax(axis=1) for x in dev[0]])
    right = guess == dev_y
    print(f"| (mixtures + prior) | 0 | | | | | {100 * right.mean():.1f}% | {100 * right[~is_pause].mean():.1f}% "
          f"| {100 * right[is_pause].mean():.1f}% | | |", flush=True)
    for text in args.candidates:
        hidden, context, frames = parse_candidate(text)
        for seed in args.seeds:
            t0 = time.monotonic()
            config = ScorerConfig(hidden=hidden, context=context, max_frames=frames, seed=seed)
            scorer, fit = fit_scorer_with_report(train[0], train[1], p, config)
            seconds = time.monotonic() - t0
            guess = np.concatenate([scorer.log_posteriors(x).argmax(axis=1) for x in dev[0]])
            right = guess == dev_y
            n_weights = sum(w.size + b.size for w, b in zip(scorer.weights, scorer.biases))
            print(f"| {'x'.join(map(str, hidden))} | {context} | {fit.train_frames} | {seed} | {fit.best_epoch + 1} "
                  f"| {100 * fit.held_out_accuracy:.1f}% | {100 * right.mean():.1f}% "
                  f"| {100 * right[~is_pause].mean():.1f}% | {100 * right[is_pause].mean():.1f}% "
                  f"| {n_weights / 1e6:.2f} M | {seconds:.0f} |", flush=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
