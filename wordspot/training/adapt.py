"""Adapting a trained model (usually a starter model) to a user's recordings.

Two steps, both over the same forward-backward statistics that training collects:

1. **Shared mean transform** (optional, on by default): one affine map ``mu' = A mu + b``
   of every Gaussian mean in a regression class (pause states and speech states are two
   classes), estimated by maximum likelihood from the user's data (MLLR: Leggetter &
   Woodland 1995, "Maximum likelihood linear regression for speaker adaptation of
   continuous density hidden Markov models", Computer Speech and Language 9, eqs. for
   diagonal covariances). It moves *every* phone towards the user's voice, also the ones
   the user never said.
2. **MAP re-estimation** (Gauvain & Lee 1994, "Maximum a posteriori estimation for
   multivariate Gaussian mixture observations of Markov chains", IEEE Trans. Speech and
   Audio Processing 2(2)): with ``tau`` the prior weight, ``n_k`` a component's expected
   frame count and ``s_k`` its posterior-weighted frame sum,

       mean_k   = (tau * prior_mean_k + s_k) / (tau + n_k)
       weight_k = (tau * prior_weight_k + n_k) / (tau + sum_j n_j)

   and, when asked, variances from the second-order statistics in the same way. With no
   data a Gaussian keeps its prior; with much data it tends to the maximum-likelihood
   estimate. The prior is the (transformed) starting model throughout the passes.

3. **Following passes: the strength.** Up to ``follow_passes`` more MAP passes, each with
   the previous pass's model as its prior and a small weight, so that Gaussians with much
   data move to what the data alone would give (means, variances, weights) and those with
   little stay; they also learn from speed copies of the recordings and from two noisy
   copies of each (babble or steady noise at 10-25 dB SNR), without which they taught the search
   to miss words in noise (docs/experiments/2026-12-03-adaptation-in-noise.md). How many run is
   decided by recordings held out of them (passes run while their log-likelihood a frame
   rises): whole speakers when the recordings have three or more, else held-out takes
   (docs/experiments/2026-12-02-adaptation-strength.md). The choice is then reused to
   adapt on every recording.

Optionally (``AdaptationConfig.pronunciations``, off by default), pronunciations learned from
the recordings (a word's vowels moved to neighbouring vowels where its takes fit that clearly
better with the starting model; :mod:`wordspot.training.pronunciations`) join the lexicon
first, so every pass and the saved model use them.

When the starting model has a state scorer (a network giving the posterior of every
mixture id), the user's recordings are then aligned with the adapted mixtures and the
network is tuned to those frames, with a penalty towards its own starting outputs
(:mod:`wordspot.training.scorer_adapt`); ``AdaptationConfig.scorer = None`` keeps it as
it is.
"""

from __future__ import annotations

import datetime as _dt
import time
import warnings
from dataclasses import dataclass, replace

import numpy as np

from wordspot import __version__
from wordspot.audio.augment import snr_range
from wordspot.acoustic.gmm import Mixtures, MixtureStats, scoring_matrix
from wordspot.acoustic.units import PAUSE_UNIT, UnitSet
from wordspot.corpus import check_manifest, split_by_recording
from wordspot.audio.band import check_training_band
from wordspot.errors import TrainingError
from wordspot.language.grammar import count_bigrams
from wordspot.language.lexicon import Lexicon
from wordspot.model import AcousticModel
from wordspot.audio.augment import NoiseSettings
from wordspot.acoustic.graph import compose
from wordspot.training.backgrounds import STEADY_MIX, background_count, background_items, check_mix, check_share
from wordspot.training.data import chain_slots, prepare_items
from wordspot.training.noise import noisy_items, recording_key
from wordspot.training.frame_labels import align_chunk
from wordspot.training.cluster import using
from wordspot.training.pronunciations import LearningConfig, learn, learned_note, regraphed, with_learned
from wordspot.training.items import CHUNK_SIZE
from wordspot.training.own_scorer import fit_own_scorer
from wordspot.training.scorer_adapt import ScorerAdaptConfig, adapt_scorer
from wordspot.training.scorer_fit import ScorerConfig
from wordspot.training.trainer import TrainingSummary, pass_loglik, pass_statistics

__all__ = [
    "AdaptationConfig",
    "map_means",
    "map_weights",
    "map_variances",
    "estimate_mean_transform",
    "apply_mean_transform",
    "regression_classes",
    "vocabulary_for",
    "adapt_items",
    "align_for_scorer",
    "align_items",
    "tune_scorer",
    "scorer_impact_items",
    "held_out_fit",
    "split_by_speaker",
    "strength_info",
    "strength_note",
    "ItemCache",
    "PassTotals",
    "reusable",
    "adapt",
    "adapting",
    "ADAPT_LEGEND",
]

#: Said once before the adapting pass lines: what their figure means.
ADAPT_LEGEND = "each pass: fit = log-likelihood a frame, which should rise from pass to pass"


