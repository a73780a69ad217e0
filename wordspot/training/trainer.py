"""Acoustic training: flat start, embedded re-estimation and mixture growth.

Outline (the measurements behind the defaults are in docs/experiments/2026-12-02-training-recipe.md):

1. **Flat start.** Every state's mixture is one Gaussian with the global mean and
   variance of all training frames; transitions are the topology defaults of
   :func:`wordspot.acoustic.units.default_unit_set`. Refinement (on by default,
   ``TrainingConfig.pause_seconds``): the three pause states start from the mean and
   variance of the first and last ``pause_seconds`` of every recording, where people
   are silent before and after a command. This gives the first alignment an anchor.
2. **Embedded re-estimation** (Baum-Welch over each utterance's whole chain; Rabiner
   1989 eqs. 40, 52-54 with mixtures): forward-backward in the log domain gives state
   and component posteriors and expected transition counts; statistics are summed over
   all utterances, then means, variances (floored at ``variance_floor`` times the
   global variance), weights and transitions (rows re-normalised, allowed transitions
   kept above a floor) are updated.
3. **Mixture growth** along ``mixtures`` (1, 2, 4, 8 by default): each growth step
   splits the heaviest components (means +-0.2 standard deviations) and is followed by
   ``passes_per_split`` passes; components that get fewer than ``min_occupancy``
   expected frames are dropped.

The work of a pass is split into fixed chunks of utterances
(:data:`wordspot.training.data.CHUNK_SIZE`), each chunk's statistics are summed in
utterance order and the chunks' sums are added in chunk order, so a run with several
processes gives exactly the same model as a serial run.
"""

from __future__ import annotations

import datetime as _dt
import time
import warnings
from dataclasses import dataclass, field, replace

import numpy as np

from wordspot import __version__
from wordspot.acoustic import kernels
from wordspot.corpus import check_manifest
from wordspot.audio.augment import NoiseSettings
from wordspot.audio.band import check_training_band
from wordspot.errors import TrainingError, TrainingWarning
from wordspot.audio.features import FeatureSettings
from wordspot.acoustic.gmm import (
    Mixtures,
    MixtureStats,
    scoring_matrix,
    single_gaussian,
    split_heaviest,
    update_mixtures,
)
from wordspot.language.grammar import count_bigrams
from wordspot.acoustic.hmm import Posteriors, graph_arrays
from wordspot.model import AcousticModel
from wordspot.util.progress import ProgressBar
from wordspot.training.backgrounds import STEADY_MIX, check_mix, check_share
from wordspot.training.cluster import open_executor, using
from wordspot.training.data import prepare_items
from wordspot.training.voice import voice_of_recordings
from wordspot.training.items import CHUNK_SIZE, Skipped, TrainingItem
from wordspot.training.own_scorer import SCRATCH_SCORER, fit_own_scorer
from wordspot.training.scorer_fit import ScorerConfig
from wordspot.acoustic.transitions import parameter_counts, refresh_graph, update_transitions
from wordspot.acoustic.units import PAUSE_UNIT, UnitSet, default_unit_set, n_transition_params

__all__ = ["TrainingConfig", "TrainingSummary", "PASS_LEGEND", "train", "train_items", "flat_start", "pass_statistics",
           "pass_loglik"]

#: Said once before the pass lines: what their figures mean.
PASS_LEGEND = ("each pass: detail = Gaussians a state (more after each doubling); fit = log-likelihood a "
               "frame, which should rise from pass to pass")


def _factors(name: str, value) -> tuple[float, ...]:
    """``value`` as a tuple of distinct floats in [0.5, 2] (warp or speed factors)."""
    v = tuple(value)
    if not v or any(isinstance(x, bool) or not isinstance(x, (int, float, np.integer, np.floating))
                    or not (0.5 <= float(x) <= 2.0) for x in v) or len(set(v)) != len(v):
        raise TrainingError(
            f"{name} must be distinct numbers between 0.5 and 2 (for example 0.9 1.0 1.1), got {value!r}"
        )
    return tuple(float(x) for x in v)


