#!/usr/bin/env python3
"""The state scorer on dev material: a quick check that the network path is sound.

The starter is adapted (no calibration: heuristic confidences, no threshold) on the demo
training voices that are not dev voices (``write_dev_train_manifest`` of
``tune_filler.py``); those recordings are aligned with it (Viterbi through each
transcript's chain, ``tests/scorer_helpers.py``), a state scorer is fitted on the frames
and their mixture ids (:func:`wordspot.training.scorer_fit.fit_scorer`), and the dev sets
of ``tune_filler.py`` (the dev voices' commands, the same joined by pauses, the phrase
stand-ins, real phrases by the dev voices, the commands in babble or fan noise at 10 dB,
noise-only clips) are recognised with every scorer weight and scale asked for. The
mixtures' and the network's scores are computed once per file; each setting re-runs
only the search.

    python tests/benchmarks/scorer_weight_dev.py [--model dev.model] [--weights 0 0.5 1] [--scales 0.5 1]
        [--hidden 512 512] [--epochs 12] [--max-frames 100000] [--joined 60] [--scorer-model net.model]

``--model FILE``: reuse this adapted model when it exists, else write it there.
``--scorer-model FILE``: reuse this model with its fitted scorer when it exists (no
alignment, no fit), else write it there after fitting.
"""

from __future__ import annotations

import argparse
import sys
import tempfile
import time
from dataclasses import replace
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
REPO = HERE.parents[1]
sys.path.insert(0, str(HERE))
sys.path.insert(0, str(REPO / "tests"))

from tune_filler import dev_sets, write_dev_train_manifest  # noqa: E402

WER_SETS = ("words", "phrases", "real phrases", "noisy 10 dB")
NO_COMMAND = ("other talk", "noise only")


def _dev_model(path: Path | None):
    from wordspot import api
    from wordspot.model import load_model
    from wordspot.training.adapt import AdaptationConfig

    if path is not None and path.exists():
        return load_model(path)
    with tempfile.TemporaryDirectory() as tmp:
        manifest = write_dev_train_manifest(Path(tmp) / "dev-train.csv")
        return api.train(manifest, REPO / "lexicon" / "bakery.txt", out=path, start="starter",
                         config=AdaptationConfig(), calibration=False)


