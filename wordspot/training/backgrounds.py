"""Background-only training items: pauses over more than the user's room tone.

The pause unit learns from the ends of the user's recordings, mostly one quiet room. Extra
items of a background alone (white or pink noise, mains hum, dithered digital silence,
fan noise; see :func:`wordspot.audio.augment.background`), 1-3 s long at -70 to -30 dBFS
over a faint room-tone floor, each with an empty transcript (one ``quiet`` chain, as a "no
command here" recording), teach it the rest. Babble can be asked for (``kinds``) but is not
among the defaults: a pause that has learnt speech takes speech in babble for pause (on the
dev voices: noise-only clips with a command 5 of 60 with babble items, 0 without; commands
in noise at 10 dB alike; see docs/experiments/2026-12-02-background-items.md). Impacts
(knocks, clinks, taps, scrapes; :mod:`wordspot.audio.impacts`) are a kind too; a *mix*
gives each kind its parts (:func:`check_mix`). The defaults draw the steady kinds alone
(:data:`STEADY_MIX`). Impacts as half of the adaptation's items at share 0.25
(:data:`IMPACTS_HALF_MIX`) cut the dev impact clips with a command at the default
threshold from 23% to 14% but cost 1.14 times the training's CPU time, and from scratch
moved firing to everyday words: an option, off
(docs/experiments/2026-12-03-impacts-in-training.md).

Reproducible for any number of processes: the recipes (kind, length, level, mains
frequency, floor, babble talkers, noise seed) are drawn up front from the training seed
alone, and the work is split into fixed chunks whose results come back in order.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np

from wordspot.audio.augment import babble, background, pink_noise
from wordspot.audio.features import FeatureSettings, compute_features
from wordspot.errors import TrainingError
from wordspot.training.cluster import using
from wordspot.training.items import CHUNK_SIZE, TrainingItem
from wordspot.training.noise import babble_pool
from wordspot.util.progress import ProgressBar

__all__ = ["BACKGROUND_KINDS", "STEADY_MIX", "IMPACTS_HALF_MIX", "KNOWN_KINDS", "MIN_BACKGROUNDS",
           "BackgroundRecipe", "check_share", "check_mix", "mix_draws", "background_count",
           "plan_backgrounds", "background_wave", "background_items"]

#: The kinds drawn, each with equal chance, when no mix is handed in.
#: The default kinds of background item (babble, which the plan also knows, is left out).
BACKGROUND_KINDS = ("white", "pink", "hum", "dither", "fan")

#: Every kind a background item can be (:func:`wordspot.audio.augment.background`).
KNOWN_KINDS = ("white", "pink", "hum", "dither", "fan", "babble", "impacts")

#: A mix of kinds: ``(kind, parts)`` pairs, each kind drawn with chance parts / total.
#: The steady kinds, one part each: the same items as :data:`BACKGROUND_KINDS`.
STEADY_MIX = tuple((kind, 1) for kind in BACKGROUND_KINDS)

#: The steady kinds one part each and impacts five parts: half of the items are impacts.
IMPACTS_HALF_MIX = STEADY_MIX + (("impacts", 5),)

#: Fewest background items when the share is above zero (a few recordings still get a
#: few of every kind).
MIN_BACKGROUNDS = 20

#: Separates these random streams from the other uses of the training seed.
_STREAM = 7349


@dataclass(frozen=True)
class BackgroundRecipe:
    """How to make one background item."""

    number: int
    kind: str
    seconds: float
    dbfs: float
    mains: float  # hum only
    floor_dbfs: float  # room tone under it (-inf: none, for digital silence)
    talkers: tuple  # speaker names (babble only)
    noise_seed: int


def check_share(share) -> float:
    """``share`` as a float in [0, 1], else a TrainingError."""
    try:
        value = float(share)
    except (TypeError, ValueError):
        value = float("nan")
    if isinstance(share, bool) or not (0.0 <= value <= 1.0):
        raise TrainingError(f"background_share (--background-share) must be a number from 0 to 1 "
                            f"(0.1 adds a tenth as many background-only items; 0 none), got {share!r}")
    return value


def check_mix(mix, name: str = "background_kinds") -> tuple[tuple[str, int], ...]:
    """``mix`` as ``((kind, parts), ...)``, else a TrainingError naming ``name``.

    Each kind one of :data:`KNOWN_KINDS`, at most once; ``parts`` a whole number >= 1
    (a plain kind name counts as one part).
    """
    pairs = []
    try:
        for entry in mix:
            kind, parts = (entry, 1) if isinstance(entry, str) else tuple(entry)
            pairs.append((kind, parts))
    except (TypeError, ValueError):
        pairs = None
    ok = bool(pairs) and all(
        isinstance(k, str) and k in KNOWN_KINDS and isinstance(p, (int, np.integer)) and not isinstance(p, bool)
        and p >= 1 for k, p in pairs) and len({k for k, _ in pairs}) == len(pairs)
    if not ok:
        raise TrainingError(f"{name} must be (kind, parts) pairs, each kind one of {', '.join(KNOWN_KINDS)} "
                            f"at most once with a whole number of parts >= 1 (e.g. (('fan', 1), ('impacts', 1))), "
                            f"got {mix!r}")
    return tuple((str(k), int(p)) for k, p in pairs)


def mix_draws(mix) -> tuple[str, ...]:
    """The kinds a plan draws from with equal chance: each kind of ``mix`` repeated
    ``parts`` times, in order (so :data:`STEADY_MIX` gives :data:`BACKGROUND_KINDS`)."""
    return tuple(kind for kind, parts in check_mix(mix) for _ in range(parts))


def background_count(n_recordings: int, share: float) -> int:
    """Items for ``n_recordings`` usable recordings: ``round(share * n)``, at least
    :data:`MIN_BACKGROUNDS` (0 when the share is 0 or there are no recordings)."""
    if share <= 0 or n_recordings <= 0:
        return 0
    return max(MIN_BACKGROUNDS, int(round(share * n_recordings)))


def plan_backgrounds(count: int, speakers, *, seed: int, levels=(-70.0, -30.0), seconds=(1.0, 3.0),
                     kinds=None) -> list[BackgroundRecipe]:
    """Recipes of ``count`` background items, from ``seed`` alone.

    ``kinds``: the kinds drawn, each with equal chance (default :data:`BACKGROUND_KINDS`,
    read when called), or a mix of ``(kind, parts)`` pairs (:func:`check_mix`; drawn as
    :func:`mix_draws`, so one part each gives the plain kinds' recipes).
    ``speakers``: the names babble may draw its 3-6 talkers from (with repeats when there
    are fewer).
    """
    names = sorted({str(s) for s in speakers})
    kinds = BACKGROUND_KINDS if kinds is None else tuple(kinds)
    if any(not isinstance(k, str) for k in kinds):
        kinds = mix_draws(kinds)
    plans = []
    for k in range(count):
        rng = np.random.default_rng([seed, _STREAM, k])
        kind = kinds[int(rng.integers(len(kinds)))]
        length = float(rng.uniform(*seconds))
        level = float(rng.uniform(*levels))
        mains = 50.0 if rng.random() < 0.5 else 60.0
        floor = float(rng.uniform(-85.0, -75.0)) if kind != "dither" else float("-inf")
        talkers: tuple = ()
        if kind == "babble" and names:
            n = int(rng.integers(3, 7))
            talkers = tuple(str(s) for s in rng.choice(names, size=n, replace=len(names) < n))
        plans.append(BackgroundRecipe(k, kind, length, level, mains, floor, talkers, int(rng.integers(2**31))))
    return plans


def background_wave(recipe: BackgroundRecipe, pool: dict, sample_rate: int) -> np.ndarray:
    """The waveform of one recipe (float32); babble without talkers becomes fan noise."""
    rng = np.random.default_rng(recipe.noise_seed)
    n = int(round(recipe.seconds * sample_rate))
    kind = recipe.kind
    streams = [np.concatenate([x for _, x in pool[t]]) for t in recipe.talkers if pool.get(t)]
    if kind == "babble" and not streams:
        kind = "fan"
    x = background(kind, n, recipe.dbfs, rng, sample_rate=sample_rate, mains=recipe.mains, streams=streams)
    if np.isfinite(recipe.floor_dbfs):
        x = x + pink_noise(n, rng, sample_rate=sample_rate) * 10.0 ** (recipe.floor_dbfs / 20.0)
    return x.astype(np.float32)


def _chunk_task(recipes, pool, settings):
    return [compute_features(background_wave(r, pool, settings.sample_rate), settings) for r in recipes]


def background_items(count: int, paths, speakers, graph, settings: FeatureSettings, *,
                     seed: int = 0, jobs: int = 1, quiet: bool = True, executor=None,
                     kinds=None) -> list[TrainingItem]:
    """``count`` background-only training items (empty transcript, one pause unit).

    Parameters
    ----------
    count : int >= 0
        See :func:`background_count`.
    paths, speakers : sequences
        The usable recordings and their speakers: babble is made of their speech parts
        (:func:`wordspot.training.noise.babble_pool`).
    graph : StateGraph
        The chain of an empty transcript (one pause unit; :func:`wordspot.training.data.chain_slots`).
    settings : FeatureSettings
    seed : int
        The training seed; the items depend only on it and the recordings, not on ``jobs``.
    jobs : int >= 1
    executor : wordspot.training.cluster.Executor, optional
    kinds : mix of ``(kind, parts)`` pairs, optional
        The kinds drawn (see :func:`plan_backgrounds`; ``TrainingConfig.background_kinds``);
        default :data:`BACKGROUND_KINDS`.

    Returns
    -------
    list of TrainingItem
        ``background`` set, paths ``background-NNN-KIND`` (no file behind them).
    """
    if count <= 0:
        return []
    speakers = [str(s) for s in speakers]
    plans = plan_backgrounds(count, speakers, seed=seed, kinds=kinds)
    pool = babble_pool(list(paths), speakers, seed=seed, sample_rate=settings.sample_rate) \
        if any(p.talkers for p in plans) else {}
    chunks = [plans[i:i + CHUNK_SIZE] for i in range(0, len(plans), CHUNK_SIZE)]
    bar = ProgressBar(len(plans), "backgrounds", quiet=quiet)
    feats = []
    with using(executor, jobs) as ex:
        for part in ex.map(_chunk_task, [(c,) for c in chunks], common=(pool, settings),
                           frames=True, label="backgrounds"):
            feats += part
            bar.update(len(part))
        bar.close()
        feats = ex.settle(feats)
    return [TrainingItem(Path(f"background-{r.number:03d}-{r.kind}"), (), np.ascontiguousarray(f), graph,
                         background=True)
            for r, f in zip(plans, feats)]
