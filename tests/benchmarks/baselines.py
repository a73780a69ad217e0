"""Two do-it-yourself isolated-word recognisers that a practitioner would otherwise write.

Both take the same feature frames as wordspot (``wordspot.audio.features``: T x 39 MFCC + deltas,
mean-normalised) and recognise exactly one word per file from the words they have recordings
of. Neither can recognise a word it has no recordings of.

* :class:`WholeWordHMM` -- one left-to-right Gaussian (mixture) HMM per word, trained and
  scored with hmmlearn; states initialised by cutting every example into equal parts.
* :class:`TemplateDTW` -- nearest template by dynamic time warping
  (``librosa.sequence.dtw``, or our compiled copy of its recurrence that gives the same
  costs), Euclidean frame distance, optional band and length normalisation, all examples
  or a few medoids per word as templates.

These are benchmark baselines, not part of the package.
"""

from __future__ import annotations

import logging
import warnings
from typing import Mapping, Sequence

import numba
import numpy as np

__all__ = ["WholeWordHMM", "TemplateDTW", "uniform_segments", "frame_distances", "dtw_costs",
           "pairwise_costs", "normalised", "medoids", "ENGINES"]


def uniform_segments(length: int, n_parts: int) -> np.ndarray:
    """Part index of each of ``length`` frames when cut into ``n_parts`` equal parts.

    Returns
    -------
    np.ndarray of int, shape (length,)
    """
    return np.minimum((np.arange(length) * n_parts) // max(length, 1), n_parts - 1)


# ----------------------------------------------------------------------------- whole-word HMM


def _left_to_right(n_states: int, stay: float = 0.6) -> tuple[np.ndarray, np.ndarray]:
    start = np.zeros(n_states)
    start[0] = 1.0
    trans = np.zeros((n_states, n_states))
    for s in range(n_states - 1):
        trans[s, s], trans[s, s + 1] = stay, 1.0 - stay
    trans[-1, -1] = 1.0
    return start, trans


def _state_init(frames: np.ndarray, n_mix: int, floor: np.ndarray, seed: int):
    """Weights, means, variances of one state's mixture from its frames (k-means for M > 1)."""
    d = frames.shape[1]
    if n_mix == 1 or len(frames) < 2 * n_mix:
        mean = frames.mean(axis=0) if len(frames) else np.zeros(d)
        var = np.maximum(frames.var(axis=0) if len(frames) > 1 else floor * 100, floor)
        return (np.full(n_mix, 1.0 / n_mix), np.repeat(mean[None], n_mix, 0),
                np.repeat(var[None], n_mix, 0))
    from sklearn.cluster import KMeans

    labels = KMeans(n_clusters=n_mix, n_init=2, random_state=seed).fit_predict(frames)
    weights = np.empty(n_mix)
    means = np.empty((n_mix, d))
    variances = np.empty((n_mix, d))
    for m in range(n_mix):
        part = frames[labels == m]
        weights[m] = max(len(part), 1)
        means[m] = part.mean(axis=0) if len(part) else frames.mean(axis=0)
        variances[m] = np.maximum(part.var(axis=0) if len(part) > 1 else frames.var(axis=0), floor)
    return weights / weights.sum(), means, variances


def _fit_word(seqs: Sequence[np.ndarray], n_states: int, n_mix: int, n_iter: int, seed: int):
    """Train one word's hmmlearn model (runs in a worker process when n_jobs > 1).

    hmmlearn's mixture M-step can leave a starved component with NaN parameters; then the
    word is trained again with half as many Gaussians (down to one), as a user would.
    """
    while True:
        try:
            model = _fit_word_once(seqs, n_states, n_mix, n_iter, seed)
            if all(np.all(np.isfinite(getattr(model, a))) for a in ("transmat_", "means_", "covars_")):
                return model
        except ValueError:
            pass
        if n_mix == 1:
            raise ValueError(f"hmmlearn training failed with {n_states} states and one Gaussian")
        n_mix //= 2


def _fit_word_once(seqs: Sequence[np.ndarray], n_states: int, n_mix: int, n_iter: int, seed: int):
    from hmmlearn import hmm

    logging.getLogger("hmmlearn").setLevel(logging.ERROR)
    seqs = [np.asarray(s, dtype=np.float64) for s in seqs]
    allf = np.concatenate(seqs)
    floor = 1e-2 * allf.var(axis=0)  # 1% of this word's variance
    parts = [np.concatenate([s[uniform_segments(len(s), n_states) == k] for s in seqs])
             for k in range(n_states)]
    inits = [_state_init(p, n_mix, floor, seed + k) for k, p in enumerate(parts)]
    start, trans = _left_to_right(n_states)
    common = dict(n_components=n_states, covariance_type="diag", n_iter=n_iter, tol=1e-3,
                  init_params="", params="tmcw" if n_mix > 1 else "tmc", random_state=seed,
                  min_covar=1e-3)
    if n_mix == 1:
        model = hmm.GaussianHMM(**common)
        model.means_ = np.stack([i[1][0] for i in inits])
        model.covars_ = np.stack([i[2][0] for i in inits])
    else:
        model = hmm.GMMHMM(n_mix=n_mix, **common)
        model.weights_ = np.stack([i[0] for i in inits])
        model.means_ = np.stack([i[1] for i in inits])
        model.covars_ = np.stack([i[2] for i in inits])
    model.startprob_, model.transmat_ = start, trans
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        model.fit(allf, lengths=[len(s) for s in seqs])
    return model


class WholeWordHMM:
    """One left-to-right HMM per word (hmmlearn), the best forward score wins.

    Parameters
    ----------
    n_states : int > 0
        Emitting states per word (silence before and after the word is absorbed by the
        first and last states).
    n_mix : int > 0
        Gaussians per state (diagonal covariances).
    n_iter : int > 0
        Baum-Welch passes (hmmlearn's EM, stopping early at ``tol=1e-3``).
    seed : int
        Seed for the k-means initialisation.
    n_jobs : int
        Words trained in parallel with joblib (each word's model is independent).
    """

    def __init__(self, *, n_states: int = 8, n_mix: int = 1, n_iter: int = 10, seed: int = 0,
                 n_jobs: int = 1):
        self.n_states = n_states
        self.n_mix = n_mix
        self.n_iter = n_iter
        self.seed = seed
        self.n_jobs = n_jobs

    def fit(self, examples: Mapping[str, Sequence[np.ndarray]]) -> "WholeWordHMM":
        """Train from ``{word: [frames (T, D), ...]}``."""
        from joblib import Parallel, delayed

        self.words_ = sorted(examples)
        jobs = [delayed(_fit_word)(examples[w], self.n_states, self.n_mix, self.n_iter, self.seed)
                for w in self.words_]
        self.models_ = Parallel(n_jobs=self.n_jobs)(jobs) if self.n_jobs != 1 else [
            _fit_word(examples[w], self.n_states, self.n_mix, self.n_iter, self.seed)
            for w in self.words_]
        return self

    @classmethod
    def fit_grid(cls, examples: Mapping[str, Sequence[np.ndarray]], grid: Sequence[tuple[int, int]], *,
                 n_iter: int = 10, seed: int = 0, n_jobs: int = 1) -> dict:
        """One recogniser per ``(n_states, n_mix)`` of ``grid``, every (setting, word) model
        trained as one joblib task (largest first), so the workers stay evenly busy.

        Returns
        -------
        dict (n_states, n_mix) -> WholeWordHMM
            The same models as ``WholeWordHMM(n_states=..., n_mix=...).fit(examples)``.
        """
        from joblib import Parallel, delayed

        words = sorted(examples)
        tasks = sorted(((s, m, w) for s, m in grid for w in words), key=lambda k: -k[0] * k[1])
        fitted = Parallel(n_jobs=n_jobs)(delayed(_fit_word)(examples[w], s, m, n_iter, seed)
                                         for s, m, w in tasks)
        by_task = dict(zip(tasks, fitted))
        out = {}
        for s, m in grid:
            rec = cls(n_states=s, n_mix=m, n_iter=n_iter, seed=seed, n_jobs=n_jobs)
            rec.words_ = words
            rec.models_ = [by_task[(s, m, w)] for w in words]
            out[(s, m)] = rec
        return out

    def scores(self, frames: np.ndarray) -> np.ndarray:
        """Forward log-likelihood of ``frames`` under every word's model, shape (n_words,)."""
        x = np.asarray(frames, dtype=np.float64)
        return np.array([m.score(x) for m in self.models_])

    def predict(self, frames: np.ndarray) -> str:
        """The word whose model scores ``frames`` best."""
        return self.words_[int(np.argmax(self.scores(frames)))]


# ----------------------------------------------------------------------------- DTW templates


def frame_distances(query: np.ndarray, templates: np.ndarray) -> np.ndarray:
    """Euclidean distances between every query frame and every template frame.

    One matrix product for all templates at once (same numbers as ``scipy.spatial.distance.cdist``).

    Parameters
    ----------
    query : np.ndarray, shape (T, D)
    templates : np.ndarray, shape (N, D)

    Returns
    -------
    np.ndarray, shape (N, T)
    """
    q = np.asarray(query, dtype=np.float64)
    t = np.asarray(templates, dtype=np.float64)
    sq = t @ (-2.0 * q.T)
    sq += (t * t).sum(1)[:, None]
    sq += (q * q).sum(1)[None, :]
    np.maximum(sq, 0.0, out=sq)
    return np.sqrt(sq, out=sq)


ENGINES = ("compiled", "librosa")


def _dtw_cost(cost: np.ndarray, band: float | None) -> float:
    from librosa.sequence import dtw

    if band is None:
        acc = dtw(C=cost, backtrack=False)
    else:
        acc = dtw(C=cost, backtrack=False, global_constraints=True, band_rad=band)
    return float(acc[-1, -1])


def _band_radii(lengths: np.ndarray, n_query: int, band: float | None) -> np.ndarray:
    """Band radius in frames of every (template, query) pair, as librosa's
    ``fill_off_diagonal`` rounds it (``np.round(band * min(shape))``); -1 for no band."""
    if band is None:
        return np.full(len(lengths), -1, dtype=np.int64)
    return np.round(band * np.minimum(lengths, n_query)).astype(np.int64)


@numba.njit(cache=True, nogil=True)
def _accumulate_last(cost, edges, radii, row):
    """Last cell of the accumulated cost of every template's rows of ``cost`` (see dtw_costs)."""
    n_templates = len(edges) - 1
    n_cols = cost.shape[1]
    out = np.empty(n_templates)
    for i in range(n_templates):
        lo, n_rows = edges[i], edges[i + 1] - edges[i]
        r = radii[i]
        offset = abs(n_rows - n_cols)
        # cells librosa's fill_off_diagonal sets to inf: j - i >= upper or i - j >= lower
        upper, lower = (r + offset, r) if n_rows < n_cols else (r, r + offset)
        diag = np.inf  # D[n-1, m-1] for the cell being filled
        for n in range(n_rows):
            for m in range(n_cols):
                c = cost[lo + n, m]
                if r >= 0 and (m - n >= upper or n - m >= lower):
                    c = np.inf
                if n == 0 and m == 0:
                    best = np.inf
                    here = c
                else:
                    # steps (1, 1), (0, 1), (1, 0) in librosa's order; min then one addition
                    # gives the same double as librosa's per-step sums (rounding is monotonic)
                    best = diag if (n > 0 and m > 0) else np.inf
                    if m > 0 and row[m - 1] < best:
                        best = row[m - 1]
                    if n > 0 and row[m] < best:
                        best = row[m]
                    here = best + c
                diag = row[m]
                row[m] = here
            diag = np.inf
        out[i] = row[n_cols - 1]
    return out


def dtw_costs(query: np.ndarray, stack: np.ndarray, edges: np.ndarray, band: float | None,
              *, engine: str = "compiled") -> np.ndarray:
    """Accumulated DTW cost (not normalised) from ``query`` to each stacked template.

    Parameters
    ----------
    query : np.ndarray, shape (T, D)
    stack : np.ndarray, shape (N, D)
        All templates' frames one after another.
    edges : np.ndarray of int, shape (n_templates + 1,)
        Template i is ``stack[edges[i]:edges[i + 1]]``.
    band : float or None
        Sakoe-Chiba band radius (librosa's ``band_rad``), None for no band.
    engine : {"compiled", "librosa"}
        ``"librosa"`` calls ``librosa.sequence.dtw`` once per template; ``"compiled"`` runs
        the same recurrence (default steps and weights, the same band cells) in one
        compiled loop over all templates and returns the same numbers
        (``tests/test_benchmark_smoke.py`` checks this), without the per-call overhead.

    Returns
    -------
    np.ndarray, shape (n_templates,)
    """
    c = frame_distances(query, stack)
    if engine == "librosa":
        return np.array([_dtw_cost(c[edges[i]:edges[i + 1]], band) for i in range(len(edges) - 1)])
    if engine != "compiled":
        raise ValueError(f"engine must be one of {ENGINES}, got {engine!r}")
    edges = np.asarray(edges, dtype=np.int64)
    radii = _band_radii(np.diff(edges), c.shape[1], band)
    return _accumulate_last(c, edges, radii, np.empty(c.shape[1]))


def pairwise_costs(seqs: Sequence[np.ndarray], band: float | None, *, engine: str = "compiled") -> np.ndarray:
    """Symmetric matrix of DTW costs (not normalised) between all pairs of ``seqs``."""
    n = len(seqs)
    out = np.zeros((n, n))
    for i in range(n - 1):
        rest = seqs[i + 1:]
        edges = np.cumsum([0] + [len(s) for s in rest])
        out[i, i + 1:] = dtw_costs(seqs[i], np.concatenate(rest), edges, band, engine=engine)
    return out + out.T


def normalised(costs: np.ndarray, len_a, len_b) -> np.ndarray:
    """DTW costs divided by the sum of the two sequence lengths (broadcasting)."""
    return costs / (np.asarray(len_a, dtype=np.float64) + np.asarray(len_b, dtype=np.float64))


def medoids(dist: np.ndarray, k: int) -> list[int]:
    """Greedy k-medoids (build step): each pick lowers the total distance most."""
    n = len(dist)
    if k >= n:
        return list(range(n))
    chosen = [int(np.argmin(dist.sum(axis=1)))]
    nearest = dist[chosen[0]].copy()
    while len(chosen) < k:
        gain = np.maximum(nearest[None, :] - dist, 0.0).sum(axis=1)
        gain[chosen] = -1.0
        c = int(np.argmax(gain))
        chosen.append(c)
        nearest = np.minimum(nearest, dist[c])
    return chosen


class TemplateDTW:
    """Nearest-template recogniser with ``librosa.sequence.dtw``.

    Parameters
    ----------
    per_word : int > 0 or None
        Templates kept per word: None keeps every example; k keeps k medoids chosen by
        DTW distance among that word's examples.
    band : float in (0, 1] or None
        Sakoe-Chiba band radius as a fraction of the length (librosa's ``band_rad``);
        None: no band.
    normalise : bool
        Divide the accumulated cost by the sum of the two lengths.
    engine : {"librosa", "compiled"}
        Who accumulates the DTW cost (see :func:`dtw_costs`): librosa's function, as a
        practitioner would call it, or our compiled copy of the same recurrence (the same
        costs, hence the same templates and answers, without librosa's per-call overhead).
    """

    def __init__(self, *, per_word: int | None = None, band: float | None = None,
                 normalise: bool = True, engine: str = "librosa"):
        if engine not in ENGINES:
            raise ValueError(f"engine must be one of {ENGINES}, got {engine!r}")
        self.per_word = per_word
        self.band = band
        self.normalise = normalise
        self.engine = engine

    def fit(self, examples: Mapping[str, Sequence[np.ndarray]]) -> "TemplateDTW":
        """Keep templates from ``{word: [frames (T, D), ...]}``."""
        templates, labels = [], []
        for word in sorted(examples):
            seqs = [np.asarray(s, dtype=np.float64) for s in examples[word]]
            if self.per_word is not None and self.per_word < len(seqs):
                dist = pairwise_costs(seqs, self.band, engine=self.engine)
                if self.normalise:
                    lens = np.array([len(s) for s in seqs])
                    dist = normalised(dist, lens[:, None], lens[None, :])
                seqs = [seqs[i] for i in medoids(dist, self.per_word)]
            templates += seqs
            labels += [word] * len(seqs)
        self.templates_ = templates
        self.labels_ = labels
        self._stack = np.concatenate(templates)
        self._edges = np.cumsum([0] + [len(t) for t in templates])
        return self

    def scores(self, frames: np.ndarray) -> np.ndarray:
        """DTW cost from ``frames`` to every template, shape (n_templates,); lower is closer."""
        q = np.asarray(frames, dtype=np.float64)
        out = dtw_costs(q, self._stack, self._edges, self.band, engine=self.engine)
        return normalised(out, np.diff(self._edges), len(q)) if self.normalise else out

    def predict(self, frames: np.ndarray) -> str:
        """The word of the closest template."""
        return self.labels_[int(np.argmin(self.scores(frames)))]
