"""Word alignment, error counts, per-word and per-speaker tables, and WER intervals.

The reference words of an utterance (what was said) are aligned with the recognised words
(what wordspot heard) by minimum edit distance with unit costs. Each aligned pair is a hit,
a substitution, a deletion (a reference word with nothing recognised) or an insertion (a
recognised word with nothing said). The word error rate is

    WER = (S + D + I) / N,        N = number of reference words.

Tie-break rule (several alignments can share the minimum edit count):

1. fewest edits S + D + I (unit costs);
2. among those, fewest substitutions, which is the same as most hits: a word is only said to
   be "recognised as" another word when no equally short alignment matches it;
3. any remaining tie (same counts, different pairing) is settled while tracing back from
   the ends of both sequences, preferring a hit or substitution, then a deletion, then an
   insertion.

Case, punctuation and spelling are compared exactly; normalise words before scoring.

Recordings with no command (an empty reference, "no command here") have N = 0: every word
recognised in them is an insertion, and here also a *false accept*. Beside the WER:

    miss rate = (S + D) / N          over the command items (N > 0), the reference words
                                     not recognised correctly;
    false accepts per hour = words recognised on the non-command items
                             / their total duration in hours.

Only non-command items give false accepts; an insertion within a command is a WER error.
"""

from __future__ import annotations

import math
import os
from collections import Counter
from dataclasses import dataclass, field
from typing import Iterable, Sequence

import numpy as np

from wordspot.errors import ScoringError

__all__ = [
    "ScoringError",
    "HIT",
    "SUBSTITUTION",
    "DELETION",
    "INSERTION",
    "AlignedPair",
    "WordAlignment",
    "align_words",
    "word_error_rate",
    "miss_rate",
    "false_accepts_per_hour",
    "ScoredUtterance",
    "UtteranceScore",
    "WordRow",
    "SpeakerRow",
    "ConfusionMatrix",
    "EvaluationResult",
    "bootstrap_wer_interval",
    "confusion_matrix",
    "score_utterances",
]

HIT = "hit"
SUBSTITUTION = "substitution"
DELETION = "deletion"
INSERTION = "insertion"

#: Default number of bootstrap replicates for the WER interval.
DEFAULT_REPLICATES = 1000
#: How many confusions each per-word row keeps.
CONFUSIONS_PER_WORD = 3
# Upper bound on the number of resampled indices held in memory at once.
_BOOTSTRAP_BLOCK = 2_000_000


@dataclass(frozen=True)
class AlignedPair:
    """One step of an alignment.

    Attributes
    ----------
    operation : {"hit", "substitution", "deletion", "insertion"}
    reference : str or None
        The reference word; None for an insertion.
    recognised : str or None
        The recognised word; None for a deletion.
    """

    operation: str
    reference: str | None
    recognised: str | None


@dataclass(frozen=True)
class WordAlignment:
    """The aligned pairs of one reference / recognised sequence, in order."""

    pairs: tuple[AlignedPair, ...]

    def _count(self, operation: str) -> int:
        return sum(1 for p in self.pairs if p.operation == operation)

    @property
    def hits(self) -> int:
        return self._count(HIT)

    @property
    def substitutions(self) -> int:
        return self._count(SUBSTITUTION)

    @property
    def deletions(self) -> int:
        return self._count(DELETION)

    @property
    def insertions(self) -> int:
        return self._count(INSERTION)

    @property
    def errors(self) -> int:
        """S + D + I."""
        return sum(1 for p in self.pairs if p.operation != HIT)

    @property
    def reference_words(self) -> int:
        """N, the number of reference words."""
        return sum(1 for p in self.pairs if p.reference is not None)

    @property
    def recognised_words(self) -> int:
        return sum(1 for p in self.pairs if p.recognised is not None)

    @property
    def wer(self) -> float:
        """Word error rate of this one sequence (see `word_error_rate` for N = 0)."""
        return word_error_rate(self.errors, self.reference_words)


