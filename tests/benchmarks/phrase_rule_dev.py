#!/usr/bin/env python3
"""Phrases judged whole or word by word (``DecoderSettings.word_rule``), on dev material only.

Per seed, the starter is adapted with calibration (that seed) on the demo training voices
that are not dev voices, as ``wordspot train`` would (``talk_gap_dev.py`` does the same).
The model recognises the dev sets of ``tune_filler.py`` once with no threshold, keeping
every word's confidence and the best path's items; each rule is then applied afterwards
with :func:`wordspot.decoding.context.keep_words`, exactly as the decoder applies it (the
threshold and the rules act after the search, so the search is the same):

- ``word``: each word by its own confidence (the decoder's default);
- ``run P``: the command words between pauses longer than P seconds form a run, judged by
  its mean confidence;
- ``run P, floor F``: the same, words below F left out of the runs (judged alone);
- ``inner P``: a run whose mean reaches the threshold keeps its words that reach it alone
  and the weak words between two of them; a run below it is dropped whole.

The sets: the dev voices' commands alone, joined, as phrase stand-ins, real phrases, in
noise at 10 dB; the same sets said by the far dev voices (``far_voices_dev.far_wave``, the
factors of ``dev_long.far_factors``: voices the model never heard; no noisy set); and the
sets without commands (other talk, noise only, everyday words, impacts, other impacts),
where every file with a word kept is a false accept. The demo's test sets are never used.

    python tests/benchmarks/phrase_rule_dev.py --seeds 0 1 2
"""

from __future__ import annotations

import argparse
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
REPO = HERE.parents[1]
sys.path.insert(0, str(HERE))

from dev_long import far_factors  # noqa: E402
from tune_filler import NO_COMMAND, dev_sets, write_dev_train_manifest  # noqa: E402

#: Sets scored by WER (the others: share of files not exactly right, or with a command).
WER_SETS = ("words", "phrases", "real phrases", "far words", "far phrases", "far real phrases")
#: The far voices' sets kept (their no-command sets would be the same files again).
FAR_SETS = ("words", "joined", "phrases", "real phrases")


def all_sets(model, n_joined: int) -> dict:
    """The ordinary dev sets (commands and no-command) and the far voices' command sets."""
    from far_voices_dev import far_wave

    sets = dev_sets(model, n_joined, snrs=(10.0,), no_command=True)
    factors = far_factors()
    far = dev_sets(model, n_joined, snrs=(10.0,), voice=lambda w, speaker: far_wave(w, factors[speaker]))
    sets.update({f"far {k}": far[k] for k in FAR_SETS if k in far})
    return sets


def score(heard, threshold: float, gap: int, min_talk: int, run_pause, floor: float = 0.0,
          inner: bool = False) -> dict:
    """Per set: WER %, or % of files not exactly right (command sets) or with a word kept
    (no-command sets)."""
    from wordspot.decoding.context import keep_words
    from wordspot.evaluation.scoring import align_words

    out = {}
    for name, items in heard.items():
        right = errors = n_words = with_word = 0
        for ref, hyp, conf, path in items:
            kept, _ = keep_words(path, conf, threshold, gap, min_talk, run_pause, floor, inner)
            words = [w for k, w in enumerate(hyp) if kept[k]]
            right += words == list(ref)
            with_word += bool(words)
            a = align_words(list(ref), words)
            errors += a.substitutions + a.deletions + a.insertions
            n_words += len(ref)
        if name in NO_COMMAND:
            out[name] = 100 * with_word / len(items)
        elif name in WER_SETS:
            out[name] = 100 * errors / max(n_words, 1)
        else:
            out[name] = 100 * (1 - right / len(items))
    return out


