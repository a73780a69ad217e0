"""Makes ``docs/recording-page.png``, the recording page shown in README.

Run from the repository root: ``python tests/web/shoot_recording_page.py [OUT]``. It starts
the page on five bakery words in a scratch folder, records with Chromium's fake microphone
(a demo recording), keeps two takes of "stop" and leaves a third waiting, then saves the
browser window (1100 pixels wide) as OUT (default ``docs/recording-page.png``).
"""

import shutil
import sys
import tempfile
import threading
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent))

from browser_helpers import console_errors, fake_microphone_file, start_chromium  # noqa: E402
from conftest import LEXICON_DIR, RECORDINGS, REPO  # noqa: E402
from wordspot.web.server import RecordingApp, RecordingSettings, make_server  # noqa: E402

__all__ = ["shoot"]

WORDS = ("mixer", "oven", "start", "stop", "timer")
SOURCE = RECORDINGS / "audio" / "train" / "espeak-en-gb-f3" / "back-t1.flac"


def _wait(driver, condition, what, timeout=20.0):
    end = time.monotonic() + timeout
    while time.monotonic() < end:
        if condition(driver):
            return
        time.sleep(0.1)
    raise SystemExit(f"timed out waiting for {what}")


def shoot(out: Path, scratch: Path) -> None:
    """Record on the page in ``scratch`` and save the window as ``out``."""
    lines = (LEXICON_DIR / "bakery.txt").read_text(encoding="utf-8").splitlines()
    lexicon = scratch / "bakery-five.txt"
    lexicon.write_text("".join(line + "\n" for line in lines if line.split(" ", 1)[0] in WORDS), encoding="utf-8")
    app = RecordingApp(RecordingSettings(folder=scratch / "my-takes", lexicon=lexicon, takes=3, speaker="baker-a"))
    server = make_server(app)
    threading.Thread(target=server.serve_forever, daemon=True).start()
    mic = fake_microphone_file(SOURCE, scratch / "fake-mic.wav")
    driver = start_chromium(scratch / "profile", fake_audio=mic, width=1100, height=1050)
    try:
        from selenium.webdriver.common.action_chains import ActionChains

        driver.get(f"http://127.0.0.1:{server.server_address[1]}/")
        _wait(driver, lambda d: d.find_elements("css selector", "#words button"), "the word list")
        keys = ActionChains(driver)
        while driver.find_element("id", "current-word").text != "stop":
            keys.send_keys("n").perform()
        for take in range(3):
            keys.send_keys("r").perform()
            _wait(driver, lambda d: "Recording" in d.find_element("id", "status").text, "recording to start")
            time.sleep(2.2)
            keys.send_keys("r").perform()
            _wait(driver, lambda d: d.find_element("id", "keep").is_enabled(), "the take to be checked")
            if take < 2:
                keys.send_keys("k").perform()
                _wait(driver, lambda d: "Saved" in d.find_element("id", "status").text, "the take to be saved")
                _wait(driver, lambda d: not d.find_element("id", "keep").is_enabled(), "the page to settle")
        driver.execute_script("window.scrollTo(0, 0); document.activeElement.blur();")
        time.sleep(0.5)
        driver.save_screenshot(str(out))
        errors = console_errors(driver)
    finally:
        driver.quit()
        server.shutdown()
        server.server_close()
    if errors:
        raise SystemExit("the page logged errors: " + "; ".join(errors))


if __name__ == "__main__":
    target = Path(sys.argv[1]) if len(sys.argv) > 1 else REPO / "docs" / "recording-page.png"
    folder = Path(tempfile.gettempdir()) / "wordspot-shot"  # a steady name: the page shows it
    shutil.rmtree(folder, ignore_errors=True)
    folder.mkdir()
    try:
        shoot(target, folder)
    finally:
        shutil.rmtree(folder, ignore_errors=True)
    print(f"wrote {target}")