def _fit(args):
    """The dev model (adapted, or reused) with a scorer fitted on its alignment of the dev-train voices."""
    from scorer_helpers import aligned_corpus
    from wordspot.corpus import read_manifest
    from wordspot.training.scorer_fit import ScorerConfig, fit_scorer_with_report

    t0 = time.process_time()
    model = _dev_model(args.model)
    print(f"dev model ready ({time.process_time() - t0:.0f} s CPU)", file=sys.stderr, flush=True)
    t0 = time.process_time()
    with tempfile.TemporaryDirectory() as tmp:
        utts = read_manifest(write_dev_train_manifest(Path(tmp) / "dev-train.csv"))
    data = aligned_corpus(model, utts)
    t1 = time.process_time()
    config = ScorerConfig(hidden=tuple(args.hidden), context=args.context, max_epochs=args.epochs,
                          max_frames=args.max_frames, seed=args.seed)
    scorer, report = fit_scorer_with_report([x for x, _ in data], [y for _, y in data],
                                            model.mixtures.n_mixtures, config)
    t2 = time.process_time()
    seen = np.unique(np.concatenate([y for _, y in data]))
    print(f"aligned {len(data)} recordings in {t1 - t0:.0f} s CPU; fitted {config} in {t2 - t1:.0f} s CPU on "
          f"{report.train_frames} frames ({seen.size} of {model.mixtures.n_mixtures} mixture ids seen); epoch kept "
          f"{report.best_epoch + 1} of {len(report.train_loss)}, held-out loss "
          f"{', '.join(f'{v:.3f}' for v in report.held_out_loss)}, held-out frame accuracy "
          f"{100 * report.held_out_accuracy:.1f}% on {report.held_out_frames} frames")
    return replace(model, scorer=scorer)


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--model", type=Path, default=None, help="adapted dev model: reused if it exists, else written")
    ap.add_argument("--scorer-model", type=Path, default=None,
                    help="model with the fitted scorer: reused if it exists, else written")
    ap.add_argument("--weights", type=float, nargs="+", default=[0.0, 0.5, 1.0])
    ap.add_argument("--scales", type=float, nargs="+", default=[0.5, 1.0])
    ap.add_argument("--hidden", type=int, nargs="+", default=[512, 512])
    ap.add_argument("--context", type=int, default=5)
    ap.add_argument("--epochs", type=int, default=12)
    ap.add_argument("--max-frames", type=int, default=100_000)
    ap.add_argument("--joined", type=int, default=60, help="joined files and phrase stand-ins each")
    ap.add_argument("--seed", type=int, default=0)
    args = ap.parse_args(argv)

    from wordspot.audio.features import compute_features
    from wordspot.decoding.decoder import DecoderSettings, build_recognizer
    from wordspot.evaluation.scoring import align_words
    from wordspot.model import load_model, save_model

    if args.scorer_model is not None and args.scorer_model.exists():
        model = load_model(args.scorer_model)
        print(f"reusing {args.scorer_model}: scorer {model.scorer.hidden_sizes}, context {model.scorer.context}")
    else:
        model = _fit(args)
        if args.scorer_model is not None:
            save_model(model, args.scorer_model)
    scorer = model.scorer

    sets = dev_sets(model, args.joined)
    rec = build_recognizer(model, settings=DecoderSettings(min_confidence=0.0))
    used = rec.network.used_mixtures
    t3 = time.process_time()
    scores = {name: [] for name in sets}
    for name, items in sets.items():
        for wave, ref in items:
            frames = compute_features(wave, model.features)
            gmm = rec.emissions(frames)
            net = scorer.scaled_log_likelihoods(frames, 1.0, columns=used).astype(np.float64)
            scores[name].append((gmm, net, ref))
    print(f"scored {sum(map(len, sets.values()))} dev files in {time.process_time() - t3:.0f} s CPU",
          file=sys.stderr, flush=True)

    # the mixing below is the decoder's own (Recognizer.emissions with a scorer weight)
    frames = compute_features(sets["words"][0][0], model.features)
    gmm, net, _ = scores["words"][0]
    mixed = build_recognizer(model, settings=DecoderSettings(scorer_weight=0.5, scorer_scale=2.0)).emissions(frames)
    assert np.allclose(mixed, 0.5 * 2.0 * net + 0.5 * gmm, atol=1e-3)
    # cost of the state scores, CPU seconds per second of audio
    waves = [w for w, _ in sets["words"][:100]]
    feats = [compute_features(w, model.features) for w in waves]
    seconds = sum(len(w) for w in waves) / model.features.sample_rate
    for w in (0.0, 0.5, 1.0):
        r = build_recognizer(model, settings=DecoderSettings(scorer_weight=w))
        t = time.process_time()
        for f in feats:
            r.emissions(f)
        print(f"state scores at weight {w:g}: {(time.process_time() - t) / seconds:.4f} CPU s per s of audio")

    settings = [(0.0, 1.0)] + [(w, s) for w in args.weights if w > 0 for s in args.scales]
    names = list(sets)
    label = {"words": "dev words: exactly right, WER", "joined": "joined: exactly right, WER",
             "phrases": "phrase stand-ins: right, WER", "real phrases": "real phrases: right, WER",
             "noisy 10 dB": "noisy 10 dB: right, WER"}
    print("| scorer weight | scale | " + " | ".join(
        label.get(n, f"{n}: files with a command") + f" ({len(sets[n])})" for n in names) + " | search s |")
    print("| ---: | ---: |" + " ---: |" * (len(names) + 1))
    for w, s in settings:
        cells, t4 = [], time.process_time()
        for name in names:
            right = errors = words = 0
            for gmm, net, ref in scores[name]:
                ll = gmm if w == 0 else w * s * net + (1 - w) * gmm
                hyp = rec.search(ll).words
                right += hyp == ref
                a = align_words(ref, hyp)
                errors += a.substitutions + a.deletions + a.insertions
                words += len(ref)
            n = len(scores[name])
            cells.append(f"{100 * (n - right) / n:.1f}%" if name in NO_COMMAND
                         else f"{100 * right / n:.0f}%, {100 * errors / max(words, 1):.1f}%")
        print(f"| {w:g} | {s:g} | " + " | ".join(cells) + f" | {time.process_time() - t4:.0f} |", flush=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
