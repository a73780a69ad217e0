#!/usr/bin/env python3
"""Choose the state scorer's size and context on the starter corpus's dev split.

The starter model aligns the starter corpus's train split (plus background-only items) and
its dev split (voices held out of starter training); each candidate network is fitted on
the train alignment and scored by its frame accuracy on the dev alignment (share of frames
whose most probable mixture id is the aligned one; also on the dev frames the alignment
puts in a pause state and in a phone state apart). Nothing of the demo's test sets is used.

    python tests/benchmarks/scorer_dev.py --model starter --try 512x512:5 256x256:5 512x512:8 \\
        --seeds 0 1 --align-cache /tmp/align

``--inputs`` fits each candidate once per kind of scorer input
(:data:`wordspot.audio.scorer_inputs.INPUT_KINDS`: ``cepstra``, ``log-mel``,
``cepstra+log-mel``); the log-mel inputs are computed from the recordings and copies made
again (``build_starters.input_frames``) and kept in ``--align-cache``.

A candidate is ``HIDDENxHIDDEN...:CONTEXT`` (``:CONTEXT`` may be left out: 5), optionally
``@FRAMES`` for the training frames at most (default: the build's).

Varied training data (``--noise-copies``, ``--speeds``): noisy copies of the train split
(labels of their clean recording) and speed copies (their own alignment). ``--mixes``
chooses which kinds of items each fit sees, e.g. ``clean`` (the recordings and
background items alone), ``clean+noisy``, ``clean+speed``, ``all``. Every network is also
scored on one noisy copy of the dev split (babble or steady noise, 0-25 dB, labels from the
clean dev alignment), and so is the model's own (shipped) scorer, first.

    python tests/benchmarks/scorer_dev.py --model starter --try 256x256:5@1500000 \
        --noise-copies 1 --speeds 0.9 1.1 --mixes clean all --seeds 0 1 2 --align-cache /tmp/align
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

MIXES = {"clean": ("clean", "background"), "clean+noisy": ("clean", "background", "noisy"),
         "clean+speed": ("clean", "background", "speed"), "all": ("clean", "background", "noisy", "speed")}


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
    ap.add_argument("--try", dest="candidates", nargs="+", default=["256x256:5"])
    ap.add_argument("--seeds", type=int, nargs="+", default=[0])
    ap.add_argument("--jobs", type=int, default=2)
    ap.add_argument("--noise-copies", type=int, default=0, help="noisy copies of the train split (default 0)")
    ap.add_argument("--speeds", type=float, nargs="*", default=[], help="speed copies of the train split")
    ap.add_argument("--mixes", nargs="+", default=["all"], choices=sorted(MIXES))
    ap.add_argument("--inputs", nargs="+", default=["cepstra"],
                    help="what the networks read (wordspot.audio.scorer_inputs.INPUT_KINDS; default cepstra)")
    ap.add_argument("--align-cache", type=Path, default=None, help="keep / reuse the alignments here")
    ap.add_argument("--save", type=Path, default=None,
                    help="write the model with each fitted scorer into this folder (trial starters)")
    args = ap.parse_args(argv)

    import numpy as np

    from wordspot.acoustic.units import GAP_UNIT, PAUSE_UNIT
    from wordspot.model import load_model, save_model
    from wordspot.training.scorer_fit import ScorerConfig, fit_scorer_with_report

    model = load_model(args.model)
    if args.align_cache:
        args.align_cache.mkdir(parents=True, exist_ok=True)
    full = build.aligned(model, [build.CORPUS / "train.csv"], jobs=args.jobs,
                         background_share=build.SCORER_BACKGROUND_SHARE, seed=0, quiet=True, cache=args.align_cache,
                         noise_copies=args.noise_copies, speeds=tuple(args.speeds))
    dev_all = build.aligned(model, [build.DEV], jobs=args.jobs, background_share=0.0, seed=0, quiet=True,
                            cache=args.align_cache, tag="dev", noise_copies=1)
    dev, dev_noisy = dev_all.only(["clean"]), dev_all.only(["noisy"])
    dev_inputs, train_inputs = {}, {}
    for kind in args.inputs:
        x = build.input_frames(model, dev_all, [build.DEV], kind, background_share=0.0, seed=0, noise_copies=1,
                               cache=args.align_cache, tag="dev")
        dev_inputs[kind] = ([a for a, k in zip(x, dev_all.kinds) if k == "clean"],
                            [a for a, k in zip(x, dev_all.kinds) if k == "noisy"])
        train_inputs[kind] = build.input_frames(model, full, [build.CORPUS / "train.csv"], kind,
                                                background_share=build.SCORER_BACKGROUND_SHARE, seed=0,
                                                noise_copies=args.noise_copies, cache=args.align_cache)
    units = model.units
    pause = set()
    for name in (PAUSE_UNIT, GAP_UNIT):
        u = units.index(name)
        pause |= set(units.state_mixture[u, : units.n_states[u]].tolist())
    dev_y = np.concatenate(dev.labels)
    noisy_y = np.concatenate(dev_noisy.labels)
    is_pause = np.isin(dev_y, sorted(pause))
    p = model.mixtures.n_mixtures
    kinds = {k: sum(len(y) for y, kk in zip(full.labels, full.kinds) if kk == k) for k in dict.fromkeys(full.kinds)}
    print(f"{args.model}: train {sum(kinds.values())} frames in {len(full.labels)} items "
          f"({', '.join(f'{k} {n}' for k, n in kinds.items())}), dev {dev_y.size} frames "
          f"({100 * is_pause.mean():.0f}% pause) and a noisy copy ({noisy_y.size} frames), {p} mixtures")
    print("| inputs | data | hidden | context | frames | seed | epochs | held-out acc | dev acc | dev phone acc | dev pause acc "
          "| noisy dev acc | weights | fit s |")
    print("| --- | --- | --- | ---: | ---: | ---: | ---: | ---: | ---: | ---: | ---: | ---: | ---: | ---: |")

    def row(scorer):
        clean_x, noisy_x = dev_inputs[scorer.inputs] if scorer.inputs in dev_inputs \
            else (dev.frames, dev_noisy.frames)
        guess = np.concatenate([scorer.log_posteriors(x).argmax(axis=1) for x in clean_x])
        right = guess == dev_y
        noisy = np.concatenate([scorer.log_posteriors(x).argmax(axis=1) for x in noisy_x]) == noisy_y
        return (f"{100 * right.mean():.1f}% | {100 * right[~is_pause].mean():.1f}% | "
                f"{100 * right[is_pause].mean():.1f}% | {100 * noisy.mean():.1f}%")

    # the mixtures themselves as a frame classifier: most likely mixture (plus the frames' log prior)
    from wordspot.acoustic.gmm import log_likelihoods
    from wordspot.training.scorer_fit import label_log_prior

    clean = full.only(MIXES["clean"])
    prior = label_log_prior(clean.labels, p)
    guess = np.concatenate([(log_likelihoods(x, model.mixtures) + prior).argmax(axis=1) for x in dev.frames])
    right = guess == dev_y
    noisy = np.concatenate([(log_likelihoods(x, model.mixtures) + prior).argmax(axis=1)
                            for x in dev_noisy.frames]) == noisy_y
    print(f"| cepstra | (mixtures + prior) | | 0 | | | | | {100 * right.mean():.1f}% | {100 * right[~is_pause].mean():.1f}% "
          f"| {100 * right[is_pause].mean():.1f}% | {100 * noisy.mean():.1f}% | | |", flush=True)
    if model.scorer is not None:
        info = model.info.get("scorer", {})
        print(f"| {model.scorer.inputs} | (the model's own scorer) | {'x'.join(map(str, info.get('hidden', [])))} | {model.scorer.context} "
              f"| {info.get('train_frames', '')} | {info.get('seed', '')} | {info.get('epochs', '')} "
              f"| {100 * info.get('held_out_frame_accuracy', float('nan')):.1f}% | {row(model.scorer)} | | |",
              flush=True)
    for mix in args.mixes:
        keep = [i for i, k in enumerate(full.kinds) if k in MIXES[mix] or k.split()[0] in MIXES[mix]]
        data = full.only(MIXES[mix])
        for text in args.candidates:
            hidden, context, frames = parse_candidate(text)
            for seed in args.seeds:
                for kind in args.inputs:
                    x_list = [train_inputs[kind][i] for i in keep]
                    t0, c0 = time.monotonic(), time.process_time()
                    config = ScorerConfig(hidden=hidden, context=context, max_frames=frames, seed=seed, inputs=kind)
                    scorer, fit = fit_scorer_with_report(x_list, data.labels, p, config, groups=data.paths)
                    seconds, cpu = time.monotonic() - t0, time.process_time() - c0
                    n_weights = sum(w.size + b.size for w, b in zip(scorer.weights, scorer.biases))
                    print(f"| {kind} | {mix} | {'x'.join(map(str, hidden))} | {context} | {fit.train_frames} | {seed} "
                          f"| {fit.best_epoch + 1} | {100 * fit.held_out_accuracy:.1f}% | {row(scorer)} "
                          f"| {n_weights / 1e6:.2f} M | {seconds:.0f} (CPU {cpu:.0f}) |", flush=True)
                    if args.save:
                        args.save.mkdir(parents=True, exist_ok=True)
                        model.scorer = scorer
                        out = save_model(model, args.save / f"{kind}-{mix}-{'x'.join(map(str, hidden))}-{frames}"
                                                            f"-s{seed}.model")
                        print(f"  saved {out}", flush=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
