#!/usr/bin/env python3
"""Rebuild wordspot's starter models from the starter corpus, with one command.

    python recordings/build_starters.py            # corpus (if missing) + both starters
    python recordings/build_starters.py --rates 16000 --jobs 2
    python recordings/build_starters.py --scorer-only   # only the state scorer, on the shipped starters

Steps:

1. If ``recordings/starter/train.csv`` is missing, make the starter corpus with
   ``recordings/starter.py build`` (synthetic speech from Debian's text-to-speech engines;
   the demo's test voices and new words are left out on purpose, see recordings/README.md).
2. Train one model per rate from scratch on the corpus's train split, with the settings
   below. The dev split's voices (flite awb and two espeak-ng voices) stay out, so that
   the dev measures of the starter and of adaptation (docs/experiments/2026-12-02-starter-corpus.md,
   docs/experiments/2026-12-02-adaptation.md) stay fair; add
   ``--manifests recordings/starter/train.csv recordings/starter/dev.csv`` to use them too.
3. Add the state scorer (:mod:`wordspot.acoustic.scorer`): align the same train split,
   plus background-only items (noise alone, labelled with the pause unit's states), items
   of impacts alone (knocks, clinks, taps, scrapes; also pause-labelled, ``--scorer-impacts``,
   never cached), a noisy copy of every recording (its recording's labels) and copies
   played 0.9 and 1.1 times as fast (each aligned through its own chain), with
   the model just trained (:func:`wordspot.training.frame_labels.align_frames`), fit the
   network on those frame labels (:func:`wordspot.training.scorer_fit.fit_scorer`), measure
   its frame accuracy on the dev split's alignment (and on a noisy copy of the dev split with
   the same labels), and attach it as ``model.scorer``.
   ``--scorer-only`` runs this step alone on the existing starter files (the shipped ones,
   or those in ``--out``), so the Gaussian mixtures are not trained again; ``--no-scorer``
   leaves it out.
4. Fit the confidence calibration the starter ships with
   (:mod:`wordspot.evaluation.starter_calibration`): many small vocabularies drawn from the
   words the dev split's recordings say alone; those recordings, the dev split's other
   talk, jumbled speech and background-only clips recognised with each; a logistic
   regression over the word measures (the state scorer's posterior measures among them),
   a measure whose weight opposes its meaning capped at the right words' 0.95 quantile.
   A model adapted from the starter keeps it when the user's takes are too few for their
   own. ``--calibration-only`` runs this step alone on the existing starter files;
   ``--no-calibration`` leaves it out.
5. Record in each model file how it was made (corpus, voices, what was left out, date,
   this command, the scorer's settings and dev figures) and write it into
   ``wordspot/starters/`` (atomically).
"""

from __future__ import annotations

import argparse
import csv
import datetime as dt
import subprocess
import sys
import time
from dataclasses import dataclass
from pathlib import Path

HERE = Path(__file__).resolve().parent
REPO = HERE.parent
CORPUS = HERE / "starter"
LEXICON = HERE / "starter-text" / "pronunciations.txt"
OUT = REPO / "wordspot" / "starters"

#: Final Gaussians per state and passes, chosen on the starter corpus's dev split.
MIXTURES = 16
FIRST_PASSES = 5
PASSES_PER_SPLIT = 3
NOISE_COPIES = 1
SPEED_FACTORS = (1.0,)
NAMES = {16000: "starter", 8000: "starter-8k"}

