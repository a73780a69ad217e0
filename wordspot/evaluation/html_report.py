"""The evaluation report as one HTML page that opens from the file system (no server).

``index.html`` holds the summary (WER with its interval, substitutions, deletions,
insertions, utterance error rate), the per-word and per-speaker tables, the confusion
picture when one was drawn, and one row per utterance with errors: what was said and
what was recognised, aligned, each error named in words (not only by colour), a player
for the recording, and a small waveform with the recognised words' times drawn on it.
A few lines of plain JavaScript filter the rows by word and speaker and sort them; the
page reads nothing from the network.
"""

from __future__ import annotations

import html
import os
import shutil
import warnings
from string import Template
from pathlib import Path
from urllib.parse import quote

import numpy as np

from wordspot.errors import WordspotError
from wordspot.evaluation.reliability import expected_calibration_error, reliability_of
from wordspot.evaluation.report import HEADING_COLOUR, INK_COLOUR, PAGE_COLOUR, WAVE_COLOUR
from wordspot.evaluation.report import format_percent as _pct
from wordspot.evaluation.scoring import DELETION, HIT, INSERTION, SUBSTITUTION

__all__ = ["REPORT_PAGE", "ERROR_LABELS", "waveform_svg", "write_html_report"]

REPORT_PAGE = "index.html"
#: The words each kind of error is named by on the page.
ERROR_LABELS = {SUBSTITUTION: "substituted", DELETION: "deleted", INSERTION: "inserted", HIT: "correct"}
_PICTURE_RATE = 8000
_PICTURE_SIZE = (320, 80)


def _e(text) -> str:
    return html.escape(str(text), quote=True)


def waveform_svg(wave: np.ndarray, sample_rate: int, segments=(), *, size=_PICTURE_SIZE) -> str:
    """An inline SVG picture: the waveform's envelope and a labelled box per recognised word.

    Parameters
    ----------
    wave : array, shape (n,)
    sample_rate : int
    segments : sequence of objects with ``word``, ``start`` and ``end`` (seconds)
    size : (width, height) in pixels
    """
    width, height = size
    x = np.asarray(wave, dtype=np.float64)
    seconds = x.size / sample_rate if x.size else 0.0
    mid = height / 2.0
    parts = [f'<svg class="wave" width="{width}" height="{height}" viewBox="0 0 {width} {height}" role="img" '
             f'aria-label="waveform, {seconds:.2f} s, with the recognised words marked">']
    for s in segments:
        if seconds <= 0:
            break
        x0 = width * max(0.0, s.start) / seconds
        x1 = width * min(seconds, s.end) / seconds
        parts.append(f'<rect class="word" x="{x0:.1f}" y="0" width="{max(1.0, x1 - x0):.1f}" height="{height}"/>'
                     f'<text x="{x0 + 2:.1f}" y="12">{_e(s.word)}</text>')
    if x.size:
        edges = np.linspace(0, x.size, width + 1).astype(int)
        path = []
        for col in range(width):
            chunk = x[edges[col]:max(edges[col + 1], edges[col] + 1)]
            lo, hi = float(chunk.min()), float(chunk.max())
            path.append(f"M{col + 0.5} {mid - hi * mid:.1f}V{mid - lo * mid + 0.5:.1f}")
        parts.append(f'<path class="env" d="{"".join(path)}"/>')
    parts.append(f'<text x="{width - 4}" y="{height - 4}" text-anchor="end">{seconds:.2f} s</text></svg>')
    return "".join(parts)


def _picture(path: Path, recognition) -> str:
    from wordspot.audio.reading import load_audio

    try:
        with warnings.catch_warnings():  # silence or clipping is for the table, not a warning here
            warnings.simplefilter("ignore")
            wave = load_audio(path, sample_rate=_PICTURE_RATE)
    except (WordspotError, OSError, ValueError, RuntimeError):
        return '<p class="note">(the recording could not be read)</p>'
    return waveform_svg(wave, _PICTURE_RATE, recognition.segments if recognition is not None else ())