@dataclass(frozen=True)
class TrainingConfig:
    """How to train (configuration only; learned state lives in the model).

    Parameters
    ----------
    mixtures : tuple of int
        Gaussians per state at each stage, increasing (default 1, 2, 4, 8).
    first_passes : int >= 1
        Re-estimation passes at the first stage (from the flat start); 5 did as well as 6
        on held-out voices, for one pass less (docs/experiments/2026-12-02-training-recipe.md).
    passes_per_split : int >= 1
        Passes after each mixture growth step.
    variance_floor : float > 0
        Variance floor as a fraction of the global variance (0.01: 1%).
    min_occupancy : float >= 0
        Expected frames a component needs to survive a pass.
    transition_floor : float >= 0
        Lowest probability an allowed transition may take.
    pause_seconds : float >= 0
        Initialise the pause states from this much audio at each end of every
        recording (0: plain flat start).
    jobs : int >= 1
        Processes for feature extraction and re-estimation (ignored with ``cluster``).
    cluster : str, optional
        Run feature extraction and every pass on the workers of this running Dask
        scheduler: its address (``tcp://host:8786``) or its scheduler file (see
        :mod:`wordspot.training.cluster`; needs ``pip install "wordspot[cluster]"``).
        The model is bit-identical to a serial run's.
    shared_dir : str, optional
        With ``cluster``: a folder every worker sees at the same path, for the frames
        files (default: this machine's temporary folder, enough for local workers).
    seed : int
        Seeds the direction (sign per dimension) of the mean offsets when splitting.
    prune : float >= 0
        Frames whose probability of belonging to a mixture is below this add nothing to
        that mixture's statistics (saves time; 0 keeps everything).
    warp_factors : tuple of float > 0
        Frequency warp factors for vocal tract length perturbation: every recording is
        trained on once per factor (see :func:`wordspot.training.data.prepare_items`);
        ``(1.0,)`` is plain training. Recognition always uses unwarped features.
    speed_factors : tuple of float > 0
        Speed perturbation: every factor other than 1 adds a copy of every recording
        played that much faster (tempo, pitch and formants together; see
        :func:`wordspot.training.data.speed_copy`). The default ``(0.9, 1.0, 1.1)``
        triples the data and the training time; on the demo set it cut isolated-word
        errors on unseen voices from 10.4% to 2.4% (docs/experiments/2026-12-02-training-recipe.md).
        ``(1.0,)`` turns it off.
    noise_copies : int >= 0
        Noisy copies of every recording for multi-condition training (babble or steady
        machine noise; see :mod:`wordspot.training.noise`); 0 trains on the clean ones only.
        The default 2 (with ``FeatureSettings.cvn``) cut 10 dB single-word errors on
        held-out voices from 35.6% (one copy) to 23.6% (docs/experiments/2026-12-02-training-recipe.md);
        each copy is babble
        two times in three (``NoiseSettings.kinds``).
    noise_snr_db : (float, float)
        Each noisy copy's SNR in dB, drawn uniformly from this range.
    background_share : float in [0, 1]
        Background-only items (no command: noise, hum, dithered silence, babble, fan at -70
        to -30 dBFS; :mod:`wordspot.training.backgrounds`) as a share of the recordings,
        at least 20 when above 0; 0 adds none.
    background_kinds : tuple of (str, int)
        Their kinds and parts: each item is a kind drawn with chance parts / total
        (:func:`wordspot.training.backgrounds.check_mix`; "impacts" are knocks and clinks).
        The default, the five steady kinds one part each, makes the items of before.
    scorer : ScorerConfig or None
        After the mixtures, fit a state scorer on these recordings, their speed and noisy
        copies and the background items, aligned with the new model
        (:mod:`wordspot.training.own_scorer`; its seed is ``seed``); its posteriors then
        feed the calibrated confidence. On the dev voices it cut other talk given a
        command from 61% to 39% of files and the EER from 10.5% to 8.4% for 0.8 times the
        training's CPU time (docs/experiments/2026-12-03-scratch-scorer.md). None: none.
    voice_components : int >= 0
        Gaussians of the voice mixture fitted on the recordings' speech frames, by which
        recognition may choose each file's frequency warp (``DecoderSettings.voice_warp``,
        :mod:`wordspot.training.voice`); 0 (the default, since the warp is off by default:
        docs/experiments/2026-12-04-frequency-warping.md): none. 32 was the dev trial's size.
    """

    mixtures: tuple[int, ...] = (1, 2, 4, 8)
    first_passes: int = 5
    passes_per_split: int = 4
    variance_floor: float = 0.01
    min_occupancy: float = 3.0
    transition_floor: float = 1e-3
    pause_seconds: float = 0.15
    jobs: int = 1
    cluster: str | None = None
    shared_dir: str | None = None
    seed: int = 0
    prune: float = 1e-4
    warp_factors: tuple[float, ...] = (1.0,)
    speed_factors: tuple[float, ...] = (0.9, 1.0, 1.1)
    noise_copies: int = 2
    noise_snr_db: tuple[float, float] = (0.0, 25.0)
    background_share: float = 0.1
    background_kinds: tuple[tuple[str, int], ...] = STEADY_MIX
    scorer: ScorerConfig | None = SCRATCH_SCORER
    voice_components: int = 0

    def __post_init__(self) -> None:
        m = tuple(self.mixtures)
        if not m or any(not isinstance(k, (int, np.integer)) or k < 1 for k in m) or list(m) != sorted(set(m)):
            raise TrainingError(
                f"mixtures must be increasing whole numbers >= 1 (for example 1 2 4 8), got {self.mixtures!r}"
            )
        if not isinstance(self.voice_components, (int, np.integer)) or self.voice_components < 0:
            raise TrainingError(f"voice_components must be a whole number >= 0 (0: no voice mixture), "
                                f"got {self.voice_components!r}")
        for name in ("first_passes", "passes_per_split", "jobs"):
            v = getattr(self, name)
            if not isinstance(v, (int, np.integer)) or v < 1:
                raise TrainingError(f"{name} must be a whole number >= 1, got {v!r}")
        if not (0 < self.variance_floor < 1):
            raise TrainingError(f"variance_floor must be in (0, 1) (0.01 is usual), got {self.variance_floor!r}")
        for name in ("warp_factors", "speed_factors"):
            object.__setattr__(self, name, _factors(name, getattr(self, name)))
        if self.min_occupancy < 0 or self.transition_floor < 0 or self.pause_seconds < 0 or self.prune < 0:
            raise TrainingError("min_occupancy, transition_floor, pause_seconds and prune must be >= 0")
        self.noise  # validates noise_copies and noise_snr_db
        object.__setattr__(self, "background_share", check_share(self.background_share))
        object.__setattr__(self, "background_kinds", check_mix(self.background_kinds))
        if self.cluster is not None and not str(self.cluster).strip():
            raise TrainingError("cluster (--cluster) must be a Dask scheduler address (tcp://host:8786) "
                                "or scheduler file")
        if self.shared_dir is not None and self.cluster is None:
            raise TrainingError("shared_dir (--shared-dir) only applies with cluster (--cluster)")
        if self.scorer is not None and not isinstance(self.scorer, ScorerConfig):
            raise TrainingError(f"scorer must be a ScorerConfig or None, got {self.scorer!r}")

    @property
    def noise(self) -> NoiseSettings:
        """The noisy-copy part of these settings."""
        return NoiseSettings(copies=self.noise_copies, snr_db=tuple(self.noise_snr_db))

    @property
    def total_passes(self) -> int:
        return self.first_passes + self.passes_per_split * (len(self.mixtures) - 1)


