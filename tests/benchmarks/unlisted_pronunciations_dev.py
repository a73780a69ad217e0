#!/usr/bin/env python3
"""Posterior measures that tolerate vowels the lexicon does not list, on dev material, over seeds.

Two systems, as in use:

* ``adapted``: per seed, the starter adapted on the demo training voices that are not dev
  voices with the held-out split of ``wordspot train`` (``CalibrationConfig(seed=s)``: 15%
  of each transcript's takes, 150 jumbled clips, speeds 0.9-1.4, no noisy copies, phrases
  or noise clips), its calibration examples gathered on the held-out takes as training
  gathers them (the model is not adapted again on every take, as ``threshold_dev.py
  --variants``);
* ``starter``: the shipped starter (not adapted), its calibration examples gathered as
  ``recordings/build_starters.py`` does (``StarterCalibrationConfig(seed=s)``, seed 0 the
  shipped one) on the starter corpus's dev split.

Each system recognises the dev sets once per seed with the bakery words and no threshold
(the adapted model) or once (the starter): the dev voices' commands ("words"), their real
phrases, the commands said with vowels moved (``shifted_vowels.py``: the espeak-ng dev
voices, two takes a word) and the same words from their listed phonemes ("listed
phonemes", the control), and the sets without a command (other talk, noise only, everyday
words, impacts; ``tune_filler.py``, ``dev_no_command.py``). Then for every candidate set of
posterior measures (:data:`CANDIDATES`: ``posterior_worst_phone`` replaced by a new
measure, or a new measure added beside it; the floored worst phone at several floors,
clipped here from the stored worst phone) a calibration is fitted on the same examples
and the dev confidences computed from the stored measures.

Prints per system and candidate, mean (min-max) over seeds: command misses at the default
threshold on the dev commands, the shifted-vowel commands and the control; dev command
WER and real-phrase WER there; no-command files with a command there; the same at the
highest threshold missing at most 5% and 20% of the dev commands (and of the dev and
shifted-vowel commands together); the EER of the dev commands (and of both) against the
no-command files.

    python tests/benchmarks/unlisted_pronunciations_dev.py --seeds 0 1 2 --save /tmp/unlisted
    python tests/benchmarks/unlisted_pronunciations_dev.py --seeds 0 1 2 --load /tmp/unlisted

``--save`` keeps every recognition's measures and the calibration examples (JSON and npz,
benchmark scratch files) so that ``--load`` scores again without recognising.
"""

from __future__ import annotations

import argparse
import json
import sys
import tempfile
import time
from pathlib import Path
from types import SimpleNamespace

import numpy as np

HERE = Path(__file__).resolve().parent
REPO = HERE.parents[1]
sys.path.insert(0, str(HERE))

from tune_filler import NO_COMMAND, dev_sets, write_dev_train_manifest  # noqa: E402

BEFORE = ("posterior_mean", "posterior_phone_mean", "posterior_worst_phone", "posterior_filler_margin")
NEW = {"any vowel": "posterior_worst_phone_any_vowel", "vowel class": "posterior_worst_phone_vowel_class",
       "second worst": "posterior_second_worst_phone", "two worst": "posterior_two_worst_phones",
       "floored": "posterior_worst_phone_floored"}
FLOORS = (-4.0, -5.0, -6.0, -8.0)


def _candidates():
    """{label: (posterior measure names, floor of the floored worst phone or None)}."""
    out = {"before (worst phone)": (BEFORE, None)}
    for short, name in NEW.items():
        for floor in (FLOORS if short == "floored" else (None,)):
            tag = f"{short} {floor:g}" if floor is not None else short
            out[f"{tag} instead"] = (tuple(name if n == "posterior_worst_phone" else n for n in BEFORE), floor)
            out[f"+ {tag}"] = (BEFORE + (name,), floor)
    return out


CANDIDATES = _candidates()
SHIFTED, LISTED = "shifted vowels", "listed phonemes"


def floored(measures: np.ndarray, floor) -> np.ndarray:
    """``measures`` (rows in the order of ``MEASURE_NAMES``) with the floored worst phone at ``floor``."""
    from wordspot.decoding.confidence import MEASURE_NAMES

    if floor is None or measures.size == 0:
        return measures
    m = measures.copy()
    m[:, MEASURE_NAMES.index(NEW["floored"])] = np.maximum(m[:, MEASURE_NAMES.index("posterior_worst_phone")], floor)
    return m


# ----------------------------------------------------------------------------- recognising

