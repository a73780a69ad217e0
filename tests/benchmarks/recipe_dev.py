#!/usr/bin/env python3
"""Cuts of the default training's recipe, judged on dev material over several seeds.

Per seed (the adaptation's and the calibration's), the starter is adapted as ``wordspot
train`` adapts it on the demo training voices that are not dev voices (``dev_candidate``
in ``recordings/voices.csv``; 950 recordings): the calibration's first training on the
recordings not held out (strength chosen on whole speakers held out within them), the
calibration's examples recognised with that model, then the training on every recording.
The variants share what they can and are made side by side:

- models: the training on everything adapted again from the starter (the default) and
  with the first training's pass statistics added (``AdaptationConfig.reuse_first_passes``);
- calibrations: the examples at the default speeds and jumbled clips, and at fewer
  (``--speeds``, ``--jumbled``), fitted on the same first model's recognitions;
- the strength chosen with one noisy copy (``AdaptationConfig.choose_noise_copies``, the
  default) against both: the first training again with both; when it chooses the same
  strength the models are the same (checked), so only the strengths are shown.

Each model recognises the dev sets of ``tune_filler.dev_sets`` once with no threshold (the
dev voices' commands clean and in babble or fan noise at 20 and 10 dB, joined files,
phrase stand-ins, real phrases, other talk, noise only, everyday words, impacts), and each
calibration's confidences are computed from the stored measures
(``threshold_dev.VariantTables``: every threshold, the EER, the same other talk). CPU
seconds of each step (this process: run with ``--jobs 1`` for the whole CPU time) are
printed beside. The demo's test sets are never used.

    OPENBLAS_NUM_THREADS=1 python tests/benchmarks/recipe_dev.py --seeds 0 1 2
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

from threshold_dev import VariantTables, decode_sets  # noqa: E402
from tune_filler import dev_sets, write_dev_train_manifest  # noqa: E402


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--seeds", type=int, nargs="+", default=[0, 1, 2])
    ap.add_argument("--jobs", type=int, default=1)
    ap.add_argument("--speeds", type=float, nargs="+", default=[0.9, 1.1, 1.4],
                    help="the calibration's fewer speeds")
    ap.add_argument("--jumbled", type=int, default=100, help="fewer jumbled clips (with the fewer speeds)")
    ap.add_argument("--no-choosing", action="store_true", help="skip the strength chosen with both noisy copies")
    ap.add_argument("--default-calibration-only", action="store_true",
                    help="only the default calibration's examples (the two models)")
    ap.add_argument("--show", type=float, nargs="+", default=[0.0, 0.05, 0.2, 0.4])
    args = ap.parse_args(argv)

    from wordspot.corpus import read_manifest
    from wordspot.evaluation.calibrate import CalibrationConfig, calibration_examples, fit_calibration, held_out_parts
    from wordspot.language.lexicon import read_lexicon
    from wordspot.model import load_model
    from wordspot.starters import starter_path
    from wordspot.training.adapt import AdaptationConfig, adapt, adapting

    lexicon = read_lexicon(REPO / "lexicon" / "bakery.txt")
    start = load_model(starter_path("starter"))
    fewer = tuple(args.speeds)
    cals = {"5 speeds, 150 jumbled (default)": dict(),
            f"{len(fewer)} speeds, 150 jumbled": dict(speeds=fewer),
            f"{len(fewer)} speeds, {args.jumbled} jumbled": dict(speeds=fewer, jumbled=args.jumbled)}
    if args.default_calibration_only:
        cals = dict(list(cals.items())[:1])
    models = ("adapted again (default)", "first passes reused")
    names = [f"{m}; {c}" for m in models for c in cals]
    tables = VariantTables(names)
    sets = None
    cpu_rows = []
    strengths = []
    with tempfile.TemporaryDirectory() as tmp:
        manifest = write_dev_train_manifest(Path(tmp) / "dev-train.csv")
        utterances = read_manifest(manifest)
        for seed in args.seeds:
            config = CalibrationConfig(seed=seed).decided(adapting=True)
            (rest, held), = held_out_parts(utterances, config)[0]
            # the first training keeps its pass statistics; each training on everything says
            # whether it reuses them
            adapt_config = AdaptationConfig(jobs=args.jobs, seed=seed, reuse_first_passes=True)
            fit = adapting(start, lexicon, config=adapt_config, manifest=manifest)
            cpu = {}
            t = time.process_time()
            first, _ = fit(rest, held_out=held)
            cpu["first training (choosing + adapting)"] = time.process_time() - t
            row = [seed, first.info["strength"]["follow_passes"]]
            if not args.no_choosing:
                t = time.process_time()
                one, _ = adapt(rest, lexicon, start, config=replace(adapt_config, choose_noise_copies=None),
                               manifest=manifest, held_out=held, cache=fit.cache)
                cpu["first training, choosing with both noisy copies (features cached)"] = time.process_time() - t
                row.append(one.info["strength"]["follow_passes"])
                if row[-1] == row[1]:
                    same = all(np.array_equal(getattr(one.mixtures, p), getattr(first.mixtures, p))
                               for p in ("weights", "means", "variances"))
                    row.append("same mixtures" if same else "DIFFERENT MIXTURES")
            strengths.append(row)
            examples = {}
            for name, fields in cals.items():
                c = replace(config, **fields)
                t = time.process_time()
                examples[name] = calibration_examples(first, held, settings=c.settings, speeds=c.speeds,
                                                      jumbled=c.jumbled, seed=c.seed, jobs=args.jobs)
                cpu[f"calibration examples, {name}"] = time.process_time() - t
            finals = {}
            for name, reuse in zip(models, (False, True)):
                t = time.process_time()
                finals[name], _ = fit(utterances, reuse=reuse)
                cpu[f"training on everything, {name}"] = time.process_time() - t
            a, b = (finals[m].mixtures for m in models)
            diff = float(np.abs(a.means - b.means).max())
            cpu_rows.append((seed, cpu, diff))
            if sets is None:
                sets = dev_sets(finals[models[0]], 100, snrs=(20.0, 10.0), no_command=True)
                print("dev sets: " + ", ".join(f"{k} {len(v)}" for k, v in sets.items()), file=sys.stderr)
            tables.new_seed()
            for m in models:
                heard = decode_sets(finals[m], sets, config.settings)
                for name in cals:
                    ex = examples[name]
                    tables.add(f"{m}; {name}", heard, fit_calibration(ex, config=config), ex)
            print(f"seed {seed} done: " + "; ".join(f"{k} {v:.1f} s" for k, v in cpu.items())
                  + f"; largest difference of the means {diff:.4f}", file=sys.stderr, flush=True)
    print("strength chosen per seed (one noisy copy, the default; both)")
    for row in strengths:
        print("  " + ", ".join(str(x) for x in row))
    print("\nCPU seconds of this process (mean over seeds, then per seed)\n")
    for k in cpu_rows[0][1]:
        v = [c[k] for _, c, _ in cpu_rows]
        print(f"| {k} | {np.mean(v):.1f} | " + ", ".join(f"{x:.1f}" for x in v) + " |")
    print("largest difference of the two models' means per seed: "
          + ", ".join(f"{d:.4f}" for _, _, d in cpu_rows) + "\n")
    print("EER per seed (dev commands against the no-command files)\n")
    for name in names:
        print(f"| {name} | " + ", ".join(f"{row[0]:.2f}" for row in tables.summary[name]) + " |")
    print()
    tables.print(args.show)
    return 0


if __name__ == "__main__":
    sys.exit(main())
