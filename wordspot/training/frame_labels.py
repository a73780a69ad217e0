"""Frame labels for the state scorer: every frame's mixture id by forced alignment.

The state scorer (a small network giving posteriors of the model's mixtures) learns from
frames labelled with the mixture of the state a Gaussian-mixture model puts them in. The
labels come from the best path (Viterbi) through the same chain training composes for
each utterance (``pau``, each word with all its pronunciations as alternatives, optional
``gap`` between words, ``pau``; see :func:`wordspot.training.data.chain_slots`), scored with
the given model's mixtures and transitions. A frame's label is ``graph.mixture[state]``:
a mixture id in ``0..P-1``; the ``gap`` state shares the middle pause mixture, so a pause
between words is labelled as pause.

Background-only items (:mod:`wordspot.training.backgrounds`; empty transcript, one pause
unit) are aligned the same way, so every one of their frames gets a pause mixture. Noisy
copies (:mod:`wordspot.training.noise`) can be added too; each takes the labels of its
clean recording (same audio length, so the same frames), which is where the clean
alignment is the better guess. Speed copies (:func:`wordspot.training.data.speed_copy`,
played faster or slower) have other frames, so each is aligned through its own chain; a
copy too short for its chain or with no path is left out silently (the recording itself
is kept).

Utterances that cannot be aligned are skipped and listed, never raised: files that do not
load, words missing from the model's lexicon (or phones missing from its units), audio too
short for the chain, and chains with no path through the audio. Features, noisy copies
and background items come from :func:`wordspot.training.data.prepare_items`; the
alignment runs on the same executors (:mod:`wordspot.training.cluster`) in fixed chunks,
so the labels are the same for any ``jobs``.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from wordspot.acoustic import kernels
from wordspot.acoustic.gmm import Mixtures, scoring_matrix
from wordspot.acoustic.hmm import graph_arrays
from wordspot.errors import TrainingError, TrainingWarning
from wordspot.training.cluster import using
from wordspot.training.data import extract_features, prepare_items
from wordspot.training.items import CHUNK_SIZE, Skipped, TrainingItem
from wordspot.util.progress import ProgressBar

__all__ = ["AlignedItem", "FrameLabels", "align_frames", "align_one", "align_chunk", "unusable_words"]


@dataclass
class AlignedItem:
    """One aligned utterance.

    Attributes
    ----------
    path : Path
        The recording (``background-NNN-KIND`` for a background-only item).
    words : tuple of str
    frames : ndarray of float32, shape (T, D)
        The model's own features of the recording.
    labels : ndarray of int32, shape (T,)
        Mixture id of every frame.
    background : bool
        A generated background-only item.
    noisy : bool
        A noisy copy of a recording (labels of its clean recording).
    speed : float
        Speed factor of a speed copy (its own alignment); 1 for the recording itself.
    """

    path: Path
    words: tuple
    frames: np.ndarray
    labels: np.ndarray
    background: bool = False
    noisy: bool = False
    speed: float = 1.0


@dataclass
class FrameLabels:
    """What :func:`align_frames` gives: aligned items and the utterances left out."""

    items: list = field(default_factory=list)
    skipped: list = field(default_factory=list)

    @property
    def frames(self) -> list:
        """Per item, frames (T, D) float32."""
        return [it.frames for it in self.items]

    @property
    def labels(self) -> list:
        """Per item, labels (T,) int32."""
        return [it.labels for it in self.items]

    @property
    def n_frames(self) -> int:
        return int(sum(it.labels.shape[0] for it in self.items))

    def counts(self, n_classes: int) -> np.ndarray:
        """Frames per mixture id, shape (n_classes,)."""
        total = np.zeros(n_classes, dtype=np.int64)
        for it in self.items:
            total += np.bincount(it.labels, minlength=n_classes)[:n_classes]
        return total


def unusable_words(words, lexicon, units) -> str | None:
    """Why a transcript cannot be chained with ``lexicon`` and ``units``, or None."""
    missing = sorted({w for w in words if w not in lexicon})
    if missing:
        return "word(s) not in the model's lexicon: " + ", ".join(missing)
    known = set(units.names)
    phones = sorted({p for w in words for pron in lexicon.pronunciations(w) for p in pron} - known)
    if phones:
        return "phone(s) not in the model's units: " + ", ".join(phones)
    return None


def align_one(frames: np.ndarray, graph, scoring, n_comp: int) -> tuple[float, np.ndarray]:
    """Best path of one utterance through its chain.

    Parameters
    ----------
    frames : ndarray, shape (T, D)
    graph : StateGraph
    scoring : tuple
        :func:`wordspot.acoustic.gmm.scoring_matrix` of the model's mixtures.
    n_comp : int
        Components per mixture.

    Returns
    -------
    score : float
        Log probability of the best path (-inf: none fits).
    labels : ndarray of int32, shape (T,)
        Mixture id of every frame (all -1 when no path fits).
    """
    x = np.ascontiguousarray(frames, dtype=np.float64)
    w, c = scoring
    ids, local = np.unique(graph.mixture, return_inverse=True)
    cols = (ids[:, None] * n_comp + np.arange(n_comp)[None, :]).reshape(-1)
    comp = kernels.score_components(x, np.ascontiguousarray(w[:, cols]), np.ascontiguousarray(c[cols]))
    mixture_ll, _ = kernels.mixture_posteriors(comp.reshape(x.shape[0], ids.size, n_comp))
    state_ll = np.ascontiguousarray(mixture_ll[:, local])
    score, states = kernels.viterbi(state_ll, *graph_arrays(graph))
    if not np.isfinite(score):
        return float(score), np.full(x.shape[0], -1, dtype=np.int32)
    return float(score), graph.mixture[states].astype(np.int32)


def align_chunk(chunk, scoring, n_comp: int) -> list[tuple[float, np.ndarray]]:
    """:func:`align_one` of every ``(frames, graph)`` pair of ``chunk``, in order, bit for bit
    the same: each graph's columns and arrays are made once for the pairs that share it,
    and the mixture log-likelihoods are computed without the component posteriors (which
    the best path does not read)."""
    w, c = scoring
    graphs: dict[int, tuple] = {}
    out = []
    for frames, graph in chunk:
        got = graphs.get(id(graph))
        if got is None:
            ids, local = np.unique(graph.mixture, return_inverse=True)
            cols = (ids[:, None] * n_comp + np.arange(n_comp)[None, :]).reshape(-1)
            got = graphs[id(graph)] = (ids.size, np.ascontiguousarray(local), np.ascontiguousarray(w[:, cols]),
                                       np.ascontiguousarray(c[cols]), graph_arrays(graph))
        n_ids, local, wg, cg, arrays = got
        x = np.ascontiguousarray(frames, dtype=np.float64)
        comp = kernels.score_components(x, wg, cg)
        mixture_ll = kernels.mixture_log_likelihoods(comp.reshape(x.shape[0], n_ids, n_comp))[0]
        score, states = kernels.viterbi(np.ascontiguousarray(mixture_ll[:, local]), *arrays)
        if not np.isfinite(score):
            out.append((float(score), np.full(x.shape[0], -1, dtype=np.int32)))
        else:
            out.append((float(score), graph.mixture[states].astype(np.int32)))
    return out


def _chunk_task(chunk, mix: Mixtures):
    scoring = scoring_matrix(mix)
    return [align_one(frames, graph, scoring, mix.n_components) for frames, graph in chunk]


def align_frames(model, utterances, *, jobs: int = 1, background_share: float = 0.0, noise=None,
                 speeds=(), seed: int = 0, quiet: bool = True, executor=None,
                 background_kinds=None) -> FrameLabels:
    """Frames and per-frame mixture ids of every utterance, by forced alignment with ``model``.

    Parameters
    ----------
    model : AcousticModel
        Its features, lexicon, units (transitions) and mixtures are used.
    utterances : sequence of wordspot.corpus.Utterance
    jobs : int >= 1
        Local processes (ignored when ``executor`` is given).
    background_share : float in [0, 1]
        Background-only items, ``background_count(usable recordings, share)`` of them
        (:mod:`wordspot.training.backgrounds`), drawn with ``seed``; 0 adds none.
    background_kinds : mix of ``(kind, parts)`` pairs, optional
        Their kinds (default the steady kinds; ``TrainingConfig.background_kinds``).
    noise : wordspot.audio.augment.NoiseSettings, optional
        Noisy copies of every usable recording, drawn with ``seed``; they take the labels
        of their clean recording.
    speeds : sequence of float
        Speed factors (> 0; 1 is skipped); every usable recording gets one copy per
        factor, played that many times faster and aligned through its own chain.
    seed : int
    quiet : bool
        No progress bars.
    executor : wordspot.training.cluster.Executor, optional

    Returns
    -------
    FrameLabels
        ``items`` (recordings in manifest order, then speed copies (factor-major), then
        noisy copies, then background items) and ``skipped`` (path and reason of every
        utterance left out).

    Raises
    ------
    TrainingError
        A speed factor that is not a number > 0.
    """
    lexicon, units = model.lexicon, model.units
    utterances = list(utterances)
    speeds = [float(s) for s in speeds if float(s) != 1.0]
    bad = [s for s in speeds if not (np.isfinite(s) and s > 0)]
    if bad:
        raise TrainingError(f"speed factors must be numbers > 0 (e.g. 0.9 1.1), got {bad[0]!r}")
    skipped: list[Skipped] = []
    usable = []
    for utt in utterances:
        reason = unusable_words(utt.words, lexicon, units)
        if reason is None:
            usable.append(utt)
        else:
            skipped.append(Skipped(utt.path, reason))
    out = FrameLabels(skipped=skipped)
    if not usable:
        return out
    with using(executor, jobs) as ex:
        with warnings.catch_warnings():
            # prepare_items warns about every file it skips; they are returned in ``skipped``
            warnings.simplefilter("ignore", TrainingWarning)
            items, left_out = prepare_items(usable, lexicon, units, model.features, jobs=jobs, quiet=quiet,
                                            noise=noise, background_share=background_share, seed=seed,
                                            background_kinds=background_kinds,
                                            executor=ex)
        skipped += left_out
        # recordings first, then their noisy copies (copy-major), then background items
        copies = noise.copies if noise is not None else 0
        n_plain = (len(items) - sum(it.background for it in items)) // (1 + copies)
        fast = _speed_items(items[:n_plain], speeds, model.features, jobs, quiet, ex)
        to_align = items[:n_plain] + [it for _, it in fast] + [it for it in items[n_plain:] if it.background]
        frames = ex.keep_on_disk([it.frames for it in to_align])
        chunks = [[(f, it.graph) for f, it in zip(frames[i:i + CHUNK_SIZE], to_align[i:i + CHUNK_SIZE])]
                  for i in range(0, len(to_align), CHUNK_SIZE)]
        bar = ProgressBar(len(to_align), "alignment", quiet=quiet)
        results = []
        for part in ex.map(_chunk_task, [(c,) for c in chunks], common=(model.mixtures,), label="alignment"):
            results += part
            bar.update(len(part))
        bar.close()
    aligned = {}
    n_fast = len(fast)
    for k, (it, (score, labels)) in enumerate(zip(to_align, results)):
        speed = fast[k - n_plain][0] if n_plain <= k < n_plain + n_fast else 1.0
        if not np.isfinite(score):
            if speed == 1.0:
                skipped.append(Skipped(it.path, "no path through its chain fits the audio (likelihood zero)"))
            continue
        aligned[k] = AlignedItem(Path(it.path), tuple(it.words), _plain(it.frames), labels, it.background,
                                 speed=speed)
    clean = {str(aligned[k].path): aligned[k] for k in range(n_plain) if k in aligned}
    noisy = []
    for it in items[n_plain:]:
        if it.background:
            continue
        base = clean.get(str(it.path))
        if base is not None and base.labels.shape[0] == it.frames.shape[0]:
            noisy.append(AlignedItem(Path(it.path), tuple(it.words), _plain(it.frames), base.labels, noisy=True))
    out.items = [aligned[k] for k in range(n_plain) if k in aligned] \
        + [aligned[k] for k in range(n_plain, n_plain + n_fast) if k in aligned] + noisy \
        + [aligned[k] for k in range(n_plain + n_fast, len(to_align)) if k in aligned]
    return out


def _speed_items(plain, speeds, settings, jobs, quiet, executor) -> list:
    """(factor, TrainingItem) of every recording in ``plain`` played at each factor, with
    the recording's own chain; copies too short for it are left out."""
    out = []
    for s in speeds:
        got = extract_features([it.path for it in plain], settings, jobs=jobs, quiet=quiet, speed=s,
                               executor=executor)
        for it, (feats, _) in zip(plain, got):
            if feats is not None and feats.shape[0] >= it.graph.min_frames():
                out.append((s, TrainingItem(it.path, it.words, feats, it.graph)))
    return out


def _plain(frames: np.ndarray) -> np.ndarray:
    """Frames as an in-memory float32 array (not a view of an executor's file)."""
    if isinstance(frames, np.memmap):
        return np.array(frames, dtype=np.float32)
    return np.ascontiguousarray(frames, dtype=np.float32)
