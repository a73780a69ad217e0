#!/usr/bin/env python3
"""A frequency warp chosen per recording at recognition time, judged on dev material only.

``--fit OUT`` writes a copy of the 16 kHz starter with a voice mixture
(:mod:`wordspot.audio.voice_warp`) fitted on the unwarped features of the speech frames
of the starter corpus's train split (every ``--every``-th recording); the shipped
starter is left as it is.

Then, per judge of the warp (``none``: factor 1, today's recognition; ``voice``: the voice
mixture; ``states``: the best of the model's own mixtures per frame, averaged over the
speech frames), every dev recording is recognised once with no threshold and the
thresholds are applied afterwards:

* the starter alone: the starter corpus's dev split (its three dev voices, one word per
  file among every word that split says), the demo's dev voices' commands (one word per
  file and in the word loop), per voice; the same commands given another vocal tract
  (``far_voices_dev.far_wave``, ``--far`` factors: a frequency scaling the warp can undo,
  a sanity check only); and the dev sets of ``tune_filler.py`` with ``--no-command-sets``
  (commands clean, at 20 and 10 dB, phrase stand-ins, real phrases; other talk, noise
  only, everyday words, impacts) with the starter's own calibration;
* ``--adapted``: the starter copy adapted with calibration as ``wordspot train`` does on the
  demo training voices that are not dev voices, once per ``--seeds`` seed of the
  calibration's held-out split, then the same dev sets.

    python tests/benchmarks/warp_dev.py --fit /tmp/starter-voice.model
    python tests/benchmarks/warp_dev.py --model /tmp/starter-voice.model --starter
    python tests/benchmarks/warp_dev.py --model /tmp/starter-voice.model --adapted --seeds 0 1 2
    python tests/benchmarks/warp_dev.py --shift /tmp/starter-voice.model /tmp/starter-voice128.model

The demo's test sets are never used here.
"""

from __future__ import annotations

import argparse
import sys
import tempfile
import time
from collections import defaultdict
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
REPO = HERE.parents[1]
sys.path.insert(0, str(HERE))

from compare_data import dev_voices  # noqa: E402

RATE = 16000
JUDGES = ("none", "voice", "states")


def fit_copy(out: Path, every: int, components: int, seed: int) -> None:
    """The starter with a voice mixture fitted on its training corpus, written to ``out``."""
    from dataclasses import replace

    from wordspot.audio.features import features_for_warps
    from wordspot.audio.reading import load_audio
    from wordspot.audio.voice_warp import fit_voice_mixture, speech_frames
    from wordspot.corpus import read_manifest
    from wordspot.model import load_model, save_model

    model = load_model("starter")
    rows = read_manifest(REPO / "recordings" / "starter" / "train.csv")[::every]
    t0 = time.process_time()
    frames = []
    for u in rows:
        (f,), e = features_for_warps(load_audio(u.path, sample_rate=model.features.sample_rate), model.features, [1.0])
        frames.append(f[speech_frames(e)])
    x = np.concatenate(frames)
    voice = fit_voice_mixture(x, components, seed=seed)
    info = {**model.info, "voice": {"recordings": len(rows), "frames": int(x.shape[0]), "components": components,
                                    "seed": seed, "source": "starter corpus train split"}}
    save_model(replace(model, voice=voice, info=info), out)
    print(f"{out}: voice mixture of {components} Gaussians on {x.shape[0]} speech frames of {len(rows)} "
          f"recordings, cpu {time.process_time() - t0:.1f} s")