#: The state scorer: hidden layers, frames of context on each side, training frames at most
#: (a seeded subsample of the clean, noisy and speed items below; about 20 minutes of one
#: core on a shared machine), background-only items per recording and the seed; chosen on
#: the starter corpus's dev split (docs/experiments/2026-12-02-state-scorer.md; the varied
#: data and 1,200,000 frames in its section "2026-12-03": dev frame accuracy 64.1% -> 65.4%
#: clean, 26.4% -> 41.8% on a noisy copy of the dev split, seed 0).
SCORER_HIDDEN = (256, 256)
SCORER_CONTEXT = 5
SCORER_MAX_FRAMES = 1_200_000
SCORER_BACKGROUND_SHARE = 0.1
SCORER_SEED = 0
#: Varied data for the scorer: noisy copies of every training recording (babble and
#: steady noise, SNR drawn from SCORER_SNR_DB; each takes its clean recording's labels) and
#: speed copies (each aligned through its own chain); dev figures in
#: docs/experiments/2026-12-02-state-scorer.md, section "2026-12-03".
SCORER_NOISE_COPIES = 1
SCORER_SNR_DB = (0.0, 25.0)
SCORER_SPEEDS = (0.9, 1.1)
#: Items of impacts alone (knocks, clinks, taps, scrapes; the training's background kind
#: "impacts", :mod:`wordspot.audio.impacts`) for the scorer, as a share of the recordings,
#: labelled with the pause states (as adaptation's ``scorer_impacts`` does), so that the
#: scorer's pause posterior rises on impulsive kitchen sounds; 0: none. 0.1 on dev, three
#: seeds (docs/experiments/2026-12-03-starter-impacts.md): impact clips with a command at
#: the default threshold 51.7% -> 3.3%, the dev-only second kind 56.7% -> 21.1%, commands
#: and other talk within the seeds' spread, commands at 10 dB 1.4 points worse.
SCORER_IMPACT_SHARE = 0.1
#: Separates the scorer's impact items from the background items (same seed).
IMPACT_STREAM = 0x1A4C7
DEV = CORPUS / "dev.csv"


def _voices(manifest: Path) -> list[str]:
    with open(manifest, newline="", encoding="utf-8") as f:
        return sorted({row["speaker"] for row in csv.DictReader(f)})


def build_corpus(jobs: int) -> None:
    if (CORPUS / "train.csv").exists():
        return
    print("starter corpus missing: building it (recordings/starter.py build)", flush=True)
    subprocess.run([sys.executable, str(HERE / "starter.py"), "build", "--jobs", str(jobs)], check=True)


def train_one(rate: int, jobs: int, mixtures: int, quiet: bool, manifests: list[Path], out: Path | None) -> Path:
    import numpy as np

    from wordspot.audio.features import FeatureSettings
    from wordspot.corpus import read_manifest
    from wordspot.language.grammar import BigramCounts
    from wordspot.language.lexicon import read_lexicon
    from wordspot.model import save_model
    from wordspot.starters import starter_path
    from wordspot.training.trainer import TrainingConfig, train

    steps = [1]
    while steps[-1] * 2 <= mixtures:
        steps.append(steps[-1] * 2)
    config = TrainingConfig(mixtures=tuple(steps), first_passes=FIRST_PASSES, passes_per_split=PASSES_PER_SPLIT,
                            jobs=jobs, noise_copies=NOISE_COPIES, speed_factors=SPEED_FACTORS,
                            scorer=None)  # its scorer is fitted below, on more frames (add_scorer)
    t0 = time.monotonic()
    utterances = [u for m in manifests for u in read_manifest(m)]
    model, summary = train(utterances, read_lexicon(LEXICON),
                           settings=FeatureSettings(sample_rate=rate), config=config, manifest=manifests[0],
                           quiet=quiet, report=None if quiet else print)
    name = NAMES[rate]
    # No word-pair counts: the starter corpus's word order says nothing about anyone's
    # commands, and a dense table over its 3,300 words would take 87 MB. Recognising with
    # the starter's own vocabulary then uses a uniform prior; adaptation counts the user's.
    model.bigrams = BigramCounts((), np.zeros((1, 1), dtype=np.int64))
    model.info.update({
        "name": name,
        "method": "starter (trained from scratch on the starter corpus)",
        "made_from": {
            "corpus": "wordspot starter corpus: synthetic speech from Debian's espeak-ng, flite and "
                      "festival voices (recordings/starter.py)",
            "manifests": [str(m.relative_to(REPO)) if m.is_relative_to(REPO) else str(m) for m in manifests],
            "voices": sorted({v for m in manifests for v in _voices(m)}),
            "left_out": "the demo's test voices (source talkers rms and ked, espeak-ng accents "
                        "en-gb-scotland, en-029, en-gb-x-gbcwmd and variants f2, m4, f4) and the demo's "
                        "new words (dough, bread, proof, faster, slower)",
            "built": dt.date.today().isoformat(),
            "command": "python recordings/build_starters.py " + " ".join(sys.argv[1:]),
            "train_seconds": round(time.monotonic() - t0, 1),
        },
    })
    path = save_model(model, out / f"{name}.model" if out else starter_path(name))
    print(f"{name}: {summary.used} utterances, {summary.n_frames} frames, {mixtures} Gaussians a state, "
          f"{time.monotonic() - t0:.0f} s -> {path}", flush=True)
    return path


