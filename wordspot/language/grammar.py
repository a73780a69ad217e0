"""The word grammar: word-pair counts, the smoothed bigram prior and its settings.

Index 0 of every word-pair table is the utterance boundary: as a *previous* word it means
"the utterance has just begun" (entry -> word), as a *next* word it means "the utterance
ends here" (word -> exit). Row 0, column 0 is the empty utterance (nothing but pause).

Smoothing (:func:`estimate_prior`): absolute discounting with back-off to add-one
smoothed unigrams (Ney, Essen & Kneser 1994, "On structuring probabilistic dependences in
stochastic language modelling", Computer Speech and Language 8). For a previous word
``v`` with pair counts ``c(v, w)``, total ``N(v)`` and ``n(v)`` distinct successors::

    P(w | v) = (c(v, w) - D) / N(v)                      if c(v, w) > 0
             = alpha(v) * U(w) / sum_{u: c(v,u)=0} U(u)   otherwise
    alpha(v) = D * n(v) / N(v)

with the discount ``D = n1 / (n1 + 2 n2)`` from the numbers of pairs seen once (n1) and
twice (n2) (the estimate given in the same paper), clipped to [0.1, 0.9], or 0.5 when it
cannot be estimated (common practice). ``U(w)``, proportional to ``c(., w) + 1``, counts how often
``w`` (or the exit) follows anything, plus one. In a prior estimated from training
transcripts, a vocabulary word that no transcript holds counts as often as the mean
recorded word (:func:`unigram_counts`), and after every previous word with counts it is
as likely as the mean recorded word is there (the row's other probabilities scaled down
to make room), so words added by pronunciation alone get a prior comparable to recorded
ones wherever they are said. A row with no counts is ``U``; a
row in which every successor was seen keeps its plain relative frequencies. So no
probability is ever zero and every row sums to one.

Prior file (our own plain-text format, UTF-8)::

    # how often one command follows another; '^' = start, '$' = end of utterance
    ^      oven   12
    oven   start  10
    start  $      10

One pair a line: previous word, next word, a whole-number count >= 0, separated by spaces.
``#`` starts a comment; blank lines are ignored; words are matched case-insensitively;
a pair listed twice adds up. The counts are smoothed as above, so unlisted pairs keep a
small probability.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np

from wordspot.errors import GrammarError

__all__ = [
    "BigramCounts",
    "count_bigrams",
    "BOUNDARY",
    "START_MARK",
    "END_MARK",
    "GrammarSettings",
    "BigramPrior",
    "estimate_prior",
    "uniform_prior",
    "read_prior",
    "prior_for_vocabulary",
    "unigram_counts",
]

BOUNDARY = "<edge>"
START_MARK = "^"  # prior file: "the utterance begins"
END_MARK = "$"  # prior file: "the utterance ends"

_DEFAULT_DISCOUNT = 0.5  # (common practice) when count-of-counts give no estimate
_DISCOUNT_RANGE = (0.1, 0.9)


@dataclass
class BigramCounts:
    """How often each word follows each other word in a set of transcripts.

    Attributes
    ----------
    words : tuple of str
        The vocabulary; word ``words[i]`` is row/column ``i + 1``.
    counts : ndarray of int64, shape (V + 1, V + 1)
        ``counts[a, b]``: times ``b`` followed ``a``; index 0 is the boundary.
    """

    words: tuple[str, ...]
    counts: np.ndarray


def count_bigrams(transcripts, vocabulary=None) -> BigramCounts:
    """Count word pairs (with the boundary) over word sequences.

    Parameters
    ----------
    transcripts : iterable of sequence of str
    vocabulary : iterable of str, optional
        Words to index (default: every word seen, sorted). Words outside it are ignored
        together with the pairs they belong to.
    """
    transcripts = [tuple(t) for t in transcripts]
    if vocabulary is None:
        vocabulary = sorted({w for t in transcripts for w in t})
    words = tuple(vocabulary)
    index = {w: i + 1 for i, w in enumerate(words)}
    counts = np.zeros((len(words) + 1, len(words) + 1), dtype=np.int64)
    for t in transcripts:
        ids = [0] + [index.get(w, -1) for w in t] + [0]
        for a, b in zip(ids[:-1], ids[1:]):
            if a >= 0 and b >= 0:
                counts[a, b] += 1
    return BigramCounts(words, counts)


@dataclass(frozen=True)
class GrammarSettings:
    """How the prior enters the search.

    Parameters
    ----------
    weight : float >= 0
        Multiplies every log prior probability (0 ignores the prior).
    insertion_penalty : float
        Added (in log units) for every word; negative values favour fewer words.
    single_word : bool
        Exactly one word between the entry and the exit pause (isolated commands).
    """

    weight: float = 1.0
    insertion_penalty: float = 0.0
    single_word: bool = False

    def __post_init__(self) -> None:
        if not (np.isfinite(self.weight) and self.weight >= 0):
            raise GrammarError(f"grammar weight must be a finite number >= 0, got {self.weight!r}")
        if not np.isfinite(self.insertion_penalty):
            raise GrammarError(
                f"insertion penalty must be a finite number, got {self.insertion_penalty!r}"
            )


@dataclass
class BigramPrior:
    """Smoothed log P(next | previous) over a vocabulary plus the boundary.

    Stored in back-off form so that a large vocabulary needs O(V + pairs) memory:
    ``log P(w | v) = pair_logp`` for the listed pairs, else ``backoff[v] + unigram[w]``.

    Attributes
    ----------
    words : tuple of str
        Word ``words[i]`` has index ``i + 1``; index 0 is the boundary.
    unigram : ndarray, shape (V + 1,)
        Log unigram term of every next word (index 0: the exit).
    backoff : ndarray, shape (V + 1,)
        Log back-off weight of every previous word (index 0: the entry), already
        divided by the unseen unigram mass of its row.
    pair_start : ndarray of int64, shape (V + 2,)
        Listed pairs of previous word ``v`` are ``pair_start[v]:pair_start[v + 1]``.
    pair_next : ndarray of int64, shape (pairs,)
    pair_logp : ndarray of float, shape (pairs,)
    method : str
        One line saying how it was estimated.
    """

    words: tuple[str, ...]
    unigram: np.ndarray
    backoff: np.ndarray
    pair_start: np.ndarray
    pair_next: np.ndarray
    pair_logp: np.ndarray
    method: str = ""

    @property
    def n_words(self) -> int:
        return len(self.words)

    def log_row(self, previous: int) -> np.ndarray:
        """Log P(. | previous) over all V + 1 next indices (0 = exit)."""
        row = self.backoff[previous] + self.unigram
        a, b = self.pair_start[previous], self.pair_start[previous + 1]
        row[self.pair_next[a:b]] = self.pair_logp[a:b]
        return row

    def log_matrix(self) -> np.ndarray:
        """Dense (V + 1, V + 1) table of log P(next | previous); for small vocabularies."""
        return np.stack([self.log_row(v) for v in range(self.n_words + 1)])

    def logprob(self, previous: str | None, following: str | None) -> float:
        """Log P(following | previous); ``None`` stands for the boundary."""
        index = {w: i + 1 for i, w in enumerate(self.words)}
        v = 0 if previous is None else index[previous]
        w = 0 if following is None else index[following]
        return float(self.log_row(v)[w])


def _discount(counts: np.ndarray) -> float:
    n1 = int(np.count_nonzero(counts == 1))
    n2 = int(np.count_nonzero(counts == 2))
    if n1 == 0 or n2 == 0:
        return _DEFAULT_DISCOUNT
    d = n1 / (n1 + 2.0 * n2)  # Ney, Essen & Kneser 1994
    return float(np.clip(d, *_DISCOUNT_RANGE))


def unigram_counts(counts: np.ndarray) -> np.ndarray:
    """How often each word (column) follows anything, with a fair share for unrecorded words.

    A word of the vocabulary that no transcript holds (column count 0) counts as often as
    the mean recorded word, so that a word added by its pronunciation alone is not pushed
    towards the words the user happened to record. Index 0 (the exit) keeps its count.
    With no recorded word at all, every count stays 0 (the prior is then uniform).
    """
    col = np.asarray(counts, dtype=np.float64).sum(axis=0)
    words = col[1:]
    recorded = words > 0
    if recorded.any() and not recorded.all():
        words = np.where(recorded, words, words[recorded].mean())
    return np.concatenate([col[:1], words])


def _fair_row(seen, logp, backoff, log_uni, recorded, unrecorded):
    """One row of listed pairs in which every unrecorded word is as likely as the mean recorded word.

    ``seen``/``logp`` are the row's listed next words and log probabilities, ``backoff``
    its log back-off weight (next words not listed get ``backoff + log_uni``). Returns the
    row's listed words (the unrecorded ones added, sorted), their log probabilities and the
    back-off weight, all scaled so that the row still sums to one.
    """
    row = backoff + log_uni  # the row as it was, over every next index
    row[seen] = logp
    with np.errstate(divide="ignore"):
        fair = np.log(np.mean(np.exp(row[recorded])))
        log_z = np.log(1.0 - np.exp(row[unrecorded]).sum() + unrecorded.size * np.exp(fair))
    words = np.concatenate([seen, unrecorded])
    values = np.concatenate([logp, np.full(unrecorded.size, fair)])
    order = np.argsort(words, kind="stable")
    return words[order], values[order] - log_z, backoff - log_z


def _from_counts(words: tuple[str, ...], counts: np.ndarray, method: str, *,
                 fair_new_words: bool = False) -> BigramPrior:
    counts = np.asarray(counts, dtype=np.float64)
    n = counts.shape[0]
    uni = (unigram_counts(counts) if fair_new_words else counts.sum(axis=0)) + 1.0
    uni /= uni.sum()
    d = _discount(counts)
    column = counts.sum(axis=0)
    recorded = np.flatnonzero(column[1:] > 0) + 1
    unrecorded = np.flatnonzero(column[1:] <= 0) + 1
    log_uni = np.log(uni)
    backoff = np.zeros(n)
    starts = [0]
    nexts: list[np.ndarray] = []
    logps: list[np.ndarray] = []
    for v in range(n):
        row = counts[v]
        total = row.sum()
        seen = np.flatnonzero(row > 0)
        unseen_mass = 1.0 - uni[seen].sum()
        if total <= 0:
            backoff[v] = 0.0  # plain unigram
            starts.append(starts[-1])
            continue
        if seen.size == n or unseen_mass <= 0:
            probs = row[seen] / total  # every successor seen: nothing to back off to
            backoff[v] = -np.inf
        else:
            probs = (row[seen] - d) / total
            alpha = d * seen.size / total
            backoff[v] = np.log(alpha) - np.log(unseen_mass)
        logp = np.log(probs)
        if fair_new_words and unrecorded.size and recorded.size:
            seen, logp, backoff[v] = _fair_row(seen, logp, backoff[v], log_uni, recorded, unrecorded)
        nexts.append(seen.astype(np.int64))
        logps.append(logp)
        starts.append(starts[-1] + seen.size)
    return BigramPrior(
        words=tuple(words),
        unigram=log_uni,
        backoff=backoff,
        pair_start=np.array(starts, dtype=np.int64),
        pair_next=np.concatenate(nexts) if nexts else np.zeros(0, dtype=np.int64),
        pair_logp=np.concatenate(logps) if logps else np.zeros(0),
        method=method,
    )


def estimate_prior(counts: BigramCounts) -> BigramPrior:
    """Smoothed prior from word-pair counts (absolute discounting, back-off to unigrams).

    Parameters
    ----------
    counts : BigramCounts

    Returns
    -------
    BigramPrior
        Every probability is positive and every row sums to one.
    """
    c = np.asarray(counts.counts)
    v = len(counts.words)
    if c.shape != (v + 1, v + 1) or np.any(c < 0):
        raise GrammarError(
            f"word-pair counts must be a non-negative ({v + 1} x {v + 1}) table, got shape {c.shape}"
        )
    return _from_counts(
        counts.words, c,
        "absolute discounting with back-off to add-one unigrams (Ney, Essen & Kneser 1994); "
        "unrecorded words as likely as the mean recorded word",
        fair_new_words=True,
    )


def uniform_prior(words) -> BigramPrior:
    """Every next word (and the exit) equally likely after every previous word."""
    words = tuple(words)
    n = len(words) + 1
    return BigramPrior(
        words=words,
        unigram=np.full(n, -np.log(n)),
        backoff=np.zeros(n),
        pair_start=np.zeros(n + 1, dtype=np.int64),
        pair_next=np.zeros(0, dtype=np.int64),
        pair_logp=np.zeros(0),
        method="uniform over the vocabulary",
    )


def read_prior(path, words) -> BigramPrior:
    """Read a prior file (format in the module docstring) for the vocabulary ``words``.

    Raises
    ------
    GrammarError
        The file is missing or unreadable, or a line is malformed or names a word
        outside the vocabulary (the message gives the file and line number).
    """
    path = Path(path)
    words = tuple(words)
    index = {w.lower(): i + 1 for i, w in enumerate(words)}
    try:
        text = path.read_text(encoding="utf-8")
    except FileNotFoundError:
        raise GrammarError(f"{path}: prior file not found; check the path") from None
    except (OSError, UnicodeDecodeError) as exc:
        raise GrammarError(f"{path}: cannot read the prior file ({exc}); it must be UTF-8 text") from None
    counts = np.zeros((len(words) + 1, len(words) + 1), dtype=np.int64)

    def lookup(token: str, mark: str, lineno: int) -> int:
        if token == mark:
            return 0
        key = token.lower()
        if key not in index:
            raise GrammarError(
                f"{path}, line {lineno}: word {token!r} is not in the vocabulary; "
                "add it to the lexicon or remove the line"
            )
        return index[key]

    for lineno, line in enumerate(text.splitlines(), start=1):
        body = line.split("#", 1)[0].split()
        if not body:
            continue
        if len(body) != 3:
            raise GrammarError(
                f"{path}, line {lineno}: expected 'previous next count', got {line.strip()!r}"
            )
        prev, nxt, num = body
        try:
            value = int(num)
        except ValueError:
            value = -1
        if value < 0:
            raise GrammarError(
                f"{path}, line {lineno}: count must be a whole number >= 0, got {num!r}"
            )
        if prev == END_MARK or nxt == START_MARK:
            raise GrammarError(
                f"{path}, line {lineno}: {END_MARK!r} may only be a next word and "
                f"{START_MARK!r} only a previous word"
            )
        counts[lookup(prev, START_MARK, lineno), lookup(nxt, END_MARK, lineno)] += value
    prior = _from_counts(words, counts, f"from prior file {path.name}, absolute discounting (Ney, Essen & Kneser 1994)")
    return prior


def prior_for_vocabulary(words, counts: BigramCounts | None = None, path=None) -> BigramPrior:
    """The prior to decode ``words`` with.

    A prior file wins; otherwise the counts are used when they cover exactly the same
    vocabulary; otherwise (a new vocabulary) every word is equally likely.
    """
    words = tuple(words)
    if path is not None:
        return read_prior(path, words)
    if counts is not None and tuple(counts.words) == words:
        return estimate_prior(counts)
    if counts is not None and set(counts.words) == set(words):
        order = [0] + [counts.words.index(w) + 1 for w in words]
        c = np.asarray(counts.counts)[np.ix_(order, order)]
        return estimate_prior(BigramCounts(words, c))
    return uniform_prior(words)
