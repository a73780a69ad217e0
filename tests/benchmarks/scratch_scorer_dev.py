#!/usr/bin/env python3
"""Does a state scorer fitted on the user's recordings alone help a model trained from scratch?

On dev material only. Per seed (the seed of the calibration's held-out split and of the
scorer fit): a model is trained from scratch with calibration as ``wordspot train
--from-scratch`` does (:func:`wordspot.evaluation.calibrate.train_calibrated` around the
from-scratch training; no refit) on the demo training voices that are not dev voices
(``tune_filler.write_dev_train_manifest``). Two variants of the training function:

* "mixtures only": the from-scratch training with ``TrainingConfig(scorer=None)`` (the
  default before this comparison);
* "+ own scorer": the same training, then (as ``TrainingConfig.scorer`` now does by
  default, with the training's seed), inside the training function (so the
  calibration sees the scorer and uses its posterior measures), the recordings, their
  speed and noisy copies and background-only items are aligned with the new model and a
  state scorer is fitted on them (:func:`wordspot.training.own_scorer.fit_own_scorer`).

The mixtures of both variants are the same for a seed (same recordings, same training
seed), so they are trained once and shared. The dev sets of ``tune_filler.py`` (the dev
voices' commands, their real phrases, the starter corpus's dev voices' other talk,
noise-only clips) are recognised with each calibrated model. Printed per variant, mean
(min-max) over seeds: EER (dev commands against other talk + noise only), and at the
default threshold the dev command WER, the real phrases WER, other-talk and noise-only
files with a command; then the CPU seconds of the mixture training and the scorer's extra.

    OPENBLAS_NUM_THREADS=1 python tests/benchmarks/scratch_scorer_dev.py [--seeds 0 1 2]

``--mix KIND:PARTS ... [--share S]`` compares instead two from-scratch trainings with the
default scorer: "items as configured" (``TrainingConfig()``) and "mix" (the training's
background items drawn from that mix of kinds, ``TrainingConfig.background_kinds``, at
share S); each trains its own mixtures, and the dev sets include "everyday words" and
"impacts" (``dev_no_command.py``)::

    OPENBLAS_NUM_THREADS=1 python tests/benchmarks/scratch_scorer_dev.py --mix white pink hum dither fan impacts:5 --share 0.25
"""

from __future__ import annotations

import os

for _var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")  # one BLAS thread while fitting (the machine is shared)

import argparse  # noqa: E402
import sys  # noqa: E402
import tempfile  # noqa: E402
import time  # noqa: E402
from dataclasses import replace  # noqa: E402
from pathlib import Path  # noqa: E402

import numpy as np  # noqa: E402

HERE = Path(__file__).resolve().parent
REPO = HERE.parents[1]
sys.path.insert(0, str(HERE))

from posterior_confidence_dev import operating_eer, print_spread, set_columns, tally  # noqa: E402
from tune_filler import dev_sets, write_dev_train_manifest  # noqa: E402

SETS = ("words", "real phrases", "other talk", "noise only")
VARIANTS = ("mixtures only", "+ own scorer")


def scored_sets(model, sets):
    """Every dev set recognised with no threshold: ``{name: [(reference, words, confidences)]}``."""
    from wordspot.audio.features import compute_features
    from wordspot.decoding.decoder import DecoderSettings, build_recognizer

    rec = build_recognizer(model, settings=DecoderSettings(min_confidence=0.0))
    scored = {}
    for name, items in sets.items():
        scored[name] = []
        for wave, ref in items:
            segs = rec.decode(compute_features(wave, model.features)).segments
            scored[name].append((ref, [g.word for g in segs], np.array([g.confidence for g in segs])))
    return scored


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--seeds", type=int, nargs="+", default=[0, 1, 2])
    ap.add_argument("--hidden", type=int, nargs="+", default=None, help="the scorer's hidden sizes")
    ap.add_argument("--mix", nargs="+", default=None, metavar="KIND[:PARTS]",
                    help="compare the configured background items with this mix of kinds (both with the scorer)")
    ap.add_argument("--share", type=float, default=None, help="with --mix: its background share")
    args = ap.parse_args(argv)
    if args.mix:
        return compare_mix(args)

    from wordspot.corpus import read_manifest
    from wordspot.decoding.confidence import DEFAULT_MIN_CONFIDENCE
    from wordspot.evaluation.calibrate import CalibrationConfig, train_calibrated
    from wordspot.language.lexicon import read_lexicon
    from wordspot.training.own_scorer import SCRATCH_SCORER, fit_own_scorer
    from wordspot.training.trainer import TrainingConfig, train

    lexicon = read_lexicon(REPO / "lexicon" / "bakery.txt")
    config = TrainingConfig(scorer=None)  # the mixtures alone; the "+ own scorer" variant adds it below
    table = {v: [] for v in VARIANTS}
    cpu = {"mixtures": [], "scorer": [], "scorer fits": []}
    sets = None
    with tempfile.TemporaryDirectory() as tmp:
        manifest = write_dev_train_manifest(Path(tmp) / "dev-train.csv")
        utterances = read_manifest(manifest)
        for seed in args.seeds:
            t_seed = time.monotonic()
            trained = {}  # recordings -> (model, summary, cpu seconds): the mixtures, shared by both variants
            scorer = replace(SCRATCH_SCORER, seed=seed,
                             **({"hidden": tuple(args.hidden)} if args.hidden else {}))

            def mixtures(utts):
                key = tuple(str(u.path) for u in utts)
                if key not in trained:
                    t0 = time.process_time()
                    model, summary = train(utts, lexicon, config=config, manifest=manifest)
                    trained[key] = (model, summary, time.process_time() - t0)
                model, summary, seconds = trained[key]
                cpu["mixtures"].append(seconds)
                return model, summary

            def with_scorer(utts):
                model, summary = mixtures(utts)
                t0 = time.process_time()
                net, info, note = fit_own_scorer(model, utts, noise=config.noise, speeds=config.speed_factors,
                                                 background_share=config.background_share, seed=config.seed,
                                                 scorer=scorer)
                cpu["scorer"].append(time.process_time() - t0)
                cpu["scorer fits"].append(info)
                return replace(model, scorer=net, info={**model.info, "scorer": info}), summary

            for variant, fit in zip(VARIANTS, (mixtures, with_scorer)):
                cal = CalibrationConfig(seed=seed).decided(adapting=False)
                model, _ = train_calibrated(fit, utterances, config=cal)
                if sets is None:
                    sets = {k: v for k, v in dev_sets(model, 0).items() if k in SETS}
                scored = scored_sets(model, sets)
                row, commands, non_commands = tally(scored, DEFAULT_MIN_CONFIDENCE)
                row.insert(0, 100 * operating_eer(commands, non_commands))
                table[variant].append(row)
                print(f"seed {seed} {variant}: " + ", ".join(f"{x:.1f}" for x in row)
                      + f" (measures {', '.join(model.calibration.names) if model.calibration else 'none'})",
                      file=sys.stderr, flush=True)
            print(f"seed {seed}: {time.monotonic() - t_seed:.0f} s; mixtures {cpu['mixtures'][-1]:.0f} cpu s, "
                  f"scorer {cpu['scorer'][-1]:.0f} cpu s ({cpu['scorer fits'][-1]})", file=sys.stderr, flush=True)
    cols = ["EER"] + set_columns(sets)
    print(f"seeds {args.seeds}, threshold {DEFAULT_MIN_CONFIDENCE}, scorer {'x'.join(map(str, scorer.hidden))} "
          f"context {scorer.context}: mean (min-max)\n")
    print_spread("variant", table, cols)
    m = np.array(cpu["mixtures"][::2])
    s = np.array(cpu["scorer"])
    print(f"\nCPU seconds: mixture training {m.mean():.0f} ({m.min():.0f}-{m.max():.0f}); the scorer's extra "
          f"(alignment + fit) {s.mean():.0f} ({s.min():.0f}-{s.max():.0f}), {np.mean(s / m):.2f}x the training")
    for seed, info in zip(args.seeds, cpu["scorer fits"]):
        print(f"seed {seed}: {info}")
    return 0