@dataclass
class Aligned:
    """Frames and mixture labels per item, what each item is (``clean``, ``noisy``,
    ``speed 0.9``..., ``background``), its recording (copies share it) and the number of
    utterances skipped."""

    frames: list
    labels: list
    kinds: list
    paths: list
    skipped: int

    def only(self, kinds) -> "Aligned":
        """The items of the given kinds alone (``speed`` takes every speed factor)."""
        kinds = set(kinds)
        keep = [i for i, k in enumerate(self.kinds) if k in kinds or k.split()[0] in kinds]
        return Aligned([self.frames[i] for i in keep], [self.labels[i] for i in keep],
                       [self.kinds[i] for i in keep], [self.paths[i] for i in keep], self.skipped)


def _kind(item) -> str:
    if item.background:
        return "background"
    if item.noisy:
        return "noisy"
    return "clean" if item.speed == 1.0 else f"speed {item.speed:g}"


def _cache_name(tag: str, background_share: float, seed: int, noise_copies: int, snr_db: tuple, speeds) -> str:
    """The alignment cache's file stem: everything the items depend on besides the model."""
    name = tag
    if background_share:
        name += f"-bg{background_share:g}"
    if background_share or noise_copies:
        name += f"-seed{seed}"
    if noise_copies:
        name += f"-noise{noise_copies}x{snr_db[0]:g}-{snr_db[1]:g}dB"
    if speeds:
        name += "-speed" + ",".join(f"{s:g}" for s in speeds)
    return name


def aligned(model, manifests: list[Path], *, jobs: int, background_share: float, seed: int, quiet: bool,
            cache: Path | None = None, tag: str = "train", noise_copies: int = 0,
            snr_db: tuple = SCORER_SNR_DB, speeds: tuple = ()) -> Aligned:
    """Frames and mixture labels of the manifests' recordings (plus background-only items,
    noisy copies with their clean recording's labels and speed copies with their own
    alignment), aligned with ``model``; read from / written to ``cache/<tag>...-<rate>.npz``
    when given, the name carrying what the items depend on besides the model (background
    share, seed, noisy and speed copies), so another seed never reads this one's copies."""
    import numpy as np

    from wordspot.audio.augment import NoiseSettings
    from wordspot.corpus import read_manifest
    from wordspot.training.frame_labels import align_frames

    rate = model.features.sample_rate
    speeds = tuple(float(s) for s in speeds if float(s) != 1.0)
    name = _cache_name(tag, background_share, seed, noise_copies, snr_db, speeds)
    path = cache / f"{name}-{rate}.npz" if cache else None
    if path is not None and path.exists():
        with np.load(path, allow_pickle=False) as z:
            cut = np.cumsum(z["lengths"])[:-1]
            return Aligned(np.split(z["frames"], cut), np.split(z["labels"], cut), z["kinds"].tolist(),
                           z["paths"].tolist(), int(z["skipped"]))
    t0 = time.monotonic()
    utterances = [u for m in manifests for u in read_manifest(m)]
    noise = NoiseSettings(copies=noise_copies, snr_db=tuple(snr_db)) if noise_copies else None
    got = align_frames(model, utterances, jobs=jobs, background_share=background_share, seed=seed, quiet=quiet,
                       noise=noise, speeds=speeds)
    kinds = [_kind(it) for it in got.items]
    counts = {k: kinds.count(k) for k in dict.fromkeys(kinds)}
    print(f"{NAMES[rate]} {name}: {len(got.items)} items aligned "
          f"({', '.join(f'{n} {k}' for k, n in counts.items())}), {got.n_frames} frames, "
          f"{len(got.skipped)} skipped, {time.monotonic() - t0:.0f} s", flush=True)
    for s in got.skipped[:5]:
        print(f"  skipped {s.path}: {s.reason}")
    if path is not None:
        tmp = path.with_suffix(".part.npz")
        np.savez(tmp, frames=np.concatenate(got.frames), labels=np.concatenate(got.labels),
                 lengths=np.array([len(y) for y in got.labels], dtype=np.int64),
                 kinds=np.array(kinds), paths=np.array([str(it.path) for it in got.items]),
                 skipped=len(got.skipped))
        tmp.replace(path)
    return Aligned(got.frames, got.labels, kinds, [str(it.path) for it in got.items], len(got.skipped))