def word_error_rate(errors: int, reference_words: int) -> float:
    """(S + D + I) / N.

    Parameters
    ----------
    errors : int >= 0
        S + D + I.
    reference_words : int >= 0
        N.

    Returns
    -------
    float
        ``errors / reference_words``. When N = 0 there is nothing to get wrong except
        insertions: the rate is 0.0 with no errors and ``math.inf`` otherwise.
    """
    if reference_words > 0:
        return errors / reference_words
    return 0.0 if errors == 0 else math.inf


def miss_rate(substitutions: int, deletions: int, reference_words: int) -> float | None:
    """(S + D) / N: the share of reference words not recognised correctly.

    A reference word counts as missed when the alignment deletes it or substitutes another
    word for it (common practice in keyword detection: a miss is a word said but not
    recognised). Insertions do not count. None when N = 0 (nothing could be missed).
    """
    return (substitutions + deletions) / reference_words if reference_words > 0 else None


def false_accepts_per_hour(false_accepts: int, seconds: float | None) -> float | None:
    """Words recognised on non-command audio per hour of that audio.

    None when the duration is unknown or zero (no non-command audio was scored).
    """
    if seconds is None or not seconds > 0:
        return None
    return false_accepts * 3600.0 / seconds


def _check_words(words, what: str) -> tuple[str, ...]:
    if isinstance(words, str):
        raise ScoringError(f"{what} must be a sequence of words, not the string {words!r}; split it first")
    words = tuple(words)
    for w in words:
        if not isinstance(w, str) or not w or w != w.strip() or len(w.split()) != 1:
            raise ScoringError(f"{what} holds {w!r}, which is not a single non-empty word")
    return words


def _cost_matrix(ref_ids: np.ndarray, hyp_ids: np.ndarray, step: int) -> np.ndarray:
    """Cumulative costs, shape (N + 1, M + 1): step per edit plus 1 per substitution."""
    n, m = len(ref_ids), len(hyp_ids)
    ramp = step * np.arange(m + 1, dtype=np.int64)
    cost = np.empty((n + 1, m + 1), dtype=np.int64)
    cost[0] = ramp
    for i in range(1, n + 1):
        sub = np.where(hyp_ids == ref_ids[i - 1], 0, step + 1)
        row = np.empty(m + 1, dtype=np.int64)
        row[0] = step * i
        row[1:] = np.minimum(cost[i - 1, :-1] + sub, cost[i - 1, 1:] + step)
        # insertions run along the row: row[j] = min over k <= j of row[k] + step * (j - k)
        cost[i] = np.minimum.accumulate(row - ramp) + ramp
    return cost


def align_words(reference: Sequence[str], recognised: Sequence[str]) -> WordAlignment:
    """Align two word sequences by minimum edit distance.

    Parameters
    ----------
    reference : sequence of str
        What was said (may be empty).
    recognised : sequence of str
        What was recognised (may be empty).

    Returns
    -------
    WordAlignment
        Pairs in order; ties are broken as the module docstring describes.
    """
    ref = _check_words(reference, "reference")
    hyp = _check_words(recognised, "recognised")
    ids: dict[str, int] = {}
    ref_ids = np.array([ids.setdefault(w, len(ids)) for w in ref], dtype=np.int64)
    hyp_ids = np.array([ids.setdefault(w, len(ids)) for w in hyp], dtype=np.int64)
    # cost = step * edits + substitutions; step > any substitution count keeps the order
    step = len(ref) + len(hyp) + 1
    cost = _cost_matrix(ref_ids, hyp_ids, step)
    pairs: list[AlignedPair] = []
    i, j = len(ref), len(hyp)
    while i > 0 or j > 0:
        here = cost[i, j]
        if i > 0 and j > 0:
            same = ref[i - 1] == hyp[j - 1]
            if here == cost[i - 1, j - 1] + (0 if same else step + 1):
                pairs.append(AlignedPair(HIT if same else SUBSTITUTION, ref[i - 1], hyp[j - 1]))
                i, j = i - 1, j - 1
                continue
        if i > 0 and here == cost[i - 1, j] + step:
            pairs.append(AlignedPair(DELETION, ref[i - 1], None))
            i -= 1
            continue
        pairs.append(AlignedPair(INSERTION, None, hyp[j - 1]))
        j -= 1
    return WordAlignment(tuple(reversed(pairs)))