class Judged:
    """Recognises waveforms under every judge, the features of each warp computed once."""

    def __init__(self, model, settings, lexicon=None, grid=None):
        from dataclasses import replace

        from wordspot.audio.voice_warp import WARP_GRID
        from wordspot.decoding.decoder import build_recognizer

        self.grid = tuple(grid or WARP_GRID)
        self.model = model
        self.rec = build_recognizer(replace(model, voice=None), settings=settings, lexicon=lexicon)
        self.cost = {"features": 0.0, "voice": 0.0, "states": 0.0, "decode": 0.0}
        self.chosen = {j: [] for j in JUDGES}

    def run(self, wave) -> dict:
        """{judge: Recognition} for one waveform."""
        from wordspot.audio.features import compute_features, features_for_warps
        from wordspot.audio.voice_warp import speech_frames, MIN_SPEECH_FRAMES

        t0 = time.process_time()
        feats, energy = features_for_warps(wave, self.model.features, self.grid)
        t1 = time.process_time()
        mask = speech_frames(energy)
        one = self.grid.index(1.0)
        pick = {"none": one}
        if mask.sum() < MIN_SPEECH_FRAMES:
            pick["voice"] = pick["states"] = one
        else:
            fits = [self.model.voice.frame_log_likelihoods(f[mask]).mean() for f in feats]
            pick["voice"] = int(np.argmax(fits))
            t2 = time.process_time()
            fits = [self.rec._mixture_scores(f[mask]).max(axis=1).mean() for f in feats]
            pick["states"] = int(np.argmax(fits))
            self.cost["voice"] += t2 - t1
            self.cost["states"] += time.process_time() - t2
        self.cost["features"] += t1 - t0
        t3 = time.process_time()
        _ = compute_features(wave, self.model.features)
        self.cost["features_one"] = self.cost.get("features_one", 0.0) + time.process_time() - t3
        out, done = {}, {}
        for j in JUDGES:
            k = pick[j]
            self.chosen[j].append(self.grid[k])
            if k not in done:
                t = time.process_time()
                done[k] = self.rec.decode(feats[k])
                self.cost["decode" if k == one else "decode_warped"] = (
                    self.cost.get("decode" if k == one else "decode_warped", 0.0) + time.process_time() - t)
            out[j] = done[k]
        return out


def words_and_conf(rec, threshold=0.0):
    return [s.word for s in rec.segments if s.confidence >= threshold]


def wer(items, threshold=0.0) -> float:
    """Percent WER of (reference, Recognition) pairs at ``threshold``."""
    from wordspot.evaluation.scoring import align_words

    err = n = 0
    for ref, rec in items:
        a = align_words(ref, words_and_conf(rec, threshold))
        err += a.substitutions + a.deletions + a.insertions
        n += len(ref)
    return 100.0 * err / max(n, 1)


def firing(items, threshold) -> float:
    return 100.0 * float(np.mean([bool(words_and_conf(r, threshold)) for _, r in items])) if items else float("nan")


def grouped_wers(judged: Judged, items, threshold=0.0):
    """{judge: {group: WER}} over (wave, reference, group) items, and the chosen warps by group."""
    by = {j: defaultdict(list) for j in JUDGES}
    warps = defaultdict(lambda: defaultdict(list))
    for wave, ref, group in items:
        got = judged.run(wave)
        for j in JUDGES:
            by[j][group].append((ref, got[j]))
            by[j]["all"].append((ref, got[j]))
            warps[j][group].append(judged.chosen[j][-1])
    return {j: {g: wer(v) for g, v in by[j].items()} for j in JUDGES}, warps


def print_groups(title, table, warps) -> None:
    groups = sorted(g for g in table["none"] if g != "all") + ["all"]
    print(f"\n{title}: WER by voice (no threshold); chosen warp: mean (min-max)\n")
    print("| judge | " + " | ".join(groups) + " | " + " | ".join(f"warp {g}" for g in groups[:-1]) + " |")
    print("| --- |" + " ---: |" * (2 * len(groups) - 1))
    for j in JUDGES:
        w = [f"{np.mean(warps[j][g]):.3f} ({min(warps[j][g]):.2f}-{max(warps[j][g]):.2f})" for g in groups[:-1]]
        print(f"| {j} | " + " | ".join(f"{table[j][g]:.1f}%" for g in groups) + " | " + " | ".join(w) + " |")
    sys.stdout.flush()