def decode_measures(model, sets, lexicon):
    """{set: [(reference, words heard, measures (n, M))]}: every file once, no threshold."""
    from wordspot.audio.features import compute_features
    from wordspot.decoding.confidence import MEASURE_NAMES
    from wordspot.decoding.decoder import DecoderSettings, build_recognizer

    rec = build_recognizer(model, settings=DecoderSettings(min_confidence=0.0), lexicon=lexicon)
    out = {}
    for name, items in sets.items():
        rows = []
        for wave, ref in items:
            segs = rec.decode(compute_features(wave, model.features)).segments
            rows.append((list(ref), [s.word for s in segs],
                         np.array([s.measures for s in segs], dtype=np.float64).reshape(-1, len(MEASURE_NAMES))))
        out[name] = rows
    return out


def save_heard(path: Path, heard) -> None:
    path.write_text(json.dumps({k: [(r, w, m.tolist()) for r, w, m in v] for k, v in heard.items()}))


def load_heard(path: Path):
    from wordspot.decoding.confidence import MEASURE_NAMES

    raw = json.loads(path.read_text())
    return {k: [(r, w, np.array(m, dtype=np.float64).reshape(-1, len(MEASURE_NAMES))) for r, w, m in v]
            for k, v in raw.items()}


def save_examples(path: Path, ex) -> None:
    np.savez(path, measures=ex.measures, right=ex.right, removed=ex.own_words_removed, jumbled=ex.jumbled,
             source=ex.source, recordings=ex.recordings)


def load_examples(path: Path):
    from wordspot.evaluation.calibrate import CalibrationExamples

    z = np.load(path)
    return CalibrationExamples(z["measures"], z["right"], z["removed"], z["jumbled"], int(z["recordings"]),
                               [], z["source"])


# ----------------------------------------------------------------------------- scoring

def hit_scores(items, conf) -> np.ndarray:
    """Per one-word command file: the highest confidence of a heard word that is the command
    (-inf: not heard). At threshold t the file's command is missed iff its score < t (with
    one reference word the alignment matches it whenever it is kept)."""
    out = []
    for (ref, words, _), c in zip(items, conf):
        assert len(ref) == 1
        hits = [x for w, x in zip(words, c) if w == ref[0]]
        out.append(max(hits) if hits else -np.inf)
    return np.array(out)


def fire_scores(conf) -> np.ndarray:
    """Per no-command file: the highest confidence of a heard word (-inf: none)."""
    return np.array([c.max() if c.size else -np.inf for c in conf])


def grid(*scores) -> np.ndarray:
    every = np.concatenate([s[np.isfinite(s)] for s in scores] + [np.zeros(1)])
    return np.unique(np.r_[0.0, np.quantile(every, np.linspace(0, 1, 400)), 1.0 + 1e-9])


def firing_at_miss(hits, fires, most: float) -> float:
    """Percent of no-command files with a command at the highest threshold (of a grid of the
    confidences' quantiles) missing at most ``most`` of the commands."""
    ok = [t for t in grid(hits) if np.mean(hits < t) <= most + 1e-12]
    return 100 * float(np.mean(fires >= max(ok, default=0.0)))  # none: no threshold (as threshold_dev.py)


def eer(hits, fires) -> float:
    """The equal error rate of misses against no-command files with a command (as
    ``posterior_confidence_dev.operating_eer``: ``evaluation.detection.equal_error_rate``)."""
    from wordspot.evaluation.detection import equal_error_rate

    ts = grid(hits, fires)
    got = equal_error_rate([float(np.mean(hits < t)) for t in ts], [float(np.mean(fires >= t)) for t in ts])
    return 100 * float("nan") if got is None else 100 * got


def wer(items, conf, t: float) -> float:
    from wordspot.evaluation.scoring import align_words

    errors = words = 0
    for (ref, hyp, _), c in zip(items, conf):
        a = align_words(ref, [w for w, x in zip(hyp, c) if x >= t])
        errors += a.substitutions + a.deletions + a.insertions
        words += len(ref)
    return 100 * errors / words


COLUMNS = ("misses dev", "misses shifted", "misses listed", "command WER", "real phrases WER",
           "no-command firing", "firing at 5% miss", "firing at 20% miss", "firing at 5% miss (dev+shifted)",
           "firing at 20% miss (dev+shifted)", "EER", "EER (dev+shifted)")