@dataclass(frozen=True)
class ScoredUtterance:
    """One utterance to score: where it came from, who spoke, what was said and heard.

    ``seconds`` (the recording's duration) and ``confidences`` (one in [0, 1] per
    recognised word) are optional; false accepts per hour need the first, the detection
    trade-off (:mod:`wordspot.evaluation.detection`) the second. An empty ``reference``
    marks a recording with no command in it. ``heard`` and ``heard_confidences``, when
    given, are every word of the best path before the confidence threshold dropped some
    (``recognised`` being what was kept): the trade-off and the reliability table look at
    all of them.
    """

    path: str | os.PathLike
    speaker: str
    reference: tuple[str, ...]
    recognised: tuple[str, ...]
    seconds: float | None = None
    confidences: tuple[float, ...] | None = None
    heard: tuple[str, ...] | None = None
    heard_confidences: tuple[float, ...] | None = None

    def every_word(self) -> tuple[tuple[str, ...], tuple[float, ...] | None]:
        """(words, confidences) before the threshold: ``heard`` if given, else ``recognised``."""
        if self.heard is None:
            return self.recognised, self.confidences
        return self.heard, self.heard_confidences

    @classmethod
    def from_text(cls, path, speaker: str, reference: str, recognised: str) -> "ScoredUtterance":
        """Build from space-separated transcripts, compared case-insensitively (case-folded)."""
        return cls(path, speaker, tuple(reference.casefold().split()), tuple(recognised.casefold().split()))


@dataclass(frozen=True)
class UtteranceScore:
    """An utterance together with its alignment."""

    utterance: ScoredUtterance
    alignment: WordAlignment

    @property
    def errors(self) -> int:
        return self.alignment.errors


@dataclass(frozen=True)
class WordRow:
    """Per-word figures.

    ``reference_count`` counts the word in the references; ``errors`` = its substitutions +
    deletions; ``inserted`` counts it as an inserted recognised word (not part of
    ``errors``); ``confusions`` lists (recognised as, count) for its errors, most frequent
    first, with None standing for a deletion.
    """

    word: str
    reference_count: int
    substitutions: int
    deletions: int
    inserted: int
    confusions: tuple[tuple[str | None, int], ...]

    @property
    def errors(self) -> int:
        return self.substitutions + self.deletions

    @property
    def error_rate(self) -> float:
        """errors / reference_count (0.0 for a word that only appears as an insertion)."""
        return self.errors / self.reference_count if self.reference_count else 0.0

    def to_dict(self) -> dict:
        return {
            "word": self.word,
            "reference_count": self.reference_count,
            "errors": self.errors,
            "substitutions": self.substitutions,
            "deletions": self.deletions,
            "inserted": self.inserted,
            "error_rate": self.error_rate if self.reference_count else None,
            "confusions": [{"recognised_as": r, "count": c} for r, c in self.confusions],
        }


@dataclass(frozen=True)
class SpeakerRow:
    """Per-speaker figures."""

    speaker: str
    utterances: int
    utterance_errors: int
    reference_words: int
    substitutions: int
    deletions: int
    insertions: int

    @property
    def errors(self) -> int:
        return self.substitutions + self.deletions + self.insertions

    @property
    def wer(self) -> float:
        return word_error_rate(self.errors, self.reference_words)

    def to_dict(self) -> dict:
        return {
            "speaker": self.speaker,
            "utterances": self.utterances,
            "utterance_errors": self.utterance_errors,
            "reference_words": self.reference_words,
            "substitutions": self.substitutions,
            "deletions": self.deletions,
            "insertions": self.insertions,
            "errors": self.errors,
            "wer": _finite_or_none(self.wer),
        }