@dataclass
class TrainingSummary:
    """What happened during training.

    Attributes
    ----------
    used : int
        Recordings that took part to the end.
    backgrounds : int
        Synthesised background-only items that took part (not counted in ``used``).
    n_frames : int
        Frames in all items (copies and background items included).
    skipped : list of Skipped
        Utterances left out, with the reason.
    passes : list of (int, float)
        Per pass: Gaussians per state, average log-likelihood per frame.
    frames_per_unit : dict of str -> float
        Expected frames of each unit in the last pass.
    frame_seconds : float
        Seconds a frame steps (turns frames into time for people).
    unseen_units : list of str
        Units that saw (almost) no data and keep their flat-start parameters.
    seconds : float
        Wall-clock time of the whole training.
    scorer_note : str
        What was done to a starting model's state scorer, in plain words ("" when there
        is none).
    adaptation : dict
        When adapting: the strength chosen and how (see ``training.adapt.adapt_items``).
    adapt_note : str
        When adapting: what was done and why, in plain words ("" otherwise).
    pronunciation_note : str
        The pronunciations learned from the recordings, in plain words ("" when none).
    """

    used: int = 0
    backgrounds: int = 0
    n_frames: int = 0
    skipped: list = field(default_factory=list)
    passes: list = field(default_factory=list)
    frames_per_unit: dict = field(default_factory=dict)
    frame_seconds: float = 0.01
    unseen_units: list = field(default_factory=list)
    seconds: float = 0.0
    scorer_note: str = ""
    adaptation: dict = field(default_factory=dict)
    adapt_note: str = ""
    pronunciation_note: str = ""

    def count(self, items) -> None:
        """Set ``used`` (recordings, not augmented copies) and ``backgrounds`` from training items."""
        self.used = len({it.path for it in items if not it.background})
        self.backgrounds = sum(1 for it in items if it.background)

    def lines(self) -> list[str]:
        """The summary as short text lines for people."""
        minutes = self.n_frames * self.frame_seconds / 60
        out = [self.adapt_note] if self.adapt_note else []
        out += [f"recordings used: {self.used} ({minutes:.1f} min of sound, copies and background sounds included)"]
        if self.backgrounds:
            out.append(f"background sounds added (no command): {self.backgrounds}")
        out.append(f"recordings skipped: {len(self.skipped)}")
        out += [f"  {s.path}: {s.reason}" for s in self.skipped]
        if self.frames_per_unit:
            cells = [f"{u} {f * self.frame_seconds:.1f}" for u, f in sorted(self.frames_per_unit.items())]
            out.append("seconds of sound each phone was learnt from: " + ", ".join(cells))
        out.append("phones heard in no recording (left as they started): "
                   + (", ".join(self.unseen_units) if self.unseen_units else "none"))
        if self.pronunciation_note:
            out.append(self.pronunciation_note)
        if self.scorer_note:
            out.append(self.scorer_note)
        out.append(f"training time: {self.seconds:.1f} s")
        return out


