"""Text rendering of an evaluation and the report folder (CSV tables, JSON, confusion picture).

The layout is wordspot's own: a short summary block, then a per-word and a per-speaker table
in aligned plain-text columns. `write_report` writes the same figures as files a spreadsheet
opens, plus ``confusions.png`` when matplotlib is installed.
"""

from __future__ import annotations

import csv
import json
import warnings
from dataclasses import dataclass, replace
from pathlib import Path

from wordspot.errors import WordspotError, WordspotWarning
from wordspot.evaluation.detection import (DET_TICKS, TradeOff, equal_error_rate_of, measurable,
                                           normal_deviate, trade_off)
from wordspot.evaluation.reliability import expected_calibration_error, reliability_of
from wordspot.evaluation.scoring import EvaluationResult, WordRow, confusion_matrix

__all__ = [
    "DELETED_LABEL",
    "INSERTED_LABEL",
    "PAGE_COLOUR",
    "INK_COLOUR",
    "HEADING_COLOUR",
    "WAVE_COLOUR",
    "COUNT_COLOURS",
    "ReportFiles",
    "format_percent",
    "render_summary",
    "render_word_table",
    "render_speaker_table",
    "render_reliability",
    "render_result",
    "CURVE_COLOURS",
    "write_report",
    "write_trade_offs",
]

#: How a deletion (nothing recognised) is shown in tables and the picture.
DELETED_LABEL = "(deleted)"
#: How an insertion (nothing said) is shown in the picture.
INSERTED_LABEL = "(inserted)"

# The reports' own colours. The HTML page's style sheet is built from them
# (:mod:`wordspot.evaluation.html_report`) and the confusion picture draws with them.
#: Page background.
PAGE_COLOUR = "#ffffff"
#: Text.
INK_COLOUR = "#111111"
#: Table headings.
HEADING_COLOUR = "#eef1f5"
#: The waveform's outline.
WAVE_COLOUR = "#0b4f8a"
#: The confusion picture's colours from no count to the largest: page to waveform blue.
COUNT_COLOURS = (PAGE_COLOUR, WAVE_COLOUR)


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


def _labelled(rows) -> list[str]:
    """``(label, value)`` rows as lines with the values in one column."""
    width = max(len(label) for label, _ in rows) + 2
    return [f"{label.ljust(width)}{value}" for label, value in rows]


def render_summary(result: EvaluationResult, *, title: str | None = None) -> str:
    """The summary block: WER with its interval, the error counts, the recording error rate."""
    low, high = result.wer_ci95
    lines = [title] if title else []
    if result.reference_words:
        wer = (f"{_pct(result.wer)}   (on more recordings like these it would likely lie between {_pct(low)} "
               f"and {_pct(high)}: 95% interval from {result.n_bootstrap} bootstrap draws)")
    else:  # only recordings with no command: nothing to get right, only false accepts
        wer = "n/a   (no command words said; see the words heard where none was said)"
    rows = [
        ("recordings scored", result.utterances),
        ("words said", f"{result.reference_words}   (in the transcripts)"),
        ("word error rate", wer),
        ("  heard as another word", f"{result.substitutions}   (substitutions)"),
        ("  missed", f"{result.deletions}   (deletions)"),
        ("  heard but not said", f"{result.insertions}   (insertions)"),
        ("  heard right", result.hits),
        ("recordings with errors", f"{result.utterance_errors} of {result.utterances} "
                                   f"({_pct(result.sentence_error_rate)})"),
        ("miss rate", f"{_pct(result.miss_rate)}   (words said but missed or heard as another word: "
                      f"{result.substitutions + result.deletions} of {result.reference_words})"),
    ]
    rows += _detection_rows(result)
    return "\n".join(lines + _labelled(rows))