@dataclass(frozen=True)
class AdaptationConfig:
    """How to adapt (configuration only).

    Parameters
    ----------
    prior_weight : float >= 0
        ``tau``: how many frames of the user's data weigh as much as the starting model
        (0: plain maximum likelihood where there is data). 300 was best of 3-10^9 on the
        dev split of the demo's training voices, for voices the adaptation never heard
        (docs/experiments/2026-12-02-adaptation.md); with the shared transform on, MAP then adds
        only a little.
    passes : int >= 1
        MAP passes (each one forward-backward over the user's data); 2 did no better than 1
        on the dev split.
    mean_transform : bool
        Estimate a shared affine mean transform per regression class before MAP.
    min_transform_frames : float > 0
        Fewest expected frames a regression class needs for a full transform; with
        fewer it gets a bias-only transform, and below a tenth of that none.
    update_variances : bool
        Also MAP-update the variances.
    jobs : int >= 1
        Processes for features and statistics.
    prune : float >= 0
        As in training: frame/mixture posteriors below this add nothing.
    background_share : float in [0, 1]
        Background-only items added to the user's recordings (see
        ``TrainingConfig.background_share``), so that the pause class's transform and MAP
        update see more than the user's room tone; 0 adds none.
    background_kinds : tuple of (str, int)
        Their kinds and parts (as ``TrainingConfig.background_kinds``); the default, the
        five steady kinds one part each, makes the items of before. ``IMPACTS_HALF_MIX``
        (impacts, knocks and clinks, as half of the items) at share 0.25 took the dev
        impact clips given a command at the default threshold from 23% to 14%, the other
        dev sets within the seeds' spread, for 1.14 times the training's CPU time: not the
        default (docs/experiments/2026-12-03-impacts-in-training.md). At share 0.2 on top
        of ``scorer_impacts`` it no longer cuts impact clips beyond the seeds' spread and
        costs far voices' commands: not the default either
        (docs/experiments/2026-12-04-impact-background-items.md).
    seed : int
        Seeds the background items.
    scorer : ScorerAdaptConfig or None
        How to tune the starting model's state scorer to the recordings (when it has
        one); None keeps the starting model's scorer unchanged.
    scorer_impacts : float in [0, 1]
        Items of impacts alone (knocks, clinks, taps, scrapes; background kind "impacts"),
        this share of the recordings in number (at least ``MIN_BACKGROUNDS``), among the
        frames the scorer is tuned on, labelled with the pause's mixtures by alignment, so
        that the scorer's pause posterior rises on impacts; the mixtures never see them.
        Drawn from a stream of their own. 0: none (the scorer is tuned on the recordings
        alone, as before). 0.1 on dev, three seeds: impact clips with a command at the
        default threshold 21.7% -> 8.9%, a second, unseen kind of impact 30.0% -> 15.0%,
        every set of commands as good or better on average, other talk 14.4% -> 15.1%
        (within the seeds' spread), about 1.05 times the training's CPU time; 0.25 did
        worse (docs/experiments/2026-12-03-impacts-no-command.md).
    follow_passes : int >= 0
        Most passes, after MAP, in which the recordings take over: each is a MAP update
        whose prior is the previous pass's model with weight ``follow_weight``, so the
        Gaussians with much data move towards the maximum-likelihood estimate pass by pass
        (means, variances, weights) while those with little keep close to the start.
        How many of them run is the *strength*, chosen on held-out recordings
        (:func:`adapt_items`); 0 is the fixed-strength MAP alone.
    follow_weight : float > 0
        ``tau`` of each following pass, relative to the previous pass's model.
    follow_variances : bool
        The following passes also update the variances (else means and weights only).
    follow_speeds : tuple of float
        Speed copies of every recording (as ``TrainingConfig.speed_factors``, without 1)
        that take part in the following passes; () none.
    follow_noise_copies : int >= 0
        Noisy copies of every recording (as ``TrainingConfig.noise_copies``) that take
        part in the following passes. Without one, the following passes cut the dev
        voices' clean errors but doubled their errors (mostly deleted words) in the demo's
        kind of noise at 20 dB; with one at 10-25 dB they cut those too, with two also
        the 10 dB errors (docs/experiments/2026-12-03-adaptation-in-noise.md).
    follow_noise_snr : (float, float)
        SNR range in dB of those noisy copies (0-25 dB, as in training from scratch, cost
        clean and 20 dB dev errors against 10-25).
    strength : int or None
        Run exactly this many following passes (at most ``follow_passes``); None: choose
        them on held-out recordings by their log-likelihood a frame.
    held_out_share : float in (0, 1)
        Share of the recordings (by recording, every speaker alike) held out to choose the
        strength when no held-out recordings are handed in.
    min_held_out_frames : int >= 0
        Fewest frames of held-out speech to choose on; with fewer the strength is 0.
    speakers_to_hold_out : int >= 2
        With recordings of at least this many speakers, the strength is chosen on whole
        speakers held out (``held_out_speaker_share`` of them, at least one): the model is
        to serve voices like these, and on the dev voices the fit of held-out takes of the
        same voices kept rising while unheard voices were recognised worse
        (docs/experiments/2026-12-02-adaptation-strength.md). With fewer speakers (one
        person's own voice) held-out recordings of the same speakers decide.
    held_out_speaker_share : float in (0, 1)
        Share of the speakers held out in that case.
    unheard_calibration : bool
        With recordings of at least ``speakers_to_hold_out`` speakers, let the confidence
        calibration of ``wordspot train`` (:func:`adapting`) hold out those same whole
        speakers: the first adaptation leaves them out, chooses the strength on them and
        is calibrated on their words (voices it has not heard), and the training on
        everything reuses the strength; one adaptation fewer than holding out takes of
        every voice and then whole speakers within the rest (0.67 times the CPU time on
        the demo set against 0.86). Off by default: on the dev voices over three seeds
        the threshold then dropped more words, in noise many more (20 dB deletions 37-50
        against 17-45; docs/experiments/2026-12-03-adaptation-goals.md).
    own_scorer : ScorerConfig or None
        Also fit a state scorer on the recordings alone, aligned with the adapted mixtures,
        with their speed and noisy copies (``follow_speeds``, ``follow_noise_copies``) and
        the background items, as training from scratch fits its own
        (:mod:`wordspot.training.own_scorer`); its outputs are the starting model's mixture
        ids, so phones the recordings never hold get a posterior of about zero. With the
        calibration of ``wordspot train`` it is fitted once, by the training on the
        recordings not held out, and the training on every recording keeps it (its
        measures were calibrated on recordings it never heard). None: no such network.
    own_scorer_role : str
        What that network is for: ``"beside"`` the tuned starter's network, as the model's
        ``own_scorer`` whose posterior measures (``own_...``) join the calibration's, or
        ``"instead"`` of tuning the starter's (then the model's only ``scorer``). On the
        dev voices over three seeds (docs/experiments/2026-12-04-adapted-scorer-unheard-accents.md):
        beside, the EER fell from 4.5% to 3.7% and other talk gave a command in 12.7% of
        files instead of 14.0%, but real phrases lost about a point of WER at the default
        threshold, for about 1.7 times the training's time (so it is off by default);
        instead, other talk gave one in 25.5% and impacts in 36% instead of none (the
        starter's network is what has heard speech that is no command).
    pronunciations : LearningConfig
        Whether and how to add pronunciations learned from the recordings to the lexicon
        (:mod:`wordspot.training.pronunciations`): candidates scored with the starting
        model, before the recordings are adapted on with the lexicon that includes them.
    calibrate_choosing_model : bool
        When the strength is chosen on whole speakers held out within the calibration's
        first training, that training returns the model adapted on the rest with the
        strength chosen (the one the choice was made with) instead of adapting every
        recording of it, when a training on every recording follows (``--refit``): one
        adaptation fewer, the calibration's words recognised by a model that heard fewer
        of the voices. Off: a few more words dropped at the threshold on dev
        (docs/experiments/2026-12-03-training-time.md).
    reuse_first_passes : bool
        The training on every recording that follows the calibration's first training
        (:func:`adapting`) adds that training's pass statistics (kept pass by pass,
        :class:`PassTotals`) to those of the recordings held out of it, instead of passing
        over every recording again: the first pass (under the starting model) is the same
        sums in another order, the later ones count the first training's recordings under
        its own models rather than the new ones. About a third of that adaptation's CPU
        time; not used with learned pronunciations (the lexicon may differ). Off: on the
        dev voices over six seeds every set stayed within the seeds' spread, but the EER
        was 0.1 point worse on the mean (docs/experiments/2026-12-03-training-recipe-cut.md).
    choose_noise_copies : int or None
        Noisy copies of every recording in the adaptation that chooses the strength on
        whole speakers held out (the first ones of ``follow_noise_copies``); None: all of
        them. The adaptations that make the models keep them all (and so does a choosing
        model kept for the calibration, ``calibrate_choosing_model``). 1 chose the same
        strength as 2, so the same models, for every seed of the dev voices' runs, for
        about a fifth fewer frames in that adaptation's following passes
        (docs/experiments/2026-12-03-training-recipe-cut.md).
    """

    prior_weight: float = 300.0
    passes: int = 1
    mean_transform: bool = True
    min_transform_frames: float = 2000.0
    update_variances: bool = False
    jobs: int = 1
    prune: float = 1e-4
    background_share: float = 0.1
    background_kinds: tuple[tuple[str, int], ...] = STEADY_MIX
    seed: int = 0
    scorer: ScorerAdaptConfig | None = ScorerAdaptConfig()
    scorer_impacts: float = 0.1
    follow_passes: int = 6
    follow_weight: float = 10.0
    follow_variances: bool = True
    follow_speeds: tuple[float, ...] = (0.9, 1.1)
    follow_noise_copies: int = 2
    follow_noise_snr: tuple[float, float] = (10.0, 25.0)
    strength: int | None = None
    held_out_share: float = 0.1
    min_held_out_frames: int = 1000
    speakers_to_hold_out: int = 3
    held_out_speaker_share: float = 0.25
    unheard_calibration: bool = False
    calibrate_choosing_model: bool = False
    reuse_first_passes: bool = False
    choose_noise_copies: int | None = 1
    pronunciations: LearningConfig = LearningConfig()
    own_scorer: ScorerConfig | None = None
    own_scorer_role: str = "beside"

    def __post_init__(self) -> None:
        if not (np.isfinite(self.prior_weight) and self.prior_weight >= 0):
            raise TrainingError(f"prior_weight must be a number >= 0 (the default is 300), got {self.prior_weight!r}")
        for name in ("passes", "jobs"):
            v = getattr(self, name)
            if isinstance(v, bool) or not isinstance(v, (int, np.integer)) or v < 1:
                raise TrainingError(f"{name} must be a whole number >= 1, got {v!r}")
        if not self.min_transform_frames > 0 or self.prune < 0:
            raise TrainingError("min_transform_frames must be > 0 and prune >= 0")
        object.__setattr__(self, "background_share", check_share(self.background_share))
        object.__setattr__(self, "background_kinds", check_mix(self.background_kinds))
        speeds = tuple(self.follow_speeds)
        if any(isinstance(f, bool) or not isinstance(f, (int, float)) or not 0.5 <= f <= 2.0 or f == 1.0
               for f in speeds) or len(set(speeds)) != len(speeds):
            raise TrainingError(f"follow_speeds must be distinct factors from 0.5 to 2 other than 1 "
                                f"(e.g. 0.9 1.1), got {self.follow_speeds!r}")
        object.__setattr__(self, "follow_speeds", tuple(float(f) for f in speeds))
        for name in (("follow_passes", "min_held_out_frames", "follow_noise_copies")
                     + (("strength",) if self.strength is not None else ())
                     + (("choose_noise_copies",) if self.choose_noise_copies is not None else ())):
            v = getattr(self, name)
            if isinstance(v, bool) or not isinstance(v, (int, np.integer)) or v < 0:
                raise TrainingError(f"{name} must be a whole number >= 0, got {v!r}")
        snr = snr_range(self.follow_noise_snr)
        if snr is None:
            raise TrainingError(f"follow_noise_snr must be two numbers low <= high in dB (e.g. 10 25), "
                                f"got {self.follow_noise_snr!r}")
        object.__setattr__(self, "follow_noise_snr", snr)
        if not (np.isfinite(self.follow_weight) and self.follow_weight > 0):
            raise TrainingError(f"follow_weight must be a number > 0 (the default is 10), got {self.follow_weight!r}")
        for name in ("held_out_share", "held_out_speaker_share"):
            h = getattr(self, name)
            if isinstance(h, bool) or not isinstance(h, (int, float)) or not 0.0 < h < 1.0:
                raise TrainingError(f"{name} must be between 0 and 1 (e.g. 0.1), got {h!r}")
        v = self.speakers_to_hold_out
        if isinstance(v, bool) or not isinstance(v, (int, np.integer)) or v < 2:
            raise TrainingError(f"speakers_to_hold_out must be a whole number >= 2, got {v!r}")
        if self.scorer is not None and not isinstance(self.scorer, ScorerAdaptConfig):
            raise TrainingError(f"scorer must be a ScorerAdaptConfig or None, got {self.scorer!r}")
        if self.own_scorer is not None and not isinstance(self.own_scorer, ScorerConfig):
            raise TrainingError(f"own_scorer must be a ScorerConfig or None, got {self.own_scorer!r}")
        if self.own_scorer_role not in ("beside", "instead"):
            raise TrainingError(f"own_scorer_role must be 'beside' or 'instead', got {self.own_scorer_role!r}")
        if not isinstance(self.pronunciations, LearningConfig):
            raise TrainingError(f"pronunciations must be a LearningConfig, got {self.pronunciations!r}")
        v = self.scorer_impacts
        if isinstance(v, bool) or not isinstance(v, (int, float)) or not 0.0 <= v <= 1.0:
            raise TrainingError(f"scorer_impacts must be a number from 0 to 1 (0.1: a tenth as many items of "
                                f"impacts as recordings for the scorer's tuning; 0 none), got {v!r}")