def impact_aligned(model, n_recordings: int, share: float, *, seed: int, jobs: int, quiet: bool) -> Aligned:
    """``background_count(n_recordings, share)`` items of impacts alone (background kind
    ``impacts``, drawn with ``seed`` on a stream of their own), each aligned to the chain
    of an empty transcript with ``model``: every frame gets a pause mixture. Kind
    ``impacts``; items no path fits are left out (counted as skipped)."""
    import numpy as np

    from wordspot.acoustic.graph import compose
    from wordspot.training.adapt import align_items
    from wordspot.training.backgrounds import background_count, background_items
    from wordspot.training.data import chain_slots

    count = background_count(n_recordings, share)
    if not count:
        return Aligned([], [], [], [], 0)
    t0 = time.monotonic()
    graph = compose(chain_slots((), model.lexicon, model.units), model.units)
    items = background_items(count, [], [], graph, model.features, seed=seed + IMPACT_STREAM, jobs=jobs,
                             quiet=quiet, kinds=(("impacts", 1),))
    got = align_items(items, model.mixtures, jobs=jobs)
    keep = [(it, y) for it, (score, y) in zip(items, got) if np.isfinite(score)]
    out = Aligned([np.asarray(it.frames, dtype=np.float32) for it, _ in keep], [y for _, y in keep],
                  ["impacts"] * len(keep), [str(it.path) for it, _ in keep], len(items) - len(keep))
    print(f"{NAMES[model.features.sample_rate]} impacts: {len(keep)} items of impacts aligned "
          f"({sum(len(y) for y in out.labels)} frames, {out.skipped} without a path), "
          f"{time.monotonic() - t0:.0f} s", flush=True)
    return out