def _audio_source(path: Path, folder: Path, copy_to: Path | None, k: int) -> str:
    path = Path(path).resolve()
    if copy_to is not None:
        copy_to.mkdir(exist_ok=True)
        target = copy_to / f"{k:04d}-{path.name}"
        shutil.copyfile(path, target)
        path = target
    try:
        rel = os.path.relpath(path, folder.resolve())
    except ValueError:  # another drive (Windows): an absolute file address
        return path.as_uri()
    return quote(Path(rel).as_posix())


def _alignment(pairs) -> str:
    cells = []
    for p in pairs:
        label = ERROR_LABELS[p.operation]
        said = _e(p.reference) if p.reference is not None else "—"
        heard = _e(p.recognised) if p.recognised is not None else "—"
        tag = "" if p.operation == HIT else f'<span class="tag">{label}</span>'
        cells.append(f'<span class="pair {p.operation}" title="{label}"><span class="said">{said}</span>'
                     f'<span class="heard">{heard}</span>{tag}</span>')
    return '<div class="aligned"><span class="pair legend"><span class="said">said</span>' \
           '<span class="heard">heard</span></span>' + "".join(cells) + "</div>"


def _word_table(result) -> str:
    rows = []
    for r in result.word_table:
        heard = ", ".join(f"{'(deleted)' if w is None else w} ×{c}" for w, c in r.confusions)
        rows.append(f"<tr><td>{_e(r.word)}</td><td>{r.reference_count}</td><td>{r.errors}</td>"
                    f"<td>{_pct(r.error_rate) if r.reference_count else '-'}</td><td>{r.inserted}</td>"
                    f"<td>{_e(heard)}</td></tr>")
    return ('<table class="figures"><thead><tr><th>word</th><th>said</th><th>errors</th><th>error rate</th>'
            '<th>inserted</th><th>heard instead</th></tr></thead><tbody>' + "".join(rows) + "</tbody></table>")


def _speaker_table(result) -> str:
    rows = [f"<tr><td>{_e(r.speaker)}</td><td>{r.utterances}</td><td>{r.reference_words}</td>"
            f"<td>{r.substitutions}</td><td>{r.deletions}</td><td>{r.insertions}</td><td>{_pct(r.wer)}</td>"
            f"<td>{r.utterance_errors}</td></tr>" for r in result.speaker_table]
    return ('<table class="figures"><thead><tr><th>speaker</th><th>recordings</th><th>words</th>'
            '<th>substituted</th><th>deleted</th><th>inserted</th><th>WER</th><th>recordings with errors</th>'
            '</tr></thead><tbody>' + "".join(rows) + "</tbody></table>")


# The colours shared with the confusion picture come from the report's palette.
_STYLE = Template("""
body { font: 16px/1.45 system-ui, sans-serif; color: $ink; background: $page; margin: 1rem 1.5rem; }
h1 { font-size: 1.5rem; } h2 { font-size: 1.2rem; margin-top: 1.5rem; }
table { border-collapse: collapse; } th, td { border: 1px solid #999; padding: 0.25rem 0.5rem; text-align: left; vertical-align: top; }
th { background: $heading; } dl.summary { display: grid; grid-template-columns: max-content auto; gap: 0.15rem 1rem; }
dl.summary dt { font-weight: 600; } dl.summary dd { margin: 0; }
.aligned { display: flex; flex-wrap: wrap; gap: 0.3rem; min-width: 17rem; }
#errors audio { width: 14rem; }
.pair { display: inline-flex; flex-direction: column; border: 2px solid #999; border-radius: 4px; padding: 0.1rem 0.4rem; min-width: 3rem; }
.pair .heard { border-top: 1px dotted #999; }
.pair .tag { font-size: 0.75rem; font-weight: 700; text-transform: uppercase; }
.pair.legend { border-style: dashed; color: #444; font-style: italic; }
.pair.substitution { border-color: #8a3b00; background: #fff1e0; }
.pair.deletion { border-color: #a00000; background: #fde8e8; }
.pair.insertion { border-color: #4a148c; background: #f1e6fb; }
svg.wave { background: #fafafa; border: 1px solid #bbb; }
svg.wave .env { stroke: $wave; stroke-width: 1; fill: none; }
svg.wave .word { fill: #f5a400; fill-opacity: 0.25; stroke: #8a5a00; }
svg.wave text { font: 11px sans-serif; fill: $ink; }
.controls { display: flex; gap: 1rem; flex-wrap: wrap; align-items: center; margin: 0.5rem 0; }
input, select, button { font: inherit; min-height: 40px; padding: 0.2rem 0.5rem; }
th button { border: 0; background: none; font-weight: 700; cursor: pointer; padding: 0; min-height: 0; }
.note { color: #444; }
""").substitute(page=PAGE_COLOUR, ink=INK_COLOUR, heading=HEADING_COLOUR, wave=WAVE_COLOUR)