# ------------------------------------------------------------------ MAP (pure functions)


def map_means(prior_means: np.ndarray, occupancy: np.ndarray, first: np.ndarray, tau: float) -> np.ndarray:
    """MAP means: ``(tau * prior + first) / (tau + occupancy)`` per component.

    Parameters
    ----------
    prior_means : ndarray, shape (P, M, D)
    occupancy : ndarray, shape (P, M)
        Expected frame counts.
    first : ndarray, shape (P, M, D)
        Posterior-weighted frame sums.
    tau : float >= 0

    Returns
    -------
    ndarray, shape (P, M, D)
        Components with no data keep the prior exactly.
    """
    denom = tau + occupancy
    safe = np.where(denom > 0, denom, 1.0)[..., None]
    out = (tau * prior_means + first) / safe
    return np.where((occupancy > 0)[..., None], out, prior_means)


def map_weights(prior_weights: np.ndarray, occupancy: np.ndarray, tau: float) -> np.ndarray:
    """MAP mixture weights: ``(tau * prior_w + n_k) / (tau + sum_j n_j)`` per mixture (rows sum to 1)."""
    num = tau * prior_weights + occupancy
    total = num.sum(axis=1, keepdims=True)
    seen = occupancy.sum(axis=1, keepdims=True) > 0
    return np.where(seen & (total > 0), num / np.where(total > 0, total, 1.0), prior_weights)


def map_variances(prior_means: np.ndarray, prior_variances: np.ndarray, new_means: np.ndarray,
                  occupancy: np.ndarray, second: np.ndarray, tau: float, floor: np.ndarray) -> np.ndarray:
    """MAP variances with the prior's second moment as pseudo-data (Gauvain & Lee 1994).

    ``var = (tau * (prior_var + prior_mean**2) + second) / (tau + n) - new_mean**2``,
    floored at ``floor`` (shape (D,)).
    """
    denom = tau + occupancy
    safe = np.where(denom > 0, denom, 1.0)[..., None]
    var = (tau * (prior_variances + prior_means**2) + second) / safe - new_means**2
    return np.where((occupancy > 0)[..., None], np.maximum(var, floor), prior_variances)


# ------------------------------------------------------------------ shared mean transform


def estimate_mean_transform(means: np.ndarray, variances: np.ndarray, occupancy: np.ndarray,
                            first: np.ndarray, *, bias_only: bool = False) -> np.ndarray:
    """Maximum-likelihood affine transform of Gaussian means (diagonal covariances).

    Row ``i`` of ``W = [b | A]`` solves ``G_i w_i = k_i`` with
    ``G_i = sum_m n_m / var_mi * xi_m xi_m^T`` and ``k_i = sum_m first_mi / var_mi * xi_m``,
    ``xi_m = [1, mean_m]`` (Leggetter & Woodland 1995).

    Parameters
    ----------
    means, variances : ndarray, shape (G, D)
        The Gaussians of one regression class.
    occupancy : ndarray, shape (G,)
    first : ndarray, shape (G, D)
    bias_only : bool
        Estimate only ``b`` (``A`` = identity): for little data.

    Returns
    -------
    ndarray, shape (D, D + 1)
        ``W``; the transformed mean is ``W @ [1, mean]``.
    """
    g, d = means.shape
    use = occupancy > 0
    n, mu, var, s = occupancy[use], means[use], variances[use], first[use]
    if bias_only:
        # Only b: b_i = sum_m (first_mi - n_m mu_mi) / var_mi / sum_m n_m / var_mi
        num = ((s - n[:, None] * mu) / var).sum(axis=0)
        den = (n[:, None] / var).sum(axis=0)
        w = np.zeros((d, d + 1))
        w[:, 0] = num / den
        w[:, 1:] = np.eye(d)
        return w
    xi = np.hstack([np.ones((mu.shape[0], 1)), mu])  # (G, D+1)
    w = np.empty((d, d + 1))
    for i in range(d):
        c = n / var[:, i]
        gi = (xi * c[:, None]).T @ xi
        ki = xi.T @ (s[:, i] / var[:, i])
        w[i] = np.linalg.solve(gi + 1e-8 * np.trace(gi) / (d + 1) * np.eye(d + 1), ki)
    return w


def apply_mean_transform(means: np.ndarray, w: np.ndarray) -> np.ndarray:
    """``W @ [1, mean]`` for every mean (any leading shape, last axis D)."""
    return w[:, 0] + means @ w[:, 1:].T


def regression_classes(units: UnitSet) -> np.ndarray:
    """Class of every mixture: 0 for the pause unit's states, 1 for the rest (speech)."""
    cls = np.ones(units.n_mixtures, dtype=np.int64)
    if PAUSE_UNIT in units:
        pdfs = units.state_mixture[units.index(PAUSE_UNIT)]
        cls[pdfs[pdfs >= 0]] = 0
    return cls


def _transformed(mix: Mixtures, stats: MixtureStats, classes: np.ndarray, min_frames: float):
    """The means after one transform per regression class, and what was done per class."""
    means = mix.means.copy()
    done = {}
    for c in np.unique(classes):
        rows = np.flatnonzero(classes == c)
        occ = stats.occupancy[rows].reshape(-1)
        total = float(occ.sum())
        if total < 0.1 * min_frames:
            done[int(c)] = "none"
            continue
        bias_only = total < min_frames
        d = mix.dim
        w = estimate_mean_transform(mix.means[rows].reshape(-1, d), mix.variances[rows].reshape(-1, d),
                                    occ, stats.first[rows].reshape(-1, d), bias_only=bias_only)
        means[rows] = apply_mean_transform(mix.means[rows], w)
        done[int(c)] = "bias" if bias_only else "full"
    return means, done