@dataclass(frozen=True)
class ConfusionMatrix:
    """Counts of reference word (rows) recognised as word (columns).

    The last row is the inserted words (nothing said), the last column the deleted words
    (nothing recognised); the corner is always 0. ``counts`` has shape
    (len(words) + 1, len(words) + 1).
    """

    words: tuple[str, ...]
    counts: np.ndarray = field(compare=False)


@dataclass(frozen=True)
class EvaluationResult:
    """Everything measured over a set of utterances (see `score_utterances`)."""

    scores: tuple[UtteranceScore, ...]
    hits: int
    substitutions: int
    deletions: int
    insertions: int
    reference_words: int
    recognised_words: int
    utterance_errors: int
    wer_ci95: tuple[float, float]
    n_bootstrap: int
    seed: int
    word_table: tuple[WordRow, ...]
    speaker_table: tuple[SpeakerRow, ...]
    non_command_utterances: int = 0
    false_accepts: int = 0
    non_command_seconds: float | None = None

    @property
    def utterances(self) -> int:
        return len(self.scores)

    @property
    def miss_rate(self) -> float | None:
        """(S + D) / N over the command items (see `miss_rate`); None without reference words."""
        return miss_rate(self.substitutions, self.deletions, self.reference_words)

    @property
    def false_accepts_per_hour(self) -> float | None:
        """Words recognised on non-command items per hour of them; None without such audio."""
        return false_accepts_per_hour(self.false_accepts, self.non_command_seconds)

    @property
    def errors(self) -> int:
        return self.substitutions + self.deletions + self.insertions

    @property
    def wer(self) -> float:
        return word_error_rate(self.errors, self.reference_words)

    @property
    def sentence_error_rate(self) -> float:
        """Share of utterances with at least one error."""
        return self.utterance_errors / self.utterances

    def to_dict(self) -> dict:
        """Plain JSON-ready dictionary (a rate that would be infinite becomes None)."""
        return {
            "wer": self.wer,
            "wer_ci95": [self.wer_ci95[0], self.wer_ci95[1]],
            "substitutions": self.substitutions,
            "deletions": self.deletions,
            "insertions": self.insertions,
            "hits": self.hits,
            "errors": self.errors,
            "reference_words": self.reference_words,
            "recognised_words": self.recognised_words,
            "utterances": self.utterances,
            "utterance_errors": self.utterance_errors,
            "sentence_error_rate": self.sentence_error_rate,
            "miss_rate": self.miss_rate,
            "non_command_utterances": self.non_command_utterances,
            "non_command_seconds": self.non_command_seconds,
            "false_accepts": self.false_accepts,
            "false_accepts_per_hour": self.false_accepts_per_hour,
            "bootstrap": {"replicates": self.n_bootstrap, "seed": self.seed},
            "words": [row.to_dict() for row in self.word_table],
            "speakers": [row.to_dict() for row in self.speaker_table],
        }


def _finite_or_none(x: float) -> float | None:
    return x if math.isfinite(x) else None