_SCRIPT = """
(function () {
  "use strict";
  var rows = Array.prototype.slice.call(document.querySelectorAll("#errors tbody tr"));
  var word = document.getElementById("filter-word"), speaker = document.getElementById("filter-speaker");
  var shown = document.getElementById("shown");
  function apply() {
    var w = word.value.trim().toLowerCase(), s = speaker.value, n = 0;
    rows.forEach(function (r) {
      var ok = (!w || (" " + r.dataset.words + " ").indexOf(" " + w + " ") >= 0) && (!s || r.dataset.speaker === s);
      r.hidden = !ok; if (ok) n++;
    });
    shown.textContent = n + " of " + rows.length + " shown";
  }
  word.addEventListener("input", apply);
  speaker.addEventListener("change", apply);
  Array.prototype.forEach.call(document.querySelectorAll("#errors th button"), function (b) {
    b.addEventListener("click", function () {
      var key = b.dataset.key, down = b.getAttribute("aria-sort") !== "descending";
      rows.sort(function (a, c) {
        var x = a.dataset[key], y = c.dataset[key];
        var d = key === "errors" || key === "order" ? Number(x) - Number(y) : (x < y ? -1 : x > y ? 1 : 0);
        return down ? -d : d;
      });
      var body = document.querySelector("#errors tbody");
      rows.forEach(function (r) { body.appendChild(r); });
      Array.prototype.forEach.call(document.querySelectorAll("#errors th button"), function (o) { o.removeAttribute("aria-sort"); });
      b.setAttribute("aria-sort", down ? "descending" : "ascending");
    });
  });
  apply();
})();
"""