# ------------------------------------------------------------------ the loop


def _map_update(prior: Mixtures, st: MixtureStats, tau: float, update_variances: bool,
                floor: np.ndarray) -> Mixtures:
    """One MAP update of ``prior`` from summed statistics (components switched off stay off)."""
    means = map_means(prior.means, st.occupancy, st.first, tau)
    weights = map_weights(prior.weights, st.occupancy, tau)
    variances = prior.variances
    if update_variances:
        variances = map_variances(prior.means, prior.variances, means, st.occupancy, st.second, tau, floor)
    # a component the starting model had switched off (weight 0) stays off
    seen = st.occupancy.sum(axis=1) > 0
    off = seen[:, None] & (prior.weights <= 0)
    if off.any():
        weights = np.where(off, 0.0, weights)
        weights[seen] /= weights[seen].sum(axis=1, keepdims=True)
    return Mixtures(weights, means, variances)


@dataclass(frozen=True)
class PassTotals:
    """What one statistics pass of :func:`adapt_items` summed.

    Attributes
    ----------
    stats : MixtureStats
    loglik : float
        Sum of the items' finite log-likelihoods.
    frames : int
        Frames of all the pass's items (copies and background items included).
    unit_frames : ndarray, shape (U,)
        Expected frames of each unit.
    fitted : bool
        Some item had a path.
    """

    stats: MixtureStats
    loglik: float
    frames: int
    unit_frames: np.ndarray
    fitted: bool

    def plus(self, other: "PassTotals") -> "PassTotals":
        """The totals of both passes' items."""
        a, b = self.stats, other.stats
        return PassTotals(MixtureStats(a.occupancy + b.occupancy, a.first + b.first, a.second + b.second),
                          self.loglik + other.loglik, self.frames + other.frames,
                          self.unit_frames + other.unit_frames, self.fitted or other.fitted)

    @property
    def fit(self) -> float:
        """Log-likelihood a frame (-inf when no item had a path)."""
        return float(self.loglik / self.frames) if self.fitted else float("-inf")


def _chunks(items) -> list:
    return [[(it.frames, it.graph) for it in items[i:i + CHUNK_SIZE]] for i in range(0, len(items), CHUNK_SIZE)]


def held_out_fit(items, units: UnitSet, mix: Mixtures, *, jobs: int = 1, prune: float = 0.0) -> float:
    """Log-likelihood a frame of ``items`` (each under its own transcript's chain) with ``mix``;
    -inf when some item has no path."""
    loglik = pass_loglik(_chunks(items), mix, units, jobs=jobs)  # what pass_statistics gives, forward only
    if not np.isfinite(loglik).all():
        return float("-inf")
    return float(loglik.sum() / sum(it.frames.shape[0] for it in items))


def adapt_items(items, units: UnitSet, mix: Mixtures, *, config: AdaptationConfig = AdaptationConfig(),
                variance_floor: np.ndarray | None = None, quiet: bool = True, report=None, held_out=None,
                copies=None, earlier=None, record=None):
    """Adapt ``mix`` to prepared utterances (units and transitions stay as they are).

    First the shared transform and ``config.passes`` MAP passes with weight
    ``config.prior_weight``; then up to ``config.follow_passes`` passes in which the data
    take over (MAP with the previous pass as the prior, weight ``config.follow_weight``).
    ``config.strength`` fixes their number; when it is None and ``held_out`` (prepared
    items of recordings left out of ``items``) holds at least ``config.min_held_out_frames``
    frames, they run while the held-out log-likelihood a frame rises, and the best model on
    the held-out items is kept; otherwise none runs. ``copies`` (speed or noisy copies of
    the recordings among ``items``) take part in the following passes only.

    ``earlier``: the :class:`PassTotals` of an earlier run's passes (other items, e.g. a
    first training's recordings), added pass by pass to those of ``items`` (needs at least
    as many as run here). ``record``: a list each pass's own :class:`PassTotals` is
    appended to (those of ``items`` alone).

    Returns
    -------
    mixtures : Mixtures
    summary : TrainingSummary
        ``passes`` holds the log-likelihood per frame of each statistics pass;
        ``adaptation`` the strength (following passes kept), how it was chosen and the
        held-out fit after each pass.
    transform : dict
        Per regression class (0 pause, 1 speech): "full", "bias" or "none".
    """
    if not items:
        raise TrainingError("no usable recording to adapt on")
    items = sorted(items, key=lambda it: it.words)
    floor = variance_floor if variance_floor is not None else 0.01 * mix.variances.min(axis=(0, 1))
    summary = TrainingSummary()
    prior = mix
    transform: dict = {}
    n_frames = sum(it.frames.shape[0] for it in items)
    chunks = _chunks(items)
    follow = sorted(items + list(copies or []), key=lambda it: it.words)
    follow_chunks = _chunks(follow) if copies else chunks
    n_follow = sum(it.frames.shape[0] for it in follow)
    held = sorted(held_out or [], key=lambda it: it.words)
    held_frames = sum(it.frames.shape[0] for it in held)
    choose = config.strength is None and held_frames >= config.min_held_out_frames and config.follow_passes > 0
    most = config.strength if config.strength is not None else (config.follow_passes if choose else 0)
    total_passes = config.passes + int(config.mean_transform) + most

    if earlier is not None and len(earlier) < total_passes:
        raise TrainingError(f"the earlier run has {len(earlier)} passes' statistics, {total_passes} are needed")

    def stats_pass(current, k, following=False):
        res = pass_statistics(follow_chunks if following else chunks, current, units, jobs=config.jobs,
                              quiet=quiet, prune=config.prune, label=f"adapt {k}/{total_passes}")
        ok = np.isfinite(res.loglik)
        res = PassTotals(res.stats, float(res.loglik[ok].sum()), n_follow if following else n_frames,
                         res.unit_frames, bool(ok.any()))
        if record is not None:
            record.append(res)
        if earlier is not None:
            res = earlier[k - 1].plus(res)
        avg = res.fit
        summary.passes.append((int(current.n_components), avg))
        if report is not None:
            if k == 1:
                report(ADAPT_LEGEND)
            report(f"adapt pass {k}  fit {avg:.4f}")
        return res

    k = 0
    if config.mean_transform:
        k += 1
        res = stats_pass(prior, k)
        means, transform = _transformed(prior, res.stats, regression_classes(units), config.min_transform_frames)
        prior = Mixtures(prior.weights.copy(), means, prior.variances.copy())
    current = prior
    res = None
    for _ in range(config.passes):
        k += 1
        res = stats_pass(current, k)
        current = _map_update(prior, res.stats, config.prior_weight, config.update_variances, floor)
    held_fits: list[float] = []
    if choose:
        held_fits.append(held_out_fit(held, units, current, jobs=config.jobs, prune=config.prune))
        if report is not None:
            report(f"  held-out fit {held_fits[-1]:.4f} ({len(held)} recordings)")
    best, strength = current, 0
    for j in range(1, most + 1):
        k += 1
        res = stats_pass(current, k, following=True)
        current = _map_update(current, res.stats, config.follow_weight, config.follow_variances, floor)
        if not choose:
            best, strength = current, j
            continue
        held_fits.append(held_out_fit(held, units, current, jobs=config.jobs, prune=config.prune))
        if report is not None:
            report(f"  held-out fit {held_fits[-1]:.4f}")
        if held_fits[-1] <= max(held_fits[:-1]):
            break  # the held-out recordings fit worse: the data have taken over far enough
        best, strength = current, j
    summary.count(items)
    summary.n_frames = int(n_frames + (earlier[0].frames if earlier is not None else 0))
    summary.frames_per_unit = {name: float(res.unit_frames[u]) for u, name in enumerate(units.names)}
    summary.adaptation = {
        "strength": int(strength),
        "chosen_on": ("held-out" if choose else "given" if config.strength is not None else "too little held out"),
        "held_out_recordings": len(held) if choose else 0,
        "held_out_fit": [round(v, 4) for v in held_fits],
        "speech_frames": int(sum(it.frames.shape[0] for it in items if not it.background)),
    }
    return best, summary, transform


