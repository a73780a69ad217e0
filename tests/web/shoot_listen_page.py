"""Makes ``docs/listen-page.png``, the recording page listening for commands, shown in README.

Run from the repository root: ``python tests/web/shoot_listen_page.py [OUT]``. It adapts the
starter to four bakery words (tests/listen_audio.py, a few seconds), starts the page in a
scratch folder with that model, switches Listen on with Chromium's fake microphone playing
demo recordings of the words, waits until the four commands are listed, and saves the
browser window (1100 pixels wide) as OUT (default ``docs/listen-page.png``) while the
microphone is still on.
"""

import shutil
import sys
import tempfile
import threading
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent))

from browser_helpers import console_errors, start_chromium  # noqa: E402
from conftest import REPO  # noqa: E402
from listen_audio import fake_microphone_commands, small_lexicon, train_small_model  # noqa: E402
from wordspot.web.server import RecordingApp, RecordingSettings, make_server  # noqa: E402

__all__ = ["shoot"]

SAID = ("oven", "stop", "timer", "start")


def _wait(driver, condition, what, timeout=60.0):
    end = time.monotonic() + timeout
    while time.monotonic() < end:
        if condition(driver):
            return
        time.sleep(0.2)
    raise SystemExit(f"timed out waiting for {what}")


def shoot(out: Path, scratch: Path) -> None:
    """Listen on the page in ``scratch`` and save the window as ``out``."""
    train_small_model(scratch / "my-takes")
    app = RecordingApp(RecordingSettings(folder=scratch / "my-takes", lexicon=small_lexicon(scratch / "bakery-four.txt"),
                                         takes=3, speaker="baker-a"))
    server = make_server(app)
    threading.Thread(target=server.serve_forever, daemon=True).start()
    mic, _ = fake_microphone_commands(scratch / "fake-mic.wav", SAID)
    driver = start_chromium(scratch / "profile", fake_audio=mic, width=1100, height=900)
    try:
        driver.get(f"http://127.0.0.1:{server.server_address[1]}/")
        _wait(driver, lambda d: not d.find_element("id", "listen-switch").get_attribute("disabled"), "the page")
        driver.find_element("id", "listen-switch").click()
        _wait(driver, lambda d: len(d.find_elements("css selector", "#heard tr")) >= len(SAID), "the commands")
        driver.execute_script("document.getElementById('listen').scrollIntoView({block: 'end'});"
                              "document.activeElement.blur();")
        time.sleep(0.5)
        driver.save_screenshot(str(out))
        errors = console_errors(driver)
    finally:
        driver.quit()
        server.shutdown()
        server.server_close()
        app.stop()
    if errors:
        raise SystemExit("the page logged errors: " + "; ".join(errors))


if __name__ == "__main__":
    target = Path(sys.argv[1]) if len(sys.argv) > 1 else REPO / "docs" / "listen-page.png"
    folder = Path(tempfile.gettempdir()) / "wordspot-shot"  # a steady name: the page shows it
    shutil.rmtree(folder, ignore_errors=True)
    folder.mkdir()
    try:
        shoot(target, folder)
    finally:
        shutil.rmtree(folder, ignore_errors=True)
    print(f"wrote {target}")