# ------------------------------------------------------------------ one pass


@dataclass
class _PassResult:
    stats: MixtureStats
    trans_counts: np.ndarray
    loglik: np.ndarray  # per utterance (-inf: no path)
    unit_frames: np.ndarray
    rows: np.ndarray | None = None  # ``stats`` holds these mixtures only (the others are zero)


class _GraphCache:
    """Per-chunk work that depends only on a graph (utterances with the same words share it):
    its arrays and the columns of the scoring matrix its mixtures use."""

    def __init__(self, graph, units: UnitSet, n_comp: int, scoring):
        self.graph = refresh_graph(graph, units)
        self.mixture_ids, self.local = np.unique(graph.mixture, return_inverse=True)
        self.cols = (self.mixture_ids[:, None] * n_comp + np.arange(n_comp)[None, :]).reshape(-1)
        w, c = scoring
        self.w = np.ascontiguousarray(w[:, self.cols])
        self.c = np.ascontiguousarray(c[self.cols])
        self.local = np.ascontiguousarray(self.local, dtype=np.int64)
        self.arrays = graph_arrays(self.graph)
        g = self.graph
        self.self_count = np.zeros(g.n_states)
        self.arc_count = np.zeros(g.n_arcs)
        self.init_count = np.zeros(g.n_states)
        self.final_count = np.zeros(g.n_states)


def _state_occupancy(state_ll, cache: _GraphCache, result: _PassResult, k: int):
    """Forward-backward over one utterance's chain: its log-likelihood into ``result`` (slot
    k), its transition counts into ``cache``; the state occupancies (T, S), or None when
    the chain cannot explain the frames."""
    self_logp, src, dst, arc_logp, init_logp, final_logp = cache.arrays
    total, alpha = kernels.forward(state_ll, self_logp, src, dst, arc_logp, init_logp, final_logp)
    result.loglik[k] = total
    if not np.isfinite(total):
        return None
    beta = kernels.backward(state_ll, self_logp, src, dst, arc_logp, final_logp)
    counts = kernels.transition_counts(state_ll, alpha, beta, total, self_logp, src, dst, arc_logp,
                                       init_logp, final_logp)
    cache.self_count += counts[0]
    cache.arc_count += counts[1]
    cache.init_count += counts[2]
    cache.final_count += counts[3]
    return np.exp(alpha + beta - total)


def _utterance_pass(item_frames, cache: _GraphCache, n_comp: int, result: _PassResult, k: int, prune: float):
    """Add one utterance's statistics into ``result`` (its log-likelihood into slot k).

    The component posteriors are formed only where a mixture's frame posterior reaches
    ``prune`` (:func:`wordspot.acoustic.kernels.accumulate_from_scores`); the sums are bit
    for bit those of :func:`_reference_utterance_pass`.
    """
    x = np.ascontiguousarray(item_frames, dtype=np.float64)
    mixture_ids, local = cache.mixture_ids, cache.local
    comp = kernels.score_components(x, cache.w, cache.c).reshape(x.shape[0], mixture_ids.size, n_comp)
    mixture_ll, top, total_c = kernels.mixture_log_likelihoods(comp)
    state_ll = np.ascontiguousarray(mixture_ll[:, local])
    gamma = _state_occupancy(state_ll, cache, result, k)
    if gamma is None:
        return
    mixture_gamma = kernels.mixture_occupancy(gamma, local, mixture_ids.size, float(prune))
    occ, first, second = kernels.accumulate_from_scores(x, comp, top, total_c, mixture_gamma)
    result.stats.occupancy[mixture_ids] += occ
    result.stats.first[mixture_ids] += first
    result.stats.second[mixture_ids] += second
    np.add.at(result.unit_frames, cache.graph.unit, gamma.sum(axis=0))


