"""The recording page in a real browser: headless Chromium with a fake microphone.

The fake microphone plays a shipped demo recording (a synthetic voice saying "back") in a
loop; the test records two takes of two words with the keyboard alone, then checks the
files and the manifest as soundfile and the csv module read them.
"""

import csv
import threading
import time

import numpy as np
import pytest
import soundfile as sf

from browser_helpers import artifact_folder, console_errors, fake_microphone_file, start_chromium
from conftest import RECORDINGS
from wordspot.web.server import RecordingApp, RecordingSettings, make_server

pytestmark = pytest.mark.slow

SOURCE = RECORDINGS / "audio" / "train" / "espeak-en-gb-f3" / "back-t1.flac"


@pytest.fixture
def page_server(tmp_path):
    lexicon = tmp_path / "bakery-words.txt"
    lexicon.write_text("oven AH V AH N\nstart S T AA R T\n", encoding="utf-8")
    app = RecordingApp(RecordingSettings(folder=tmp_path / "takes", lexicon=lexicon, takes=2, speaker="baker-a"))
    server = make_server(app)
    thread = threading.Thread(target=server.serve_forever, daemon=True)
    thread.start()
    yield app, f"http://127.0.0.1:{server.server_address[1]}/"
    server.shutdown()
    server.server_close()


def _wait(driver, condition, what, timeout=20.0):
    end = time.monotonic() + timeout
    while time.monotonic() < end:
        value = condition(driver)
        if value:
            return value
        time.sleep(0.1)
    raise AssertionError(f"timed out waiting for {what}; status: "
                         f"{driver.find_element('id', 'status').text!r}")


def test_record_two_takes_of_two_words(page_server, tmp_path, tmp_path_factory):
    from selenium.webdriver.common.action_chains import ActionChains
    from selenium.webdriver.common.keys import Keys

    app, url = page_server
    mic = fake_microphone_file(SOURCE, tmp_path / "fake-mic.wav")
    driver = start_chromium(tmp_path / "profile", fake_audio=mic)
    try:
        driver.get(url)
        _wait(driver, lambda d: d.find_elements("css selector", "#words button"), "the word list")
        keys = ActionChains(driver)
        said = []
        for _ in range(4):
            word = driver.find_element("id", "current-word").text
            said.append(word)
            keys.send_keys(Keys.SPACE).perform()
            _wait(driver, lambda d: "Recording" in d.find_element("id", "status").text, "recording to start")
            time.sleep(2.5)
            keys.send_keys(Keys.SPACE).perform()
            _wait(driver, lambda d: d.find_element("id", "keep").is_enabled(), "the take to be checked")
            keys.send_keys(Keys.ENTER).perform()
            _wait(driver, lambda d: "Saved" in d.find_element("id", "status").text, "the take to be saved")
            _wait(driver, lambda d: not d.find_element("id", "keep").is_enabled(), "the page to settle")
        screenshot = artifact_folder(tmp_path_factory) / "recording-page.png"
        driver.save_screenshot(str(screenshot))
        errors = console_errors(driver)
    finally:
        driver.quit()
    assert said == ["oven", "oven", "start", "start"]  # the page moves on when a word is done
    assert errors == []
    assert screenshot.stat().st_size > 10_000

    with open(app.takes.folder / "train.csv", newline="", encoding="utf-8") as fh:
        rows = list(csv.DictReader(fh))
    assert [r["transcript"] for r in rows] == ["oven", "oven", "start", "start"]
    assert len({r["path"] for r in rows}) == 4
    assert {r["speaker"] for r in rows} == {"baker-a"}
    source_peak = np.max(np.abs(sf.read(SOURCE)[0]))
    for r in rows:
        path = app.takes.folder / r["path"]
        info = sf.info(path)
        assert (info.samplerate, info.channels, info.subtype) == (16000, 1, "PCM_16")
        wave, _ = sf.read(path)
        # trimmed to the speech plus 0.25 s margins: more than the word, less than the
        # 2.5 s recorded (with room for a slow machine pressing Space late)
        assert 0.4 < info.duration < 4.0
        # not silent: the fake microphone's voice at close to its own level (resampling and
        # the browser's processing keep the peak within a factor of two)
        assert np.max(np.abs(wave)) > 0.5 * source_peak
    assert not (app.takes.folder / "held-out.csv").exists()