def _detection_rows(result: EvaluationResult) -> list[tuple[str, str]]:
    n = result.non_command_utterances
    if n == 0:
        return [("false accepts", "not measured: no recordings without a command "
                                  "(rows with an empty transcript); record some other talk and room sound")]
    per_hour = result.false_accepts_per_hour
    rate = "duration unknown" if per_hour is None else f"{per_hour:.1f} per hour"
    seconds = "" if result.non_command_seconds is None else f", {result.non_command_seconds:.1f} s"
    rows = [("false accepts", f"{result.false_accepts} word(s) heard on {n} recording(s) "
                              f"without a command{seconds}: {rate}")]
    eer = equal_error_rate_of(result)
    if eer is not None:
        rows.append(("equal error rate", f"{_pct(eer)}   (at the confidence threshold where the miss rate "
                                         "equals the share of recordings without a command that get a word)"))
    return rows


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
    header = ["speaker", "recordings", "words", "substituted", "deleted", "inserted", "WER",
              "recordings with errors"]
    return _columns(header, body, right=set(range(1, 8)))


def render_reliability(result: EvaluationResult) -> str | None:
    """The reliability table, one line per confidence bin that holds words (None without words)."""
    rows = reliability_of(result)
    if rows is None:
        return None
    body = [[f"{r.low:.1f}-{r.high:.1f}", str(r.words), f"{r.mean_confidence:.2f}", _pct(r.share_correct)]
            for r in rows if r.words]
    gap = expected_calibration_error(rows)
    head = (f"Confidence reliability (every word heard, those below the threshold too; "
            f"confidences are off by {_pct(gap)} on average: expected calibration error)")
    return head + "\n" + _columns(["confidence", "words", "mean", "right"], body, right={1, 2, 3})


def render_result(result: EvaluationResult, *, title: str | None = None, word_limit: int | None = 20) -> str:
    """Summary, per-word and per-speaker tables and the reliability table as one text block."""
    parts = [
        render_summary(result, title=title),
        "By word\n" + render_word_table(result, limit=word_limit),
        "By speaker\n" + render_speaker_table(result),
    ]
    reliability = render_reliability(result)
    if reliability is not None:
        parts.append(reliability)
    return "\n\n".join(parts)


@dataclass(frozen=True)
class ReportFiles:
    """Paths written by `write_report`; a picture or table not written is None.

    ``trade_off`` (``det.png``) and ``trade_off_table`` (``det.csv``) need both command
    recordings and recordings without a command; ``reliability`` (``reliability.csv``)
    needs at least one word heard with a confidence.
    """

    folder: Path
    errors: Path
    words: Path
    speakers: Path
    summary: Path
    confusions: Path | None
    trade_off: Path | None = None
    trade_off_table: Path | None = None
    reliability: Path | None = None


def _write_csv(path: Path, header: list[str], rows) -> None:
    with open(path, "w", newline="", encoding="utf-8") as fh:
        writer = csv.writer(fh)
        writer.writerow(header)
        writer.writerows(rows)


def _figure_class(name: str):
    """matplotlib's Agg figure maker, or None (with a warning naming ``name``) without matplotlib."""
    try:
        from matplotlib.backends.backend_agg import FigureCanvasAgg
        from matplotlib.figure import Figure
    except ImportError:
        warnings.warn(
            f"matplotlib is not installed, so {name} was not drawn; "
            "install it with: pip install matplotlib",
            WordspotWarning,
            stacklevel=4,
        )
        return None

    def make(**options):
        fig = Figure(**options)
        FigureCanvasAgg(fig)
        return fig

    return make


