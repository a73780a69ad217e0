"""Text rendering of an evaluation and the report folder (CSV tables, JSON, confusion picture).

The layout is wordspot's own: a short summary block, then a per-word and a per-speaker table
in aligned plain-text columns. `write_report` writes the same figures as files a spreadsheet
opens, plus ``confusions.png`` when matplotlib is installed.
"""

from __future__ import annotations

import csv
import json
import warnings
from dataclasses import dataclass
from pathlib import Path

from wordspot.errors import WordspotError, WordspotWarning
from wordspot.evaluation.scoring import EvaluationResult, WordRow, confusion_matrix

__all__ = [
    "DELETED_LABEL",
    "INSERTED_LABEL",
    "ReportFiles",
    "format_percent",
    "render_summary",
    "render_word_table",
    "render_speaker_table",
    "render_result",
    "write_report",
]

#: How a deletion (nothing recognised) is shown in tables and the picture.
DELETED_LABEL = "(deleted)"
#: How an insertion (nothing said) is shown in the picture.
INSERTED_LABEL = "(inserted)"


def format_percent(x: float | None) -> str:
    """A rate as a percentage with two decimals; "n/a" for a missing rate, "inf" for infinity."""
    if x is None or x != x:
        return "n/a"
    if x == float("inf"):
        return "inf"
    return f"{100.0 * x:.2f}%"


_pct = format_percent


def _columns(header: list[str], rows: list[list[str]], right: set[int]) -> str:
    widths = [max(len(r[k]) for r in [header] + rows) for k in range(len(header))]

    def line(cells):
        out = [c.rjust(w) if k in right else c.ljust(w) for k, (c, w) in enumerate(zip(cells, widths))]
        return "  ".join(out).rstrip()

    rule = "  ".join("-" * w for w in widths)
    return "\n".join([line(header), rule] + [line(r) for r in rows])


def _confusion_text(row: WordRow, sep: str = ", ") -> str:
    return sep.join(f"{DELETED_LABEL if r is None else r} x{c}" for r, c in row.confusions)


def render_summary(result: EvaluationResult, *, title: str | None = None) -> str:
    """The summary block: WER with its interval, the error counts, the utterance error rate."""
    low, high = result.wer_ci95
    lines = [title] if title else []
    lines += [
        f"utterances scored       {result.utterances}",
        f"reference words         {result.reference_words}",
        f"word error rate         {_pct(result.wer)}   "
        f"(95% interval {_pct(low)} .. {_pct(high)}, {result.n_bootstrap} bootstrap replicates)",
        f"  substitutions         {result.substitutions}",
        f"  deletions             {result.deletions}",
        f"  insertions            {result.insertions}",
        f"  correct words         {result.hits}",
        f"utterances with errors  {result.utterance_errors} of {result.utterances} "
        f"({_pct(result.sentence_error_rate)})",
    ]
    return "\n".join(lines)


def render_word_table(result: EvaluationResult, *, limit: int | None = None) -> str:
    """Per-word table, most errors first; ``limit`` keeps only the first rows."""
    rows = result.word_table if limit is None else result.word_table[:limit]
    body = [
        [
            r.word,
            str(r.reference_count),
            str(r.errors),
            _pct(r.error_rate) if r.reference_count else "-",
            str(r.inserted),
            _confusion_text(r),
        ]
        for r in rows
    ]
    header = ["word", "said", "errors", "error rate", "inserted", "heard instead"]
    text = _columns(header, body, right={1, 2, 3, 4})
    hidden = len(result.word_table) - len(rows)
    if hidden > 0:
        text += f"\n({hidden} more words in the report folder's words.csv)"
    return text


def render_speaker_table(result: EvaluationResult) -> str:
    """Per-speaker table in speaker order."""
    body = [
        [
            r.speaker,
            str(r.utterances),
            str(r.reference_words),
            str(r.substitutions),
            str(r.deletions),
            str(r.insertions),
            _pct(r.wer),
            str(r.utterance_errors),
        ]
        for r in result.speaker_table
    ]
    header = ["speaker", "utterances", "words", "subst", "del", "ins", "WER", "utts with errors"]
    return _columns(header, body, right=set(range(1, 8)))


def render_result(result: EvaluationResult, *, title: str | None = None, word_limit: int | None = 20) -> str:
    """Summary, per-word and per-speaker tables as one text block."""
    return "\n\n".join(
        [
            render_summary(result, title=title),
            "By word\n" + render_word_table(result, limit=word_limit),
            "By speaker\n" + render_speaker_table(result),
        ]
    )


@dataclass(frozen=True)
class ReportFiles:
    """Paths written by `write_report`; ``confusions`` is None when no picture was drawn."""

    folder: Path
    errors: Path
    words: Path
    speakers: Path
    summary: Path
    confusions: Path | None


