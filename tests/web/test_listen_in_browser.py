"""Listen for commands, in a real browser: headless Chromium with a fake microphone.

The fake microphone plays demo recordings of four bakery words (a voice the model was not
adapted to) with a second and a half of quiet between them; the page's model is the
starter adapted to those words (tests/listen_audio.py). The test switches Listen on,
waits for the commands in the page's list, switches it off, and checks that every
microphone track has ended and nothing was logged as an error.
"""

import threading
import time

import pytest

from browser_helpers import artifact_folder, console_errors, start_chromium
from listen_audio import fake_microphone_commands, small_lexicon, train_small_model
from test_page_in_browser import KEEP_STREAMS, TRACK_STATES
from wordspot.web.server import RecordingApp, RecordingSettings, make_server

pytestmark = pytest.mark.slow

SAID = ("oven", "stop", "timer", "start")


@pytest.fixture(scope="module")
def model_file(tmp_path_factory):
    return train_small_model(tmp_path_factory.mktemp("listen-model"))


@pytest.fixture
def listen_server(tmp_path, model_file):
    folder = tmp_path / "takes"
    folder.mkdir()
    (folder / "words.model").write_bytes(model_file.read_bytes())
    app = RecordingApp(RecordingSettings(folder=folder, lexicon=small_lexicon(tmp_path / "words.txt")))
    server = make_server(app)
    threading.Thread(target=server.serve_forever, daemon=True).start()
    yield app, f"http://127.0.0.1:{server.server_address[1]}/"
    server.shutdown()
    server.server_close()
    app.stop()


def _wait(driver, condition, what, timeout=30.0):
    end = time.monotonic() + timeout
    while time.monotonic() < end:
        value = condition(driver)
        if value:
            return value
        time.sleep(0.2)
    raise AssertionError(f"timed out waiting for {what}; listening: "
                         f"{driver.find_element('id', 'listen-status').text!r}")


def _heard(driver):
    """The rows of the page's list of heard commands, oldest first: (time, words, confidence)."""
    rows = driver.find_elements("css selector", "#heard tr")
    return [tuple(td.text for td in r.find_elements("tag name", "td")) for r in reversed(rows)]


def test_commands_said_to_the_microphone_are_listed(listen_server, tmp_path, tmp_path_factory):
    app, url = listen_server
    mic, said = fake_microphone_commands(tmp_path / "fake-mic.wav", SAID)
    driver = start_chromium(tmp_path / "profile", fake_audio=mic)
    try:
        driver.get(url)
        _wait(driver, lambda d: not d.find_element("id", "listen-switch").get_attribute("disabled"),
              "the Listen switch (the page knows the model)")
        driver.execute_script(KEEP_STREAMS)
        before = driver.find_element("id", "mic-state").text
        driver.find_element("id", "listen-switch").click()
        _wait(driver, lambda d: "Listening" in d.find_element("id", "listen-status").text, "listening to start")
        on = (driver.find_element("id", "mic-state").text, driver.find_element("id", "mic-state").get_attribute("data-on"),
              driver.find_element("id", "listen-switch").get_attribute("aria-pressed"),
              driver.execute_script(TRACK_STATES), len(app.listening))
        # the fake microphone plays the four words within 13 s (and then again, in a loop)
        _wait(driver, lambda d: len(_heard(d)) >= len(SAID), "the four commands", timeout=60.0)
        shown = _heard(driver)
        driver.find_element("id", "listen-switch").click()
        _wait(driver, lambda d: "Stopped listening" in d.find_element("id", "listen-status").text, "listening to stop")
        off = (driver.find_element("id", "mic-state").text, driver.find_element("id", "mic-state").get_attribute("data-on"),
               driver.find_element("id", "listen-switch").get_attribute("aria-pressed"),
               driver.execute_script(TRACK_STATES), len(app.listening))
        driver.save_screenshot(str(artifact_folder(tmp_path_factory) / "listen-page.png"))
        errors = console_errors(driver)
    finally:
        driver.quit()
    assert before == "Microphone off"
    assert on == ("Microphone on", "true", "true", ["audio live"], 1)
    assert off == ("Microphone off", "false", "false", ["audio ended"], 0)  # every track stopped, session freed
    assert errors == []
    # the first four commands shown are the four said, in order, each at about the time the
    # demo manifest says the word starts: the fake microphone starts its file when the page
    # opens it, and sound that arrives before the page's audio graph is connected is not
    # sent, so a time may be early by that delay but never late by more than 0.3 s
    first = shown[:len(SAID)]
    assert [words for _, words, _ in first] == list(SAID)
    for (when, _, sure), s in zip(first, said):
        minutes, seconds = when.split(":")
        assert -1.0 <= 60 * int(minutes) + float(seconds) - s.start <= 0.3, (when, s)
        assert sure.endswith("%") and 0 <= int(sure[:-1]) <= 100


def test_listening_ended_by_the_server_is_said_in_plain_words(listen_server, tmp_path):
    from selenium.webdriver.common.action_chains import ActionChains

    app, url = listen_server
    mic, _ = fake_microphone_commands(tmp_path / "fake-mic.wav", SAID)
    driver = start_chromium(tmp_path / "profile", fake_audio=mic)
    try:
        driver.get(url)
        _wait(driver, lambda d: not d.find_element("id", "listen-switch").get_attribute("disabled"), "the Listen switch")
        driver.execute_script(KEEP_STREAMS)
        ActionChains(driver).send_keys("s").perform()  # the page's key for Start / Stop listening
        _wait(driver, lambda d: "Listening" in d.find_element("id", "listen-status").text, "listening to start")
        _wait(driver, lambda d: len(app.listening) == 1, "the server's session")
        # what the page meets when its session is freed (idle, or the server stopping)
        app.listening.stop_all()
        _wait(driver, lambda d: "stopped" in d.find_element("id", "listen-status").text, "the page to notice")
        status = driver.find_element("id", "listen-status")
        said = (status.text, status.get_attribute("class"), driver.find_element("id", "mic-state").text,
                driver.execute_script(TRACK_STATES),
                driver.find_element("id", "listen-switch").get_attribute("aria-pressed"))
        errors = console_errors(driver)
    finally:
        driver.quit()
    assert said == ("Listening stopped: listening has ended (the server stopped); switch Listen on again",
                    "error", "Microphone off", ["audio ended"], "false")
    # the only messages logged are the browser's own lines about the refused block and the
    # page's stop request that follows it (both 404: the session is gone)
    assert errors and all("/api/listen/" in e and "status of 404" in e for e in errors), errors
