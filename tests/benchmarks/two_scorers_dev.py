#!/usr/bin/env python3
"""Both state scorers in the calibration of an adapted model, on dev material.

Per seed (the calibration's held-out split): the starter is adapted as ``wordspot train``
adapts it on the demo training voices that are not dev voices (its state scorer tuned);
a second network is fitted on the same recordings aligned with the adapted mixtures
(``AdaptationConfig.own_scorer``'s recipe, :func:`wordspot.training.own_scorer.fit_own_scorer`).
The two models share their mixtures, so they hear the same words; only the posterior
measures differ. Three calibrations are fitted on the same held-out examples (recognised
by the model adapted on the rest, as ``train_calibrated`` does) and applied to the final
models' recognitions of the dev sets (``tune_filler.dev_sets``: the dev voices' commands
clean and in noise, joined files, phrases, and the sets with no command):

- the tuned starter's network (the default),
- the own network alone,
- both: the default's measures and the own network's four posterior measures side by side.

``--diagnose-test`` instead trains on every training voice and scores the demo's test voices
one word per file: **for diagnosis only**, never to choose.

    OPENBLAS_NUM_THREADS=1 python tests/benchmarks/two_scorers_dev.py --seeds 0 1 2
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

from tune_filler import NO_COMMAND, dev_sets, write_dev_train_manifest  # noqa: E402

from wordspot.decoding.confidence import OWN_PREFIX as OWN  # noqa: E402  (the own network's measures' prefix)


def _measures(segments, names):
    from wordspot.decoding.confidence import MEASURE_NAMES

    idx = [MEASURE_NAMES.index(n) for n in names]
    return np.array([[s.measures[i] for i in idx] for s in segments], dtype=np.float64).reshape(-1, len(idx))


def _fit(x, right, names, config):
    """As ``fit_calibration``: logistic regression, then caps where a weight opposes its sign."""
    from wordspot.evaluation.calibrate import contrary_caps
    from wordspot.util.logistic import fit_logistic

    fitted = fit_logistic(x, right.astype(int), names, penalty=config.penalty)
    return contrary_caps(fitted, x[right.astype(bool)], config.cap_quantile)


def _systems(ex_a, ex_b, config):
    """The three calibrations, each with the function giving its inputs from the two
    recognitions' segments."""
    from wordspot.evaluation.calibrate import CALIBRATION_POSTERIOR_MEASURES, calibration_measures
    from wordspot.decoding.confidence import MEASURE_NAMES

    names = calibration_measures(ex_a.measures)
    cols = [MEASURE_NAMES.index(n) for n in names]
    post = [MEASURE_NAMES.index(n) for n in CALIBRATION_POSTERIOR_MEASURES]
    xa, xb = ex_a.measures[:, cols], ex_b.measures[:, cols]
    both = np.hstack([xa, ex_b.measures[:, post]])
    both_names = tuple(names) + tuple(OWN + n for n in CALIBRATION_POSTERIOR_MEASURES)
    return {
        "tuned starter's network (default)": (_fit(xa, ex_a.right, names, config),
                                              lambda sa, sb: _measures(sa, names)),
        "own network": (_fit(xb, ex_b.right, names, config), lambda sa, sb: _measures(sb, names)),
        "both networks": (_fit(both, ex_a.right, both_names, config),
                          lambda sa, sb: np.hstack([_measures(sa, names),
                                                    _measures(sb, CALIBRATION_POSTERIOR_MEASURES)])),
    }


def _models(utterances, lexicon, seed, settings, jobs):
    """(calibrations, model A, model B, seconds): the default adaptation and the own
    network, both calibrations' examples from the model adapted on the rest."""
    from wordspot.evaluation.calibrate import CalibrationConfig, calibration_examples, held_out_parts
    from wordspot.model import load_model
    from wordspot.training.adapt import AdaptationConfig, adapting
    from wordspot.training.own_scorer import SCRATCH_SCORER, fit_own_scorer
    from wordspot.audio.augment import NoiseSettings

    config = AdaptationConfig(jobs=jobs)
    ccfg = CalibrationConfig(seed=seed, settings=settings)
    own = replace(SCRATCH_SCORER, max_frames=60_000, seed=config.seed)
    noise = NoiseSettings(copies=config.follow_noise_copies, snr_db=config.follow_noise_snr)

    def own_model(model, utts):
        net, _, _ = fit_own_scorer(replace(model, scorer=None), utts, noise=noise, speeds=config.follow_speeds,
                                   background_share=config.background_share,
                                   background_kinds=config.background_kinds, seed=config.seed, scorer=own, jobs=jobs)
        return replace(model, scorer=net)

    t0 = time.perf_counter()
    fit = adapting(load_model("starter"), lexicon, config=config)
    parts, _ = held_out_parts(utterances, ccfg)
    rest, held = parts[0]
    first, _ = fit(rest, held_out=held, again=True)
    first_b = own_model(first, rest)
    kw = dict(settings=ccfg.settings, speeds=ccfg.speeds, jumbled=ccfg.jumbled, seed=ccfg.seed, jobs=jobs)
    ex_a = calibration_examples(first, held, **kw)
    ex_b = calibration_examples(first_b, held, **kw)
    if ex_a.right.shape != ex_b.right.shape or not np.array_equal(ex_a.right, ex_b.right):
        raise SystemExit("the two networks' held-out words differ: the mixtures are not shared")
    model_a, _ = fit(utterances)
    model_b = own_model(model_a, utterances)
    return _systems(ex_a, ex_b, ccfg), model_a, model_b, time.perf_counter() - t0