def score(heard, ex, names, floor, config):
    """The row of :data:`COLUMNS` for one calibration (fitted on ``ex`` over ``names``)."""
    from wordspot.decoding.confidence import BASE_MEASURE_NAMES, DEFAULT_MIN_CONFIDENCE, MEASURE_NAMES
    from wordspot.evaluation.calibrate import fit_calibration

    names = BASE_MEASURE_NAMES + tuple(names)
    cols = [MEASURE_NAMES.index(n) for n in names]
    # an example with a measure that is not finite is left out (as starter_calibration_dev.py;
    # the starter's seed 1 draws one with an infinite runner-up margin)
    ok = np.isfinite(ex.measures[:, cols]).all(axis=1)
    fitted = type(ex)(floored(ex.measures[ok], floor), ex.right[ok], ex.own_words_removed[ok], ex.jumbled[ok],
                      ex.recordings, [], ex.source[ok])
    cal = fit_calibration(fitted, config=config, names=names)
    conf = {k: [cal.predict(floored(m, floor)[:, cols]) if m.shape[0] else np.zeros(0) for _, _, m in v]
            for k, v in heard.items()}
    t = DEFAULT_MIN_CONFIDENCE
    h = {k: hit_scores(heard[k], conf[k]) for k in ("words", SHIFTED, LISTED) if k in heard}
    fires = np.concatenate([fire_scores(conf[k]) for k in NO_COMMAND if k in heard])
    both = np.concatenate([h["words"], h[SHIFTED]])
    return [100 * np.mean(h["words"] < t), 100 * np.mean(h[SHIFTED] < t),
            100 * np.mean(h[LISTED] < t) if LISTED in h else np.nan, wer(heard["words"], conf["words"], t),
            wer(heard["real phrases"], conf["real phrases"], t) if "real phrases" in heard else np.nan,
            100 * np.mean(fires >= t), firing_at_miss(h["words"], fires, 0.05), firing_at_miss(h["words"], fires, 0.2),
            firing_at_miss(both, fires, 0.05), firing_at_miss(both, fires, 0.2), eer(h["words"], fires), eer(both, fires)]


def describe(heard) -> str:
    """Median worst-phone measures of the right command words by set (what the measures see)."""
    from wordspot.decoding.confidence import MEASURE_NAMES

    names = ["posterior_worst_phone"] + list(NEW.values())[:4]
    lines = ["| set | right words | " + " | ".join(names) + " |", "| --- | ---: |" + " ---: |" * len(names)]
    for k in ("words", SHIFTED, LISTED):
        rows = [m[i] for ref, w, m in heard.get(k, []) for i, x in enumerate(w) if x == ref[0]]
        if rows:
            a = np.array(rows)
            lines.append(f"| {k} | {len(rows)} | " + " | ".join(
                f"{np.median(a[:, MEASURE_NAMES.index(n)]):.2f}" for n in names) + " |")
    wrong = [m[i] for k in NO_COMMAND for _, w, m in heard.get(k, []) for i in range(len(w))]
    if wrong:
        a = np.array(wrong)
        lines.append(f"| no-command sets (every word wrong) | {len(wrong)} | " + " | ".join(
            f"{np.median(a[:, MEASURE_NAMES.index(n)]):.2f}" for n in names) + " |")
    return "\n".join(lines)


def print_table(title, rows_by_candidate) -> None:
    print(f"\n{title}\n")
    print("| candidate | " + " | ".join(COLUMNS) + " |")
    print("| --- |" + " ---: |" * len(COLUMNS))
    for label, rows in rows_by_candidate.items():
        a = np.array(rows, dtype=float)
        print(f"| {label} | " + " | ".join(f"{a[:, j].mean():.1f} ({a[:, j].min():.1f}-{a[:, j].max():.1f})"
                                           for j in range(a.shape[1])) + " |")


# ----------------------------------------------------------------------------- main

