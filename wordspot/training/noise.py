"""Noisy copies of the training recordings, for multi-condition training.

Every usable recording gets ``NoiseSettings.copies`` extra training items with the same
transcript and chain, whose audio is the recording plus babble or steady noise (see
:mod:`wordspot.audio.augment`) at an SNR drawn from ``NoiseSettings.snr_db``, measured over the
recording's speech part (estimated with :func:`wordspot.audio.augment.speech_span`).

Reproducible for any number of processes: each copy's recipe (kind, SNR, babble talkers,
noise seed) is drawn in the calling process from ``(seed, recording key, copy number)``,
and the work is split into fixed chunks whose results come back in order. The key is the
recording's number in the list unless the caller hands in keys of its own
(:func:`recording_key`: the same recipe for a recording in any list, so a caller can make
a recording's copies once and reuse them for several sets).

Babble talkers come from a pool: the speech parts of up to :data:`POOL_PER_SPEAKER`
recordings of every speaker, one stream per speaker. A copy's babble uses the streams of
other speakers first; when there are too few (one person training on their own voice),
its own speaker's stream is used with the recording itself cut out, so a recording never
hears itself in its babble.
"""

from __future__ import annotations

import zlib
from dataclasses import dataclass
from pathlib import PurePath

import numpy as np

from wordspot.audio.reading import load_audio
from wordspot.audio.augment import NoiseSettings, babble, fit_length, mean_power, mix_at_snr, speech_span, steady_noise
from wordspot.audio.features import FeatureSettings, compute_features
from wordspot.util.progress import ProgressBar
from wordspot.training.cluster import using
from wordspot.training.items import CHUNK_SIZE, TrainingItem

__all__ = ["POOL_PER_SPEAKER", "CopyRecipe", "babble_pool", "babble_streams", "plan_copies", "noisy_wave",
           "noisy_items", "recording_key"]

#: Recordings per speaker whose speech parts make up that speaker's babble stream.
POOL_PER_SPEAKER = 12

#: Separates these random streams from the other uses of the training seed.
_STREAM = 6021


@dataclass(frozen=True)
class CopyRecipe:
    """How to make one noisy copy of recording ``index``."""

    index: int
    kind: str
    snr_db: float
    talkers: tuple  # speaker names (babble only)
    noise_seed: int


def babble_pool(paths, speakers, *, seed: int, sample_rate: int) -> dict:
    """Speech parts of up to :data:`POOL_PER_SPEAKER` recordings per speaker.

    Returns
    -------
    dict of str -> list of (int, ndarray)
        Per speaker: (recording number, float32 speech part), in a seeded order.
    """
    rng = np.random.default_rng([seed, _STREAM])
    by_speaker: dict[str, list[int]] = {}
    for k, spk in enumerate(speakers):
        by_speaker.setdefault(spk, []).append(k)
    pool = {}
    for spk in sorted(by_speaker):
        idx = by_speaker[spk]
        chosen = sorted(rng.permutation(idx)[:POOL_PER_SPEAKER].tolist())
        parts = []
        for k in chosen:
            wave = load_audio(paths[k], sample_rate=sample_rate)
            a, b = speech_span(wave, sample_rate)
            parts.append((k, wave[a:b].copy()))
        pool[spk] = parts
    return pool


def recording_key(path, words) -> int:
    """A number for a recording from its file name, the name of the folder it is in and its
    transcript (CRC-32 of the three), not from where that folder is: the same recordings
    give the same copies, so the same model, whether the manifest was named by a relative
    or an absolute path, from any working directory or copy of the folder."""
    p = PurePath(str(path))
    return zlib.crc32(f"{p.parent.name}/{p.name}\n{' '.join(words)}".encode("utf-8"))


def plan_copies(speakers, noise: NoiseSettings, *, seed: int, keys=None) -> list[CopyRecipe]:
    """Recipes of every noisy copy, copy-major (all first copies, then all second ones).

    ``keys`` (whole numbers >= 0, one per recording; default the recording numbers) seed
    each recording's recipes, so a recording with the same key gets the same recipe in
    any list of the same speakers (babble talkers are drawn from the list's speakers)."""
    names = sorted(set(speakers))
    keys = range(len(speakers)) if keys is None else [int(k) for k in keys]
    plans = []
    for c in range(noise.copies):
        for k, (key, spk) in enumerate(zip(keys, speakers)):
            rng = np.random.default_rng([seed, _STREAM, key, c])
            kind = noise.kinds[int(rng.integers(len(noise.kinds)))]
            snr = float(rng.uniform(*noise.snr_db))
            talkers: tuple = ()
            if kind == "babble":
                n = int(rng.integers(noise.talkers[0], noise.talkers[1] + 1))
                others = [s for s in names if s != spk]
                picked = list(rng.permutation(others)[:n]) if others else []
                while len(picked) < n:  # too few other speakers: reuse voices
                    picked.append(others[int(rng.integers(len(others)))] if others and rng.random() < 0.5 else spk)
                talkers = tuple(str(s) for s in picked)
            plans.append(CopyRecipe(k, kind, snr, talkers, int(rng.integers(2**31))))
    return plans


