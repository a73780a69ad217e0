"""Live listening: a demo long recording pushed in blocks of any size gives the commands of a scan."""

from pathlib import Path

import numpy as np
import pytest
import soundfile as sf
import soxr

from conftest import LEXICON_DIR
from wordspot.decoding.decoder import build_recognizer
from wordspot.errors import AudioError, DecodingError
from wordspot.language.lexicon import read_lexicon
from wordspot.model import load_model
from wordspot.stream.detector import DetectorSettings
from wordspot.stream.live import LIVE_DETECTOR, ListenSettings, LiveListener
from wordspot.stream.scan import scan_file

REPO = Path(__file__).resolve().parents[2]
# a demo long recording (recordings/long.csv): talk, kitchen noise and 13 commands, 85 s at 16 kHz
LONG = REPO / "recordings" / "audio" / "long" / "festival-ked" / "long-02.flac"


@pytest.fixture(scope="module")
def recognizer():
    return build_recognizer(load_model("starter"), lexicon=read_lexicon(LEXICON_DIR / "bakery.txt"))


@pytest.fixture(scope="module")
def wave():
    x, rate = sf.read(LONG, dtype="float32")
    assert rate == 16000
    return x


def _listen(recognizer, x, rate, sizes, settings=None):
    listener = LiveListener(recognizer, input_rate=rate, settings=settings)
    out, i, k = [], 0, 0
    while i < x.size:
        n = sizes[k % len(sizes)]
        out += listener.push(x[i : i + n])
        i, k = i + n, k + 1
    assert listener.heard_seconds == pytest.approx(x.size / rate)
    return out + listener.finish()


def _key(commands):
    return [(c.words, round(c.start, 6), round(c.end, 6), round(c.confidence, 6)) for c in commands]


def test_block_size_does_not_change_the_commands(recognizer, wave, rng):
    whole = _listen(recognizer, wave, 16000, [wave.size])
    assert len(whole) >= 8
    for sizes in ([160], [1, 399, 4000], [int(n) for n in rng.integers(1, 48000, size=15)]):
        assert _key(_listen(recognizer, wave, 16000, sizes)) == _key(whole)


def test_same_commands_as_a_scan_with_the_live_detector(recognizer, wave):
    # the file scan with the same settings recognises the same stretches the same way
    live = _listen(recognizer, wave, 16000, [1600])
    scanned = scan_file(recognizer, LONG, settings=ListenSettings().scan_settings())
    assert not scanned.error
    assert _key(live) == _key(scanned.commands)
    assert all(c.path == "-" for c in live)
    # judged whole, as the scan: a command's confidence is its words' mean, at least 0.35
    assert any(len(c.parts) > 1 for c in live)
    for c in live:
        assert c.confidence == pytest.approx(np.mean([w.confidence for w in c.parts])) and c.confidence >= 0.35


def test_other_input_rates_are_resampled_inside(recognizer, wave):
    # 44.1 kHz input: the same commands for any block size (soxr's streaming resampler keeps
    # its state between blocks), and nearly the same as at the model's own rate.
    up = soxr.resample(wave, 16000, 44100)
    a = _listen(recognizer, up, 44100, [441])
    b = _listen(recognizer, up, 44100, [100000, 7, 30001])
    assert _key(a) == _key(b)
    native = _listen(recognizer, wave, 16000, [1600])
    same = sum(any(c.words == n.words and abs(c.start - n.start) < 0.05 for n in native) for c in a)
    assert same >= 0.8 * len(native)


def test_memory_holds_only_the_stretch_in_progress(recognizer, wave):
    # Looped three times (over four minutes): the samples held never exceed the longest
    # stretch the detector allows (max_stretch plus padding, look-back, hangover, one block).
    s = LIVE_DETECTOR
    bound = (s.max_stretch + 2 * s.padding + s.lookback + s.hangover + 0.1) * 16000
    listener = LiveListener(recognizer, input_rate=16000)
    most = 0
    for _ in range(3):
        for i in range(0, wave.size, 1600):
            listener.push(wave[i : i + 1600])
            most = max(most, listener.held_samples)
    assert 0 < most <= bound


def test_bad_settings_and_samples(recognizer):
    with pytest.raises(DecodingError, match="floor_ahead"):
        ListenSettings(detector=DetectorSettings())
    with pytest.raises(DecodingError, match="split_pause"):
        ListenSettings(split_pause=-1.0)
    with pytest.raises(AudioError, match="input_rate"):
        LiveListener(recognizer, input_rate=0)
    listener = LiveListener(recognizer, input_rate=16000)
    assert listener.push(np.zeros(0, np.float32)) == []
    with pytest.raises(AudioError, match="NaN"):
        listener.push(np.array([0.0, np.nan], np.float32))
    listener.finish()
    with pytest.raises(AudioError, match="after finish"):
        listener.push(np.zeros(10, np.float32))


def test_a_command_followed_by_talk_is_reported_before_the_talk_stops(recognizer):
    # In this demo recording "pause" (labelled 28.669-29.329 s, recordings/long.csv) is
    # followed at once by other talk, so its stretch stays open for about 6 s more. The
    # listener looks at the stretch in progress five times a second and reports the
    # command once 0.6 s (split_pause + early_hold) without a command word follow it;
    # waiting for the pause (early_every 0) reports it only when the talk stops.
    x, rate = sf.read(REPO / "recordings" / "audio" / "long" / "flite-rms" / "long-06.flac", dtype="float32")
    end = 29.329

    def reported_at(settings):
        listener = LiveListener(recognizer, input_rate=rate, settings=settings)
        for i in range(0, x.size, 320):
            for c in listener.push(x[i : i + 320]):
                if c.start < end and end - 0.7 < c.end:
                    return (i + 320) / rate, c
        raise AssertionError("the command was not found")

    early, command = reported_at(ListenSettings())
    late, _ = reported_at(ListenSettings(early_every=0.0))
    assert command.words == ("pause",)
    assert early - end <= 1.0
    assert late - end > 3.0


def test_early_reports_do_not_depend_on_the_block_size(recognizer):
    x, rate = sf.read(REPO / "recordings" / "audio" / "long" / "flite-rms" / "long-06.flac", dtype="float32")
    a = _listen(recognizer, x, rate, [320])
    b = _listen(recognizer, x, rate, [x.size])
    assert _key(a) == _key(b) and len(a) >= 8
    with pytest.raises(DecodingError, match="early_span"):
        ListenSettings(early_span=-1.0)
