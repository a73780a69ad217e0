#!/usr/bin/env python3
"""Confidence of voices far from the starter corpus's, on dev material only.

The demo's training voices are given another vocal tract and pitch (``--factor F``: sox
``speed F`` then ``tempo 1/F``, so every frequency, formants and pitch alike, is scaled
by F at the same length; ``--tilt DB`` adds a spectral tilt, ``treble`` at 3 kHz), both
the "user's" training takes (the voices that are not dev voices) and the dev voices'
commands: a user with an unusual voice. Per seed of the calibration's held-out split
the starter is adapted as ``wordspot train`` does (held-out takes, the calibration's
examples recognised by the model adapted on the rest, adapted again on every take), and
the examples of every kind are gathered once (the default kinds, noisy copies, joined
phrases, and, with ``--whole-speakers``, the examples of whole speakers held out of
another adaptation); each calibration variant (:data:`VARIANTS`) is then fitted on its
examples and applied to the final model's recognitions of the dev sets of
``tune_filler.py`` (the far dev voices' commands clean, in noise, joined, as phrase
stand-ins; the starter corpus's other talk and noise-only clips, which no far voice
says). ``--factor 1`` (no change) gives the ordinary dev voices. ``--scratch`` also
trains from scratch (``api.train`` with its default calibration) per seed, as a last row.

    python tests/benchmarks/far_voices_dev.py --factor 1.2 --seeds 0 1 2 --scratch
    python tests/benchmarks/far_voices_dev.py --factor 1 --seeds 0 1 2 --whole-speakers

The demo's test sets are never used here.
"""

from __future__ import annotations

import argparse
import csv
import subprocess
import sys
import tempfile
import time
from dataclasses import replace
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
REPO = HERE.parents[1]
sys.path.insert(0, str(HERE))

from compare_data import dev_voices  # noqa: E402
from threshold_dev import CLEAN, NOISY, PHRASE, VariantTables, decode_sets, mix_arg  # noqa: E402
from tune_filler import NO_COMMAND, _rows, dev_sets  # noqa: E402

RATE = 16000


def far_wave(wave: np.ndarray, factor: float, tilt_db: float = 0.0) -> np.ndarray:
    """``wave`` (16 kHz) with every frequency scaled by ``factor`` at the same length (sox
    ``speed`` then ``tempo``), and ``tilt_db`` of treble at 3 kHz; the level kept."""
    if factor == 1.0 and tilt_db == 0.0:
        return np.asarray(wave, dtype=np.float32)
    effects = []
    if factor != 1.0:
        effects += ["speed", f"{factor:g}", "rate", str(RATE), "tempo", f"{1.0 / factor:.6f}"]
    if tilt_db:
        effects += ["treble", f"{tilt_db:g}", "3000"]
    raw = np.asarray(wave, dtype=np.float32)
    fmt = ["-t", "f32", "-r", str(RATE), "-c", "1"]
    out = subprocess.run(["sox", "-V1", *fmt, "-", *fmt, "-", *effects], input=raw.tobytes(),
                         capture_output=True, check=True).stdout
    got = np.frombuffer(out, dtype=np.float32).copy()
    peak = np.abs(got).max() if got.size else 0.0
    rms_in, rms_out = np.sqrt(np.mean(raw ** 2)), np.sqrt(np.mean(got ** 2)) if got.size else 0.0
    if rms_out > 0:
        got *= min(rms_in / rms_out, 0.99 / max(peak, 1e-9))
    return got


def voice_factors(factor: float, per_voice) -> dict:
    """The frequency scale of every demo training voice: ``factor`` for all, or with
    ``per_voice`` the voices in name order given its factors in turn."""
    with open(REPO / "recordings" / "voices.csv", newline="", encoding="utf-8") as fh:
        voices = sorted(r["voice"] for r in csv.DictReader(fh) if r["split"] == "train")
    return {v: (per_voice[i % len(per_voice)] if per_voice else factor) for i, v in enumerate(voices)}


