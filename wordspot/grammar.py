"""Word-to-word statistics of the training transcripts (the raw material of the prior).

Index 0 of the count matrix is the utterance boundary: row 0 counts words that open an
utterance (entry -> word) and column 0 counts words that close one (word -> exit).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["BigramCounts", "count_bigrams", "BOUNDARY"]

BOUNDARY = "<edge>"


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