def _write_csv(path: Path, header: list[str], rows) -> None:
    with open(path, "w", newline="", encoding="utf-8") as fh:
        writer = csv.writer(fh)
        writer.writerow(header)
        writer.writerows(rows)


def _draw_confusions(result: EvaluationResult, path: Path) -> bool:
    try:
        from matplotlib.backends.backend_agg import FigureCanvasAgg
        from matplotlib.figure import Figure
    except ImportError:
        warnings.warn(
            "matplotlib is not installed, so confusions.png was not drawn; "
            "install it with: pip install matplotlib",
            WordspotWarning,
            stacklevel=3,
        )
        return False
    cm = confusion_matrix(result)
    rows = list(cm.words) + [INSERTED_LABEL]
    cols = list(cm.words) + [DELETED_LABEL]
    side = min(max(4.0, 0.45 * len(rows) + 2.5), 24.0)
    fig = Figure(figsize=(side, side), dpi=100)
    FigureCanvasAgg(fig)
    ax = fig.add_subplot()
    image = ax.imshow(cm.counts, cmap="Blues", interpolation="nearest")
    fig.colorbar(image, ax=ax, fraction=0.046, pad=0.04, label="count")
    ax.set_xticks(range(len(cols)), labels=cols, rotation=60, ha="right")
    ax.set_yticks(range(len(rows)), labels=rows)
    ax.set_xlabel("recognised as")
    ax.set_ylabel("said")
    ax.set_title(f"Word confusions (WER {_pct(result.wer)})")
    if len(rows) <= 30:
        top = cm.counts.max() or 1
        for r in range(cm.counts.shape[0]):
            for c in range(cm.counts.shape[1]):
                n = int(cm.counts[r, c])
                if n:
                    colour = "white" if n > 0.6 * top else "black"
                    ax.text(c, r, str(n), ha="center", va="center", fontsize=8, color=colour)
    fig.tight_layout()
    fig.savefig(path)
    return True


def write_report(result: EvaluationResult, folder, *, picture: bool = True) -> ReportFiles:
    """Write the report folder.

    Files: ``errors.csv`` (file, reference, recognised; only utterances with errors),
    ``words.csv``, ``speakers.csv``, ``summary.json`` (`EvaluationResult.to_dict`) and, when
    ``picture`` is true and matplotlib is installed, ``confusions.png`` (a warning is issued
    if matplotlib is missing).

    Parameters
    ----------
    result : EvaluationResult
    folder : str or path
        Created if missing; existing files of the same names are replaced.
    picture : bool

    Returns
    -------
    ReportFiles
    """
    folder = Path(folder)
    try:
        folder.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise WordspotError(f"cannot create the report folder {folder}: {exc.strerror or exc}") from None
    if not folder.is_dir():
        raise WordspotError(f"the report folder {folder} is not a folder; choose another path")
    paths = ReportFiles(
        folder=folder,
        errors=folder / "errors.csv",
        words=folder / "words.csv",
        speakers=folder / "speakers.csv",
        summary=folder / "summary.json",
        confusions=folder / "confusions.png",
    )
    try:
        _write_csv(
            paths.errors,
            ["file", "reference", "recognised"],
            (
                [str(s.utterance.path), " ".join(s.utterance.reference), " ".join(s.utterance.recognised)]
                for s in result.scores
                if s.errors
            ),
        )
        _write_csv(
            paths.words,
            ["word", "reference_count", "errors", "substitutions", "deletions", "inserted", "error_rate",
             "heard_instead"],
            (
                [r.word, r.reference_count, r.errors, r.substitutions, r.deletions, r.inserted,
                 f"{r.error_rate:.6f}" if r.reference_count else "", _confusion_text(r, sep="; ")]
                for r in result.word_table
            ),
        )
        _write_csv(
            paths.speakers,
            ["speaker", "utterances", "utterance_errors", "reference_words", "substitutions", "deletions",
             "insertions", "errors", "wer"],
            (
                [r.speaker, r.utterances, r.utterance_errors, r.reference_words, r.substitutions, r.deletions,
                 r.insertions, r.errors, "" if r.wer == float("inf") else f"{r.wer:.6f}"]
                for r in result.speaker_table
            ),
        )
        paths.summary.write_text(json.dumps(result.to_dict(), indent=2) + "\n", encoding="utf-8")
        drawn = picture and _draw_confusions(result, paths.confusions)
    except OSError as exc:
        raise WordspotError(f"cannot write the report in {folder}: {exc.strerror or exc}") from None
    if not drawn:
        paths = ReportFiles(paths.folder, paths.errors, paths.words, paths.speakers, paths.summary, None)
    return paths