def input_frames(model, got: Aligned, manifests: list[Path], kind: str, *, background_share: float, seed: int,
                 noise_copies: int = 0, snr_db: tuple = SCORER_SNR_DB, cache: Path | None = None,
                 tag: str = "train", check_every: int = 97) -> list:
    """The scorer inputs ``kind`` (:mod:`wordspot.audio.scorer_inputs`) of every item of
    ``got`` (an :func:`aligned` result made with the same arguments), one array per item.

    ``"cepstra"`` are ``got.frames`` themselves. Other kinds need the waveforms, which are
    made again from the recordings and the same seeded recipes (speed copies, noisy
    copies, background items); every ``check_every``-th item's cepstra are computed from
    the remade waveform and must equal the aligned frames, so a copy that came out
    otherwise stops the run. The log-mel part is kept in ``cache`` when given (the same
    name as the alignment's, with ``-logmel<bands>``)."""
    import numpy as np

    from wordspot.audio.augment import NoiseSettings
    from wordspot.audio.features import compute_features
    from wordspot.audio.reading import load_audio
    from wordspot.audio.scorer_inputs import LOG_MEL_BANDS, scorer_inputs
    from wordspot.corpus import read_manifest
    from wordspot.training.backgrounds import background_count, background_wave, plan_backgrounds
    from wordspot.training.data import speed_copy
    from wordspot.training.noise import babble_pool, noisy_wave, plan_copies

    if kind == "cepstra":
        return list(got.frames)
    settings = model.features
    rate = settings.sample_rate
    speeds = sorted({float(k.split()[1]) for k in got.kinds if k.startswith("speed")}, key=lambda f: f)
    name = _cache_name(tag, background_share, seed, noise_copies, snr_db, speeds)
    path = cache / f"{name}-logmel{LOG_MEL_BANDS}-{rate}.npz" if cache else None
    if path is not None and path.exists():
        with np.load(path, allow_pickle=False) as z:
            mel = np.split(z["frames"], np.cumsum(z["lengths"])[:-1])
    else:
        t0 = time.monotonic()
        utterances = [u for m in manifests for u in read_manifest(m)]
        plain = [i for i, k in enumerate(got.kinds) if k == "clean"]
        if got.skipped or len(plain) != len(utterances):
            raise SystemExit(f"{len(utterances)} recordings but {len(plain)} aligned ({got.skipped} skipped): "
                             "the remade copies would not line up; align again")
        for i, u in zip(plain, utterances):
            if Path(got.paths[i]).name != Path(u.path).name:
                raise SystemExit(f"item {i} is {got.paths[i]}, the manifest says {u.path}")
        paths = [u.path for u in utterances]
        speakers = [str(u.speaker) for u in utterances]
        pool = babble_pool(paths, speakers, seed=seed, sample_rate=rate)
        recipes = plan_copies(speakers, NoiseSettings(copies=noise_copies, snr_db=tuple(snr_db)), seed=seed) \
            if noise_copies else []
        backgrounds = plan_backgrounds(background_count(len(paths), background_share), speakers, seed=seed)
        counters = {"noisy": 0, "background": 0}
        by_path = {got.paths[i]: k for k, i in enumerate(plain)}  # the aligned paths, copies share them
        mel = []
        loaded: dict = {}

        def wave_of(k: int):
            if k not in loaded:
                loaded.clear()
                loaded[k] = load_audio(paths[k], sample_rate=rate)
            return loaded[k]

        for i, (k_ind, p) in enumerate(zip(got.kinds, got.paths)):
            if k_ind == "background":
                wave = background_wave(backgrounds[counters["background"]], pool, rate)
                counters["background"] += 1
            elif k_ind == "noisy":
                r = recipes[counters["noisy"]]
                counters["noisy"] += 1
                wave = noisy_wave(wave_of(r.index), r, pool, rate)
            else:
                k = by_path[p]
                wave = wave_of(k)
                if k_ind != "clean":
                    wave = speed_copy(wave, rate, float(k_ind.split()[1]))
            x = scorer_inputs(wave, settings, "log-mel")
            if x.shape[0] != got.labels[i].shape[0]:
                raise SystemExit(f"item {i} ({k_ind}, {p}): {x.shape[0]} frames remade, {got.labels[i].shape[0]} aligned")
            if i % check_every == 0:
                c = compute_features(wave, settings)
                if not np.allclose(c, got.frames[i], atol=1e-3):
                    raise SystemExit(f"item {i} ({k_ind}, {p}): the remade waveform's cepstra differ from the aligned ones")
            mel.append(x)
            if i % 2000 == 0 and i:
                print(f"  log-mel inputs: {i} of {len(got.kinds)} items, {time.monotonic() - t0:.0f} s", flush=True)
        print(f"{NAMES[rate]} {name}: log-mel inputs of {len(mel)} items, {time.monotonic() - t0:.0f} s", flush=True)
        if path is not None:
            tmp = path.with_suffix(".part.npz")
            np.savez(tmp, frames=np.concatenate(mel), lengths=np.array([len(x) for x in mel], dtype=np.int64))
            tmp.replace(path)
    if kind == "log-mel":
        return mel
    return [np.ascontiguousarray(np.concatenate([c, m], axis=1)) for c, m in zip(got.frames, mel)]