def _reference_utterance_pass(item_frames, cache: _GraphCache, n_comp: int, result: _PassResult, k: int,
                              prune: float):
    """:func:`_utterance_pass` the plain way (every component posterior, ``np.add.at``), for the tests."""
    x = np.ascontiguousarray(item_frames, dtype=np.float64)
    mixture_ids, local = cache.mixture_ids, cache.local
    comp = kernels.score_components(x, cache.w, cache.c)
    mixture_ll, comp_post = kernels.mixture_posteriors(comp.reshape(x.shape[0], mixture_ids.size, n_comp))
    state_ll = np.ascontiguousarray(mixture_ll[:, local])
    gamma = _state_occupancy(state_ll, cache, result, k)
    if gamma is None:
        return
    mixture_gamma = np.zeros((x.shape[0], mixture_ids.size))
    np.add.at(mixture_gamma.T, local, gamma.T)
    if prune > 0:
        mixture_gamma[mixture_gamma < prune] = 0.0  # the moment sums skip these (frame, mixture) pairs
    occ, first, second = kernels.accumulate_moments(x, comp_post, mixture_gamma)
    result.stats.occupancy[mixture_ids] += occ
    result.stats.first[mixture_ids] += first
    result.stats.second[mixture_ids] += second
    np.add.at(result.unit_frames, cache.graph.unit, gamma.sum(axis=0))


def _chunk_pass(chunk, scoring, shape, units: UnitSet, prune: float = 0.0, reference: bool = False) -> _PassResult:
    """Summed statistics of a chunk of (frames, graph) pairs, in order.

    ``scoring`` is :func:`wordspot.acoustic.gmm.scoring_matrix` of the mixtures (made once
    a pass, not once a chunk), ``shape`` their ``(n_mixtures, n_components, dim)``;
    ``reference`` uses :func:`_reference_utterance_pass`.
    """
    n_mix, n_comp, dim = shape
    n_params = n_transition_params(units.n_units)
    result = _PassResult(
        MixtureStats.zeros(n_mix, n_comp, dim),
        np.zeros(n_params),
        np.full(len(chunk), -np.inf),
        np.zeros(units.n_units),
    )
    one = _reference_utterance_pass if reference else _utterance_pass
    caches: dict[int, _GraphCache] = {}
    for k, (frames, graph) in enumerate(chunk):
        cache = caches.get(id(graph))
        if cache is None:
            cache = caches[id(graph)] = _GraphCache(graph, units, n_comp, scoring)
        one(frames, cache, n_comp, result, k, prune)
    for cache in caches.values():  # insertion order: the same in every process
        post = Posteriors(0.0, np.zeros((0, 0)), cache.self_count, cache.arc_count,
                          cache.init_count, cache.final_count)
        result.trans_counts += parameter_counts(cache.graph, post, n_params)
    # Only the mixtures of this chunk's chains go back (the others hold zeros), so a result
    # stays small between processes; adding zeros changes no bit of the totals.
    result.rows = np.unique(np.concatenate([cache.mixture_ids for cache in caches.values()]))
    s = result.stats
    result.stats = MixtureStats(s.occupancy[result.rows], s.first[result.rows], s.second[result.rows])
    return result


def _run_pass(chunks, mix, units, executor, label, quiet, prune, reference=False) -> _PassResult:
    bar = ProgressBar(sum(len(c) for c in chunks), label, quiet=quiet)
    shape = (mix.n_mixtures, mix.n_components, mix.dim)
    gen = executor.map(_chunk_pass, [(c,) for c in chunks], common=(scoring_matrix(mix), shape, units, prune, reference),
                       label=label)
    total = None
    lls = []
    for part in gen:  # in chunk order, whatever the number of processes
        if total is None:
            total = _PassResult(MixtureStats.zeros(mix.n_mixtures, mix.n_components, mix.dim),
                                np.zeros_like(part.trans_counts), None, np.zeros_like(part.unit_frames))
        for name in ("occupancy", "first", "second"):
            getattr(total.stats, name)[part.rows] += getattr(part.stats, name)
        total.trans_counts += part.trans_counts
        total.unit_frames += part.unit_frames
        lls.append(part.loglik)
        bar.update(len(part.loglik))
    bar.close()
    total.loglik = np.concatenate(lls)
    return total


def _chunk_loglik(chunk, scoring, n_comp: int, units: UnitSet) -> np.ndarray:
    """Log-likelihood of each (frames, graph) pair of a chunk under its chain: the forward
    pass of :func:`_utterance_pass` alone (the same kernels on the same numbers, so the
    same values bit for bit), without the backward pass and the sums."""
    out = np.full(len(chunk), -np.inf)
    caches: dict[int, _GraphCache] = {}
    for k, (frames, graph) in enumerate(chunk):
        cache = caches.get(id(graph))
        if cache is None:
            cache = caches[id(graph)] = _GraphCache(graph, units, n_comp, scoring)
        x = np.ascontiguousarray(frames, dtype=np.float64)
        comp = kernels.score_components(x, cache.w, cache.c).reshape(x.shape[0], cache.mixture_ids.size, n_comp)
        mixture_ll = kernels.mixture_log_likelihoods(comp)[0]
        state_ll = np.ascontiguousarray(mixture_ll[:, cache.local])
        self_logp, src, dst, arc_logp, init_logp, final_logp = cache.arrays
        out[k] = kernels.forward(state_ll, self_logp, src, dst, arc_logp, init_logp, final_logp)[0]
    return out


