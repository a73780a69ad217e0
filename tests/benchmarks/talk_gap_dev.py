#!/usr/bin/env python3
"""Dropping command words said inside other talk (``DecoderSettings.talk_gap``), on dev material.

Per seed, the starter is adapted with calibration on the demo training voices that are not
dev voices (as ``threshold_dev.py`` does); the model recognises the dev sets of
``tune_filler.py`` once, with no threshold, keeping every word's confidence and the best
path's items; then every threshold, gap and number of sides is applied afterwards with
:func:`wordspot.decoding.context.inside_talk`, exactly as the decoder applies it.

One more dev set, ``among talk``: a dev command said by a voice that the starter corpus's
dev split also has (flite-awb, espeak-en-gb-x-gbclan-f5) between two of that voice's
sentences from that split (none with a lexicon word), 0.05-1.0 s of the first sentence's
room tone on each side (uniform, our own assumption of how people pause around a command
among talk; chosen before any result). WER over the commands: the cost of the rule where
commands sit among talk, and the words the talk adds. And ``other sentences``: the
sentences of ``other talk`` alone (a word said alone is never inside talk).

    python tests/benchmarks/talk_gap_dev.py [--seeds 0 1 2]
"""

from __future__ import annotations

import argparse
import csv
import sys
import tempfile
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
REPO = HERE.parents[1]
sys.path.insert(0, str(HERE))

from tune_filler import NO_COMMAND, dev_sets, write_dev_train_manifest  # noqa: E402
from joined_pauses import RATE  # noqa: E402

THRESHOLDS = (0.05,)
GAPS = (0.0, 0.2, 0.3, 0.4)
#: (sides, look past kept commands, seconds of talk a side needs)
VARIANTS = ((2, True, 0.0), (2, True, 0.3), (1, True, 0.3), (1, True, 0.5), (1, True, 0.8))


def among_talk(model, n: int = 120, seed: int = 20261203):
    """``n`` (waveform, command words): a dev command between two sentences of its voice."""
    from wordspot.audio.reading import load_audio

    rec = REPO / "recordings"
    start_dev = rec / "starter" / "dev.csv"
    if not start_dev.exists():
        return []
    vocab = set(model.lexicon.words)
    with open(start_dev, newline="", encoding="utf-8") as fh:
        talk = [r for r in csv.DictReader(fh) if r["kind"] == "sentence" and not (set(r["transcript"].split()) & vocab)]
    with open(rec / "train.csv", newline="", encoding="utf-8") as fh:
        takes = list(csv.DictReader(fh))
    voices = sorted({r["speaker"] for r in talk} & {r["speaker"] for r in takes})
    rng = np.random.default_rng(seed)
    out = []
    for i in range(n):
        v = voices[i % len(voices)]
        said = [r for r in takes if r["speaker"] == v]
        pool = [r for r in talk if r["speaker"] == v]
        cmd = said[int(rng.integers(len(said)))]
        a_row, b_row = (pool[k] for k in rng.choice(len(pool), size=2, replace=False))
        parts = []
        a = load_audio(start_dev.parent / a_row["path"], sample_rate=RATE)
        b = load_audio(start_dev.parent / b_row["path"], sample_rate=RATE)
        c = load_audio(rec / cmd["path"], sample_rate=RATE)
        a0, a1 = int(float(a_row["speech_start"]) * RATE), int(float(a_row["speech_end"]) * RATE)
        tone = a[:max(a0 - int(0.02 * RATE), int(0.05 * RATE))]
        c0, c1 = int(float(cmd["speech_start"]) * RATE), int(float(cmd["speech_end"]) * RATE)
        b0, b1 = int(float(b_row["speech_start"]) * RATE), int(float(b_row["speech_end"]) * RATE)
        parts = [tone, a[a0:a1], np.resize(tone, int(rng.uniform(0.05, 1.0) * RATE)), c[c0:c1],
                 np.resize(tone, int(rng.uniform(0.05, 1.0) * RATE)), b[b0:b1], tone]
        out.append((np.concatenate(parts).astype(np.float32), cmd["transcript"].split()))
    return out


def other_sentences(model):
    """The sentences among the starter corpus's dev recordings with no lexicon word."""
    from wordspot.audio.reading import load_audio

    start_dev = REPO / "recordings" / "starter" / "dev.csv"
    if not start_dev.exists():
        return []
    vocab = set(model.lexicon.words)
    with open(start_dev, newline="", encoding="utf-8") as fh:
        rows = [r for r in csv.DictReader(fh) if r["kind"] == "sentence" and not (set(r["transcript"].split()) & vocab)]
    return [(load_audio(start_dev.parent / r["path"], sample_rate=RATE), []) for r in rows]