def frame_accuracy(scorer, frames_list, labels_list) -> float:
    """Share of frames whose most probable mixture id is their label."""
    right = total = 0
    for x, y in zip(frames_list, labels_list):
        right += int((scorer.log_posteriors(x).argmax(axis=1) == y).sum())
        total += len(y)
    return right / max(total, 1)


def _pair(got: Aligned):
    return got.frames, got.labels


def add_scorer(path: Path, jobs: int, quiet: bool, manifests: list[Path], config, cache: Path | None = None,
               noise_copies: int = SCORER_NOISE_COPIES, speeds: tuple = SCORER_SPEEDS,
               impact_share: float = SCORER_IMPACT_SHARE) -> Path:
    """Fit the state scorer of the model file ``path`` on its alignment of ``manifests``
    (plus ``impact_share`` items of impacts alone, :func:`impact_aligned`, never cached)
    and write the model back with it (atomically)."""
    from wordspot.model import load_model, save_model
    from wordspot.training.scorer_fit import fit_scorer_with_report

    t0 = time.monotonic()
    model = load_model(path)
    name = model.info.get("name", path.stem)
    train = aligned(model, manifests, jobs=jobs, background_share=SCORER_BACKGROUND_SHARE, seed=config.seed,
                    quiet=quiet, cache=cache, noise_copies=noise_copies, speeds=speeds)
    impacts = impact_aligned(model, train.kinds.count("clean"), impact_share, seed=config.seed, jobs=jobs,
                             quiet=quiet)
    train = Aligned(train.frames + impacts.frames, train.labels + impacts.labels, train.kinds + impacts.kinds,
                    train.paths + impacts.paths, train.skipped)
    t_align = time.monotonic() - t0
    # copies of one recording are held out together (early stopping on unseen recordings)
    scorer, fit = fit_scorer_with_report(train.frames, train.labels, model.mixtures.n_mixtures, config,
                                         groups=train.paths)
    t_fit = time.monotonic() - t0 - t_align
    dev = dev_noisy = None
    if DEV.exists():
        # the dev split and one noisy copy of it (labels of the clean alignment)
        got = aligned(model, [DEV], jobs=jobs, background_share=0.0, seed=0, quiet=quiet, cache=cache, tag="dev",
                      noise_copies=1)
        dev = round(frame_accuracy(scorer, *_pair(got.only(["clean"]))), 4)
        dev_noisy = round(frame_accuracy(scorer, *_pair(got.only(["noisy"]))), 4)
    model.scorer = scorer
    model.info["scorer"] = {
        "made_from": [str(m.relative_to(REPO)) if m.is_relative_to(REPO) else str(m) for m in manifests],
        "labels": "forced alignment with this model's mixtures (training chains; background-only "
                  f"items, share {SCORER_BACKGROUND_SHARE}, and items of impacts alone, share {impact_share:g}, "
                  "labelled with the pause states; noisy copies with their clean recording's labels; speed "
                  "copies with their own alignment)",
        "impact_share": float(impact_share), "impact_items": len(impacts.labels),
        "noise_copies": int(noise_copies), "noise_snr_db": [float(v) for v in SCORER_SNR_DB],
        "speeds": [float(v) for v in speeds],
        "hidden": list(config.hidden), "context": int(config.context), "seed": int(config.seed),
        "max_frames": int(config.max_frames), "utterances_skipped": int(train.skipped),
        "train_frames": fit.train_frames, "epochs": fit.best_epoch + 1,
        "held_out_frame_accuracy": round(float(fit.held_out_accuracy), 4),
        "dev_frame_accuracy": dev,
        "dev_noisy_frame_accuracy": dev_noisy,
        "built": dt.date.today().isoformat(),
        "command": "python recordings/build_starters.py " + " ".join(sys.argv[1:]),
        "seconds": round(time.monotonic() - t0, 1),
    }
    out = save_model(model, path)
    print(f"{name}: scorer {config.hidden} context {config.context}, {fit.train_frames} frames, "
          f"epoch {fit.best_epoch + 1}, held-out frame accuracy {fit.held_out_accuracy:.3f}, dev {dev}, "
          f"dev noisy {dev_noisy}, "
          f"align {t_align:.0f} s, fit {t_fit:.0f} s, {time.monotonic() - t0:.0f} s -> {out} "
          f"({out.stat().st_size / 1e6:.1f} MB)", flush=True)
    return out