def _heard(model_a, model_b, items, settings, single_word=False):
    from wordspot.audio.features import compute_features
    from wordspot.decoding.decoder import build_recognizer

    s = replace(settings, single_word=single_word)
    ra, rb = build_recognizer(model_a, settings=s), build_recognizer(model_b, settings=s)
    out = []
    for wave, ref in items:
        x = compute_features(wave, model_a.features)
        sa, sb = ra.decode(x).segments, rb.decode(x).segments
        if [w.word for w in sa] != [w.word for w in sb]:
            raise SystemExit("the two models heard different words: the mixtures are not shared")
        out.append((ref, sa, sb))
    return out


def _score(heard, system, threshold):
    from wordspot.evaluation.scoring import align_words

    cal, inputs = system
    right = errors = words = 0
    for ref, sa, sb in heard:
        conf = cal.predict(inputs(sa, sb)) if sa else np.zeros(0)
        kept = [w.word for w, c in zip(sa, np.atleast_1d(conf)) if c >= threshold]
        right += kept == list(ref)
        a = align_words(list(ref), kept)
        errors += a.substitutions + a.deletions + a.insertions
        words += len(ref)
    return errors, words, right, len(heard)


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--seeds", type=int, nargs="+", default=[0, 1, 2])
    ap.add_argument("--jobs", type=int, default=2)
    ap.add_argument("--thresholds", type=float, nargs="+", default=[0.02, 0.05, 0.1])
    ap.add_argument("--diagnose-test", action="store_true",
                    help="train on every training voice, score the demo's test voices (diagnosis only)")
    args = ap.parse_args(argv)

    from posterior_confidence_dev import operating_eer
    from wordspot.corpus import read_manifest
    from wordspot.decoding.decoder import DecoderSettings
    from wordspot.language.lexicon import read_lexicon

    settings = DecoderSettings(min_confidence=0.0, filler_penalty=-100.0)
    lexicon = read_lexicon(REPO / "lexicon" / "bakery.txt")
    rows = {}
    with tempfile.TemporaryDirectory() as tmp:
        manifest = REPO / "recordings" / "train.csv" if args.diagnose_test else \
            write_dev_train_manifest(Path(tmp) / "dev-train.csv")
        utterances = read_manifest(manifest)
        sets = None
        for seed in args.seeds:
            systems, model_a, model_b, secs = _models(utterances, lexicon, seed, settings, args.jobs)
            if args.diagnose_test:
                from wordspot.audio.reading import load_audio

                test = [(load_audio(u.path, sample_rate=16000), list(u.words))
                        for u in read_manifest(REPO / "recordings" / "test.csv")]
                heard = {"test (one word per file)": _heard(model_a, model_b, test, settings, single_word=True)}
            else:
                if sets is None:
                    sets = dev_sets(model_a, 100, snrs=(20.0, 10.0), no_command=True)
                heard = {name: _heard(model_a, model_b, items, settings) for name, items in sets.items()}
            for name, system in systems.items():
                for t in args.thresholds:
                    rows.setdefault((name, t), []).append({k: _score(h, system, t) for k, h in heard.items()})
                if not args.diagnose_test:
                    def triples(key):
                        cal, inputs = system
                        return [(ref, [w.word for w in sa], cal.predict(inputs(sa, sb)) if sa else np.zeros(0))
                                for ref, sa, sb in heard[key]]
                    eer = 100 * operating_eer(triples("words"), [(w, c) for key in ("other talk", "noise only")
                                                                  for _, w, c in triples(key)])
                    rows.setdefault((name, "eer"), []).append(eer)
            print(f"seed {seed} done ({secs:.0f} s for the models and examples)", file=sys.stderr, flush=True)
    kinds = list(heard)
    print(f"seeds {args.seeds}: mean (min-max); commands and noise: WER; joined: files exactly right; "
          "no-command sets: files with a command")
    print("| calibration | threshold | " + " | ".join(kinds) + " | EER |")
    print("| --- | ---: |" + " ---: |" * (len(kinds) + 1))
    for (name, t), per_seed in rows.items():
        if t == "eer":
            continue
        cells = []
        for k in kinds:
            vals = []
            for r in per_seed:
                errors, words, right, files = r[k]
                vals.append(100 * (1 - right / files) if k in NO_COMMAND else
                            100 * right / files if k == "joined" else 100 * errors / max(words, 1))
            cells.append(f"{np.mean(vals):.1f} ({min(vals):.1f}-{max(vals):.1f})")
        e = rows.get((name, "eer"))
        print(f"| {name} | {t:g} | " + " | ".join(cells) + (f" | {np.mean(e):.1f} ({min(e):.1f}-{max(e):.1f}) |"
                                                              if e else " | |"))
    return 0


if __name__ == "__main__":
    sys.exit(main())
