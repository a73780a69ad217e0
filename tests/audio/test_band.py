"""The bandwidth check: telephone-band recordings given to a wideband model are named."""

import numpy as np
import soundfile as sf
import soxr

from conftest import RECORDINGS
from decoding_helpers import tiny_model
from wordspot.audio.band import NARROW_DB, high_band_db, is_narrow_band, measure_band
from wordspot.audio.reading import load_audio
from wordspot.cli import main
from wordspot.model import save_model

DEMO = RECORDINGS / "audio" / "test" / "flite-rms" / "cancel-t1.flac"


def _telephone(x, rate=16000):
    """Down to 8 kHz and back: nothing above 4 kHz survives (Nyquist: 8000 / 2)."""
    return soxr.resample(soxr.resample(x, rate, 8000), 8000, rate)


def test_white_noise_share_matches_the_band_widths(rng):
    # White noise has flat power: the share above 4 kHz of the power above 100 Hz is the
    # ratio of band widths, (8000 - 4000) / (8000 - 100), -2.96 dB (worked by hand).
    x = rng.normal(size=16000 * 4)
    assert abs(high_band_db(x, 16000) - 10 * np.log10(4000 / 7900)) < 0.2


def test_demo_speech_is_wide_and_its_telephone_copy_narrow():
    x = load_audio(DEMO, sample_rate=16000)
    assert not is_narrow_band(x, 16000)
    y = _telephone(x)
    assert high_band_db(y, 16000) < NARROW_DB
    assert is_narrow_band(y, 16000)
    # an 8 kHz model rate cannot carry the band at all: never "narrow"
    assert not is_narrow_band(soxr.resample(x, 16000, 8000), 8000)
    # silence is not narrowband speech
    assert not is_narrow_band(np.zeros(16000), 16000)


def test_recognize_names_telephone_band_files_once(rng, tmp_path, capsys):
    model = tiny_model(rng, {"oven": [["AA", "B"]], "stop": [["S", "T"]]})
    model_path = save_model(model, tmp_path / "m.model")
    wide = rng.normal(size=16000).astype(np.float32) * 0.1
    narrow = _telephone(wide.astype(np.float64)).astype(np.float32)
    sf.write(tmp_path / "wide.wav", wide, 16000)
    sf.write(tmp_path / "narrow-a.wav", narrow, 16000)
    sf.write(tmp_path / "narrow-b.wav", narrow, 16000)
    assert main(["recognize", "--model", str(model_path), str(tmp_path / "wide.wav")]) == 0
    assert "telephone band" not in capsys.readouterr().err
    assert main(["recognize", "--model", str(model_path), str(tmp_path / "wide.wav"),
                 str(tmp_path / "narrow-a.wav"), str(tmp_path / "narrow-b.wav")]) == 0
    err = capsys.readouterr().err
    assert err.count("telephone band") == 1
    assert "2 of 3 recording(s)" in err and "--model starter-8k" in err


def test_measure_band_of_a_set(tmp_path, rng):
    files = []
    for i in range(3):
        sf.write(tmp_path / f"n{i}.wav", _telephone(rng.normal(size=16000) * 0.1).astype(np.float32), 16000)
        files.append(tmp_path / f"n{i}.wav")
    band = measure_band(files, 16000)
    assert band["narrow"] and band["measured"] == 3
    assert measure_band([tmp_path / "missing.wav"], 16000) == {"high_band_db": None, "narrow": False, "measured": 0}