def add_calibration(path: Path, quiet: bool, manifest: Path = DEV, seed: int = 0) -> Path:
    """Fit the starter calibration of the model file ``path`` on ``manifest`` (the dev split:
    recordings the starter was not trained on) and write the model back with it (atomically)."""
    from wordspot.corpus import read_manifest
    from wordspot.evaluation.calibrate import capped_measures
    from wordspot.evaluation.starter_calibration import StarterCalibrationConfig, fit_starter_calibration
    from wordspot.model import load_model, save_model

    t0 = time.monotonic()
    model = load_model(path)
    name = model.info.get("name", path.stem)
    config = StarterCalibrationConfig(seed=seed)
    cal, ex = fit_starter_calibration(model, read_manifest(manifest), config,
                                      report=None if quiet else (lambda line: print(line, flush=True)))
    if cal is None:
        print(f"{name}: no calibration fitted ({int(ex.right.sum())} right, {int((~ex.right).sum())} wrong words)")
        return path
    model.calibration = cal
    model.info["calibration"] = {
        "starter": True,
        "made_from": str(manifest.relative_to(REPO)) if manifest.is_relative_to(REPO) else str(manifest),
        "vocabularies": config.vocabularies, "words_per_vocabulary": list(config.words),
        "other_talk_per_vocabulary": config.other_talk, "jumbled_per_vocabulary": config.jumbled,
        "noise_per_vocabulary": config.noise, "seed": seed, "measures": list(cal.names),
        "cap_quantile": config.cap_quantile, "capped_measures": capped_measures(cal),
        "right_words": int(ex.right.sum()), "wrong_words": int((~ex.right).sum()),
        "built": dt.date.today().isoformat(),
        "command": "python recordings/build_starters.py " + " ".join(sys.argv[1:]),
        "seconds": round(time.monotonic() - t0, 1),
    }
    out = save_model(model, path)
    print(f"{name}: calibration over {len(cal.names)} measures from {int(ex.right.sum())} right and "
          f"{int((~ex.right).sum())} wrong words, {time.monotonic() - t0:.0f} s -> {out}", flush=True)
    return out


