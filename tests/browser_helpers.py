"""Headless Chromium for the browser tests (Debian's chromium and chromium-driver, selenium).

Tests that need the browser call :func:`start_chromium`; it skips the test, naming what
is missing, when the browser, its driver or selenium cannot be found (``.ci/run``
installs them). The fake microphone plays a WAV file in a loop
(``--use-file-for-fake-audio-capture``) and the permission prompt is answered yes.
"""

import shutil
from pathlib import Path

import numpy as np
import pytest
import soundfile as sf
import soxr

CHROMIUM_NAMES = ("chromium", "chromium-browser")
DRIVER_NAMES = ("chromedriver", "chromium-driver")


def _which(names):
    for name in names:
        found = shutil.which(name) or (Path("/usr/bin") / name if (Path("/usr/bin") / name).exists() else None)
        if found:
            return str(found)
    return None


def fake_microphone_file(source: Path, target: Path, *, rate: int = 48000, pause: float = 0.6) -> Path:
    """A 16-bit WAV for Chromium's fake microphone: the recording with quiet before and after."""
    wave, file_rate = sf.read(source, dtype="float32", always_2d=True)
    wave = wave.mean(axis=1)
    if file_rate != rate:
        wave = soxr.resample(wave, file_rate, rate)
    quiet = np.zeros(int(pause * rate), dtype=np.float32)
    sf.write(target, np.concatenate([quiet, wave, quiet]), rate, subtype="PCM_16")
    return target


def start_chromium(profile: Path, *, fake_audio: Path | None = None, width: int = 1280, height: int = 1000):
    """A headless Chromium driven by selenium; the caller quits it."""
    webdriver = pytest.importorskip("selenium.webdriver", reason="selenium is not installed (pip install selenium)")
    from selenium.common.exceptions import WebDriverException
    from selenium.webdriver.chrome.service import Service

    browser, driver = _which(CHROMIUM_NAMES), _which(DRIVER_NAMES)
    if browser is None or driver is None:
        pytest.skip("Chromium or its driver is not installed "
                    "(apt-get install chromium chromium-driver; .ci/run does it)")
    options = webdriver.ChromeOptions()
    options.binary_location = browser
    for arg in ("--headless=new", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
                "--disable-background-networking", "--disable-component-update", "--disable-sync",
                "--disable-dev-shm-usage", "--autoplay-policy=no-user-gesture-required",
                f"--user-data-dir={profile}", f"--window-size={width},{height}"):
        options.add_argument(arg)
    if fake_audio is not None:
        options.add_argument("--use-fake-device-for-media-stream")
        options.add_argument("--use-fake-ui-for-media-stream")
        options.add_argument(f"--use-file-for-fake-audio-capture={fake_audio}")
    options.set_capability("goog:loggingPrefs", {"browser": "ALL"})
    try:
        return webdriver.Chrome(service=Service(executable_path=driver), options=options)
    except WebDriverException as exc:
        pytest.skip(f"Chromium could not be started: {str(exc).splitlines()[0]}")


def console_errors(driver) -> list[str]:
    """Messages the page logged at error level (console errors, failed loads, exceptions)."""
    return [e["message"] for e in driver.get_log("browser") if e.get("level") == "SEVERE"]


def artifact_folder(tmp_path_factory) -> Path:
    """Where the browser tests keep their screenshots (under pytest's temporary folder)."""
    folder = tmp_path_factory.getbasetemp() / "browser-artifacts"
    folder.mkdir(exist_ok=True)
    return folder