def dev_set_rows(judged: Judged, sets) -> dict:
    """{judge: figures} on the tune_filler dev sets at no threshold and the default threshold."""
    from posterior_confidence_dev import operating_eer
    from threshold_dev import fa_at_miss
    from tune_filler import NO_COMMAND

    from wordspot.decoding.confidence import DEFAULT_MIN_CONFIDENCE as T

    heard = {j: {} for j in JUDGES}
    for name, items in sets.items():
        for wave, ref in items:
            got = judged.run(wave)
            for j in JUDGES:
                heard[j].setdefault(name, []).append((ref, got[j]))
    out = {}
    for j in JUDGES:
        h = heard[j]
        row = {}
        for name, items in h.items():
            if name in NO_COMMAND:
                row[f"{name}: files with a command at {T:g}"] = firing(items, T)
            elif name == "joined":
                row["joined exactly right at 0"] = 100.0 * np.mean([words_and_conf(r) == ref for ref, r in items])
            else:
                row[f"{name} WER at 0"] = wer(items)
                row[f"{name} WER at {T:g}"] = wer(items, T)

        def conf(r):
            return np.array([s.confidence for s in r.segments])

        commands = [(ref, [s.word for s in r.segments], conf(r)) for ref, r in h["words"]]
        non = [([s.word for s in r.segments], conf(r)) for name in NO_COMMAND for _, r in h.get(name, [])]
        row["EER"] = 100 * operating_eer(commands, non)
        row["no-command firing at <= 5% miss"] = 100 * fa_at_miss(commands, non)
        out[j] = row
    return out


def print_dev_rows(title, rows_per_seed) -> None:
    """rows_per_seed: list over seeds of {judge: {figure: value}}; mean (min-max)."""
    names = list(rows_per_seed[0]["none"])
    print(f"\n{title}: mean (min-max) over {len(rows_per_seed)} run(s)\n")
    print("| figure | " + " | ".join(JUDGES) + " |")
    print("| --- |" + " ---: |" * len(JUDGES))
    for n in names:
        cells = []
        for j in JUDGES:
            a = np.array([r[j][n] for r in rows_per_seed])
            cells.append(f"{a.mean():.1f}" + (f" ({a.min():.1f}-{a.max():.1f})" if len(a) > 1 else ""))
        print(f"| {n} | " + " | ".join(cells) + " |")
    sys.stdout.flush()


