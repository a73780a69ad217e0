"""A short forced alignment for the state-scorer tests and benchmarks.

Each utterance's training chain (pause, words with optional gaps, pause) is aligned to
its frames with the model's mixtures by Viterbi (:func:`wordspot.acoustic.hmm.viterbi_path`);
a frame's label is the mixture id of its state. Test and benchmark use only; the
project's own frame labels come from :mod:`wordspot.training`.
"""

from __future__ import annotations

import numpy as np

from wordspot.acoustic.gmm import log_likelihoods
from wordspot.acoustic.hmm import viterbi_path

__all__ = ["align_items", "aligned_corpus"]


def align_items(model, items):
    """(frames, labels) of every training item the chain fits (``items``: TrainingItem list)."""
    out = []
    for it in items:
        ll = log_likelihoods(it.frames, model.mixtures, it.graph.mixture)
        score, states = viterbi_path(it.graph, ll)
        if np.isfinite(score):
            out.append((np.asarray(it.frames, dtype=np.float32), it.graph.mixture[states].astype(np.int64)))
    return out


def aligned_corpus(model, utterances, lexicon=None):
    """Features and labels of ``utterances`` aligned with ``model`` (its own lexicon by default)."""
    from wordspot.training.data import prepare_items

    items, _ = prepare_items(utterances, lexicon or model.lexicon, model.units, model.features)
    return align_items(model, items)