def align_for_scorer(items, mix: Mixtures, extra=(), *, jobs: int = 1) -> tuple[list, list]:
    """Frames and per-frame mixture ids of the recordings among ``items`` (background-only
    items left out), then of every item of ``extra`` (background items too), by forced
    alignment of each one's chain with ``mix``
    (:func:`wordspot.training.frame_labels.align_one`); items no path fits are left out.
    With ``jobs`` > 1 the items are shared among that many processes (the same result, in
    the same order)."""
    used = [it for it in items if not it.background] + list(extra)
    frames, labels = [], []
    for it, (score, y) in zip(used, align_items(used, mix, jobs=jobs)):
        if np.isfinite(score):
            frames.append(np.asarray(it.frames, dtype=np.float32))
            labels.append(y)
    return frames, labels


def align_items(items, mix: Mixtures, *, jobs: int = 1) -> list:
    """``(score, mixture ids)`` of each item's forced alignment through its chain with
    ``mix`` (:func:`wordspot.training.frame_labels.align_chunk`; score -inf where no path
    fits), in the items' order; with ``jobs`` > 1 shared among that many processes."""
    chunks = [[(it.frames, it.graph) for it in items[i:i + CHUNK_SIZE]] for i in range(0, len(items), CHUNK_SIZE)]
    with using(None, jobs if len(chunks) > 1 else 1) as ex:
        return [one for part in ex.map(align_chunk, [(c,) for c in chunks],
                                       common=(scoring_matrix(mix), mix.n_components), label="alignment")
                for one in part]


def tune_scorer(start: AcousticModel, items, mix: Mixtures, config: ScorerAdaptConfig, report=None, extra=(),
                jobs: int = 1):
    """The starting model's scorer tuned to ``items`` aligned with ``mix`` (and the
    background items ``extra``, see :func:`align_for_scorer`; aligned in ``jobs`` processes).

    Returns
    -------
    scorer : StateScorer
    info : dict
        What was done, for the model's ``info``.
    note : str
        One plain sentence for the training summary.
    """
    t0 = time.monotonic()
    if start.scorer.inputs != "cepstra":
        # tuning reads the aligned feature frames; other inputs are not computed here yet
        return start.scorer, {"tuned": False, "reason": f"its inputs ({start.scorer.inputs}) are not tuned yet"}, \
            f"kept the starting model's sound scorer as it is (tuning a scorer on {start.scorer.inputs} " \
            "inputs is not supported yet)"
    frames, labels = align_for_scorer(items, mix, jobs=jobs)
    more_frames, more_labels = align_for_scorer([], mix, extra, jobs=jobs)
    if labels:
        frames, labels = frames + more_frames, labels + more_labels
    if not labels:
        return start.scorer, {"tuned": False, "reason": "no recording could be aligned"}, \
            "kept the starting model's sound scorer as it is (no recording could be aligned)"
    speech = regression_classes(start.units) == 1
    scorer, rep = adapt_scorer(start.scorer, frames, labels, config, speech_classes=speech,
                               frame_seconds=start.features.hop_ms / 1000.0)
    seconds = time.monotonic() - t0
    held = [round(v, 4) for v in rep.held_out_loss]
    recordings = rep.recordings - len(more_labels)  # the user's, without the items of impacts
    info = {"tuned": rep.best_epoch > 0, "rho": float(config.rho), "layers": config.layers,
            "prior": config.prior, "seed": int(config.seed), "recordings": recordings,
            "seconds_of_speech": round(rep.seconds_of_speech, 1), "train_frames": rep.train_frames,
            "held_out_frames": rep.held_out_frames, "held_out_loss": held, "epoch_kept": rep.best_epoch,
            "held_out_accuracy": [None if not np.isfinite(a) else round(a, 4) for a in rep.held_out_accuracy],
            "seconds": round(seconds, 2), **({"impact_items": len(more_labels)} if len(extra) else {})}
    if report is not None:
        report(f"sound scorer: held-out loss per epoch {', '.join(f'{v:.3f}' for v in held)}; "
               f"epoch {rep.best_epoch} kept ({seconds:.1f} s)")
    if rep.best_epoch == 0:
        note = ("kept the starting model's sound scorer as it is: tuning it to your recordings did not "
                "help on the recordings held out to check it")
    else:
        note = (f"tuned the sound scorer to your voice on {rep.seconds_of_speech:.0f} seconds of speech "
                f"({recordings} recordings)")
    return scorer, info, note


def vocabulary_for(words, lexicon: Lexicon, start_lexicon: Lexicon) -> tuple[Lexicon, list[str]]:
    """The user's lexicon, plus pronunciations from the starting model for transcript words it lacks.

    Returns
    -------
    lexicon : Lexicon
    borrowed : list of str
        Words whose pronunciations came from the starting model's lexicon.
    """
    borrowed = sorted({w for w in words if w not in lexicon and w in start_lexicon})
    if not borrowed:
        return lexicon, []
    entries = {w: lexicon.pronunciations(w) for w in lexicon.words}
    entries.update({w: start_lexicon.pronunciations(w) for w in borrowed})
    return Lexicon(entries, source=f"{lexicon.source} + starting model"), borrowed


