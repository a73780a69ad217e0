"""Compile a lexicon, the unit models and the grammar into flat arrays the decoder walks.

The network is a set of *items*, each a small left-to-right piece of states:

* item 0: the entry pause (the ``quiet`` unit), where every utterance begins;
* item 1: the exit pause, where every utterance ends;
* item ``2 + p``: pronunciation ``p`` of a word: its units' states followed by a
  skippable copy of the short pause (the ``gap`` unit) so that an optional pause after
  the word still knows which word it follows (this keeps the bigram prior exact).

Every state refers to a shared mixture; unit parameters are never copied per word,
only their indices and log transition probabilities are laid out. Inside an item, tokens
move along self-loops and arcs; a token leaving an item (``end_logp``) becomes a *word
end*, and word ends enter the next items through the grammar (:mod:`wordspot.language.grammar`):

    entry pause -> word -> [gap] -> word -> [gap] -> ... -> exit pause

with score ``weight * log P(next | previous) + insertion_penalty`` on each word-to-word
link. After the commands come the *background words* when they are on: the filler (one
item per phone) and the pause between words (:mod:`wordspot.decoding.filler`). With ``single_word`` a word may only be followed by the exit pause. The empty
utterance (entry pause straight into the exit pause) is allowed unless switched off:
it is how a file with nothing but silence comes out empty.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from wordspot.errors import DecodingError, LexiconError
from wordspot.language.grammar import BigramPrior, GrammarSettings
from wordspot.decoding.filler import BackgroundWords, FillerSettings, background_words, extend_links
from wordspot.acoustic.graph import StateGraph, compose
from wordspot.acoustic.units import GAP_UNIT, PAUSE_UNIT, UnitSet

__all__ = ["Network", "compile_network", "ENTRY_ITEM", "EXIT_ITEM", "FIRST_WORD_ITEM"]

ENTRY_ITEM = 0
EXIT_ITEM = 1
FIRST_WORD_ITEM = 2

# Optional pause after a word when the model has no ``gap`` unit: one state tied to the
# middle pause state, entered or skipped with equal odds (common practice, no source).
_FALLBACK_GAP_SKIP = 0.5
_FALLBACK_GAP_STAY = 0.6


@dataclass
class Network:
    """A compiled recognition network (all arrays contiguous, int64 / float64).

    Attributes
    ----------
    words : tuple of str
        Vocabulary; word ``words[i]`` has index ``i + 1`` (0 is the boundary).
    prons : tuple of tuple of str
        Units of every pronunciation; ``pron_word[p]`` is its word index.
    mixture : ndarray, shape (S,)
        Column of the emission matrix each state uses (see ``used_mixtures``).
    used_mixtures : ndarray, shape (P,)
        Model mixtures the network uses; emissions are computed for these only.
    self_logp : ndarray, shape (S,)
    arc_first : ndarray, shape (S + 1,)
        Arcs leaving state ``s`` are ``arc_first[s]:arc_first[s + 1]``.
    arc_dst, arc_logp : ndarray, shape (E,)
    end_logp : ndarray, shape (S,)
        Log probability of leaving the item after this state (-inf if impossible).
    tail : ndarray of bool, shape (S,)
        State of a word's trailing optional pause.
    item : ndarray, shape (S,)
        Item of each state.
    start_first : ndarray, shape (I + 1,)
        Entry states of item ``i`` are ``start_state[start_first[i]:start_first[i + 1]]``
        with log entry probabilities ``start_logp``.
    start_state, start_logp : ndarray
    pron_word : ndarray, shape (n_prons,)
    word_first : ndarray, shape (V + 2,)
        Pronunciations of word ``v`` are ``word_pron[word_first[v]:word_first[v + 1]]``.
    word_pron : ndarray
    unigram, backoff, pair_first, pair_next, pair_logp : ndarray
        The grammar link scores (weight and insertion penalty applied), in the back-off
        form of :class:`~wordspot.language.grammar.BigramPrior`.
    single_word : bool
        The kernel's own one-word rule (off when the background words carry it).
    allow_empty : bool
    min_frames : int
        Fewest frames of a complete path holding one word.
    background : BackgroundWords or None
        The filler and pause words after the commands (:mod:`wordspot.decoding.filler`),
        or None when they are switched off.
    phone : ndarray, shape (S,)
        Place of each state's unit in its item (0 for the first phone of a pronunciation,
        1 for the next, ...); -1 for a word's trailing-pause states.
    """

    words: tuple[str, ...]
    prons: tuple[tuple[str, ...], ...]
    mixture: np.ndarray
    used_mixtures: np.ndarray
    self_logp: np.ndarray
    arc_first: np.ndarray
    arc_dst: np.ndarray
    arc_logp: np.ndarray
    end_logp: np.ndarray
    tail: np.ndarray
    item: np.ndarray
    start_first: np.ndarray
    start_state: np.ndarray
    start_logp: np.ndarray
    pron_word: np.ndarray
    word_first: np.ndarray
    word_pron: np.ndarray
    unigram: np.ndarray
    backoff: np.ndarray
    pair_first: np.ndarray
    pair_next: np.ndarray
    pair_logp: np.ndarray
    single_word: bool
    allow_empty: bool
    min_frames: int
    background: BackgroundWords | None = None
    phone: np.ndarray | None = None

    def is_command(self, word: int) -> bool:
        """Is word index ``word`` one of the commands (not the boundary, filler or pause)?"""
        return 0 < word <= len(self.words)

    @property
    def n_states(self) -> int:
        return int(self.mixture.shape[0])

    @property
    def n_words(self) -> int:
        return len(self.words)

    def link_row(self, previous: int) -> np.ndarray:
        """Score of every link out of ``previous`` (index 0 = entry) into next (0 = exit).

        The same numbers the decoder adds, with the single-word and empty-utterance
        restrictions applied (-inf where a link is not allowed).
        """
        row = self.backoff[previous] + self.unigram
        a, b = self.pair_first[previous], self.pair_first[previous + 1]
        row[self.pair_next[a:b]] = self.pair_logp[a:b]
        if previous == 0 and not self.allow_empty:
            row[0] = -np.inf
        if previous > 0 and self.single_word:
            row[1:] = -np.inf
        return row


def _with_gap(units: UnitSet) -> tuple[UnitSet, int]:
    """The unit set, with a fallback optional-pause unit appended if it has none."""
    if GAP_UNIT in units:
        return units, units.index(GAP_UNIT)
    pause = units.index(PAUSE_UNIT)
    u = units.n_units
    n_states = np.append(units.n_states, 1)
    state_mixture = np.vstack([units.state_mixture, [[units.state_mixture[pause, 1], -1, -1]]])
    trans = np.concatenate([units.trans, np.zeros((1,) + units.trans.shape[1:])])
    trans[u, 0, 0] = _FALLBACK_GAP_STAY
    trans[u, 0, -1] = 1.0 - _FALLBACK_GAP_STAY
    entry = np.vstack([units.entry, np.zeros(units.entry.shape[1])])
    entry[u, 0] = 1.0 - _FALLBACK_GAP_SKIP
    entry[u, -1] = _FALLBACK_GAP_SKIP
    return UnitSet(units.names + (GAP_UNIT,), n_states, state_mixture, trans, entry), u


def _unit_ids(word: str, pron, units: UnitSet) -> list[int]:
    ids = []
    for name in pron:
        if name not in units or name in (PAUSE_UNIT, GAP_UNIT):
            raise LexiconError(
                f"word {word!r}: unit {name!r} is not a phone this model has; "
                "re-spell the word with the model's units or retrain with it"
            )
        ids.append(units.index(name))
    return ids


def _scaled(logp: np.ndarray, weight: float) -> np.ndarray:
    logp = np.asarray(logp, dtype=np.float64)
    return np.where(np.isfinite(logp), weight * logp, logp)


def compile_network(
    units: UnitSet,
    n_mixtures: int,
    lexicon,
    prior: BigramPrior,
    grammar: GrammarSettings = GrammarSettings(),
    *,
    allow_empty: bool = True,
    filler: FillerSettings | None = None,
) -> Network:
    """Lay out the recognition network.

    Parameters
    ----------
    units : UnitSet
        Must hold the pause unit ``quiet``; the ``gap`` unit is used after words if present.
    n_mixtures : int
        Number of mixtures in the model (for checking the tying table).
    lexicon : Lexicon
        Every pronunciation of every word becomes an item.
    prior : BigramPrior
        Over exactly ``lexicon.words`` in that order.
    grammar : GrammarSettings
    allow_empty : bool
        Allow the empty utterance (pause only).
    filler : FillerSettings, optional
        Let a free phone loop and pauses between words compete with the commands (see
        :mod:`wordspot.decoding.filler`); off when None or not ``enabled``.

    Raises
    ------
    LexiconError
        Empty lexicon, or a pronunciation uses a unit the model does not have.
    DecodingError
        The model has no pause unit, or the prior covers other words.
    """
    if PAUSE_UNIT not in units:
        raise DecodingError(f"the model has no pause unit {PAUSE_UNIT!r}; it cannot be used for recognition")
    words = tuple(lexicon.words)
    if not words:
        raise LexiconError(f"{getattr(lexicon, 'source', 'lexicon')}: the lexicon has no words")
    if tuple(prior.words) != words:
        raise DecodingError("the grammar prior covers other words than the lexicon; build it for this vocabulary")
    if int(units.state_mixture.max()) >= n_mixtures:
        raise DecodingError("the model's units refer to mixtures it does not have")
    units, gap = _with_gap(units)
    pause = units.index(PAUSE_UNIT)

    graphs: list[StateGraph] = [compose([[[pause]]], units), compose([[[pause]]], units)]
    prons: list[tuple[str, ...]] = []
    pron_word: list[int] = []
    word_first = [0, 0]  # word 0 (the boundary) has no pronunciations
    for v, word in enumerate(words, start=1):
        for pron in lexicon.pronunciations(word):
            ids = _unit_ids(word, pron, units)
            graphs.append(compose([[ids], [[gap]]], units))
            prons.append(tuple(pron))
            pron_word.append(v)
        if len(prons) == word_first[-1]:
            raise LexiconError(f"word {word!r} has no pronunciation")
        word_first.append(len(prons))
    n_real_prons = len(prons)

    bg = None
    if filler is not None and filler.enabled:
        bg = background_words(len(words), grammar.single_word, allow_empty)
        phones = [u for u, name in enumerate(units.names) if name not in (PAUSE_UNIT, GAP_UNIT)]
        for v in range(len(words) + 1, bg.n_words + 1):
            for u in phones if v in bg.fillers else [pause]:
                g = compose([[[u]]], units)
                if v in bg.fillers and filler.frame_penalty:
                    g.self_logp = g.self_logp + filler.frame_penalty
                    g.arc_logp = g.arc_logp + filler.frame_penalty
                graphs.append(g)
                prons.append((units.names[u],))
                pron_word.append(v)
            word_first.append(len(prons))

    sizes = np.array([g.n_states for g in graphs], dtype=np.int64)
    offsets = np.concatenate([[0], np.cumsum(sizes)])
    cat = lambda name: np.concatenate([getattr(g, name) for g in graphs])  # noqa: E731
    model_mixture = cat("mixture").astype(np.int64)
    used_mixtures, mixture = np.unique(model_mixture, return_inverse=True)
    item = np.repeat(np.arange(len(graphs), dtype=np.int64), sizes)
    # A trailing-pause state is one in the second slot of a word's graph.
    tail = (cat("slot") == 1) & (item >= FIRST_WORD_ITEM) & (item < FIRST_WORD_ITEM + n_real_prons)
    # Each unit's states start at position 0: count those starts within every item.
    unit_start = (cat("position") == 0).astype(np.int64)
    before = np.cumsum(unit_start) - unit_start
    phone = np.where(tail, -1, np.cumsum(unit_start) - 1 - before[offsets[:-1]][item])

    src = np.concatenate([g.arc_src.astype(np.int64) + o for g, o in zip(graphs, offsets)])
    dst = np.concatenate([g.arc_dst.astype(np.int64) + o for g, o in zip(graphs, offsets)])
    lp = cat("arc_logp")
    order = np.argsort(src, kind="stable")
    arc_first = np.searchsorted(src[order], np.arange(offsets[-1] + 1)).astype(np.int64)

    init = cat("init_logp")
    start_state = np.flatnonzero(np.isfinite(init)).astype(np.int64)
    start_first = np.searchsorted(item[start_state], np.arange(len(graphs) + 1)).astype(np.int64)

    # Grammar link scores: weight * log P, plus the insertion penalty on every word.
    pen = float(grammar.insertion_penalty)
    unigram = _scaled(prior.unigram, grammar.weight)
    unigram[1:] += pen
    pair_logp = _scaled(prior.pair_logp, grammar.weight) + np.where(prior.pair_next > 0, pen, 0.0)
    pair_first = np.asarray(prior.pair_start, dtype=np.int64)
    backoff = _scaled(prior.backoff, grammar.weight)
    single_word = bool(grammar.single_word)
    if bg is not None:
        unigram, backoff, pair_first, pair_next, pair_logp = extend_links(
            unigram, backoff, pair_first, np.asarray(prior.pair_next, dtype=np.int64), pair_logp, bg, filler,
            single_word=single_word, allow_empty=bool(allow_empty))
        single_word = False  # the link tables carry the rule now
    else:
        pair_next = np.asarray(prior.pair_next, dtype=np.int64)

    pause_min = graphs[ENTRY_ITEM].min_frames()
    word_min = min(compose([[_unit_ids(words[v - 1], p, units)]], units).min_frames()
                   for p, v in zip(prons[:n_real_prons], pron_word))
    return Network(
        words=words,
        prons=tuple(prons),
        mixture=np.ascontiguousarray(mixture, dtype=np.int64),
        used_mixtures=used_mixtures.astype(np.int64),
        self_logp=np.ascontiguousarray(cat("self_logp"), dtype=np.float64),
        arc_first=arc_first,
        arc_dst=np.ascontiguousarray(dst[order]),
        arc_logp=np.ascontiguousarray(lp[order], dtype=np.float64),
        end_logp=np.ascontiguousarray(cat("final_logp"), dtype=np.float64),
        tail=np.ascontiguousarray(tail),
        item=item,
        start_first=start_first,
        start_state=start_state,
        start_logp=np.ascontiguousarray(init[start_state], dtype=np.float64),
        pron_word=np.array(pron_word, dtype=np.int64),
        word_first=np.array(word_first, dtype=np.int64),
        word_pron=np.arange(len(prons), dtype=np.int64),
        unigram=np.ascontiguousarray(unigram),
        backoff=np.ascontiguousarray(backoff),
        pair_first=pair_first,
        pair_next=np.ascontiguousarray(pair_next, dtype=np.int64),
        pair_logp=np.ascontiguousarray(pair_logp),
        single_word=single_word,
        allow_empty=bool(allow_empty),
        min_frames=int(2 * pause_min + word_min),
        background=bg,
        phone=np.ascontiguousarray(phone, dtype=np.int64),
    )