def babble_streams(pool: dict, recipe: CopyRecipe) -> list[np.ndarray]:
    """The talker streams of a babble recipe, each without the recording itself."""
    streams = []
    for talker in recipe.talkers:
        parts = [x for k, x in pool.get(talker, []) if k != recipe.index]
        if parts:
            streams.append(np.concatenate(parts))
    return streams


def noisy_wave(wave: np.ndarray, recipe: CopyRecipe, pool: dict, sample_rate: int) -> np.ndarray:
    """The noisy copy of ``wave`` that ``recipe`` describes (the recording itself when it
    is digital silence, which has no SNR to measure against)."""
    rng = np.random.default_rng(recipe.noise_seed)
    span = speech_span(wave, sample_rate)
    if mean_power(wave, span) <= 0:
        return wave
    n = wave.shape[0]
    noise = None
    if recipe.kind == "babble":
        streams = babble_streams(pool, recipe)
        if streams:
            noise = babble(streams, n, rng)
    if noise is None or mean_power(noise) <= 0:
        noise = steady_noise(n, rng, sample_rate=sample_rate)
    return mix_at_snr(wave, fit_length(noise, n, rng), recipe.snr_db, span=span)


def _copy_features(wave: np.ndarray, recipe: CopyRecipe, pool: dict, settings: FeatureSettings) -> np.ndarray:
    return compute_features(noisy_wave(wave, recipe, pool, settings.sample_rate), settings)


def _chunk_task(recipes, paths, pool, settings):
    out = []
    cache: dict = {}
    for recipe in recipes:
        path = paths[recipe.index]
        if path not in cache:
            cache = {path: load_audio(path, sample_rate=settings.sample_rate)}
        out.append(_copy_features(cache[path], recipe, pool, settings))
    return out


def noisy_items(items: list[TrainingItem], speakers, noise: NoiseSettings, settings: FeatureSettings, *,
                seed: int = 0, jobs: int = 1, quiet: bool = True, executor=None, keys=None,
                only=None) -> list[TrainingItem]:
    """Noisy copies of prepared training items.

    Parameters
    ----------
    items : list of TrainingItem
        The usable clean recordings.
    speakers : sequence of str
        Speaker of each item (babble comes from other speakers when possible).
    noise : NoiseSettings
    settings : FeatureSettings
    seed : int
        The training seed; the copies depend only on it and the items, not on ``jobs``.
    jobs : int >= 1
    executor : wordspot.training.cluster.Executor, optional
        Where the work runs (default: one for ``jobs`` local processes).
    keys : sequence of int, optional
        Per item, the number that seeds its recipes (:func:`plan_copies`); default the
        item's place in ``items``.
    only : sequence of int, optional
        Make the copies of these items alone (their places in ``items``); the babble pool
        and the recipes are still drawn from the whole list, so each copy is the one the
        whole list would give.

    Returns
    -------
    list of TrainingItem
        ``noise.copies * len(items)`` items (copy-major; with ``only``, ``noise.copies *
        len(only)``), sharing the clean items' chains.
    """
    if noise.copies == 0 or not items:
        return []
    speakers = [str(s) for s in speakers]
    paths = [it.path for it in items]
    pool = babble_pool(paths, speakers, seed=seed, sample_rate=settings.sample_rate) \
        if "babble" in noise.kinds else {}
    plans = plan_copies(speakers, noise, seed=seed, keys=keys)
    if only is not None:
        wanted = {int(k) for k in only}
        plans = [p for p in plans if p.index in wanted]
    # the work goes recording by recording (all copies of one recording in a row), so each
    # recording is read once; the copies come back in the plans' order
    order = sorted(range(len(plans)), key=lambda i: (plans[i].index, i))
    chunks = [[plans[i] for i in order[j:j + CHUNK_SIZE]] for j in range(0, len(order), CHUNK_SIZE)]
    bar = ProgressBar(len(plans), "noisy copies", quiet=quiet)
    made = []
    with using(executor, jobs) as ex:
        for part in ex.map(_chunk_task, [(c,) for c in chunks], common=(paths, pool, settings),
                           frames=True, label="noisy copies"):
            made += part
            bar.update(len(part))
        bar.close()
        made = ex.settle(made)
    feats = [None] * len(plans)
    for i, f in zip(order, made):
        feats[i] = f
    out: list[TrainingItem] = []
    for recipe, f in zip(plans, feats):
        it = items[recipe.index]
        out.append(TrainingItem(it.path, it.words, np.ascontiguousarray(f), it.graph))
    return out