def adapt(utterances, lexicon: Lexicon, start: AcousticModel, *, config: AdaptationConfig = AdaptationConfig(),
          manifest=None, quiet: bool = True, report=None, held_out=None,
          cache: ItemCache | None = None, held_out_copies: bool = True, record: dict | None = None,
          base: dict | None = None, own_net=None) -> tuple[AcousticModel, TrainingSummary]:
    """Adapt ``start`` to recordings labelled with their words; the result recognises ``lexicon``'s words.

    The feature settings, units and transitions of ``start`` are kept, so every phone of
    the starting model stays available for words added later. Transcript words missing
    from ``lexicon`` are taken from ``start``'s lexicon when it has them.

    The strength (how many passes let the recordings take over, see
    :func:`adapt_items`) is ``config.strength`` when given; else it is chosen on
    ``held_out`` (utterances left out of ``utterances``, e.g. the calibration's) when
    given, else on ``config.held_out_share`` of the recordings held out by
    :func:`wordspot.corpus.split_by_recording`, after which all of them are adapted on
    with the strength found. ``cache`` keeps prepared recordings between calls;
    ``held_out_copies`` (with ``held_out``): also make the held-out recordings' speed and
    noisy copies in the same go, for a training on everything that follows (False when
    none does).

    ``record``, when given, is filled with what a later training on more recordings can
    reuse (:func:`reusable`): the recordings and background items adapted on, the strength,
    the lexicon and every pass's :class:`PassTotals`. ``base``: such a record of an earlier
    call on some of ``utterances`` with the same strength; when :func:`reusable` accepts it,
    only the other recordings (and their copies) are passed over and each pass adds the
    earlier one's statistics (``AdaptationConfig.reuse_first_passes``); the background
    items are the earlier call's.

    ``own_net``: ``(scorer, info)`` of a second network fitted by an earlier call (the
    calibration's first training), kept as this model's ``own_scorer`` instead of fitting
    one again (``config.own_scorer`` with role ``"beside"``).

    Raises
    ------
    ManifestError
        Missing files or words in neither lexicon.
    TrainingError
        The lexicon uses units the starting model does not have, or nothing is usable.
    """
    t0 = time.monotonic()
    utterances = list(utterances)
    if not utterances:
        raise TrainingError(f"{manifest or 'manifest'}: lists no recordings to adapt on")
    lexicon, borrowed = vocabulary_for({w for u in utterances for w in u.words}, lexicon, start.lexicon)
    check_manifest(utterances, lexicon, manifest=manifest)
    missing = sorted(lexicon.units_used() - set(start.units.names))
    if missing:
        raise TrainingError(
            f"the lexicon uses unit(s) {', '.join(missing)} that the starting model does not have; "
            "use ARPAbet phones the starting model knows, or train with --from-scratch"
        )
    cache = cache if cache is not None else ItemCache()
    if base is not None and not reusable(base, utterances, lexicon, config, held_out):
        base = None
    if base is not None:  # the earlier call's background items are in its statistics
        items, skipped = cache.recordings(utterances, lexicon, start, config, quiet)
        items = items + list(base["backgrounds"])
    else:
        items, skipped = _prepared(utterances, lexicon, start, config, quiet, cache)
    if not items:
        raise TrainingError(f"{manifest or 'manifest'}: none of the {len(utterances)} recordings is usable")
    speaker_of = {u.path: u.speaker for u in utterances}
    clean = [it for it in items if not it.background]
    c0 = time.process_time()
    learned = learn(clean, [speaker_of[it.path] for it in clean], lexicon, start.units, start.mixtures,
                    config.pronunciations, store=cache.gains)
    cache.learning_cpu += time.process_time() - c0
    lexicon = with_learned(lexicon, learned)
    items = regraphed(items, lexicon, start.units, config.pronunciations.enabled)
    chosen = None
    usable = {it.path for it in items if not it.background}  # made once, not once per recording
    used = [u for u in utterances if u.path in usable]
    by_speaker = len({u.speaker for u in used}) >= config.speakers_to_hold_out
    choose = config.strength is None and config.follow_passes > 0
    held_utts = list(held_out or [])
    # held-out recordings of speakers the recordings lack are whole speakers held out: choose on them
    whole = bool(held_utts) and not {u.speaker for u in held_utts} & {u.speaker for u in used}
    held_items: list = []
    if held_utts and (choose or _follows(config)):
        held_lex, _ = vocabulary_for({w for u in held_utts for w in u.words}, lexicon, start.lexicon)
        held_utts = [u for u in held_utts if set(u.words) <= set(held_lex.words)]
        held_items, _ = cache.recordings(held_utts, held_lex, start, config, True)
        held_items = regraphed(held_items, held_lex, start.units, config.pronunciations.enabled)
    # the held-out recordings' copies are made with these in one go, for the training on everything
    # (when none follows, only drawn with them: the same copies of these, none of theirs)
    copies = _copies(used + held_utts, items + held_items, lexicon, start, config, quiet, cache,
                     count=None if held_out_copies else sum(not it.background for it in items))
    held_paths = {it.path for it in held_items} - {u.path for u in used}
    copies = regraphed([it for it in copies if it.path not in held_paths], lexicon, start.units,
                       config.pronunciations.enabled)
    if by_speaker and not whole:
        held_items = []  # chosen on whole speakers held out below, not on takes of the same voices
    if held_items and choose:
        chosen_speakers = len({u.speaker for u in held_utts}) if whole else 0
    elif choose and not held_items and (held_out is None or by_speaker):
        # (only when a training on everything follows: else this model would be the one written)
        keep = held_out is not None and by_speaker and config.calibrate_choosing_model and held_out_copies
        choosing = copies
        if (not keep and config.choose_noise_copies is not None
                and config.choose_noise_copies < config.follow_noise_copies):
            choosing = _copies(used + held_utts, items + held_items, lexicon, start, config, quiet, cache,
                               count=sum(not it.background for it in items), noise_copies=config.choose_noise_copies)
            choosing = regraphed([it for it in choosing if it.path not in held_paths], lexicon, start.units,
                                 config.pronunciations.enabled)
        chosen = _choose_on_split(items, used, choosing, start, config, by_speaker, quiet, report, keep=keep)
        if chosen is not None:
            config = replace(config, strength=chosen["strength"])
    if not choose:
        held_items = []
    if config.strength == 0:
        copies = []
    if chosen is not None and "kept" in chosen:  # the choosing adaptation's model is the calibration's
        mix, summary, transform, items = chosen.pop("kept")
    elif base is not None:  # only the recordings the earlier call lacked, its statistics added
        done = base["paths"]
        new = [it for it in items if not it.background and it.path not in done]
        mix, summary, transform = adapt_items(new, start.units, start.mixtures, config=config, quiet=quiet,
                                              report=report, copies=[it for it in copies if it.path not in done],
                                              earlier=base["passes"])
        summary.count(items)
        summary.adaptation["speech_frames"] = int(sum(it.frames.shape[0] for it in items if not it.background))
    else:
        passes = [] if record is not None else None
        mix, summary, transform = adapt_items(items, start.units, start.mixtures, config=config, quiet=quiet,
                                              report=report, held_out=held_items, copies=copies, record=passes)
        if record is not None:
            record.update(paths=frozenset(it.path for it in items if not it.background),
                          backgrounds=[it for it in items if it.background], passes=passes,
                          strength=int(summary.adaptation["strength"]), lexicon=lexicon)
    if held_items and summary.adaptation.get("chosen_on") == "held-out":
        summary.adaptation["held_out_speakers"] = chosen_speakers
    if chosen is not None:
        summary.adaptation.update({k: chosen[k] for k in ("chosen_on", "held_out_recordings", "held_out_fit",
                                                          "held_out_speakers")})
    summary.skipped = skipped
    summary.frame_seconds = start.features.hop_ms / 1000
    used = {it.path for it in items if not it.background}
    band = check_training_band(sorted(used), start.features.sample_rate)
    bigrams = count_bigrams([u.words for u in utterances if u.path in used and u.words],  # as trainer.train
                           vocabulary=lexicon.words)
    summary.seconds = time.monotonic() - t0
    info = {
        "created": _dt.datetime.now(_dt.timezone.utc).isoformat(timespec="seconds"),
        "wordspot_version": __version__,
        "method": "adapted",
        "adapted_from": {k: start.info.get(k) for k in ("name", "created", "made_from", "method") if k in start.info},
        "utterances": summary.used,
        "skipped": len(summary.skipped),
        "frames": summary.n_frames,
        "prior_weight": float(config.prior_weight),
        "follow_copies": {"speeds": list(config.follow_speeds), "noise_copies": int(config.follow_noise_copies),
                         "noise_snr_db": list(config.follow_noise_snr)},
        "passes": int(config.passes),
        "mean_transform": {("pause", "speech")[c]: how for c, how in sorted(transform.items())},
        "update_variances": bool(config.update_variances),
        "background_share": float(config.background_share),
        "background_items": int(summary.backgrounds),
        "background_kinds": [[k, p] for k, p in config.background_kinds],
        "borrowed_pronunciations": borrowed,
        **({"learned_pronunciations": {w: [" ".join(p) for p in prons] for w, prons in learned.items()},
            "learning_cpu_seconds": round(cache.learning_cpu, 3)} if config.pronunciations.enabled else {}),
        "loglik_per_pass": [round(v, 6) for _, v in summary.passes],
        "seconds": round(summary.seconds, 2),
        "strength": strength_info(summary.adaptation, start.features.hop_ms / 1000, config),
    }
    info["audio_band"] = band
    summary.adapt_note = strength_note(info["strength"])
    summary.pronunciation_note = learned_note(learned)
    bare = AcousticModel(features=start.features, units=start.units, mixtures=mix, lexicon=lexicon,
                         bigrams=bigrams, info=info, voice=getattr(start, "voice", None))  # no scorer yet
    scorer, own = start.scorer, None
    if config.own_scorer is not None and config.own_scorer_role == "instead":
        scorer, info["scorer"], summary.scorer_note = _own_scorer(bare, utterances, config)
        if scorer is None:
            scorer = start.scorer
            summary.scorer_note += "; kept the starting model's sound scorer as it is"
    elif scorer is not None and config.scorer is not None:
        # (a scorer reading other inputs is kept as it is: no items to make for it)
        extra = scorer_impact_items(items, utterances, start, config, quiet) if scorer.inputs == "cepstra" else []
        scorer, info["scorer_adaptation"], summary.scorer_note = tune_scorer(start, items, mix, config.scorer,
                                                                             extra=extra, report=report,
                                                                             jobs=config.jobs)
    elif scorer is not None:
        info["scorer_adaptation"] = {"tuned": False, "reason": "kept by request"}
        summary.scorer_note = "kept the starting model's sound scorer as it is (as asked)"
    if config.own_scorer is not None and config.own_scorer_role == "beside":
        if own_net is not None:
            own, info["own_scorer"] = own_net
            note = (f"sound scorer: the one fitted on {own_net[1].get('frames', 0)} frames of your recordings not "
                    "held out for the calibration, kept")
        else:
            own, info["own_scorer"], note = _own_scorer(bare, utterances, config)
        summary.scorer_note = "; ".join(n for n in (summary.scorer_note, "a second " + note) if n)
    summary.seconds = time.monotonic() - t0
    info["seconds"] = round(summary.seconds, 2)
    return replace(bare, scorer=scorer, own_scorer=own), summary