def calibrate_only(args) -> int:
    """``--calibration-only``: the calibration step on the existing starter files."""
    from wordspot.starters import starter_path

    for rate in args.rates:
        path = (args.out / f"{NAMES[rate]}.model") if args.out else starter_path(NAMES[rate])
        if not path.exists():
            print(f"build_starters.py: error: {path} does not exist; build it first", file=sys.stderr)
            return 2
        add_calibration(path, args.quiet)
    return 0


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0],
                                 formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--rates", type=int, nargs="+", default=[16000, 8000], choices=sorted(NAMES))
    ap.add_argument("--jobs", type=int, default=2)
    ap.add_argument("--mixtures", type=int, default=MIXTURES, help=f"Gaussians a state (default {MIXTURES})")
    ap.add_argument("--manifests", type=Path, nargs="+", default=[CORPUS / "train.csv"],
                    help="training manifests (default: the starter corpus's train split)")
    ap.add_argument("--out", type=Path, default=None,
                    help="write NAME.model files into this folder instead of wordspot/starters/ (dev runs)")
    ap.add_argument("--quiet", action="store_true")
    step = ap.add_mutually_exclusive_group()
    step.add_argument("--scorer-only", action="store_true",
                      help="only add the state scorer to the existing starter files (no Gaussian training)")
    step.add_argument("--no-scorer", action="store_true", help="train the Gaussian mixtures only")
    ap.add_argument("--scorer-hidden", type=int, nargs="+", default=list(SCORER_HIDDEN),
                    help=f"hidden layer sizes of the scorer (default {' '.join(map(str, SCORER_HIDDEN))})")
    ap.add_argument("--scorer-context", type=int, default=SCORER_CONTEXT,
                    help=f"frames of context on each side (default {SCORER_CONTEXT})")
    ap.add_argument("--scorer-frames", type=int, default=SCORER_MAX_FRAMES,
                    help=f"training frames at most (default {SCORER_MAX_FRAMES})")
    ap.add_argument("--scorer-seed", type=int, default=SCORER_SEED, help=f"(default {SCORER_SEED})")
    ap.add_argument("--scorer-noise-copies", type=int, default=SCORER_NOISE_COPIES,
                    help=f"noisy copies of every recording for the scorer (default {SCORER_NOISE_COPIES})")
    ap.add_argument("--scorer-speeds", type=float, nargs="*", default=list(SCORER_SPEEDS),
                    help=f"speed copies for the scorer (default {' '.join(map(str, SCORER_SPEEDS))}; none: clean only)")
    ap.add_argument("--scorer-impacts", type=float, default=SCORER_IMPACT_SHARE,
                    help="items of impacts alone for the scorer, as a share of the recordings "
                         f"(default {SCORER_IMPACT_SHARE:g}; 0: none)")
    ap.add_argument("--align-cache", type=Path, default=None,
                    help="keep the alignments in this folder and reuse them (dev runs)")
    ap.add_argument("--calibration-only", action="store_true",
                    help="only fit the confidence calibration of the existing starter files")
    ap.add_argument("--no-calibration", action="store_true", help="leave out the confidence calibration")
    args = ap.parse_args(argv)
    if args.calibration_only:
        if not DEV.exists():
            build_corpus(args.jobs)
        return calibrate_only(args)
    if any(m.parent == CORPUS for m in args.manifests):
        build_corpus(args.jobs)
    (args.out or OUT).mkdir(parents=True, exist_ok=True)
    if args.align_cache:
        args.align_cache.mkdir(parents=True, exist_ok=True)
    config = None
    if not args.no_scorer:
        from wordspot.errors import TrainingError
        from wordspot.training.scorer_fit import ScorerConfig

        try:
            config = ScorerConfig(hidden=tuple(args.scorer_hidden), context=args.scorer_context,
                                  max_frames=args.scorer_frames, seed=args.scorer_seed)
        except TrainingError as exc:
            print(f"build_starters.py: error: {exc}", file=sys.stderr)
            return 2
        if not (0.0 <= args.scorer_impacts <= 1.0):
            print(f"build_starters.py: error: --scorer-impacts must be a share from 0 to 1 (e.g. 0.1), "
                  f"got {args.scorer_impacts:g}", file=sys.stderr)
            return 2
        if args.scorer_noise_copies < 0 or any(not (0.5 <= v <= 2.0) for v in args.scorer_speeds):
            print("build_starters.py: error: --scorer-noise-copies must be >= 0 and --scorer-speeds "
                  "factors from 0.5 to 2 (e.g. 0.9 1.1)", file=sys.stderr)
            return 2
    t0 = time.monotonic()
    for rate in args.rates:
        if args.scorer_only:
            from wordspot.starters import starter_path

            path = (args.out / f"{NAMES[rate]}.model") if args.out else starter_path(NAMES[rate])
            if not path.exists():
                print(f"build_starters.py: error: {path} does not exist; build it first "
                      "(without --scorer-only)", file=sys.stderr)
                return 2
        else:
            path = train_one(rate, args.jobs, args.mixtures, args.quiet, args.manifests, args.out)
        if config is not None:
            add_scorer(path, args.jobs, args.quiet, args.manifests, config, args.align_cache,
                       noise_copies=args.scorer_noise_copies, speeds=tuple(args.scorer_speeds),
                       impact_share=args.scorer_impacts)
        if not args.no_calibration:
            add_calibration(path, args.quiet)
    print(f"starters rebuilt in {time.monotonic() - t0:.0f} s")
    return 0


if __name__ == "__main__":
    from wordspot.util.threads import one_blas_thread

    with one_blas_thread():  # one BLAS thread, as wordspot's own commands: the same model on any machine
        sys.exit(main())