def pass_loglik(chunks, mix: Mixtures, units: UnitSet, *, jobs: int = 1, executor=None) -> np.ndarray:
    """Log-likelihood of every utterance of ``chunks`` (in order) under its chain with
    ``mix``: the ``loglik`` of :func:`pass_statistics`, bit for bit, from the forward pass
    alone (about half the work: no backward pass, no statistics)."""
    if not chunks:
        return np.zeros(0)
    with using(executor, jobs) as ex:
        parts = list(ex.map(_chunk_loglik, [(c,) for c in chunks],
                            common=(scoring_matrix(mix), mix.n_components, units), label="fit"))
    return np.concatenate(parts)


def pass_statistics(chunks, mix: Mixtures, units: UnitSet, *, jobs: int = 1, quiet: bool = True,
                    prune: float = 0.0, label: str = "statistics", executor=None, reference: bool = False):
    """One forward-backward pass over chunks of ``(frames, graph)`` pairs, summed in chunk order.

    Returns an object with ``stats`` (MixtureStats), ``trans_counts``, ``loglik`` (per
    utterance) and ``unit_frames``; the same for any ``jobs`` (or ``executor``).
    ``reference``: each utterance the plain way (the tests compare, bit for bit).
    """
    with using(executor, jobs) as ex:
        return _run_pass(chunks, mix, units, ex, label, quiet, prune, reference)


# ------------------------------------------------------------------ flat start


def flat_start(items: list[TrainingItem], units: UnitSet, *, frame_rate: float,
               pause_seconds: float) -> tuple[Mixtures, np.ndarray]:
    """One Gaussian per state from the global statistics of all frames.

    Returns
    -------
    mixtures : Mixtures
    global_variance : ndarray, shape (D,)
    """
    n = sum(it.frames.shape[0] for it in items)
    s1 = np.zeros(items[0].frames.shape[1])
    s2 = np.zeros_like(s1)
    for it in items:
        x = it.frames.astype(np.float64)
        s1 += x.sum(axis=0)
        s2 += (x * x).sum(axis=0)
    mean = s1 / n
    var = np.maximum(s2 / n - mean**2, 1e-8)
    mix = single_gaussian(units.n_mixtures, mean, var)
    edge = int(round(pause_seconds * frame_rate))
    if edge > 0 and PAUSE_UNIT in units:
        used = [it.frames for it in items if it.frames.shape[0] >= 3 * edge]
        if used:
            # Mean and variance of all end frames, read recording by recording (the client's
            # memory does not grow with the corpus), with the bits of numpy's mean and var.
            n = 2 * edge * len(used)
            end_mean = _running_sum(_end_frames(f, edge) for f in used) / n
            end_var = _running_sum(np.square(_end_frames(f, edge) - end_mean) for f in used) / n
            pau_var = np.maximum(end_var, 0.01 * var)
            mixture_ids = units.state_mixture[units.index(PAUSE_UNIT)]
            mixture_ids = mixture_ids[mixture_ids >= 0]
            mix.means[mixture_ids, 0] = end_mean
            mix.variances[mixture_ids, 0] = pau_var
    return mix, var


def _end_frames(frames: np.ndarray, edge: int) -> np.ndarray:
    return np.concatenate([frames[:edge], frames[-edge:]]).astype(np.float64)


def _running_sum(blocks) -> np.ndarray:
    """Column sums of the blocks' rows, added one row after the other in block order.

    numpy sums a C-ordered array over axis 0 row after row too, so this gives the bits of
    ``np.concatenate(blocks).sum(axis=0)`` without the concatenated array (checked in
    ``tests/training/test_trainer.py``).
    """
    total = None
    for b in blocks:
        total = np.add.reduce(b if total is None else np.concatenate([total[None], b]), axis=0)
    return total


# ------------------------------------------------------------------ the loop


