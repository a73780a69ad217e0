"""Training material: every usable utterance's features and its state chain.

Features are computed once, up front (in parallel over processes when ``jobs > 1``), and
kept in memory for all passes. Each utterance's chain is

    quiet, word 1 (all its pronunciations as alternatives), [gap], word 2, ..., quiet

composed into one :class:`~wordspot.acoustic.graph.StateGraph`. Files that fail to load and
utterances too short for their chain are skipped with a :class:`TrainingWarning` naming
the file; they are listed in the training summary.

Frequency-warp augmentation (vocal tract length perturbation): with ``warps=(0.9, 1.0,
1.1)`` every utterance gives one item per factor, its features computed with the mel
filterbank's frequency axis scaled by that factor (:func:`wordspot.audio.features.compute_features`),
all with the same chain. Items come out warp by warp, in utterance order within each.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import soxr

from wordspot.errors import AudioError, FeatureError, TrainingWarning
from wordspot.audio.reading import load_audio
from wordspot.audio.features import FeatureSettings, compute_features, file_features
from wordspot.acoustic.graph import StateGraph, compose
from wordspot.util.progress import ProgressBar
from wordspot.training.cluster import using
from wordspot.training.items import CHUNK_SIZE, Skipped, TrainingItem
from wordspot.training.backgrounds import background_count, background_items
from wordspot.training.noise import noisy_items
from wordspot.acoustic.units import GAP_UNIT, PAUSE_UNIT, UnitSet

__all__ = ["chain_slots", "extract_features", "extract_speed_features", "prepare_items", "speed_copy"]

def chain_slots(words, lexicon, units: UnitSet) -> list:
    """Slots of the training chain of a transcript (see :func:`wordspot.acoustic.graph.compose`).

    An empty transcript (a recording with no command in it) is one pause unit throughout.
    """
    pause = units.index(PAUSE_UNIT)
    gap = units.index(GAP_UNIT)
    if not words:
        return [[(pause,)]]
    slots: list = [[(pause,)]]
    for k, word in enumerate(words):
        if k > 0:
            slots.append([(gap,)])
        slots.append([tuple(units.index(u) for u in pron) for pron in lexicon.pronunciations(word)])
    slots.append([(pause,)])
    return slots


def speed_copy(wave: np.ndarray, sample_rate: int, factor: float) -> np.ndarray:
    """``wave`` played ``factor`` times faster (tempo, pitch and formants shift together).

    Speed perturbation (Ko et al. 2015, "Audio augmentation for speech recognition",
    Interspeech): resample to ``sample_rate / factor`` and read the result at ``sample_rate``.
    """
    if factor == 1.0:
        return wave
    return soxr.resample(np.ascontiguousarray(wave, dtype=np.float32), sample_rate,
                         int(round(sample_rate / factor)), quality="HQ")


def _features_task(paths, settings, warp=1.0, speed=1.0):
    """Features of several files; failures and warnings returned, not raised."""
    out = []
    for path in paths:
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            try:
                if speed == 1.0:
                    feats = file_features(path, settings, warp=warp)
                else:
                    wave = load_audio(path, sample_rate=settings.sample_rate)
                    feats = compute_features(speed_copy(wave, settings.sample_rate, speed), settings, warp=warp)
                error = None
            except (AudioError, FeatureError) as exc:
                feats, error = None, str(exc)
        notes = [(w.category, str(w.message)) for w in caught]
        out.append((feats, error, notes))
    return out


def _speeds_task(paths, settings, speeds):
    """Features of several files at each speed factor (none of them 1), each file read
    once: per path, per speed ``(features, error, warnings)`` as :func:`_features_task`
    gives them (the reading's warnings repeated for every speed, as reading it again would)."""
    out = []
    for path in paths:
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            try:
                wave, error = load_audio(path, sample_rate=settings.sample_rate), None
            except (AudioError, FeatureError) as exc:
                wave, error = None, str(exc)
        read_notes = [(w.category, str(w.message)) for w in caught]
        per_speed = []
        for speed in speeds:
            if wave is None:
                per_speed.append((None, error, read_notes))
                continue
            with warnings.catch_warnings(record=True) as caught:
                warnings.simplefilter("always")
                try:
                    feats, err = compute_features(speed_copy(wave, settings.sample_rate, speed), settings), None
                except (AudioError, FeatureError) as exc:
                    feats, err = None, str(exc)
            per_speed.append((feats, err, read_notes + [(w.category, str(w.message)) for w in caught]))
        out.append(per_speed)
    return out


def extract_speed_features(paths, settings: FeatureSettings, speeds, *, jobs: int = 1, quiet: bool = True,
                           executor=None) -> list:
    """:func:`extract_features` at every factor of ``speeds`` (none of them 1), each file read
    once: a list per speed, in the order of ``speeds``, of ``(features, None)`` or ``(None,
    message)`` per path; the same arrays, messages and warnings as one call per speed."""
    paths = list(paths)
    speeds = [float(f) for f in speeds]
    chunks = [paths[i:i + CHUNK_SIZE] for i in range(0, len(paths), CHUNK_SIZE)]
    bar = ProgressBar(len(paths), "features", quiet=quiet)
    got = []
    with using(executor, jobs) as ex:
        for part in ex.map(_speeds_task, [(c,) for c in chunks], common=(settings, speeds),
                           frames=True, label="features"):
            got += part
            bar.update(len(part))
        bar.close()
        results = []
        for k in range(len(speeds)):
            for per_speed in got:
                feats, error, notes = per_speed[k]
                for category, message in notes:
                    warnings.warn(message, category, stacklevel=2)
                results.append((feats, error))
        results = ex.settle(results)
    n = len(paths)
    return [results[k * n:(k + 1) * n] for k in range(len(speeds))]


def extract_features(paths, settings: FeatureSettings, *, jobs: int = 1, quiet: bool = True,
                     warp: float = 1.0, speed: float = 1.0, executor=None):
    """Features of every file (frequency axis warped by ``warp``, played ``speed`` times
    faster), or the error that stopped it.

    ``executor`` (a :class:`wordspot.training.cluster.Executor`) runs the work; by
    default, one for ``jobs`` local processes. A cluster's executor hands the features
    back as memory-mapped views of files in its shared folder.

    Returns
    -------
    list of (ndarray or None, str or None)
        ``(features, None)`` or ``(None, message)`` per path, in order. Warnings raised
        while loading (in any process) are re-issued here.
    """
    paths = list(paths)
    chunks = [paths[i:i + CHUNK_SIZE] for i in range(0, len(paths), CHUNK_SIZE)]
    bar = ProgressBar(len(paths), "features", quiet=quiet)
    results = []
    with using(executor, jobs) as ex:
        for part in ex.map(_features_task, [(c,) for c in chunks], common=(settings, warp, speed),
                           frames=True, label="features"):
            for feats, error, notes in part:
                for category, message in notes:
                    warnings.warn(message, category, stacklevel=2)
                results.append((feats, error))
            bar.update(len(part))
        bar.close()
        return ex.settle(results)


def prepare_items(utterances, lexicon, units: UnitSet, settings: FeatureSettings, *,
                  jobs: int = 1, quiet: bool = True,
                  warps=(1.0,), speeds=(1.0,), noise=None, background_share: float = 0.0,
                  seed: int = 0, executor=None, background_kinds=None) -> tuple[list[TrainingItem], list[Skipped]]:
    """Load features and build chains; skip (with a warning) what cannot be used.

    ``warps``: frequency warp factors; each utterance gives one item per factor (the
    default, ``(1.0,)``, is plain training). A file that cannot be used is skipped (and
    reported) once, at the first factor.

    ``speeds``: speed perturbation factors (see :func:`speed_copy`); every factor other
    than 1 adds one unwarped item per utterance, after the warped ones. A copy too short
    for its chain is left out silently (the recording itself is used).

    ``noise``: a :class:`wordspot.audio.augment.NoiseSettings`; its noisy copies of every usable
    recording (unwarped, drawn with ``seed``; see :mod:`wordspot.training.noise`) come
    after all other items.

    ``background_share``: background-only items (no command, one pause unit; see
    :mod:`wordspot.training.backgrounds`), ``background_count(usable recordings, share)``
    of them, drawn with ``seed`` from ``background_kinds`` (a mix of ``(kind, parts)``
    pairs, :func:`wordspot.training.backgrounds.check_mix`; default the steady kinds),
    come last; 0 adds none.

    ``executor``: where the work runs (see :func:`extract_features`).

    Returns
    -------
    items : list of TrainingItem
    skipped : list of Skipped
    """
    items: list[TrainingItem] = []
    skipped: list[Skipped] = []
    graphs: dict[tuple[str, ...], StateGraph] = {}
    variants = [(float(w), 1.0) for w in warps] + [(1.0, float(s)) for s in speeds if float(s) != 1.0]
    sped = [s for w, s in variants if s != 1.0]
    by_speed: dict = {}
    for k, (warp, speed) in enumerate(variants):
        if speed != 1.0 and len(sped) > 1:  # every speed copy of a recording from one reading of it
            if not by_speed:
                by_speed = dict(zip(sped, extract_speed_features([u.path for u in utterances], settings, sped,
                                                                 jobs=jobs, quiet=quiet, executor=executor)))
            features = by_speed[speed]
        else:
            features = extract_features([u.path for u in utterances], settings, jobs=jobs, quiet=quiet,
                                        warp=warp, speed=speed, executor=executor)
        if k == 0:
            _collect(utterances, features, lexicon, units, graphs, items, skipped, settings.hop_ms / 1000)
        else:
            bad = {s.path for s in skipped}
            _collect([u for u in utterances if u.path not in bad],
                     [f for u, f in zip(utterances, features) if u.path not in bad],
                     lexicon, units, graphs, items, None, settings.hop_ms / 1000)
        if k == 0:
            n_plain = len(items)
    if noise is not None and noise.copies > 0:
        speaker = {u.path: u.speaker for u in utterances}
        base = items[:n_plain]
        items += noisy_items(base, [speaker[it.path] for it in base], noise, settings,
                             seed=seed, jobs=jobs, quiet=quiet, executor=executor)
    count = background_count(n_plain, background_share)
    if count:
        speaker = {u.path: u.speaker for u in utterances}
        graph = graphs.get(()) or compose(chain_slots((), lexicon, units), units)
        items += background_items(count, [it.path for it in items[:n_plain]],
                                  [speaker[it.path] for it in items[:n_plain]], graph, settings,
                                  seed=seed, jobs=jobs, quiet=quiet, executor=executor,
                                  kinds=background_kinds)
    return items, skipped


def _collect(utterances, features, lexicon, units, graphs, items, skipped, hop: float) -> None:
    for utt, (feats, error) in zip(utterances, features):
        if feats is None:
            reason = f"could not be loaded: {error}"
        else:
            graph = graphs.get(utt.words)
            if graph is None:
                graph = compose(chain_slots(utt.words, lexicon, units), units)
                graphs[utt.words] = graph
            need = graph.min_frames()
            if feats.shape[0] < need:
                reason = (f"too short: {feats.shape[0] * hop:.2f} s of sound for its {len(utt.words)} word(s), "
                          f"which need at least {need * hop:.2f} s ({need} frames); record it again, "
                          "or fix its transcript")
            else:
                items.append(TrainingItem(utt.path, utt.words, np.ascontiguousarray(feats), graph))
                continue
        if skipped is not None:
            skipped.append(Skipped(utt.path, reason))
            message = reason if feats is None and str(utt.path) in reason else f"{utt.path}: {reason}"
            warnings.warn(f"skipping {message}", TrainingWarning, stacklevel=3)