def _own_scorer(bare: AcousticModel, utterances, config: AdaptationConfig):
    """A state scorer fitted on ``utterances`` aligned with the adapted model ``bare``'s
    mixtures (``config.own_scorer``; :func:`wordspot.training.own_scorer.fit_own_scorer`), with
    the following passes' speed and noisy copies and the adaptation's background items."""
    noise = (NoiseSettings(copies=config.follow_noise_copies, snr_db=config.follow_noise_snr)
             if config.follow_noise_copies else None)
    return fit_own_scorer(bare, utterances, noise=noise, speeds=config.follow_speeds,
                          background_share=config.background_share, background_kinds=config.background_kinds,
                          seed=config.seed, scorer=replace(config.own_scorer, seed=config.seed), jobs=config.jobs)


def reusable(base: dict, utterances, lexicon: Lexicon, config: AdaptationConfig, held_out=None) -> bool:
    """Whether :func:`adapt` on ``utterances`` can add the passes ``base`` recorded: the
    strength is fixed to the recorded one, nothing is held out, no pronunciation is learned,
    the lexicon is the same, every recording ``base`` adapted on is among ``utterances`` and
    some are new."""
    paths = {u.path for u in utterances}
    return (held_out is None and config.strength is not None and config.strength == base.get("strength")
            and not config.pronunciations.enabled and base.get("lexicon") == lexicon
            and base["paths"] <= paths and bool(paths - base["paths"])
            and len(base["passes"]) >= config.passes + int(config.mean_transform) + config.strength)


class ItemCache:
    """Prepared items of recordings, kept between the adaptations of one training run (the
    calibration's first training, the choosing run and the training again on everything
    share them), so each recording's features and speed copies are computed once."""

    def __init__(self):
        self.clean: dict = {}
        self.skipped: dict = {}
        self.copies: dict = {}
        self.noisy: dict = {}
        self.gains: dict = {}  # (path, words) -> gains of candidate pronunciations (the starting model's)
        self.learning_cpu = 0.0  # CPU seconds spent learning pronunciations in all the run's adaptations

    def recordings(self, utterances, lexicon: Lexicon, start: AcousticModel, config: AdaptationConfig,
                   quiet: bool) -> tuple[list, list]:
        """(items, skipped) of ``utterances`` in their order, as ``prepare_items`` gives them,
        without background items."""
        missing = [u for u in utterances if (u.path, u.words) not in self.clean and u.path not in self.skipped]
        if missing:
            got, skipped = prepare_items(missing, lexicon, start.units, start.features, jobs=config.jobs, quiet=quiet)
            self.clean.update({(it.path, it.words): it for it in got})
            self.skipped.update({sk.path: sk for sk in skipped})
        items = [self.clean[(u.path, u.words)] for u in utterances if (u.path, u.words) in self.clean]
        skipped = [self.skipped[u.path] for u in utterances if u.path in self.skipped]
        return items, skipped

    def speed_copies(self, used, lexicon: Lexicon, start: AcousticModel, config: AdaptationConfig,
                     quiet: bool) -> list:
        """Speed copies (``config.follow_speeds``) of the usable recordings ``used``."""
        missing = [u for u in used if (u.path, u.words) not in self.copies]
        if missing:
            with warnings.catch_warnings():  # the recordings themselves were checked already
                warnings.simplefilter("ignore")
                got, _ = prepare_items(missing, lexicon, start.units, start.features, jobs=config.jobs, quiet=quiet,
                                       warps=(), speeds=config.follow_speeds)
            for u in missing:
                self.copies[(u.path, u.words)] = []
            for it in got:
                self.copies[(it.path, it.words)].append(it)
        return [it for u in used for it in self.copies[(u.path, u.words)]]

    def noisy_copies(self, items, speakers, start: AcousticModel, config: AdaptationConfig, quiet: bool,
                     count: int | None = None) -> list:
        """The noisy copies (``config.follow_noise_copies`` at ``config.follow_noise_snr``)
        of the recordings' ``items``, copy-major. Those not made yet are made in one go,
        each recording's recipe (kind, SNR, talkers, noise seed) seeded by ``config.seed``
        and the recording itself (:func:`wordspot.training.noise.recording_key`) rather than
        its place in the list, and kept: each recording is noised once however many
        adaptations use it (the babble's talker streams come from the recordings made in
        the same go). With ``count``, only the first ``count`` items' copies are made and
        returned (the rest still make up the go: the same copies as making them all)."""
        noise = NoiseSettings(copies=config.follow_noise_copies, snr_db=config.follow_noise_snr)
        store = self.noisy.setdefault((config.seed, noise.copies, noise.snr_db), {})
        count = len(items) if count is None else count
        missing = [k for k, it in enumerate(items) if (it.path, it.words) not in store]
        if any(k < count for k in missing):
            todo = [items[k] for k in missing]
            only = [j for j, k in enumerate(missing) if k < count]
            got = noisy_items(todo, [speakers[k] for k in missing], noise, start.features, seed=config.seed,
                              jobs=config.jobs, quiet=quiet, keys=[recording_key(it.path, it.words) for it in todo],
                              only=None if len(only) == len(todo) else only)
            for j, it in enumerate([todo[j] for j in only]):
                store[(it.path, it.words)] = got[j::len(only)]
        return [store[(it.path, it.words)][c] for c in range(noise.copies) for it in items[:count]]


#: Separates the scorer's impact items from the mixtures' background items (same training seed).
_SCORER_IMPACT_SEED = 0x5C0121


def scorer_impact_items(items, utterances, start: AcousticModel, config: AdaptationConfig, quiet: bool = True):
    """The items of impacts alone for the scorer's tuning (``config.scorer_impacts``; none when 0)."""
    recordings = [it for it in items if not it.background]
    count = background_count(len(recordings), config.scorer_impacts)
    if not count:
        return []
    speaker = {u.path: u.speaker for u in utterances}
    graph = compose(chain_slots((), start.lexicon, start.units), start.units)
    return background_items(count, [it.path for it in recordings], [speaker.get(it.path, "") for it in recordings],
                            graph, start.features, seed=config.seed + _SCORER_IMPACT_SEED, jobs=config.jobs,
                            quiet=quiet, kinds=(("impacts", 1),))


def _prepared(utterances, lexicon: Lexicon, start: AcousticModel, config: AdaptationConfig, quiet: bool,
              cache: ItemCache) -> tuple[list, list]:
    """The recordings' items (through ``cache``) and the background items, as
    ``prepare_items(..., background_share=config.background_share, seed=config.seed)``."""
    items, skipped = cache.recordings(utterances, lexicon, start, config, quiet)
    count = background_count(len(items), config.background_share)
    if count:
        speaker = {u.path: u.speaker for u in utterances}
        graph = compose(chain_slots((), lexicon, start.units), start.units)
        items = items + background_items(count, [it.path for it in items], [speaker[it.path] for it in items],
                                         graph, start.features, seed=config.seed, jobs=config.jobs, quiet=quiet,
                                         kinds=config.background_kinds)
    return items, skipped


def _follows(config: AdaptationConfig) -> bool:
    """Whether a following pass may run (and so needs the recordings' copies)."""
    return not (config.strength == 0 or (config.strength is None and config.follow_passes == 0))


def _copies(used, items, lexicon: Lexicon, start: AcousticModel, config: AdaptationConfig, quiet: bool,
            cache: ItemCache, count: int | None = None, noise_copies: int | None = None) -> list:
    """Speed and noisy copies of the usable recordings for the following passes (none when
    no following pass can run); each recording's copies are made once (``cache``). With
    ``count``, those of the first ``count`` recordings among ``items`` only (the noisy
    copies drawn as for all of them); with ``noise_copies``, the first that many noisy
    copies of each (of ``config.follow_noise_copies``)."""
    if not _follows(config):
        return []
    clean = [it for it in items if not it.background]
    count = len(clean) if count is None else count
    paths = {it.path for it in clean[:count]}
    out = cache.speed_copies([u for u in used if u.path in paths], lexicon, start, config, quiet) \
        if config.follow_speeds else []
    if config.follow_noise_copies:
        speaker = {u.path: u.speaker for u in used}
        noisy = cache.noisy_copies(clean, [speaker[it.path] for it in clean], start, config, quiet, count=count)
        out += noisy if noise_copies is None else noisy[:noise_copies * count]  # copy-major
    return out