def write_html_report(evaluation, folder, *, copy_audio: bool = False, confusions=None) -> Path:
    """Write ``folder/index.html`` for one evaluated set.

    Parameters
    ----------
    evaluation : wordspot.evaluation.run.ManifestEvaluation
    folder : str or path
        The report folder (created if missing).
    copy_audio : bool
        Copy the recordings with errors into ``folder/audio/`` (so the folder can be moved
        or sent on its own); otherwise the players point to the recordings where they are,
        by a relative path.
    confusions : path, optional
        The confusion picture to show (``confusions.png`` from ``write_report``).

    Returns
    -------
    Path
        The page written.
    """
    folder = Path(folder)
    try:
        folder.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise WordspotError(f"cannot create the report folder {folder}: {exc.strerror or exc}") from None
    r = evaluation.result
    low, high = r.wer_ci95
    recognitions = {str(rec.path): rec for rec in evaluation.recognitions}
    failed = dict(evaluation.failed)
    speakers = sorted({s.utterance.speaker for s in r.scores if s.errors})
    rows = []
    copy_to = folder / "audio" if copy_audio else None
    for k, score in enumerate(r.scores):
        if not score.errors:
            continue
        u = score.utterance
        path = Path(u.path)
        rec = recognitions.get(str(u.path))
        words = sorted({w for p in score.alignment.pairs for w in (p.reference, p.recognised) if w})
        counts = f"{score.alignment.substitutions} / {score.alignment.deletions} / {score.alignment.insertions}"
        if str(u.path) in failed:
            media = f'<p class="note">could not be read: {_e(failed[str(u.path)])}</p>'
            picture = ""
        else:
            try:
                source = _audio_source(path, folder, copy_to, k)
            except OSError as exc:
                raise WordspotError(f"cannot copy {path} into the report: {exc.strerror or exc}") from None
            media = f'<audio controls preload="none" src="{_e(source)}"></audio>'
            picture = _picture(path, rec)
        rows.append(
            f'<tr class="utt" data-order="{k}" data-speaker="{_e(u.speaker)}" data-words="{_e(" ".join(words))}" '
            f'data-errors="{score.errors}" data-file="{_e(path.name)}">'
            f'<td>{_e(path.name)}<br><span class="note">{_e(u.speaker)}</span><br>{media}</td>'
            f"<td>{_alignment(score.alignment.pairs)}</td><td>{counts}</td><td>{picture}</td></tr>")
    confusions_html = ""
    if confusions is not None and Path(confusions).is_file():
        rel = quote(Path(os.path.relpath(Path(confusions).resolve(), folder.resolve())).as_posix())
        confusions_html = (f'<h2>Confusions</h2><img src="{_e(rel)}" alt="Which word was recognised as which: '
                           f'rows are the words said, columns the words recognised" width="600">')
    reliability = reliability_of(r)
    reliability_html = "" if reliability is None else (
        f"<dt>confidence reliability</dt><dd>confidences are off by "
        f"{_pct(expected_calibration_error(reliability))} on average over {sum(b.words for b in reliability)} "
        f"words heard (expected calibration error; mean confidence against share right, per bin: "
        f"reliability.csv)</dd>")
    options = "".join(f'<option value="{_e(s)}">{_e(s)}</option>' for s in speakers)
    title = f"wordspot evaluation: {evaluation.name}"
    page = f"""<!DOCTYPE html>
<html lang="en"><head><meta charset="utf-8"><meta name="viewport" content="width=device-width, initial-scale=1">
<title>{_e(title)}</title><link rel="icon" href="data:,"><style>{_STYLE}</style></head>
<body>
<h1>{_e(title)}</h1>
<h2>Summary</h2>
<dl class="summary">
<dt>word error rate</dt><dd>{_pct(r.wer)} (on more recordings like these it would likely lie between {_pct(low)} and {_pct(high)}: 95% interval from {r.n_bootstrap} bootstrap draws)</dd>
<dt>words said</dt><dd>{r.reference_words} (in the transcripts)</dd>
<dt>heard as another word</dt><dd>{r.substitutions} (substituted)</dd>
<dt>missed</dt><dd>{r.deletions} (deleted)</dd>
<dt>heard but not said</dt><dd>{r.insertions} (inserted)</dd>
<dt>heard right</dt><dd>{r.hits}</dd>
<dt>recordings with errors</dt><dd>{r.utterance_errors} of {r.utterances} ({_pct(r.sentence_error_rate)})</dd>
<dt>files that could not be read</dt><dd>{len(evaluation.failed)}</dd>
{reliability_html}
</dl>
<h2 id="errors-heading">Recordings with errors</h2>
<p class="note">Each box shows a word said (top) and the word heard (bottom); errors are named
(substituted, deleted, inserted) and coloured. The picture marks where the recognised words were heard.</p>
<div class="controls">
<label>Word <input id="filter-word" type="search" placeholder="e.g. oven"></label>
<label>Speaker <select id="filter-speaker"><option value="">everyone</option>{options}</select></label>
<span id="shown" aria-live="polite"></span>
</div>
<table id="errors" aria-labelledby="errors-heading"><thead><tr>
<th><button type="button" data-key="file">recording</button></th><th>said and heard</th>
<th><button type="button" data-key="errors">substituted / deleted / inserted</button></th><th>picture</th>
</tr></thead><tbody>
{"".join(rows) if rows else ""}
</tbody></table>
{"" if rows else '<p>No recording has an error.</p>'}
<h2>By word</h2>
{_word_table(r)}
<h2>By speaker</h2>
{_speaker_table(r)}
{confusions_html}
<script>{_SCRIPT}</script>
</body></html>
"""
    target = folder / REPORT_PAGE
    try:
        target.write_text(page, encoding="utf-8")
    except OSError as exc:
        raise WordspotError(f"cannot write {target}: {exc.strerror or exc}") from None
    return target