def _det_axes(ax, title: str) -> None:
    """Normal-deviate axes of a DET picture: ticks in percent, the diagonal, labels, legend."""
    edge = normal_deviate([0.0, 1.0])
    ax.plot(edge, edge, ":", color="grey", linewidth=0.8)
    ticks = normal_deviate(DET_TICKS)
    labels = [f"{100 * t:g}" for t in DET_TICKS]
    ax.set_xticks(ticks, labels=labels, rotation=60)
    ax.set_yticks(ticks, labels=labels)
    ax.set_xlim(edge)
    ax.set_ylim(edge)
    ax.grid(True, linewidth=0.4)
    ax.set_xlabel("false-accept rate (% of recordings without a command that get a word)")
    ax.set_ylabel("miss rate (% of command words deleted or substituted)")
    ax.set_title(title)
    ax.legend(loc="upper right", fontsize=8)


def _draw_trade_off(points: TradeOff, path: Path) -> bool:
    """The DET picture: miss rate against false-accept rate on normal-deviate axes."""
    make = _figure_class(path.name)
    if make is None:
        return False
    fig = make(figsize=(6.0, 6.0), dpi=100)
    ax = fig.add_subplot()
    x = normal_deviate(points.false_accept_rate)
    y = normal_deviate(points.miss_rate)
    ax.plot(x, y, drawstyle="default", marker=".", color="tab:blue", label="word confidence threshold")
    eer = points.equal_error_rate
    if eer is not None:
        ax.plot([normal_deviate(eer)], [normal_deviate(eer)], "o", color="tab:red",
                label=f"equal error rate {_pct(eer)}")
    _det_axes(ax, "Detection error trade-off")
    fig.tight_layout()
    fig.savefig(path)
    return True


#: Colours of the systems' curves in the picture of several trade-offs, in order (then again).
CURVE_COLOURS = ("tab:blue", "tab:orange", "tab:green", "tab:red", "tab:purple", "tab:brown", "tab:pink",
                 "tab:grey", "tab:olive", "tab:cyan")


def _trade_offs_figure(curves: dict, make, title: str):
    """One DET curve per system (line ``gid`` = the system's name), each with its EER marked."""
    fig = make(figsize=(7.0, 7.0), dpi=100)
    ax = fig.add_subplot()
    for k, (name, points) in enumerate(curves.items()):
        colour = CURVE_COLOURS[k % len(CURVE_COLOURS)]
        eer = points.equal_error_rate
        label = f"{name} (equal error rate {'-' if eer is None else _pct(eer)})"
        ax.plot(normal_deviate(points.false_accept_rate), normal_deviate(points.miss_rate), marker=".",
                markersize=3, color=colour, label=label, gid=name)
        if eer is not None:
            ax.plot([normal_deviate(eer)], [normal_deviate(eer)], "o", color=colour, gid=f"{name}: equal error rate")
    _det_axes(ax, title)
    fig.tight_layout()
    return fig


def write_trade_offs(curves: dict, folder, *, title: str = "Detection error trade-off", picture: bool = True,
                     stem: str = "det") -> tuple[Path, Path | None]:
    """Several systems' trade-offs on one set: ``<stem>.csv`` and ``<stem>.png`` in ``folder``.

    Parameters
    ----------
    curves : dict of system name -> TradeOff
        In legend order.
    folder : str or path
        Created if missing.
    title : str
        The picture's title.
    picture : bool
        Draw ``<stem>.png`` (needs matplotlib; a warning without it).

    Returns
    -------
    table : Path
        Columns ``system`` then those of a report's ``det.csv``, each system's rows in
        threshold order.
    picture : Path or None
        One curve per system on normal-deviate axes, its equal error rate marked, a legend.
    """
    folder = Path(folder)
    table, image = folder / f"{stem}.csv", folder / f"{stem}.png"
    try:
        folder.mkdir(parents=True, exist_ok=True)
        _write_csv(table, ["system"] + _TRADE_OFF_COLUMNS,
                   ([name] + row for name, points in curves.items() for row in _trade_off_rows(points)))
        if not picture:
            return table, None
        make = _figure_class(image.name)
        if make is None:
            return table, None
        _trade_offs_figure(curves, make, title).savefig(image)
    except OSError as exc:
        raise WordspotError(f"cannot write the trade-off picture in {folder}: {exc.strerror or exc}") from None
    return table, image