def build_sets(lexicon, folder: Path | None):
    """The dev sets as (waveform, reference) lists; the shifted-vowel sets kept in ``folder``."""
    from shifted_vowels import shifted_vowel_set

    sets = dev_sets(SimpleNamespace(lexicon=lexicon), 0, snrs=(), no_command=True)
    for gone in ("joined", "phrases"):
        sets.pop(gone, None)
    for name, listed in ((SHIFTED, False), (LISTED, True)):
        cached = folder / f"{name.replace(' ', '-')}.npz" if folder else None
        if cached and cached.exists():
            z = np.load(cached, allow_pickle=False)
            sets[name] = [(z[f"w{i}"], [str(z["words"][i])]) for i in range(len(z["words"]))]
            continue
        got = shifted_vowel_set(lexicon, listed=listed)
        if not got:
            raise SystemExit("unlisted_pronunciations_dev.py: the text-to-speech engines are needed")
        sets[name] = [(w, ref) for w, ref, _ in got]
        if cached:
            np.savez(cached, words=np.array([ref[0] for _, ref, _ in got]), said=np.array([s for _, _, s in got]),
                     **{f"w{i}": w for i, (w, _, _) in enumerate(got)})
    return sets


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--seeds", type=int, nargs="+", default=[0, 1, 2])
    ap.add_argument("--systems", nargs="+", default=["starter", "adapted"], choices=["starter", "adapted"])
    ap.add_argument("--save", type=Path, default=None, help="keep recognitions and examples in this folder")
    ap.add_argument("--load", type=Path, default=None, help="score the recognitions and examples kept by --save")
    args = ap.parse_args(argv)

    from wordspot.corpus import read_manifest
    from wordspot.decoding.decoder import DecoderSettings
    from wordspot.evaluation.calibrate import CalibrationConfig, calibration_examples, held_out_parts
    from wordspot.evaluation.starter_calibration import StarterCalibrationConfig, starter_calibration_examples
    from wordspot.language.lexicon import read_lexicon
    from wordspot.model import load_model
    from wordspot.starters import starter_path
    from wordspot.training.adapt import AdaptationConfig, adapting

    lexicon = read_lexicon(REPO / "lexicon" / "bakery.txt")
    folder = args.load or args.save
    if args.save:
        args.save.mkdir(parents=True, exist_ok=True)
    settings = DecoderSettings(min_confidence=0.0)
    starter_config = CalibrationConfig(min_items=1, min_per_class=5, penalty=StarterCalibrationConfig.penalty)
    results = {s: {c: [] for c in CANDIDATES} for s in args.systems}
    sets = starter_heard = None
    start = load_model(starter_path("starter"))
    for system in args.systems:
        for seed in args.seeds:
            t0 = time.process_time()
            heard_file = folder / f"{system}-seed{seed}.json" if folder else None
            ex_file = folder / f"{system}-seed{seed}-examples.npz" if folder else None
            if system == "starter" and folder and seed != args.seeds[0]:
                heard_file = folder / f"starter-seed{args.seeds[0]}.json"  # the starter hears the dev sets once
            if args.load or (args.save and heard_file.exists() and ex_file.exists()):  # kept by an earlier run
                heard, ex = load_heard(heard_file), load_examples(ex_file)
            else:
                if sets is None:
                    sets = build_sets(lexicon, args.save)
                    print("dev sets: " + ", ".join(f"{k} {len(v)}" for k, v in sets.items()), file=sys.stderr)
                if system == "starter":
                    ex = (load_examples(ex_file) if ex_file is not None and ex_file.exists() else
                          starter_calibration_examples(start, read_manifest(REPO / "recordings" / "starter" / "dev.csv"),
                                                       StarterCalibrationConfig(seed=seed)))
                    if starter_heard is None:
                        starter_heard = (load_heard(heard_file) if heard_file is not None and heard_file.exists()
                                         else decode_measures(start, sets, lexicon))
                    heard = starter_heard
                else:
                    config = CalibrationConfig(seed=seed, settings=settings)
                    with tempfile.TemporaryDirectory() as tmp:
                        manifest = write_dev_train_manifest(Path(tmp) / "dev-train.csv")
                        (rest, held), = held_out_parts(read_manifest(manifest), config)[0]
                        model, _ = adapting(start, lexicon, config=AdaptationConfig(), manifest=manifest)(
                            rest, held_out=held)
                        ex = calibration_examples(model, held, settings=settings, speeds=config.speeds,
                                                  jumbled=config.jumbled, seed=seed)
                    heard = decode_measures(model, sets, lexicon)
                if args.save:
                    save_heard(heard_file, heard)
                    save_examples(ex_file, ex)
            config = starter_config if system == "starter" else CalibrationConfig(seed=seed, settings=settings)
            for label, (names, floor) in CANDIDATES.items():
                results[system][label].append(score(heard, ex, names, floor, config))
            print(f"{system} seed {seed}: {ex.right.size} calibration words ({int(ex.right.sum())} right), "
                  f"cpu {time.process_time() - t0:.0f} s", file=sys.stderr, flush=True)
            if seed == args.seeds[0]:
                print(f"\n{system}, seed {seed}: medians of the worst-phone measures of the right command words\n")
                print(describe(heard))
    for system, rows in results.items():
        print_table(f"{system}: seeds {args.seeds}, mean (min-max); threshold for misses and WER: the default",
                    rows)
    return 0


if __name__ == "__main__":
    sys.exit(main())