def dev_sets_with_talk(model, n_joined: int) -> dict:
    """``tune_filler.dev_sets`` plus "among talk" and "other sentences" (where the starter
    corpus is there): the sentences of "other talk" alone, since a word said alone is never
    inside talk."""
    sets = dev_sets(model, n_joined)
    for name, extra in (("among talk", among_talk(model)), ("other sentences", other_sentences(model))):
        if extra:
            sets[name] = extra
    return sets


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--seeds", type=int, nargs="+", default=[0, 1, 2])
    ap.add_argument("--gaps", type=float, nargs="+", default=list(GAPS), help="gaps in seconds (0: the rule off)")
    ap.add_argument("--joined", type=int, default=100, help="joined files and phrase stand-ins (default 100)")
    args = ap.parse_args(argv)

    from wordspot import api
    from wordspot.audio.features import compute_features
    from wordspot.decoding.context import inside_talk
    from wordspot.decoding.decoder import DecoderSettings, build_recognizer
    from wordspot.evaluation.calibrate import CalibrationConfig
    from wordspot.evaluation.scoring import align_words

    settings = DecoderSettings(min_confidence=0.0)
    table: dict = {}
    sets = None
    with tempfile.TemporaryDirectory() as tmp:
        manifest = write_dev_train_manifest(Path(tmp) / "dev-train.csv")
        for seed in args.seeds:
            model = api.train(manifest, REPO / "lexicon" / "bakery.txt", start="starter",
                              calibration=CalibrationConfig(seed=seed))
            if sets is None:
                sets = dev_sets_with_talk(model, args.joined)
            rec = build_recognizer(model, settings=settings)
            heard = {}
            for name, items in sets.items():
                heard[name] = []
                for wave, ref in items:
                    r = rec.decode(compute_features(wave, model.features))
                    words = r.segments  # threshold 0: every word
                    heard[name].append((ref, [s.word for s in words], np.array([s.confidence for s in words]),
                                        r.path_items))
            hop = rec.hop
            for t in THRESHOLDS:
                for g in args.gaps:
                    for sides, through, least in VARIANTS if g > 0 else ((2, False, 0.0),):
                        row = []
                        for name, items in heard.items():
                            right = errors = n_words = 0
                            for ref, hyp, conf, path in items:
                                inside = inside_talk(path, conf, t, int(round(g / hop)), sides, through,
                                                     int(round(least / hop)))
                                kept = [w for k, w in enumerate(hyp) if conf[k] >= t and not inside[k]]
                                right += kept == ref
                                a = align_words(ref, kept)
                                errors += a.substitutions + a.deletions + a.insertions
                                n_words += len(ref)
                            row.append(100 * (1 - right / len(items)) if name in NO_COMMAND or name == "joined"
                                       or name == "other sentences"
                                       or name.startswith("noisy") else 100 * errors / max(n_words, 1))
                        table.setdefault((t, g, sides, through, least), []).append(row)
            print(f"seed {seed} done", file=sys.stderr, flush=True)
    label = {"words": "command WER", "joined": "joined: not exactly right", "phrases": "phrase stand-ins WER",
             "real phrases": "real phrases WER", "among talk": "among talk WER"}
    names = [label.get(n, f"{n}: files with a command" if n in NO_COMMAND or n == "other sentences"
                       else f"{n}: not exactly right")
             for n in sets]
    summed = [j for j, n in enumerate(sets) if n != "other sentences"]  # a part of "other talk"
    print(f"seeds {args.seeds}: mean (min-max); 'sum' adds the columns' means (other sentences, a part of "
          "other talk, left out)")
    print("| threshold | gap s | sides | past kept commands | talk s | " + " | ".join(names) + " | sum |")
    print("| ---: | ---: | ---: | --- | ---: |" + " ---: |" * (len(names) + 1))
    for (t, g, sides, through, least), rows in table.items():
        a = np.array(rows)
        print(f"| {t:g} | {g:g} | {sides if g > 0 else '-'} | {('yes' if through else 'no') if g > 0 else '-'} | "
              f"{least:g} | "
              + " | ".join(f"{a[:, j].mean():.1f} ({a[:, j].min():.1f}-{a[:, j].max():.1f})" for j in range(a.shape[1]))
              + f" | {a.mean(axis=0)[summed].sum():.1f} |")
    return 0


if __name__ == "__main__":
    sys.exit(main())
