"""Small hand-built models and plain reference searches for the decoder tests.

Nothing here calls the decoder: the references are written out independently (a dense
textbook Viterbi over one composed chain, and a loop over every word sequence).
"""

from __future__ import annotations

import itertools

import numpy as np
from hmmlearn.base import BaseHMM

from wordspot.audio.features import FeatureSettings
from wordspot.acoustic.gmm import Mixtures
from wordspot.language.grammar import count_bigrams
from wordspot.acoustic.graph import compose
from wordspot.language.lexicon import Lexicon
from wordspot.model import AcousticModel
from wordspot.acoustic.units import GAP_UNIT, PAUSE_UNIT, default_unit_set

PHONES = ("AA", "B", "K", "S", "T")


class TableHMM(BaseHMM):
    """hmmlearn model (reference library) whose per-state log-likelihoods come from a fixed
    table: observation ``t`` (an index) scores row ``t``; set ``startprob_`` and ``transmat_``."""

    def __init__(self, table, **kw):
        super().__init__(n_components=table.shape[1], **kw)
        self.table = table

    def _compute_log_likelihood(self, X):
        return self.table[X[:, 0].astype(int)]

    def _check(self):
        pass

    def _get_n_fit_scalars_per_param(self):
        return {}


def tiny_model(rng, entries, *, dim=39, separation=5.0, transcripts=(), n_components=1, phones=PHONES):
    """A model whose mixture means are far apart (one direction per mixture) with unit variances.

    Parameters
    ----------
    entries : dict word -> list of phone lists
    transcripts : word sequences for the bigram counts
    phones : the model's phones
    """
    lex = Lexicon(entries)
    units = default_unit_set(phones)
    p = units.n_mixtures
    means = np.zeros((p, n_components, dim))
    for k in range(p):
        direction = rng.normal(size=dim)
        means[k] = separation * direction / np.linalg.norm(direction)
    weights = np.full((p, n_components), 1.0 / n_components)
    mix = Mixtures(weights, means + 0.1 * rng.normal(size=means.shape), np.ones((p, n_components, dim)))
    return AcousticModel(
        features=FeatureSettings(),
        units=units,
        mixtures=mix,
        lexicon=lex,
        bigrams=count_bigrams(transcripts, lex.words),
        info={"made_by": "tests/decoding_helpers.py"},
    )


def chain_graph(model, words_prons):
    """Composed HMM of one word sequence: pause, (word, optional gap)*, pause.

    ``words_prons`` lists, per word, its alternative pronunciations (phone names).
    """
    u = model.units
    pause, gap = u.index(PAUSE_UNIT), u.index(GAP_UNIT)
    slots = [[[pause]]]
    for prons in words_prons:
        slots.append([[u.index(x) for x in pron] for pron in prons])
        slots.append([[gap]])
    slots.append([[pause]])
    return compose(slots, u)


def viterbi_score(graph, state_ll):
    """Textbook Viterbi over a dense transition matrix (log domain); best path score.

    ``state_ll`` has shape (T, S). Returns -inf if no path fits.
    """
    s = graph.n_states
    trans = np.full((s, s), -np.inf)
    trans[np.arange(s), np.arange(s)] = graph.self_logp
    for a, b, lp in zip(graph.arc_src, graph.arc_dst, graph.arc_logp):
        trans[a, b] = np.logaddexp(trans[a, b], lp)
    delta = graph.init_logp + state_ll[0]
    for t in range(1, state_ll.shape[0]):
        delta = np.max(delta[:, None] + trans, axis=0) + state_ll[t]
    return float(np.max(delta + graph.final_logp))


def exhaustive_best(model, network, ll, *, max_words=3):
    """Best (score, words) over every word sequence of 0..max_words words.

    ``ll`` is (T, P) over ``network.used_mixtures``; the grammar scores come from
    ``network.link_row`` (the same numbers the decoder is told to add).
    """
    words = network.words
    column = {int(p): j for j, p in enumerate(network.used_mixtures)}
    best = (-np.inf, None)
    for n in range(0, max_words + 1):
        for seq in itertools.product(range(1, len(words) + 1), repeat=n):
            ids = (0,) + seq + (0,)
            grammar = sum(network.link_row(a)[b] for a, b in zip(ids[:-1], ids[1:]))
            if not np.isfinite(grammar):
                continue
            graph = chain_graph(model, [model.lexicon.pronunciations(words[i - 1]) for i in seq])
            state_ll = ll[:, [column[int(p)] for p in graph.mixture]]
            score = viterbi_score(graph, state_ll) + grammar
            if score > best[0]:
                best = (score, [words[i - 1] for i in seq])
    return best


def frames_along(model, mixture_path, rng, noise=0.3):
    """Frames drawn near the first component mean of each mixture in ``mixture_path``."""
    means = model.mixtures.means[np.asarray(mixture_path), 0]
    return means + noise * rng.normal(size=means.shape)


def word_mixtures(model, pron, frames_per_state=3):
    u = model.units
    out = []
    for phone in pron:
        k = u.index(phone)
        for i in range(int(u.n_states[k])):
            out += [int(u.state_mixture[k, i])] * frames_per_state
    return out


def pause_mixtures(model, n_frames):
    """A path through the pause unit: first, middle (repeated), last state."""
    k = model.units.index(PAUSE_UNIT)
    sp = model.units.state_mixture[k]
    middle = max(n_frames - 2, 1)
    return [int(sp[0])] + [int(sp[1])] * middle + [int(sp[2])]


def gap_mixtures(model, n_frames):
    """A path through the optional short pause after a word (tied to the middle pause state)."""
    k = model.units.index(GAP_UNIT)
    return [int(model.units.state_mixture[k, 0])] * n_frames