def _choose_on_split(items, used, copies, start: AcousticModel, config: AdaptationConfig, by_speaker: bool,
                     quiet: bool, report, keep: bool = False) -> dict | None:
    """The strength chosen by adapting on all but a held-out part of the recordings (whole
    speakers when ``by_speaker``, else takes); None when that part is too short. With
    ``keep`` its ``"kept"`` holds that adaptation's (mixtures, summary, transform, items)."""
    if by_speaker:
        held_utts = split_by_speaker(used, config.held_out_speaker_share, config.seed)
    else:
        _, held_utts = split_by_recording(used, config.held_out_share, config.seed)
    held_paths = {u.path for u in held_utts}
    held_items = [it for it in items if not it.background and it.path in held_paths]
    if sum(it.frames.shape[0] for it in held_items) < config.min_held_out_frames:
        return None
    speakers = len({u.speaker for u in held_utts}) if by_speaker else 0
    if report is not None:
        what = f"{speakers} speakers' {len(held_items)} recordings" if by_speaker else f"{len(held_items)} recordings"
        report(f"choosing the strength: adapting on {len(used) - len(held_items)} recordings, {what} held out")
    rest = [it for it in items if it.background or it.path not in held_paths]
    mix, first, transform = adapt_items(rest, start.units, start.mixtures, config=config, quiet=quiet,
                                        report=report, held_out=held_items,
                                        copies=[it for it in copies if it.path not in held_paths])
    if keep:
        if report is not None:
            report(f"strength {first.adaptation['strength']}: this model, adapted on {len(used) - len(held_items)} "
                   "recordings, is the one the calibration uses")
        return dict(first.adaptation, held_out_speakers=speakers, kept=(mix, first, transform, rest))
    if report is not None:
        report(f"adapting on all {len(used)} recordings with strength {first.adaptation['strength']}")
    return dict(first.adaptation, held_out_speakers=speakers)


def split_by_speaker(utterances, share: float, seed: int) -> list:
    """The recordings of ``ceil(share * speakers)`` speakers (at least one, never all), drawn with ``seed``."""
    speakers = sorted({u.speaker for u in utterances})
    k = min(max(1, int(np.ceil(share * len(speakers)))), len(speakers) - 1)
    rng = np.random.default_rng([seed, 0x73706B72])
    held = {speakers[i] for i in rng.choice(len(speakers), size=k, replace=False)}
    return [u for u in utterances if u.speaker in held]


def strength_info(adaptation: dict, frame_seconds: float, config: AdaptationConfig) -> dict:
    """The model's ``info["strength"]``: passes kept, how they were chosen, minutes of speech."""
    return {"follow_passes": int(adaptation.get("strength", 0)),
            "chosen_on": adaptation.get("chosen_on", "given"),
            "held_out_recordings": int(adaptation.get("held_out_recordings", 0)),
            "held_out_speakers": int(adaptation.get("held_out_speakers", 0)),
            "held_out_fit": list(adaptation.get("held_out_fit", [])),
            "follow_weight": float(config.follow_weight),
            "most_passes": int(config.follow_passes),
            "speech_minutes": round(adaptation.get("speech_frames", 0) * frame_seconds / 60, 2)}


def strength_note(info: dict) -> str:
    """One plain sentence on how strongly the model was adapted and why."""
    k, minutes = info["follow_passes"], info["speech_minutes"]
    speech = f"{minutes:.1f} minutes of your recordings"
    if info["chosen_on"] == "held-out" and info.get("held_out_speakers"):
        why = (f"chosen on {info['held_out_recordings']} recordings of {info['held_out_speakers']} speaker"
               f"{'s' if info['held_out_speakers'] != 1 else ''} held out, as voices it has not heard")
    elif info["chosen_on"] == "held-out":
        why = f"chosen on {info['held_out_recordings']} held-out recordings"
    elif info["chosen_on"] == "given":
        why = "as asked"
    else:
        why = "too few recordings to hold out for choosing more"
    if k == 0:
        if info["chosen_on"] == "held-out":
            why += ", which fit worse after any further pass"
        return (f"adapted the starting model lightly: {speech}, the shared shift and one weighted pass, "
                f"no further pass ({why})")
    how = "strongly" if k >= max(2, info["most_passes"] // 2) else "moderately"
    return (f"adapted the starting model {how}: {speech}, {k} further pass{'es' if k != 1 else ''} in "
            f"which your recordings take over ({why})")


def adapting(start: AcousticModel, lexicon: Lexicon, *, config: AdaptationConfig = AdaptationConfig(),
             manifest=None, quiet: bool = True, report=None):
    """The training function ``fit(utterances, held_out=None) -> (model, summary)`` that adapts ``start``.

    Made for :func:`wordspot.evaluation.calibrate.train_calibrated`: its first call, with
    the calibration's held-out recordings, chooses the strength on them; later calls without
    held-out recordings (training again on every recording) reuse that strength. ``again``
    False says no training on every recording follows (the held-out recordings' copies are
    then not made); ``say``, when given, takes the report lines instead of ``report`` and
    the progress bars are left out (a training run beside other work). Carries
    ``runs_beside`` (True: the training on everything may run while the calibration
    recognises, it reads only the strength the first call chose; and, with
    ``config.reuse_first_passes``, the first call's pass statistics, which are kept only
    then; ``reuse=False`` on a later call adapts afresh all the same),
    ``start_calibration`` (the starting model's calibration, the fallback) and
    ``takes_held_out``.
    """
    chosen: dict = {}
    first: dict = {}  # the first training's passes (AdaptationConfig.reuse_first_passes) and second network
    cache = ItemCache()

    def fit(utterances, held_out=None, again=True, say=None, reuse=None):
        cfg = config
        if held_out is None and config.strength is None and chosen:
            cfg = replace(config, strength=chosen["follow_passes"])
        reuse = config.reuse_first_passes if reuse is None else reuse
        record = {} if held_out is not None and again and config.reuse_first_passes else None
        model, summary = adapt(utterances, lexicon, start, config=cfg, manifest=manifest,
                               quiet=quiet if say is None else True, report=report if say is None else say,
                               held_out=held_out, cache=cache, held_out_copies=again, record=record,
                               base=first.get("record") if held_out is None and reuse else None,
                               own_net=first.get("own") if held_out is None else None)
        if record:
            first["record"] = record
        if held_out is not None and model.own_scorer is not None:
            # the calibration is fitted on this network's measures of recordings it never
            # heard; the training on every recording keeps it (AdaptationConfig.own_scorer)
            first["own"] = (model.own_scorer, model.info["own_scorer"])
        if held_out is not None and config.strength is None:
            chosen.clear()
            chosen.update(model.info["strength"])
        elif chosen and cfg is not config:
            strength = {**model.info["strength"], **{k: chosen[k] for k in
                                                     ("chosen_on", "held_out_recordings", "held_out_fit",
                                                      "held_out_speakers")}}
            model.info["strength"] = strength
            summary.adaptation.update(chosen_on=strength["chosen_on"])
            summary.adapt_note = strength_note(strength)
        return model, summary

    def speakers_apart(utterances):
        """(rest, held out): whole speakers held out for the calibration, or None (see
        ``AdaptationConfig.unheard_calibration``)."""
        utterances = list(utterances)
        if not config.unheard_calibration or len({u.speaker for u in utterances}) < config.speakers_to_hold_out:
            return None
        held = split_by_speaker(utterances, config.held_out_speaker_share, config.seed)
        speakers = {u.speaker for u in held}
        return [u for u in utterances if u.speaker not in speakers], held

    fit.takes_held_out = True
    fit.runs_beside = True
    fit.cache = cache
    fit.speakers_apart = speakers_apart
    fit.start_calibration = getattr(start, "calibration", None)
    return fit