def compare_mix(args) -> int:
    """Two from-scratch trainings per seed, the configured background items against ``args.mix``."""
    from threshold_dev import mix_arg

    from wordspot.corpus import read_manifest
    from wordspot.decoding.confidence import DEFAULT_MIN_CONFIDENCE
    from wordspot.evaluation.calibrate import CalibrationConfig, train_calibrated
    from wordspot.language.lexicon import read_lexicon
    from wordspot.training.trainer import TrainingConfig, train

    lexicon = read_lexicon(REPO / "lexicon" / "bakery.txt")
    share = {} if args.share is None else {"background_share": args.share}
    configs = {"items as configured": TrainingConfig(),
               "mix": TrainingConfig(background_kinds=mix_arg(args.mix), **share)}
    table = {v: [] for v in configs}
    cpu = {v: [] for v in configs}
    sets = None
    with tempfile.TemporaryDirectory() as tmp:
        manifest = write_dev_train_manifest(Path(tmp) / "dev-train.csv")
        utterances = read_manifest(manifest)
        for seed in args.seeds:
            for variant, base in configs.items():
                config = replace(base, seed=seed)

                def fit(utts, config=config, variant=variant):
                    t0 = time.process_time()
                    got = train(utts, lexicon, config=config, manifest=manifest)
                    cpu[variant].append(time.process_time() - t0)
                    return got

                cal = CalibrationConfig(seed=seed).decided(adapting=False)
                model, _ = train_calibrated(fit, utterances, config=cal)
                if sets is None:
                    sets = {k: v for k, v in dev_sets(model, 0, no_command=True).items()
                            if k in SETS + ("noisy 10 dB", "everyday words", "impacts")}
                scored = scored_sets(model, sets)
                row, commands, non_commands = tally(scored, DEFAULT_MIN_CONFIDENCE)
                no_threshold, _, _ = tally(scored, 0.0)
                row = [100 * operating_eer(commands, non_commands)] + row + no_threshold[-2:]
                table[variant].append(row)
                print(f"seed {seed} {variant}: " + ", ".join(f"{x:.1f}" for x in row)
                      + f"; training cpu {cpu[variant][-1]:.0f} s (background items "
                      f"{model.info.get('background_items')})", file=sys.stderr, flush=True)
    cols = (["EER"] + [("10 dB WER" if n == "noisy 10 dB" else c) for n, c in zip(sets, set_columns(sets))]
            + [f"{n}: files with a command, no threshold" for n in list(sets)[-2:]])
    print(f"seeds {args.seeds}, threshold {DEFAULT_MIN_CONFIDENCE}; mix {' '.join(args.mix)}, share "
          f"{args.share if args.share is not None else 'default'}: mean (min-max)\n")
    print_spread("variant", table, cols)
    base = np.array(cpu["items as configured"])
    for v, secs in cpu.items():
        s = np.array(secs)
        print(f"\nCPU seconds of the training (mixtures and scorer; calibration's one training a seed), {v}: "
              f"{s.mean():.0f} ({s.min():.0f}-{s.max():.0f}); ratio to the configured items "
              f"{np.mean(s / base):.2f} ({np.min(s / base):.2f}-{np.max(s / base):.2f})")
    return 0


if __name__ == "__main__":
    sys.exit(main())