def _draw_confusions(result: EvaluationResult, path: Path) -> bool:
    make = _figure_class(path.name)
    if make is None:
        return False
    fig = _confusion_figure(result, make)
    fig.savefig(path)
    return True


def _confusion_figure(result: EvaluationResult, make):
    """The confusion picture as a figure (``make`` from :func:`_figure_class`), coloured
    from :data:`COUNT_COLOURS`."""
    from matplotlib.colors import LinearSegmentedColormap

    counts_map = LinearSegmentedColormap.from_list("wordspot-counts", COUNT_COLOURS)
    cm = confusion_matrix(result)
    rows = list(cm.words) + [INSERTED_LABEL]
    cols = list(cm.words) + [DELETED_LABEL]
    side = min(max(4.0, 0.45 * len(rows) + 2.5), 24.0)
    fig = make(figsize=(side, side), dpi=100)
    ax = fig.add_subplot()
    image = ax.imshow(cm.counts, cmap=counts_map, interpolation="nearest")
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
                    colour = PAGE_COLOUR if n > 0.6 * top else INK_COLOUR
                    ax.text(c, r, str(n), ha="center", va="center", fontsize=8, color=colour)
    fig.tight_layout()
    return fig


def write_report(result: EvaluationResult, folder, *, picture: bool = True) -> ReportFiles:
    """Write the report folder.

    Files: ``errors.csv`` (file, reference, recognised; only utterances with errors),
    ``words.csv``, ``speakers.csv``, ``summary.json`` (`EvaluationResult.to_dict`) and, when
    ``picture`` is true and matplotlib is installed, ``confusions.png`` (a warning is issued
    if matplotlib is missing). When the set holds recordings with and without a command and
    every recognised word's confidence is known: ``det.csv`` (misses and false accepts at
    each confidence threshold) and ``det.png`` (the detection error trade-off picture).
``reliability.csv``: words, mean confidence and share right per confidence bin
(:mod:`wordspot.evaluation.reliability`).

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
        if not drawn:
            paths = replace(paths, confusions=None)
        rows = reliability_of(result)
        if rows is not None:
            paths = replace(paths, reliability=folder / "reliability.csv")
            _write_csv(paths.reliability, ["low", "high", "words", "correct", "mean_confidence", "share_correct"],
                       ([f"{r.low:.2f}", f"{r.high:.2f}", r.words, r.correct,
                         "" if r.words == 0 else f"{r.mean_confidence:.6f}",
                         "" if r.words == 0 else f"{r.share_correct:.6f}"] for r in rows))
        if measurable(result):
            points = trade_off([s.utterance for s in result.scores])
            paths = replace(paths, trade_off_table=folder / "det.csv")
            _write_trade_off_table(points, paths.trade_off_table)
            if picture and _draw_trade_off(points, folder / "det.png"):
                paths = replace(paths, trade_off=folder / "det.png")
    except OSError as exc:
        raise WordspotError(f"cannot write the report in {folder}: {exc.strerror or exc}") from None
    return paths


_TRADE_OFF_COLUMNS = ["threshold", "misses", "miss_rate", "false_accepts", "false_accepts_per_hour",
                      "false_accept_rate"]


def _trade_off_rows(points: TradeOff) -> list[list]:
    per_hour = points.false_accepts_per_hour
    return [
        [f"{t:.6g}", int(m), f"{mr:.6f}", int(fa), "" if per_hour is None else f"{per_hour[k]:.3f}", f"{far:.6f}"]
        for k, (t, m, mr, fa, far) in enumerate(zip(points.thresholds, points.misses, points.miss_rate,
                                                     points.false_accepts, points.false_accept_rate))
    ]


def _write_trade_off_table(points: TradeOff, path: Path) -> None:
    _write_csv(path, _TRADE_OFF_COLUMNS, _trade_off_rows(points))
