"""What competes with the command words: a free phone loop (the filler) and mid-utterance pauses.

Without them the word loop can only say "one of my words" or "the pause": talk that is no
command comes out as commands, and a long pause between two commands has nothing to go
to but the exit pause. With them the network's word index space grows by *background
words* placed after the real vocabulary:

* the **filler**: one item per phone of the model (its three states, no trailing gap);
  going through the filler once is one phone, and every phone costs ``phone_penalty``;
  so a stretch of speech that spells none of the commands is explained phone by phone;
* the **pause**: one item holding the whole pause unit (with its own skip-and-return
  arcs), entered between words for ``pause_penalty``: a long pause between commands stays
  a pause.

A command is then reported only where its word's path (acoustics, prior and insertion
penalty) beats the filler's phones over the same frames. The link scores of the
background words are laid into the prior's back-off tables as listed pairs (their
unigram terms are -inf), so the search kernel needs no special case:

* command ``v`` -> filler: ``phone_penalty``; -> pause: ``pause_penalty``;
* filler -> filler: ``phone_penalty``; filler <-> pause: the penalty of the one entered;
* filler or pause -> command ``w``: the links out of the entry (``v = 0``), as if a new
  utterance began (the prior knows nothing of what was said in the filler);
* filler or pause -> exit: 0.

For one command per file (``single_word``), there are two copies of each background word,
one before and one after the command, and a command may be followed only by the second
copies or the exit: "one command or none" is then a property of the link tables alone.
The same two copies keep "at least one command" when the empty result is not allowed
(only the copy after a command may reach the exit).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from wordspot.errors import DecodingError

__all__ = ["FillerSettings", "BackgroundWords", "background_words", "extend_links", "check_penalty"]

_NEG = -np.inf


@dataclass(frozen=True)
class FillerSettings:
    """The background words' switches and penalties (log units).

    Parameters
    ----------
    enabled : bool
        Let the filler and mid-utterance pauses compete with the commands.
    phone_penalty : float <= 0
        Added for every phone the filler spells: the lower, the more readily speech is
        taken for a command.
    pause_penalty : float <= 0
        Added when a pause between words begins.
    frame_penalty : float <= 0
        Added for every frame the filler spells (on its self-loops and arcs, and on the
        link into each of its phones).
    """

    enabled: bool = True
    phone_penalty: float = -100.0
    pause_penalty: float = -10.0
    frame_penalty: float = 0.0

    def __post_init__(self) -> None:
        for name in ("phone_penalty", "pause_penalty", "frame_penalty"):
            check_penalty(getattr(self, name), name)


def check_penalty(value, name: str) -> None:
    """A penalty is a finite number <= 0 (``DecodingError`` naming ``name`` otherwise)."""
    if not (isinstance(value, (int, float)) and np.isfinite(value) and value <= 0):
        raise DecodingError(f"{name} must be a finite number <= 0, got {value!r}")


@dataclass(frozen=True)
class BackgroundWords:
    """Word indices of the background words (after the ``n_real`` commands).

    ``fillers`` and ``pauses`` hold one index (word loop) or two (one command per file:
    before, after).
    """

    n_real: int
    fillers: tuple[int, ...]
    pauses: tuple[int, ...]

    @property
    def n_words(self) -> int:
        """Commands plus background words (the boundary, index 0, not counted)."""
        return self.n_real + len(self.fillers) + len(self.pauses)


def background_words(n_real: int, single_word: bool, allow_empty: bool = True) -> BackgroundWords:
    """Indices of the background words for a vocabulary of ``n_real`` commands.

    Two copies (before and after the first command) when the grammar must count commands:
    one command per file, or at least one command (``allow_empty`` off).
    """
    if single_word or not allow_empty:
        return BackgroundWords(n_real, (n_real + 1, n_real + 3), (n_real + 2, n_real + 4))
    return BackgroundWords(n_real, (n_real + 1,), (n_real + 2,))


def extend_links(unigram, backoff, pair_first, pair_next, pair_logp, bg: BackgroundWords,
                 settings: FillerSettings, *, single_word: bool, allow_empty: bool):
    """Link tables (back-off form, weight and penalty applied) with the background words added.

    Parameters
    ----------
    unigram, backoff : ndarray, shape (V + 1,)
    pair_first : ndarray, shape (V + 2,)
    pair_next, pair_logp : ndarray
        The commands' link scores as the kernel reads them.
    bg : BackgroundWords
    settings : FillerSettings
    single_word, allow_empty : bool

    Returns
    -------
    unigram, backoff, pair_first, pair_next, pair_logp : ndarray
        Over ``bg.n_words + 1`` words. With ``single_word`` every restriction is in the
        tables (commands back off to nothing), so the kernel's own single-word rule must
        be switched off.
    """
    n_real, n_all = bg.n_real, bg.n_words
    fp = float(settings.phone_penalty) + float(settings.frame_penalty)
    pp = float(settings.pause_penalty)
    pre_f, pre_p = bg.fillers[0], bg.pauses[0]
    post_f, post_p = bg.fillers[-1], bg.pauses[-1]

    def listed(v):
        a, b = pair_first[v], pair_first[v + 1]
        return dict(zip(pair_next[a:b].tolist(), pair_logp[a:b].tolist()))

    def entry_row():
        """The entry's listed pairs to commands (its exit pair belongs to the entry alone)."""
        return {w: lp for w, lp in listed(0).items() if w > 0}

    rows: list[dict[int, float]] = []
    new_backoff = np.full(n_all + 1, _NEG)
    # the entry: its own links, plus the first background words
    row = listed(0)
    row.update({pre_f: fp})
    rows.append(row)
    new_backoff[0] = backoff[0]
    # commands
    for v in range(1, n_real + 1):
        if single_word:
            exit_score = listed(v).get(0, backoff[v] + unigram[0])
            rows.append({0: exit_score, post_f: fp, post_p: pp})
        else:
            row = listed(v)
            row.update({post_f: fp, post_p: pp})
            rows.append(row)
            new_backoff[v] = backoff[v]
    # background words: the copy before any command may go on to a command (as from the
    # entry) and, if the empty result is allowed, to the exit; the copy after a command
    # to the exit and, in the word loop, to another command. With one copy it is both.
    for v in range(n_real + 1, n_all + 1):
        before = v in (pre_f, pre_p)
        after = v in (post_f, post_p)
        f, p = (pre_f, pre_p) if before else (post_f, post_p)
        row = {f: fp}
        if v in bg.fillers:
            row[p] = pp
        if (before or not single_word):
            row.update(entry_row())
            new_backoff[v] = backoff[0]
        # the exit: listed, so that the back-off term never opens it where it is closed
        row[0] = 0.0 if (before and allow_empty) or after else _NEG
        rows.append(row)

    new_unigram = np.concatenate([unigram, np.full(n_all - n_real, _NEG)])
    counts = np.array([len(r) for r in rows], dtype=np.int64)
    first = np.concatenate([[0], np.cumsum(counts)]).astype(np.int64)
    nxt = np.concatenate([np.array(sorted(r), dtype=np.int64) for r in rows])
    lp = np.concatenate([np.array([r[w] for w in sorted(r)], dtype=np.float64) for r in rows])
    return new_unigram, new_backoff, first, nxt, lp