def bootstrap_wer_interval(
    errors: np.ndarray,
    reference_words: np.ndarray,
    *,
    n_bootstrap: int = DEFAULT_REPLICATES,
    seed: int = 0,
) -> tuple[float, float]:
    """95% percentile interval of the WER by resampling utterances with replacement.

    Each replicate draws as many utterances as there are, with replacement, and takes
    sum(errors) / sum(reference words) over the draw (Bisani and Ney, 2004, "Bootstrap
    estimates for confidence intervals in ASR performance evaluation"). The interval runs
    from the 2.5th to the 97.5th percentile of the replicates.

    Parameters
    ----------
    errors, reference_words : array of int, shape (U,)
        Per-utterance S + D + I and N; U >= 1.
    n_bootstrap : int >= 1
    seed : int

    Returns
    -------
    (low, high) : tuple of float
    """
    errors = np.asarray(errors, dtype=np.int64)
    reference_words = np.asarray(reference_words, dtype=np.int64)
    if errors.ndim != 1 or errors.shape != reference_words.shape or errors.size == 0:
        raise ScoringError(
            f"bootstrap needs two equal-length, non-empty 1-D arrays; got shapes {errors.shape} and {reference_words.shape}"
        )
    if isinstance(n_bootstrap, bool) or not isinstance(n_bootstrap, (int, np.integer)) or n_bootstrap < 1:
        raise ScoringError(f"n_bootstrap must be a whole number >= 1, got {n_bootstrap!r}; 1000 is usual")
    rng = np.random.default_rng(seed)
    n_utt = errors.size
    block = max(1, _BOOTSTRAP_BLOCK // n_utt)
    err_sums = np.empty(n_bootstrap, dtype=np.int64)
    ref_sums = np.empty(n_bootstrap, dtype=np.int64)
    for start in range(0, n_bootstrap, block):  # blocks of replicates bound the memory
        stop = min(start + block, n_bootstrap)
        draw = rng.integers(0, n_utt, size=(stop - start, n_utt))
        err_sums[start:stop] = errors[draw].sum(axis=1)
        ref_sums[start:stop] = reference_words[draw].sum(axis=1)
    with np.errstate(divide="ignore", invalid="ignore"):
        rates = np.where(
            ref_sums > 0, err_sums / np.maximum(ref_sums, 1), np.where(err_sums > 0, np.inf, 0.0)
        )
    return _quantile(rates, 0.025), _quantile(rates, 0.975)


def _quantile(values: np.ndarray, q: float) -> float:
    """numpy's default (linear) quantile, but infinite when the upper neighbour is infinite.

    A replicate drawing only recordings with no command and some words has WER inf;
    numpy's interpolation would turn inf - inf into NaN.
    """
    v = np.sort(values)
    pos = q * (v.size - 1)
    lo, hi = int(math.floor(pos)), int(math.ceil(pos))
    if lo == hi or math.isinf(v[hi]):
        return float(v[hi])
    return float(v[lo] + (pos - lo) * (v[hi] - v[lo]))


def _word_table(scores: Sequence[UtteranceScore]) -> tuple[WordRow, ...]:
    ref_count: Counter = Counter()
    subs: Counter = Counter()
    dels: Counter = Counter()
    ins: Counter = Counter()
    confusions: dict[str, Counter] = {}
    for score in scores:
        for p in score.alignment.pairs:
            if p.reference is not None:
                ref_count[p.reference] += 1
            if p.operation == SUBSTITUTION:
                subs[p.reference] += 1
                confusions.setdefault(p.reference, Counter())[p.recognised] += 1
            elif p.operation == DELETION:
                dels[p.reference] += 1
                confusions.setdefault(p.reference, Counter())[None] += 1
            elif p.operation == INSERTION:
                ins[p.recognised] += 1
    rows = []
    for word in set(ref_count) | set(ins):
        conf = confusions.get(word, Counter())
        top = sorted(conf.items(), key=lambda kv: (-kv[1], kv[0] is None, kv[0] or ""))
        rows.append(
            WordRow(word, ref_count[word], subs[word], dels[word], ins[word], tuple(top[:CONFUSIONS_PER_WORD]))
        )
    rows.sort(key=lambda r: (-r.errors, -r.inserted, -r.reference_count, r.word))
    return tuple(rows)


def _speaker_table(scores: Sequence[UtteranceScore]) -> tuple[SpeakerRow, ...]:
    by_speaker: dict[str, list[UtteranceScore]] = {}
    for score in scores:
        by_speaker.setdefault(score.utterance.speaker, []).append(score)
    rows = []
    for speaker in sorted(by_speaker):
        group = by_speaker[speaker]
        rows.append(
            SpeakerRow(
                speaker=speaker,
                utterances=len(group),
                utterance_errors=sum(1 for s in group if s.errors),
                reference_words=sum(s.alignment.reference_words for s in group),
                substitutions=sum(s.alignment.substitutions for s in group),
                deletions=sum(s.alignment.deletions for s in group),
                insertions=sum(s.alignment.insertions for s in group),
            )
        )
    return tuple(rows)


def score_utterances(
    records: Iterable[ScoredUtterance],
    *,
    n_bootstrap: int = DEFAULT_REPLICATES,
    seed: int = 0,
) -> EvaluationResult:
    """Align every utterance and gather totals, tables and the WER interval.

    Parameters
    ----------
    records : iterable of ScoredUtterance
        At least one, with at least one reference word over the whole set.
    n_bootstrap : int >= 1
        Bootstrap replicates for ``wer_ci95``.
    seed : int
        Seed of the resampling, so the interval is reproducible.

    Returns
    -------
    EvaluationResult
    """
    records = tuple(records)
    if not records:
        raise ScoringError("nothing to score: no recordings were given")
    scores = []
    for rec in records:
        if not isinstance(rec, ScoredUtterance):
            raise ScoringError(f"score_utterances expects ScoredUtterance records, got {type(rec).__name__}")
        if not isinstance(rec.speaker, str):
            raise ScoringError(f"{rec.path}: speaker must be a string, got {rec.speaker!r}; use '' when unknown")
        try:
            alignment = align_words(rec.reference, rec.recognised)
        except ScoringError as exc:
            raise ScoringError(f"{rec.path}: {exc}") from None
        scores.append(UtteranceScore(rec, alignment))
    errors = np.array([s.errors for s in scores], dtype=np.int64)
    n_ref = np.array([s.alignment.reference_words for s in scores], dtype=np.int64)
    # A set of recordings with no command at all (every transcript empty) is scored for its
    # false accepts; its WER is 0 with no word heard and infinite otherwise (N = 0).
    ci = bootstrap_wer_interval(errors, n_ref, n_bootstrap=n_bootstrap, seed=seed)
    quiet = [s.utterance for s in scores if not s.utterance.reference]
    durations = [u.seconds for u in quiet]
    return EvaluationResult(
        scores=tuple(scores),
        hits=sum(s.alignment.hits for s in scores),
        substitutions=sum(s.alignment.substitutions for s in scores),
        deletions=sum(s.alignment.deletions for s in scores),
        insertions=sum(s.alignment.insertions for s in scores),
        reference_words=int(n_ref.sum()),
        recognised_words=sum(s.alignment.recognised_words for s in scores),
        utterance_errors=int(np.count_nonzero(errors)),
        wer_ci95=ci,
        n_bootstrap=int(n_bootstrap),
        seed=seed,
        word_table=_word_table(scores),
        speaker_table=_speaker_table(scores),
        non_command_utterances=len(quiet),
        false_accepts=sum(len(u.recognised) for u in quiet),
        non_command_seconds=(float(sum(durations)) if quiet and None not in durations else None),
    )


def confusion_matrix(result: EvaluationResult) -> ConfusionMatrix:
    """Count reference word -> recognised word over all alignments, with insertion/deletion slots."""
    words = sorted(
        {p.reference for s in result.scores for p in s.alignment.pairs if p.reference is not None}
        | {p.recognised for s in result.scores for p in s.alignment.pairs if p.recognised is not None}
    )
    index = {w: k for k, w in enumerate(words)}
    extra = len(words)  # last row: inserted; last column: deleted
    counts = np.zeros((extra + 1, extra + 1), dtype=np.int64)
    for s in result.scores:
        for p in s.alignment.pairs:
            r = index[p.reference] if p.reference is not None else extra
            c = index[p.recognised] if p.recognised is not None else extra
            counts[r, c] += 1
    return ConfusionMatrix(tuple(words), counts)
