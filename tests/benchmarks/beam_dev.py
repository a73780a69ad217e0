#!/usr/bin/env python3
"""The search's beams and state limit on dev material: agreement with the unpruned search, errors, time.

Per seed, the starter is adapted with calibration on the demo training voices that are not
dev voices (as ``talk_gap_dev.py`` does); every file of the dev sets of ``tune_filler.py``
(plus ``among talk`` and ``other sentences`` from ``talk_gap_dev.py``) is scored once
(mixtures and the sound scorer's posteriors), then searched with every beam setting and
with no pruning at all. Reported per setting:

- the share of files whose kept words (default threshold and rules) differ from the
  unpruned search's (pruning errors, whatever their sign);
- the dev error figures as ``talk_gap_dev.py`` reports them (WER for command sets, files
  not exactly right or with a command for the others);
- the search's CPU time (``time.process_time``, one thread, the settings interleaved in
  every round, best of ``--rounds``) as a ratio to the default setting's.

    python tests/benchmarks/beam_dev.py [--seeds 0 1 2] [--rounds 3]
"""

from __future__ import annotations

import os

for _var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS", "NUMBA_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

import argparse  # noqa: E402
import sys  # noqa: E402
import tempfile  # noqa: E402
import time  # noqa: E402
from pathlib import Path  # noqa: E402

import numpy as np  # noqa: E402

HERE = Path(__file__).resolve().parent
REPO = HERE.parents[1]
sys.path.insert(0, str(HERE))

from talk_gap_dev import dev_sets_with_talk  # noqa: E402
from tune_filler import NO_COMMAND, write_dev_train_manifest  # noqa: E402

#: (beam, word-end beam, state limit); the first is the default, inf = no pruning
SETTINGS = ((800.0, 600.0, 2000), (400.0, 300.0, 2000), (300.0, 250.0, 2000), (250.0, 200.0, 2000),
            (200.0, 150.0, 2000), (800.0, 600.0, 300), (800.0, 600.0, 150), (300.0, 250.0, 300))


def _label(s) -> str:
    return "unpruned" if not np.isfinite(s[0]) else f"{s[0]:g} / {s[1]:g} / {s[2]}"


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--seeds", type=int, nargs="+", default=[0, 1, 2])
    ap.add_argument("--rounds", type=int, default=3, help="timing rounds; the best is kept (default 3)")
    ap.add_argument("--settings", nargs="+", metavar="B,W,K",
                    help="beam,word-end beam,state limit triples; the first is the reference for time "
                    "(default: the grid in SETTINGS)")
    ap.add_argument("--joined", type=int, default=100, help="joined files and phrase stand-ins (default 100)")
    args = ap.parse_args(argv)

    from wordspot import api
    from wordspot.audio.features import compute_features
    from wordspot.decoding.decoder import DecoderSettings, build_recognizer
    from wordspot.evaluation.calibrate import CalibrationConfig
    from wordspot.evaluation.scoring import align_words

    grid = [tuple(float(x) for x in t.split(",")) for t in args.settings] if args.settings else SETTINGS
    settings = list(grid) + [(np.inf, np.inf, np.iinfo(np.int64).max)]
    table: dict = {}
    sets = None
    with tempfile.TemporaryDirectory() as tmp:
        manifest = write_dev_train_manifest(Path(tmp) / "dev-train.csv")
        for seed in args.seeds:
            model = api.train(manifest, REPO / "lexicon" / "bakery.txt", start="starter",
                              calibration=CalibrationConfig(seed=seed))
            if sets is None:
                sets = dev_sets_with_talk(model, args.joined)
            recs = [build_recognizer(model, settings=DecoderSettings(beam=b, word_end_beam=w, state_limit=int(k)))
                    for b, w, k in settings]
            scored = {name: [(ref, recs[0].emissions_and_posteriors(compute_features(wave, model.features)))
                             for wave, ref in items]
                      for name, items in sets.items()}
            spent = np.full(len(settings), np.inf)
            words: list[dict] = [{} for _ in settings]
            for rnd in range(args.rounds):
                for i, rec in enumerate(recs):
                    took = 0.0
                    out = {}
                    for name, items in scored.items():
                        a = time.process_time()
                        got = [rec.search(ll, posteriors=lp).words for _, (ll, lp) in items]
                        took += time.process_time() - a
                        out[name] = got
                    spent[i] = min(spent[i], took)
                    words[i] = out
            for i, s in enumerate(settings):
                row = []
                differ = total = 0
                for name, items in scored.items():
                    right = errors = n_words = 0
                    for k, (ref, _) in enumerate(items):
                        kept = list(words[i][name][k])
                        differ += kept != list(words[-1][name][k])
                        total += 1
                        right += kept == ref
                        a = align_words(ref, kept)
                        errors += a.substitutions + a.deletions + a.insertions
                        n_words += len(ref)
                    whole_file = name in NO_COMMAND or name in ("joined", "other sentences") or name.startswith("noisy")
                    row.append(100 * (1 - right / len(items)) if whole_file else 100 * errors / max(n_words, 1))
                table.setdefault(s, []).append([100 * differ / total, spent[i] / spent[0]] + row)
            print(f"seed {seed} done", file=sys.stderr, flush=True)
    label = {"words": "command WER", "joined": "joined: not exactly right", "phrases": "phrase stand-ins WER",
             "real phrases": "real phrases WER", "among talk": "among talk WER"}
    names = ["files unlike unpruned %", "search time x default"] + [
        label.get(n, f"{n}: files with a command" if n in NO_COMMAND or n == "other sentences"
                  else f"{n}: not exactly right") for n in sets]
    print(f"seeds {args.seeds}: mean (min-max)")
    print("| beam / word-end beam / state limit | " + " | ".join(names) + " |")
    print("| --- |" + " ---: |" * len(names))
    for s, rows in table.items():
        a = np.array(rows)
        cells = [f"{a[:, j].mean():.{2 if j == 1 else 1}f} ({a[:, j].min():.{2 if j == 1 else 1}f}-"
                 f"{a[:, j].max():.{2 if j == 1 else 1}f})" for j in range(a.shape[1])]
        print(f"| {_label(s)} | " + " | ".join(cells) + " |")
    return 0


if __name__ == "__main__":
    sys.exit(main())