def recognise(args):
    """Per seed: (every set's recognitions with no threshold, the hop in seconds)."""
    from wordspot import api
    from wordspot.audio.features import compute_features
    from wordspot.decoding.decoder import DecoderSettings, build_recognizer
    from wordspot.evaluation.calibrate import CalibrationConfig
    from wordspot.training.adapt import AdaptationConfig

    sets = None
    with tempfile.TemporaryDirectory() as tmp:
        manifest = write_dev_train_manifest(Path(tmp) / "dev-train.csv")
        for seed in args.seeds:
            t0 = time.process_time()
            model = api.train(manifest, REPO / "lexicon" / "bakery.txt", start="starter",
                              config=AdaptationConfig(jobs=args.jobs), calibration=CalibrationConfig(seed=seed))
            t1 = time.process_time()
            if sets is None:
                sets = all_sets(model, args.joined)
                print("sets: " + ", ".join(f"{k} {len(v)}" for k, v in sets.items()), file=sys.stderr, flush=True)
            rec = build_recognizer(model, settings=DecoderSettings(min_confidence=0.0))
            heard = {}
            for name, items in sets.items():
                heard[name] = []
                for wave, ref in items:
                    r = rec.decode(compute_features(wave, model.features))
                    heard[name].append((ref, [s.word for s in r.segments], np.array([s.confidence for s in r.segments]),
                                        r.path_items))
            if args.save:
                import pickle

                args.save.mkdir(parents=True, exist_ok=True)
                with open(args.save / f"seed{seed}.pickle", "wb") as fh:
                    pickle.dump((heard, rec.hop), fh)
            print(f"seed {seed}: cpu {t1 - t0:.0f} s adapting, {time.process_time() - t1:.0f} s recognising",
                  file=sys.stderr, flush=True)
            yield heard, rec.hop


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--seeds", type=int, nargs="+", default=[0, 1, 2])
    ap.add_argument("--joined", type=int, default=60, help="joined files and phrase stand-ins per voice kind")
    ap.add_argument("--pauses", type=float, nargs="+", default=[0.3, 0.5, 1.0], help="run pauses in seconds")
    ap.add_argument("--thresholds", type=float, nargs="+", default=[None],
                    help="thresholds (default: the calibrated model's default)")
    ap.add_argument("--floors", type=float, nargs="+", default=[0.0], help="run floors")
    ap.add_argument("--inner", action="store_true", help="also the inner rule at each pause")
    ap.add_argument("--jobs", type=int, default=2)
    ap.add_argument("--save", type=Path, default=None,
                    help="keep each seed's recognitions in this folder (pickle: scratch files only)")
    ap.add_argument("--load", type=Path, default=None, help="make the table from a --save folder instead")
    args = ap.parse_args(argv)

    from wordspot.decoding.confidence import DEFAULT_MIN_CONFIDENCE
    from wordspot.decoding.decoder import DecoderSettings

    base = DecoderSettings()
    table: dict = {}
    heards = []
    if args.load:
        import pickle

        for seed in args.seeds:
            with open(args.load / f"seed{seed}.pickle", "rb") as fh:
                heards.append(pickle.load(fh))
    else:
        heards = list(recognise(args))
    for heard, hop in heards:
        gap, least = int(round(base.talk_gap / hop)), int(round(base.talk_length / hop))
        for t in args.thresholds:
            t = DEFAULT_MIN_CONFIDENCE if t is None else t
            for pause in [None] + list(args.pauses):
                frames = None if pause is None else int(round(pause / hop))
                for floor in [0.0] if pause is None else args.floors:
                    table.setdefault((t, pause, floor, False), []).append(score(heard, t, gap, least, frames, floor))
                if pause is not None and args.inner:
                    table.setdefault((t, pause, 0.0, True), []).append(score(heard, t, gap, least, frames, 0.0, True))
    sets = heards[0][0]
    names = list(sets)
    label = {n: (f"{n} WER" if n in WER_SETS else f"{n}: files with a command" if n in NO_COMMAND
                 else f"{n}: not exactly right") for n in names}
    print(f"seeds {args.seeds}: mean (min-max) in %")
    print("| threshold | rule | " + " | ".join(label[n] for n in names) + " |")
    print("| ---: | --- |" + " ---: |" * len(names))
    for (t, pause, floor, inner), rows in table.items():
        a = np.array([[r[n] for n in names] for r in rows])
        rule = ("word" if pause is None else f"{'inner' if inner else 'run'} {pause:g} s"
                + (f", floor {floor:g}" if floor else ""))
        print(f"| {t:g} | {rule} | "
              + " | ".join(f"{a[:, j].mean():.1f} ({a[:, j].min():.1f}-{a[:, j].max():.1f})" for j in range(len(names)))
              + " |", flush=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
