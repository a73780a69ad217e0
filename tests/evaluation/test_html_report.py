"""Tests of wordspot.evaluation.html_report: the report page, read back as HTML and in a browser."""

import re
from html.parser import HTMLParser
from pathlib import Path
from types import SimpleNamespace
from urllib.parse import unquote, urlsplit

import numpy as np
import pytest
import soundfile as sf

from browser_helpers import artifact_folder, console_errors, start_chromium
from wordspot.decoding.decoder import Recognition
from wordspot.evaluation.html_report import waveform_svg, write_html_report
from wordspot.evaluation.run import ManifestEvaluation
from wordspot.evaluation.scoring import ScoredUtterance, score_utterances

RATE = 16000


class _Page(HTMLParser):
    """Collects the error rows, their text, the audio sources and images."""

    def __init__(self):
        super().__init__()
        self.rows, self.audio, self.images, self._row = [], [], [], None

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        if tag == "tr" and a.get("class") == "utt":
            self._row = {"speaker": a["data-speaker"], "text": []}
            self.rows.append(self._row)
        elif tag == "audio":
            self.audio.append(a["src"])
        elif tag == "img":
            self.images.append(a["src"])

    def handle_endtag(self, tag):
        if tag == "tr":
            self._row = None

    def handle_data(self, data):
        if self._row is not None and data.strip():
            self._row["text"].append(data.strip())


def _segment(word, start, end):
    # only the word and its times are drawn (the decoder's WordSegment has these too)
    return SimpleNamespace(word=word, start=start, end=end)


def _evaluation(folder: Path):
    """The worked example of tests/evaluation/test_report.py with real audio files:
    S=1, D=3, I=1, N=10 (WER 50.00%); 3 of 4 utterances wrong."""
    said = [("ann", "oven on", "oven on"), ("ann", "mixer off", "mixer of off"),
            ("bo", "set timer ten minutes", "set ten minute"), ("bo", "oven off", "")]
    scored, recs = [], []
    t = np.arange(2 * RATE) / RATE
    for k, (who, ref, hyp) in enumerate(said):
        path = folder / "takes" / who / f"take {k}.wav"  # a space, to check the address is quoted
        path.parent.mkdir(parents=True, exist_ok=True)
        sf.write(path, 0.5 * np.sin(2 * np.pi * 200 * t), RATE)
        scored.append(ScoredUtterance.from_text(path, who, ref, hyp))
        words = hyp.split()
        recs.append(Recognition(path=str(path), duration=2.0,
                                segments=[_segment(w, 0.5 + 0.4 * i, 0.8 + 0.4 * i) for i, w in enumerate(words)]))
    result = score_utterances(scored, n_bootstrap=200, seed=3)
    return ManifestEvaluation("bakery-test", result, recs, [], 0.1, 8.0)


def _read(page: Path) -> _Page:
    parsed = _Page()
    parsed.feed(page.read_text(encoding="utf-8"))
    return parsed


def test_one_row_per_utterance_with_errors_and_players_that_find_their_files(tmp_path):
    ev = _evaluation(tmp_path)
    page = write_html_report(ev, tmp_path / "report")
    parsed = _read(page)
    assert len(parsed.rows) == ev.result.utterance_errors == 3
    assert len(parsed.audio) == 3
    for src in parsed.audio:
        assert not src.startswith(("/", "file:"))  # relative, so the folders can move together
        target = (page.parent / unquote(src)).resolve()
        assert target.is_file() and target.parent.parent.name == "takes"
    text = page.read_text(encoding="utf-8")
    assert "50.00%" in text and "3 of 4" in text
    assert "http://" not in text and "https://" not in text
    # plain words for people; the trade's terms only in parentheses
    assert "<h2 id=\"errors-heading\">Recordings with errors</h2>" in text
    assert "<dt>heard as another word</dt><dd>1 (substituted)</dd>" in text and "<dt>missed</dt><dd>3 (deleted)</dd>" in text
    visible = re.sub(r"<script>.*?</script>|<style>.*?</style>|<[^>]+>", " ", text, flags=re.S)
    assert "utterance" not in visible.lower() and "replicates" not in visible


def test_errors_are_named_in_words(tmp_path):
    parsed = _read(write_html_report(_evaluation(tmp_path), tmp_path / "report"))
    by_speaker = {}
    for row in parsed.rows:
        by_speaker.setdefault(row["speaker"], []).append(" ".join(row["text"]))
    ann, = by_speaker["ann"]
    assert re.search(r"— of inserted", ann)  # nothing said, "of" heard
    timer, oven = by_speaker["bo"]
    assert "timer — deleted" in timer and "minutes minute substituted" in timer
    assert oven.count("deleted") == 2 and "1 / 1 / 0" not in oven


def test_copied_audio_travels_with_the_report(tmp_path):
    ev = _evaluation(tmp_path)
    page = write_html_report(ev, tmp_path / "report", copy_audio=True)
    parsed = _read(page)
    for src in parsed.audio:
        assert unquote(src).startswith("audio/")
        copied = page.parent / unquote(src)
        original = next(Path(u.utterance.path) for u in ev.result.scores if Path(u.utterance.path).name in unquote(src))
        assert copied.read_bytes() == original.read_bytes()


def test_waveform_picture_marks_the_word_times():
    # worked by hand: a 2.0 s take drawn 420 px wide puts 0.5-1.0 s at x = 105..210 px
    wave = 0.5 * np.ones(2 * RATE)
    svg = waveform_svg(wave, RATE, [_segment("oven", 0.5, 1.0)], size=(420, 90))
    assert '<rect class="word" x="105.0" y="0" width="105.0" height="90"/>' in svg
    assert ">oven</text>" in svg and ">2.00 s</text>" in svg
    # a constant 0.5 reaches halfway up from the middle line (45 px): y = 45 - 22.5, and the
    # stroke runs half a pixel further so that a flat stretch still shows
    assert "M0.5 22.5V23.0" in svg


@pytest.mark.slow
def test_report_in_the_browser(tmp_path, tmp_path_factory):
    from selenium.webdriver.common.by import By

    report = tmp_path / "report"
    page = write_html_report(_evaluation(tmp_path), report)
    driver = start_chromium(tmp_path / "profile")
    try:
        driver.get(page.as_uri())
        rows = driver.find_elements(By.CSS_SELECTOR, "#errors tbody tr")
        sources = [a.get_attribute("src") for a in driver.find_elements(By.TAG_NAME, "audio")]
        driver.find_element(By.ID, "filter-word").send_keys("timer")
        visible = [r for r in rows if r.is_displayed()]
        shown = driver.find_element(By.ID, "shown").text
        screenshot = artifact_folder(tmp_path_factory) / "report-page.png"
        driver.save_screenshot(str(screenshot))
        errors = console_errors(driver)
    finally:
        driver.quit()
    assert errors == []
    assert len(rows) == 3 and len(visible) == 1 and shown == "1 of 3 shown"
    assert len(sources) == 3
    for src in sources:  # the browser's own reading of each address
        url = urlsplit(src)
        assert url.scheme == "file" and Path(unquote(url.path)).is_file()
