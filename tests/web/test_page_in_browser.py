"""The recording page in a real browser: headless Chromium with a fake microphone.

The fake microphone plays a shipped demo recording (a synthetic voice saying "back") in a
loop; the test records two takes of two words with the keyboard alone (the page's own
keys: R record / stop, K keep, A record again, L listen, N next word, B back one word),
then checks the files and the manifest as soundfile and the csv module read them. Another
test checks that the microphone is released after every take.
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

    app, url = page_server
    mic = fake_microphone_file(SOURCE, tmp_path / "fake-mic.wav")
    driver = start_chromium(tmp_path / "profile", fake_audio=mic)
    try:
        driver.get(url)
        _wait(driver, lambda d: d.find_elements("css selector", "#words button"), "the word list")
        keys = ActionChains(driver)
        current = lambda: driver.find_element("id", "current-word").text  # noqa: E731

        # N and B move between the words, round the end of the list
        moves = []
        for key in "nbb":
            keys.send_keys(key).perform()
            moves.append(current())
        keys.send_keys("n").perform()
        # letters typed into a text box stay there and press nothing
        box = driver.find_element("id", "new-word")
        box.click()
        box.send_keys("rkn")
        typed = (box.get_attribute("value"), current(), driver.find_element("id", "status").text,
                 driver.find_element("id", "mic-state").text)
        box.clear()
        driver.find_element("id", "words").click()  # focus out of the box

        said = []
        for n in range(4):
            word = current()
            said.append(word)
            for attempt in range(2 if n == 0 else 1):
                keys.send_keys("r").perform()
                _wait(driver, lambda d: "Recording" in d.find_element("id", "status").text, "recording to start")
                time.sleep(2.5)
                keys.send_keys("R").perform()  # with Shift or Caps Lock as well
                _wait(driver, lambda d: d.find_element("id", "keep").is_enabled(), "the take to be checked")
                if attempt == 0 and n == 0:
                    keys.send_keys("l").perform()
                    _wait(driver, lambda d: "Playing" in d.find_element("id", "status").text, "the take to play")
                    keys.send_keys("a").perform()  # record again: the take is thrown away
                    _wait(driver, lambda d: "thrown away" in d.find_element("id", "status").text, "the take to go")
                    assert not driver.find_element("id", "keep").is_enabled()
            keys.send_keys("k").perform()
            _wait(driver, lambda d: "Saved" in d.find_element("id", "status").text, "the take to be saved")
            _wait(driver, lambda d: not d.find_element("id", "keep").is_enabled(), "the page to settle")
        screenshot = artifact_folder(tmp_path_factory) / "recording-page.png"
        driver.save_screenshot(str(screenshot))
        errors = console_errors(driver)
    finally:
        driver.quit()
    assert moves == ["start", "oven", "start"]
    assert typed == ("rkn", "oven", "", "Microphone off")
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
        # 2.5 s recorded (with room for a slow machine pressing R late)
        assert 0.4 < info.duration < 4.0
        # not silent: the fake microphone's voice at close to its own level (resampling and
        # the browser's processing keep the peak within a factor of two)
        assert np.max(np.abs(wave)) > 0.5 * source_peak
    assert not (app.takes.folder / "held-out.csv").exists()


# Keeps every stream the page gets from getUserMedia in window.openedStreams, so the test
# can look at their tracks after a take (MediaStreamTrack.readyState is "live" or "ended",
# from the W3C Media Capture and Streams specification).
KEEP_STREAMS = """
window.openedStreams = [];
const original = navigator.mediaDevices.getUserMedia.bind(navigator.mediaDevices);
navigator.mediaDevices.getUserMedia = async (constraints) => {
  const stream = await original(constraints);
  window.openedStreams.push(stream);
  return stream;
};
"""
TRACK_STATES = "return window.openedStreams.flatMap((s) => s.getTracks().map((t) => t.kind + ' ' + t.readyState));"


def test_microphone_is_released_after_each_take(page_server, tmp_path):
    _, url = page_server
    mic = fake_microphone_file(SOURCE, tmp_path / "fake-mic.wav")
    driver = start_chromium(tmp_path / "profile", fake_audio=mic)
    try:
        driver.get(url)
        _wait(driver, lambda d: d.find_elements("css selector", "#words button"), "the word list")
        driver.execute_script(KEEP_STREAMS)
        before = driver.find_element("id", "mic-state").text if driver.find_elements("id", "mic-state") else None
        states = []
        for take in range(2):
            driver.find_element("id", "record").click()
            _wait(driver, lambda d: "Recording" in d.find_element("id", "status").text, "recording to start")
            states.append(("recording", driver.execute_script(TRACK_STATES)))
            time.sleep(1.5)
            driver.find_element("id", "record").click()
            _wait(driver, lambda d: d.find_element("id", "keep").is_enabled(), "the take to be checked")
            states.append(("checked", driver.execute_script(TRACK_STATES)))
            # listening to the take plays it back without opening the microphone again
            driver.find_element("id", "play").click()
            time.sleep(0.5)
            states.append(("played", driver.execute_script(TRACK_STATES)))
            if take == 0:
                driver.find_element("id", "keep").click()
                _wait(driver, lambda d: "Saved" in d.find_element("id", "status").text, "the take to be saved")
        indicator = driver.find_element("id", "mic-state").text if driver.find_elements("id", "mic-state") else None
        errors = console_errors(driver)
    finally:
        driver.quit()
    # while recording exactly the streams opened so far exist and the newest one is live;
    # after the take every track of every stream has been stopped
    assert states[0] == ("recording", ["audio live"])
    assert states[1] == ("checked", ["audio ended"])
    assert states[2] == ("played", ["audio ended"])
    assert states[3] == ("recording", ["audio ended", "audio live"])  # a new stream for the next take
    assert states[4] == ("checked", ["audio ended", "audio ended"])
    assert states[5] == ("played", ["audio ended", "audio ended"])
    assert before == "Microphone off"
    assert indicator == "Microphone off"
    assert errors == []