def train_items(items: list[TrainingItem], units: UnitSet, *, frame_rate: float,
                config: TrainingConfig = TrainingConfig(), quiet: bool = True, report=None,
                executor=None):
    """Train mixtures and transitions on prepared utterances.

    Parameters
    ----------
    items : list of TrainingItem
    units : UnitSet
        Topology and starting transitions.
    frame_rate : float
        Frames per second of the features (for the pause initialisation).
    config : TrainingConfig
    quiet : bool
        No progress bars.
    report : callable, optional
        Called with one line of text per pass.
    executor : wordspot.training.cluster.Executor, optional
        Where the passes run (default: one made for ``config.jobs``).

    Returns
    -------
    units : UnitSet
    mixtures : Mixtures
    summary : TrainingSummary
        ``used``, ``n_frames``, ``passes``, ``frames_per_unit`` and ``unseen_units`` filled.
    dropped : list of Skipped
        Utterances dropped because no path through their chain fits.
    """
    if not items:
        raise TrainingError("no usable recording to train on")
    # Same transcripts next to each other, so a chunk composes and refreshes each graph
    # once; the order is fixed by the data alone (stable sort), never by ``jobs``.
    items = sorted(items, key=lambda it: it.words)
    with using(executor, config.jobs, config.cluster, config.shared_dir) as ex:
        # Workers read the frames from memory-mapped files instead of receiving copies
        # every pass (a task sends a view of such a file as its name and rows).
        frames = ex.keep_on_disk([it.frames for it in items])
        return _train_loop([replace(it, frames=f) for it, f in zip(items, frames)], units, frame_rate,
                           config, quiet, report, ex)


def _train_loop(items, units, frame_rate, config, quiet, report, executor):
    """The passes of :func:`train_items` (items sorted, frames wherever they live)."""
    rng = np.random.default_rng(config.seed)
    mix, global_var = flat_start(items, units, frame_rate=frame_rate, pause_seconds=config.pause_seconds)
    floor = config.variance_floor * global_var
    summary = TrainingSummary()
    dropped: list[Skipped] = []
    updated = np.ones(mix.n_mixtures, dtype=bool)
    last = None
    n_pass = 0
    for stage, n_comp in enumerate(config.mixtures):
        if stage > 0:
            # Grow only mixtures that had data; the others keep their flat start.
            mix = split_heaviest(mix, n_comp, which=updated, rng=rng)
        passes = config.first_passes if stage == 0 else config.passes_per_split
        for _ in range(passes):
            n_pass += 1
            chunks = [[(it.frames, it.graph) for it in items[i:i + CHUNK_SIZE]]
                      for i in range(0, len(items), CHUNK_SIZE)]
            label = f"pass {n_pass}/{config.total_passes} ({n_comp} mix)"
            res = _run_pass(chunks, mix, units, executor, label, quiet, config.prune)
            bad = ~np.isfinite(res.loglik)
            if bad.any():
                for k in np.flatnonzero(bad):
                    reason = "no path through its chain fits the audio (likelihood zero)"
                    dropped.append(Skipped(items[k].path, reason))
                    warnings.warn(f"skipping {items[k].path}: {reason}", TrainingWarning, stacklevel=2)
                items = [it for k, it in enumerate(items) if not bad[k]]
                if not items:
                    raise TrainingError("no recording is usable: none of them matches its transcript "
                                        "(no path through its chain fits the audio); check the transcripts")
            n_frames = sum(it.frames.shape[0] for it in items)
            avg = float(res.loglik[~bad].sum() / n_frames)
            summary.passes.append((int(n_comp), avg))
            if report is not None:
                if n_pass == 1:
                    report(PASS_LEGEND)
                report(f"pass {n_pass:2d}  detail {n_comp}  fit {avg:.4f}")
            mix, updated = update_mixtures(mix, res.stats, variance_floor=floor,
                                           min_occupancy=config.min_occupancy)
            units = update_transitions(units, res.trans_counts, floor=config.transition_floor)
            last = res
    summary.count(items)
    summary.n_frames = int(sum(it.frames.shape[0] for it in items))
    summary.frames_per_unit = {name: float(last.unit_frames[u]) for u, name in enumerate(units.names)}
    seen = np.zeros(units.n_units, dtype=bool)
    for u in range(units.n_units):
        mixture_ids = units.state_mixture[u, : units.n_states[u]]
        seen[u] = bool(updated[mixture_ids].any())
    summary.unseen_units = [n for u, n in enumerate(units.names) if not seen[u]]
    return units, mix, summary, dropped