def starter_alone(model, args) -> None:
    from far_voices_dev import far_wave
    from tune_filler import _rows, dev_sets

    from wordspot.audio.reading import load_audio
    from wordspot.corpus import read_manifest
    from wordspot.decoding.decoder import DecoderSettings
    from wordspot.language.lexicon import read_lexicon

    one = DecoderSettings(single_word=True, min_confidence=0.0)
    loop = DecoderSettings(min_confidence=0.0)
    starter_lex = read_lexicon(REPO / "recordings" / "starter-text" / "pronunciations.txt")
    dev = [u for u in read_manifest(REPO / "recordings" / "starter" / "dev.csv") if len(u.words) == 1]
    dev = dev[:: max(1, len(dev) // args.most)][: args.most]
    dev_lex = starter_lex.restricted_to(sorted({u.words[0] for u in dev}))
    t0 = time.process_time()
    bakery = read_lexicon(REPO / "lexicon" / "bakery.txt")
    if args.sets_only:
        return starter_sets(model, bakery, loop, args)
    j = Judged(model, one, dev_lex)
    table, warps = grouped_wers(j, [(load_audio(u.path, sample_rate=RATE), list(u.words), u.speaker) for u in dev])
    print_groups(f"starter corpus dev split, {len(dev)} files, {len(dev_lex)} words, one word per file", table, warps)
    cost(j)
    rec = REPO / "recordings"
    held = set(dev_voices(rec / "voices.csv"))
    words = [r for r in _rows(rec / "train.csv") if r["speaker"] in held]
    base = [(load_audio(rec / r["path"], sample_rate=RATE), r["transcript"].split(), r["speaker"]) for r in words]
    for name, settings in (("one word per file", one), ("word loop", loop)):
        j = Judged(model, settings, bakery)
        table, warps = grouped_wers(j, base)
        print_groups(f"demo dev voices' commands ({len(base)}), {name}", table, warps)
    for factor in args.far:
        j = Judged(model, loop, bakery)
        table, warps = grouped_wers(j, [(far_wave(w, factor), ref, g) for w, ref, g in base])
        print_groups(f"far voices (sanity check only: a frequency scaling by {factor:g}), word loop", table, warps)
    starter_sets(model, bakery, loop, args)
    print(f"\nstarter alone: cpu {time.process_time() - t0:.0f} s", file=sys.stderr)


def starter_sets(model, bakery, loop, args) -> None:
    """The tune_filler dev sets recognised by the starter alone with the bakery lexicon
    (so that the starter corpus's talk without a bakery word is the other-talk set)."""
    from dataclasses import replace

    from tune_filler import dev_sets

    sets = dev_sets(replace(model, lexicon=bakery), args.joined, snrs=(20.0, 10.0), no_command=True)
    print("dev sets: " + ", ".join(f"{k} {len(v)}" for k, v in sets.items()), file=sys.stderr)
    j = Judged(model, loop, bakery)
    print_dev_rows("starter alone (its own calibration), tune_filler dev sets, word loop", [dev_set_rows(j, sets)])
    cost(j)


def cost(j: Judged) -> None:
    c = j.cost
    d = c["decode"]
    print(f"\ncpu seconds: features at one warp {c.get('features_one', 0):.1f}, at {len(j.grid)} warps "
          f"{c['features']:.1f}; voice judge {c['voice']:.1f}, states judge {c['states']:.1f}; decoding "
          f"(unwarped) {d:.1f}. Choosing by the voice mixture costs "
          f"{(c['features'] - c.get('features_one', 0) + c['voice']) / max(d + c.get('features_one', 0), 1e-9):.2f} "
          f"of recognition (features + decoding)")
    sys.stdout.flush()


def adapted(model, args) -> None:
    from tune_filler import dev_sets, write_dev_train_manifest

    from wordspot import api
    from wordspot.decoding.decoder import DecoderSettings
    from wordspot.evaluation.calibrate import CalibrationConfig
    from wordspot.training.adapt import AdaptationConfig

    loop = DecoderSettings(min_confidence=0.0)
    rows, sets = [], None
    with tempfile.TemporaryDirectory() as tmp:
        manifest = write_dev_train_manifest(Path(tmp) / "dev-train.csv")
        for seed in args.seeds:
            t0 = time.process_time()
            fit = api.train(manifest, REPO / "lexicon" / "bakery.txt", start=model,
                            config=AdaptationConfig(jobs=2), calibration=CalibrationConfig(seed=seed, settings=loop))
            assert fit.voice is not None
            if sets is None:
                sets = dev_sets(fit, args.joined, snrs=(20.0, 10.0), no_command=True)
            j = Judged(fit, loop)
            rows.append(dev_set_rows(j, sets))
            print(f"seed {seed}: cpu {time.process_time() - t0:.0f} s", file=sys.stderr, flush=True)
            print_dev_rows(f"adapted with calibration, seeds {args.seeds[:len(rows)]}", rows)
            cost(j)


def shift(models, args) -> None:
    """Without decoding: on every 3rd demo dev command and every 8th starter corpus dev file,
    the spread of the chosen warp within a voice and its mean shift when the file is given
    another vocal tract (``far_wave`` by 1.15 and 0.87: ideal about -0.13 and +0.15), for
    the voice mixture of each model and for the first model's own mixtures ("states")."""
    import csv

    from far_voices_dev import far_wave

    from wordspot.audio.features import features_for_warps
    from wordspot.audio.reading import load_audio
    from wordspot.audio.voice_warp import MIN_SPEECH_FRAMES, WARP_GRID, speech_frames
    from wordspot.corpus import read_manifest
    from wordspot.decoding.decoder import build_recognizer
    from wordspot.language.lexicon import read_lexicon

    rec = REPO / "recordings"
    held = set(dev_voices(rec / "voices.csv"))
    with open(rec / "train.csv", newline="", encoding="utf-8") as fh:
        rows = [r for r in csv.DictReader(fh) if r["speaker"] in held][::3]
    items = [(load_audio(rec / r["path"], sample_rate=RATE), "demo " + r["speaker"]) for r in rows]
    items += [(load_audio(u.path, sample_rate=RATE), "starter corpus " + u.speaker)
              for u in read_manifest(rec / "starter" / "dev.csv")[::8]]
    states = build_recognizer(models[0][1], lexicon=read_lexicon(REPO / "lexicon" / "bakery.txt"))
    judges = {name: (lambda f, m=model: float(m.voice.frame_log_likelihoods(f).mean())) for name, model in models}
    judges["states"] = lambda f: float(states._mixture_scores(f).max(axis=1).mean())
    got = defaultdict(list)
    for wave, group in items:
        for factor in (1.0, 1.15, 0.87):
            feats, energy = features_for_warps(far_wave(wave, factor), models[0][1].features, WARP_GRID)
            mask = speech_frames(energy)
            for name, judge in judges.items():
                k = WARP_GRID.index(1.0) if mask.sum() < MIN_SPEECH_FRAMES else int(
                    np.argmax([judge(f[mask]) for f in feats]))
                got[name, group, factor].append(WARP_GRID[k])
    groups = sorted({g for _, g, _ in got})
    print(f"\n{len(items)} dev files; chosen warp: spread within a voice (mean sd), mean shift for a scaling by "
          "1.15 (ideal about -0.13) and 0.87 (ideal about +0.15)\n")
    print("| judge | spread | shift 1.15 | shift 0.87 |")
    print("| --- | ---: | ---: | ---: |")
    for name in judges:
        sd = np.mean([np.std(got[name, g, 1.0]) for g in groups])
        up, down = (np.mean([np.mean(np.subtract(got[name, g, f], got[name, g, 1.0])) for g in groups])
                    for f in (1.15, 0.87))
        print(f"| {name} | {sd:.3f} | {up:+.3f} | {down:+.3f} |")


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--fit", type=Path, default=None, help="write the starter copy with a voice mixture here")
    ap.add_argument("--every", type=int, default=10, help="with --fit: every N-th training recording")
    ap.add_argument("--components", type=int, default=32, help="with --fit: Gaussians of the voice mixture")
    ap.add_argument("--seed", type=int, default=0, help="with --fit: the mixture's seed")
    ap.add_argument("--model", type=Path, default=None, help="a starter copy with a voice mixture (--fit)")
    ap.add_argument("--starter", action="store_true", help="the starter alone")
    ap.add_argument("--adapted", action="store_true", help="adapted with calibration, per seed")
    ap.add_argument("--shift", type=Path, nargs="+", default=None, metavar="MODEL",
                    help="without decoding: how steady the choice is and how it follows a known scaling, for the "
                         "voice mixture of each MODEL and the first one's own mixtures")
    ap.add_argument("--seeds", type=int, nargs="+", default=[0, 1, 2])
    ap.add_argument("--most", type=int, default=300, help="starter corpus dev files at the most")
    ap.add_argument("--joined", type=int, default=100, help="joined files and phrase stand-ins")
    ap.add_argument("--sets-only", action="store_true", help="with --starter: only the tune_filler dev sets")
    ap.add_argument("--far", type=float, nargs="*", default=[1.15, 0.87])
    args = ap.parse_args(argv)
    if args.fit:
        fit_copy(args.fit, args.every, args.components, args.seed)
    if args.shift:
        from wordspot.model import load_model

        shift([(f"voice, {load_model(p).voice.n_components} Gaussians", load_model(p)) for p in args.shift], args)
    if args.model and (args.starter or args.adapted):
        from wordspot.model import load_model

        model = load_model(args.model)
        if model.voice is None:
            ap.error(f"{args.model} has no voice mixture; make one with --fit")
        if args.starter:
            starter_alone(model, args)
        if args.adapted:
            adapted(model, args)
    return 0


if __name__ == "__main__":
    sys.exit(main())