def write_far_training(out: Path, factors: dict, tilt_db: float) -> Path:
    """Far copies of the demo training recordings of the voices that are not dev voices,
    as WAV files under ``out``, and their manifest (returned)."""
    from wordspot.audio.reading import load_audio
    from wordspot.audio.writing import write_wav

    rec = REPO / "recordings"
    held = set(dev_voices(rec / "voices.csv"))
    manifest = out / "far-train.csv"
    with open(manifest, "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh)
        w.writerow(["path", "transcript", "speaker"])
        for r in _rows(rec / "train.csv"):
            if r["speaker"] in held:
                continue
            path = out / (r["path"].rsplit(".", 1)[0] + ".wav")
            path.parent.mkdir(parents=True, exist_ok=True)
            write_wav(path, far_wave(load_audio(rec / r["path"], sample_rate=RATE), factors[r["speaker"]], tilt_db),
                      RATE)
            w.writerow([str(path), r["transcript"], r["speaker"]])
    return manifest


def shift_to_miss(cal, right_measures: np.ndarray, most: float, threshold: float):
    """``cal`` with its intercept raised just enough that at most ``most`` of the right
    words ``right_measures`` fall below ``threshold`` (unchanged when already so)."""
    from wordspot.decoding.confidence import MEASURE_NAMES

    cols = [MEASURE_NAMES.index(n) for n in cal.names]
    d = cal.decision(right_measures[:, cols])
    want = np.quantile(d, most)
    need = np.log(threshold / (1 - threshold)) - want
    return cal if need <= 0 else replace(cal, intercept=cal.intercept + need)


class ClippedCalibration:
    """A fitted calibration whose measures are clipped, before the standardisation, to the
    range its own examples spanned (all measures, or only those named in ``only``): no
    extrapolation of a linear log-odds beyond what the fit saw (common practice for linear
    models used outside their data, no source). Dev-only; same ``names`` / ``decision`` /
    ``predict`` as :class:`wordspot.util.logistic.Calibration`."""

    def __init__(self, cal, examples, only=None):
        from wordspot.decoding.confidence import MEASURE_NAMES
        from wordspot.util.logistic import sigmoid

        self.cal, self.names, self._sigmoid = cal, cal.names, sigmoid
        x = examples.measures[:, [MEASURE_NAMES.index(n) for n in cal.names]]
        keep = np.array([only is None or n in only for n in cal.names])
        self.lo = np.where(keep, x.min(axis=0), -np.inf)
        self.hi = np.where(keep, x.max(axis=0), np.inf)

    def decision(self, X):
        return self.cal.decision(np.clip(np.asarray(X, dtype=np.float64), self.lo, self.hi))

    def predict(self, X):
        return self._sigmoid(self.decision(X))


class BestRightClipped(ClippedCalibration):
    """A fitted calibration whose measures are clipped on their better side only, to the
    best value among the right held-out words ``right`` (rows in the order of
    ``MEASURE_NAMES``): a measure of sign +1 (``calibrate.MEASURE_SIGNS``) from above at
    their largest, of sign -1 from below at their smallest, one without a sign not at all.
    A word that fits better than any right held-out word counts as the best of them, not
    as something the fit never saw (ours, no source). Dev-only."""

    def __init__(self, cal, right, only=None):
        from wordspot.decoding.confidence import MEASURE_NAMES
        from wordspot.evaluation.calibrate import MEASURE_SIGNS
        from wordspot.util.logistic import sigmoid

        self.cal, self.names, self._sigmoid = cal, cal.names, sigmoid
        x = right[:, [MEASURE_NAMES.index(n) for n in cal.names]]
        sign = np.array([MEASURE_SIGNS.get(n, 0) if only is None or n in only else 0 for n in cal.names])
        self.lo = np.where(sign < 0, x.min(axis=0), -np.inf)
        self.hi = np.where(sign > 0, x.max(axis=0), np.inf)


def toward(start, examples, penalty: float):
    """The logistic regression of right / wrong on ``examples`` (the default measures),
    its L2 penalty pulling the weights toward those of the calibration ``start`` (a
    starter's, over the same measures) instead of toward 0: ``start``'s weight of a raw
    measure, ``w / s``, put on this fit's standardisation (``w / s * s_here``). The
    penalised log-likelihood of :mod:`wordspot.util.logistic` with ``||w - w0||^2``
    (a Gaussian prior centred on ``w0``: common practice, no source). Dev-only."""
    from scipy.optimize import minimize

    from wordspot.decoding.confidence import MEASURE_NAMES
    from wordspot.evaluation.calibrate import calibration_measures
    from wordspot.util.logistic import Calibration, sigmoid

    names = calibration_measures(examples.measures)
    if set(names) != set(start.names):
        raise SystemExit(f"the starter's calibration uses {start.names}, these examples {names}")
    x = examples.measures[:, [MEASURE_NAMES.index(n) for n in names]]
    y = examples.right.astype(np.float64)
    means, scales = x.mean(axis=0), x.std(axis=0)
    scales[scales == 0] = 1.0
    order = [start.names.index(n) for n in names]
    w0 = np.append(start.coefficients[order] / start.scales[order] * scales, 0.0)
    a = np.hstack([(x - means) / scales, np.ones((x.shape[0], 1))])
    ridge = np.append(np.full(len(names), float(penalty)), 0.0)

    def loss(t):
        v = a @ t
        return float(np.sum(np.logaddexp(0.0, v) - y * v) + 0.5 * np.dot(ridge * (t - w0), t - w0))

    def grad(t):
        return a.T @ (sigmoid(a @ t) - y) + ridge * (t - w0)

    def hess(t):
        p = sigmoid(a @ t)
        return (a * (p * (1 - p))[:, None]).T @ a + np.diag(ridge)

    out = minimize(loss, w0.copy(), jac=grad, hess=hess, method="Newton-CG", options={"xtol": 1e-10, "maxiter": 200})
    return Calibration(names, means, scales, out.x[:-1].copy(), float(out.x[-1]))


def variants(whole: bool):
    """name -> f(examples of held-out takes, examples of whole speakers or None, config) -> Calibration.

    The first, "no cap (the former default)", sets the share of other talk the others are
    matched at; all but the default and the capped ones are fitted without the caps of
    ``CalibrationConfig.cap_quantile``, as they were recorded."""
    from wordspot.decoding.confidence import BASE_MEASURE_NAMES, DEFAULT_MIN_CONFIDENCE, MEASURE_NAMES
    from wordspot.evaluation.calibrate import calibration_measures, fit_calibration

    def kinds(ex, names):
        return ex.subset(np.isin(ex.source, names))

    def signed(ex, c, free=()):
        """The sign-constrained fit with the measures ``free`` of any sign."""
        from wordspot.evaluation.calibrate import MEASURE_SIGNS
        from wordspot.util.logistic import fit_logistic

        names = calibration_measures(ex.measures)
        return fit_logistic(ex.measures[:, [MEASURE_NAMES.index(n) for n in names]], ex.right.astype(int), names,
                            penalty=c.penalty, signs=[0 if n in free else MEASURE_SIGNS.get(n, 0) for n in names])

    def starter():
        from wordspot.model import load_model
        from wordspot.starters import starter_path

        return load_model(starter_path("starter")).calibration

    def right_of(ex):
        return ex.measures[ex.right & (ex.source == "held-out")]

    out = {
        # first: the share of other talk the others are matched at (the default before the caps)
        "no cap (the former default)": lambda ex, w, c: fit_calibration(kinds(ex, CLEAN),
                                                                        config=replace(c, cap_quantile=None)),
        "default (held-out takes)": lambda ex, w, c: fit_calibration(kinds(ex, CLEAN), config=c),
        "base measures only": lambda ex, w, c: fit_calibration(kinds(ex, CLEAN), config=c,
                                                                names=BASE_MEASURE_NAMES),
        "penalty x10": lambda ex, w, c: fit_calibration(kinds(ex, CLEAN), config=replace(c, penalty=10 * c.penalty)),
        "penalty x30": lambda ex, w, c: fit_calibration(kinds(ex, CLEAN), config=replace(c, penalty=30 * c.penalty)),
        "without acoustic_per_frame": lambda ex, w, c: fit_calibration(
            kinds(ex, CLEAN), config=c, names=[n for n in calibration_measures(ex.measures) if n != "acoustic_per_frame"]),
        "+ noisy copies": lambda ex, w, c: fit_calibration(kinds(ex, CLEAN + NOISY), config=c),
        "+ noisy + phrases": lambda ex, w, c: fit_calibration(kinds(ex, CLEAN + NOISY + PHRASE), config=c),
        "measures clipped to the examples' range": lambda ex, w, c: ClippedCalibration(
            fit_calibration(kinds(ex, CLEAN), config=c), kinds(ex, CLEAN)),
        "acoustic_per_frame clipped to the examples' range": lambda ex, w, c: ClippedCalibration(
            fit_calibration(kinds(ex, CLEAN), config=c), kinds(ex, CLEAN), only=("acoustic_per_frame",)),
        "contrary measures capped at the right words' 0.9 quantile": lambda ex, w, c: fit_calibration(
            kinds(ex, CLEAN), config=replace(c, cap_quantile=0.9)),
        "contrary measures capped at the right words' 0.95 quantile": lambda ex, w, c: fit_calibration(
            kinds(ex, CLEAN), config=replace(c, cap_quantile=0.95)),
        "sign-constrained weights": lambda ex, w, c: fit_calibration(
            kinds(ex, CLEAN), config=replace(c, weight_signs=True)),
        "sign-constrained, acoustic_per_frame free": lambda ex, w, c: signed(kinds(ex, CLEAN), c,
                                                                             free=("acoustic_per_frame",)),
        "toward the starter's weights": lambda ex, w, c: toward(starter(), kinds(ex, CLEAN), c.penalty),
        "toward the starter's weights, penalty x10": lambda ex, w, c: toward(
            starter(), kinds(ex, CLEAN), 10 * c.penalty),
        "clipped at the best right held-out word": lambda ex, w, c: BestRightClipped(
            fit_calibration(kinds(ex, CLEAN), config=c), right_of(ex)),
        "acoustic_per_frame clipped at the best right held-out word": lambda ex, w, c: BestRightClipped(
            fit_calibration(kinds(ex, CLEAN), config=c), right_of(ex), only=("acoustic_per_frame",)),
        "sign-constrained + clipped at the best right word": lambda ex, w, c: BestRightClipped(
            fit_calibration(kinds(ex, CLEAN), config=replace(c, weight_signs=True)), right_of(ex)),
        "held-out right words <= 1% below": lambda ex, w, c: shift_to_miss(
            fit_calibration(kinds(ex, CLEAN), config=c), right_of(ex), 0.01, DEFAULT_MIN_CONFIDENCE),
    }
    if whole:
        from wordspot.evaluation.calibrate import _merged

        out.update({
            "whole speakers": lambda ex, w, c: fit_calibration(kinds(w, CLEAN), config=c),
            "takes + whole speakers": lambda ex, w, c: fit_calibration(
                _merged([kinds(ex, CLEAN), kinds(w, CLEAN)]), config=c),
            "whole speakers' right words <= 3% below": lambda ex, w, c: shift_to_miss(
                fit_calibration(kinds(ex, CLEAN), config=c), right_of(w), 0.03, DEFAULT_MIN_CONFIDENCE),
        })
    # every variant but the default and the capped ones as recorded before the caps: uncapped
    capped = {"default (held-out takes)", "contrary measures capped at the right words' 0.9 quantile",
              "contrary measures capped at the right words' 0.95 quantile"}
    return {k: f if k in capped else (lambda ex, w, c, f=f: f(ex, w, replace(c, cap_quantile=None)))
            for k, f in out.items()}


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--factor", type=float, default=1.2, help="frequency scale of every voice (1: unchanged)")
    ap.add_argument("--per-voice", type=float, nargs="+", default=None, metavar="F",
                    help="instead: these scales given to the training voices in name order, in turn")
    ap.add_argument("--tilt", type=float, default=0.0, help="treble at 3 kHz in dB")
    ap.add_argument("--seeds", type=int, nargs="+", default=[0, 1, 2])
    ap.add_argument("--scratch", action="store_true", help="also train from scratch per seed (last row)")
    ap.add_argument("--whole-speakers", action="store_true",
                    help="also gather the examples of whole speakers held out of another adaptation")
    ap.add_argument("--joined", type=int, default=60, help="joined dev files and phrase stand-ins")
    ap.add_argument("--jobs", type=int, default=2)
    ap.add_argument("--background-kinds", nargs="+", default=None, metavar="KIND",
                    help="the adaptation's background items' kinds, KIND or KIND:PARTS (default: its default)")
    ap.add_argument("--background-share", type=float, default=None,
                    help="the adaptation's background share (default: its default)")
    ap.add_argument("--save", type=Path, default=None,
                    help="keep each seed's recognitions and examples in this folder (pickle: scratch files only)")
    ap.add_argument("--load", type=Path, default=None,
                    help="make the tables from a --save folder instead (or from one of threshold_dev.py "
                         "--variants --save: its recognitions and examples, without --scratch and --whole-speakers)")
    ap.add_argument("--only", nargs="+", default=None, metavar="NAME", help="with --load: only these variants")
    ap.add_argument("--explain", nargs="+", default=None, metavar="SET",
                    help="with --load: per seed, the measures of the right words of these sets below 0.05 beside "
                         "the held-out right words (e.g. phrases 'real phrases')")
    ap.add_argument("--show", type=float, nargs="+", default=[0.0, 0.02, 0.05, 0.1])
    args = ap.parse_args(argv)

    from wordspot.decoding.decoder import DecoderSettings
    from wordspot.evaluation.calibrate import CalibrationConfig

    settings = DecoderSettings(min_confidence=0.0)
    table = variants(args.whole_speakers)
    if args.only:
        table = {k: v for k, v in table.items() if k in args.only}
    names = list(table) + (["from scratch (its own calibration)"] if args.scratch else [])
    tables = VariantTables(names)
    sets = None
    if args.load:
        import pickle

        for seed in args.seeds:
            with open(args.load / f"seed{seed}.pickle", "rb") as fh:
                kept = pickle.load(fh)
            # a threshold_dev.py --variants --save folder holds (recognitions, examples) only
            heard, ex, whole, scratch = kept if len(kept) == 4 else (*kept, None, None)
            config = CalibrationConfig(seed=seed, settings=settings)
            tables.new_seed()
            for v, make in table.items():
                tables.add(v, heard, make(ex, whole, config), ex)
            if args.explain:
                explain(heard, ex, whole, args.explain, 0.05)
            if args.scratch and scratch is not None:
                tables.add(names[-1], scratch[0], scratch[1], ex)
        sets = heard
    else:
        sets = gather(args, table, names, tables)
    print((f"recognitions kept in {args.load}" if args.load else f"far voices: factor {args.per_voice or args.factor}")
          + f", tilt {args.tilt:g} dB; background items {adaptation_options(args) or 'default'}; seeds {args.seeds}: mean (min-max); "
          f"no-command sets: {', '.join(n for n in NO_COMMAND if n in sets)}\n")
    tables.print(args.show)
    return 0


def explain(heard, ex, whole, sets, threshold: float) -> None:
    """Why the default calibration rates right words of ``sets`` low: each measure
    standardised as the calibration does and its share of the log-odds, for the held-out
    right words it was fitted on and for the right words of ``sets`` below ``threshold``."""
    from wordspot.decoding.confidence import MEASURE_NAMES
    from wordspot.evaluation.calibrate import fit_calibration
    from wordspot.evaluation.reliability import word_hits

    cal = fit_calibration(ex.subset(np.isin(ex.source, CLEAN)))
    cols = [MEASURE_NAMES.index(n) for n in cal.names]
    right = []
    for ref, segs in [x for name in sets for x in heard[name]]:
        right += [np.asarray(g.measures)[cols] for g, h in zip(segs, word_hits(ref, [g.word for g in segs])) if h]
    right = np.array(right)
    low = right[cal.predict(right) < threshold]
    held = ex.measures[ex.right & (ex.source == "held-out")][:, cols]
    print(f"{', '.join(sets)}: {len(low)} of {len(right)} right words below {threshold:g}; held-out right words "
          f"below it {100 * np.mean(cal.predict(held) < threshold):.1f}%"
          + ("" if whole is None else ", whole speakers' right words "
             f"{100 * np.mean(cal.predict(whole.measures[whole.right & (whole.source == 'held-out')][:, cols]) < threshold):.1f}%"))
    print("\n| measure | weight | held-out right words | right words below | log-odds, held-out right | log-odds, below |")
    print("| --- | ---: | ---: | ---: | ---: | ---: |")
    for j, n in enumerate(cal.names):
        z = [(a[:, j].mean() - cal.means[j]) / cal.scales[j] if len(a) else float("nan") for a in (held, low)]
        print(f"| `{n}` | {cal.coefficients[j]:+.2f} | {z[0]:+.2f} | {z[1]:+.2f} | {cal.coefficients[j] * z[0]:+.2f} | "
              f"{cal.coefficients[j] * z[1]:+.2f} |")
    print()


def light(heard):
    """Recognitions without the decoder's objects: word and measures per segment."""
    from types import SimpleNamespace

    return {name: [(ref, [SimpleNamespace(word=g.word, measures=np.asarray(g.measures)) for g in segs])
                   for ref, segs in items] for name, items in heard.items()}


def adaptation_options(args) -> dict:
    """``AdaptationConfig`` fields from ``--background-kinds`` / ``--background-share`` (none given: {})."""
    out = {} if args.background_share is None else {"background_share": args.background_share}
    if args.background_kinds:
        out["background_kinds"] = mix_arg(args.background_kinds)
    return out


def gather(args, table, names, tables):
    """Adapt, gather the examples and recognise the dev sets per seed, adding every variant to ``tables``."""
    from wordspot import api
    from wordspot.corpus import read_manifest
    from wordspot.decoding.decoder import DecoderSettings
    from wordspot.evaluation.calibrate import (CalibrationConfig, calibration_examples, held_out_parts,
                                               recognised_share)
    from wordspot.language.lexicon import read_lexicon
    from wordspot.model import load_model
    from wordspot.starters import starter_path
    from wordspot.training.adapt import AdaptationConfig, adapting, split_by_speaker

    settings = DecoderSettings(min_confidence=0.0)
    lexicon = read_lexicon(REPO / "lexicon" / "bakery.txt")
    start = load_model(starter_path("starter"))
    adapt = AdaptationConfig(jobs=args.jobs, **adaptation_options(args))
    sets = None
    with tempfile.TemporaryDirectory() as tmp:
        t0 = time.process_time()
        factors = voice_factors(args.factor, args.per_voice)
        print("scales: " + ", ".join(f"{v} {f:g}" for v, f in factors.items()), file=sys.stderr)
        manifest = write_far_training(Path(tmp), factors, args.tilt)
        utterances = read_manifest(manifest)
        print(f"far copies ({len(utterances)}) {time.process_time() - t0:.0f} s cpu", file=sys.stderr, flush=True)
        for seed in args.seeds:
            t0 = time.process_time()
            config = CalibrationConfig(seed=seed, settings=settings)
            (rest, held), = held_out_parts(utterances, config)[0]
            fit = adapting(start, lexicon, config=adapt, manifest=manifest)
            model_rest, _ = fit(rest, held_out=held)
            ex = calibration_examples(model_rest, held, settings=settings, speeds=config.speeds,
                                      jumbled=config.jumbled, seed=seed, noisy=2, phrases=100, jobs=args.jobs)
            model, _ = fit(utterances)
            whole = None
            if args.whole_speakers:
                held_w = split_by_speaker(utterances, AdaptationConfig.held_out_speaker_share, seed)
                spk = {u.speaker for u in held_w}
                rest_w = [u for u in utterances if u.speaker not in spk]
                fit_w = adapting(start, lexicon, config=adapt, manifest=manifest)
                model_w, _ = fit_w(rest_w, held_out=held_w, again=False)
                whole = calibration_examples(model_w, recognised_share(held_w, len(utterances), config),
                                             settings=settings, speeds=config.speeds, jumbled=config.jumbled,
                                             seed=seed, jobs=args.jobs)
                print(f"seed {seed}: whole speakers {sorted(spk)}", file=sys.stderr)
            t1 = time.process_time()
            if sets is None:
                def voice(wave, speaker):
                    return far_wave(wave, factors[speaker], args.tilt)

                sets = dev_sets(model, args.joined, snrs=(20.0, 10.0), no_command=True, voice=voice)
                print("dev sets: " + ", ".join(f"{k} {len(v)}" for k, v in sets.items()), file=sys.stderr)
            heard = light(decode_sets(model, sets, settings))
            tables.new_seed()
            for v, make in table.items():
                tables.add(v, heard, make(ex, whole, config), ex)
            kept = None
            if args.scratch:
                scratch = api.train(manifest, lexicon, start=None, calibration=CalibrationConfig(seed=seed))
                kept = (light(decode_sets(scratch, sets, settings)), scratch.calibration)
                tables.add(names[-1], kept[0], kept[1], ex)
            if args.save:
                import pickle

                args.save.mkdir(parents=True, exist_ok=True)
                with open(args.save / f"seed{seed}.pickle", "wb") as fh:
                    pickle.dump((heard, ex, whole, kept), fh)
            print(f"seed {seed}: {ex.right.size} calibration words ({int(ex.right.sum())} right); cpu "
                  f"{t1 - t0:.0f} s adapting and examples, {time.process_time() - t1:.0f} s dev sets",
                  file=sys.stderr, flush=True)
    return sets


if __name__ == "__main__":
    sys.exit(main())