def train(utterances, lexicon, *, settings: FeatureSettings | None = None,
          config: TrainingConfig = TrainingConfig(), manifest=None, quiet: bool = True,
          report=None) -> tuple[AcousticModel, TrainingSummary]:
    """Train an acoustic model from recordings labelled with their words.

    Parameters
    ----------
    utterances : sequence of wordspot.corpus.Utterance
    lexicon : wordspot.language.lexicon.Lexicon
        Must hold every transcript word (all missing words are listed in one error
        before any work starts).
    settings : FeatureSettings, optional
        Feature settings (default: 16 kHz MFCC, 39 values a frame).
    config : TrainingConfig
    manifest : str or path, optional
        The manifest's name, for messages.
    quiet : bool
        No progress bars.
    report : callable, optional
        Receives one line of text per pass.

    Returns
    -------
    model : AcousticModel
    summary : TrainingSummary

    Raises
    ------
    ManifestError
        Missing files or words not in the lexicon.
    TrainingError
        Nothing usable is left.
    """
    start = time.monotonic()
    settings = FeatureSettings() if settings is None else settings
    utterances = list(utterances)
    if not utterances:
        raise TrainingError(f"{manifest or 'manifest'}: lists no recordings to train on")
    check_manifest(utterances, lexicon, manifest=manifest)
    units = default_unit_set(sorted(lexicon.units_used()))
    with open_executor(config.jobs, config.cluster, config.shared_dir,
                       check_paths=[utterances[0].path]) as executor:
        items, skipped = prepare_items(utterances, lexicon, units, settings, jobs=config.jobs, quiet=quiet,
                                       warps=config.warp_factors, speeds=config.speed_factors,
                                       noise=config.noise, background_share=config.background_share,
                                       seed=config.seed, executor=executor,
                                       background_kinds=config.background_kinds)
        if not items:
            raise TrainingError(
                f"{manifest or 'manifest'}: none of the {len(utterances)} recordings is usable "
                "(see the warnings above); fix or replace the files and train again"
            )
        units, mix, summary, dropped = train_items(items, units, frame_rate=settings.frame_rate, config=config,
                                                   quiet=quiet, report=report, executor=executor)
        model = _model(utterances, lexicon, settings, config, items, units, mix, summary, dropped, skipped, start)
        if config.scorer is not None:
            net, scorer_info, summary.scorer_note = fit_own_scorer(
                model, utterances, noise=config.noise, speeds=config.speed_factors,
                background_share=config.background_share, seed=config.seed,
                background_kinds=config.background_kinds, scorer=replace(config.scorer, seed=config.seed), jobs=config.jobs, quiet=quiet, executor=executor)
            if net is None:
                warnings.warn(summary.scorer_note + "; word confidences use the mixtures' measures alone",
                              TrainingWarning, stacklevel=2)
            summary.seconds = time.monotonic() - start
            model = replace(model, scorer=net, info={**model.info, "scorer": scorer_info,
                                                     "seconds": round(summary.seconds, 2)})
    if config.voice_components:
        left_out = {s.path for s in summary.skipped}
        voice = voice_of_recordings([u.path for u in utterances if u.path not in left_out], settings,
                                    config.voice_components, seed=config.seed)
        model = replace(model, voice=voice)
    return model, summary


def _model(utterances, lexicon, settings, config, items, units, mix, summary, dropped, skipped, start):
    """The trained model (no scorer yet) with its word pairs and info; fills ``summary``."""
    summary.skipped = skipped + dropped
    summary.frame_seconds = settings.hop_ms / 1000
    if summary.unseen_units:
        warnings.warn(
            "no recording holds the phone(s) " + ", ".join(summary.unseen_units)
            + ", so they stay untrained (flat-start parameters): record words that use them",
            TrainingWarning, stacklevel=3,
        )
    used = {it.path for it in items if not it.background} - {s.path for s in dropped}
    band = check_training_band(sorted(used), settings.sample_rate)
    # recordings with no command (empty transcripts) train the pause but add no word pairs:
    # the prior stays the commands' own
    transcripts = [u.words for u in utterances if u.path in used and u.words]
    bigrams = count_bigrams(transcripts, vocabulary=lexicon.words)
    summary.seconds = time.monotonic() - start
    info = {
        "created": _dt.datetime.now(_dt.timezone.utc).isoformat(timespec="seconds"),
        "wordspot_version": __version__,
        "utterances": summary.used,
        "skipped": len(summary.skipped),
        "frames": summary.n_frames,
        "passes": len(summary.passes),
        "loglik_per_pass": [round(v, 6) for _, v in summary.passes],
        "mixture_schedule": [int(k) for k in config.mixtures],
        "seconds": round(summary.seconds, 2),
        "seed": int(config.seed),
        "warp_factors": list(config.warp_factors),
        "speed_factors": list(config.speed_factors),
        "noise_copies": int(config.noise_copies),
        "noise_snr_db": [float(v) for v in config.noise_snr_db],
        "noise_kinds": list(config.noise.kinds),
        "background_share": float(config.background_share),
        "background_items": int(summary.backgrounds),
        "background_kinds": [[k, p] for k, p in config.background_kinds],
        "unseen_units": list(summary.unseen_units),
        "audio_band": band,
    }
    return AcousticModel(features=settings, units=units, mixtures=mix, lexicon=lexicon,
                         bigrams=bigrams, info=info)
