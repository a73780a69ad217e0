"""Early looks at a stretch in progress with whole commands judged (the "mean" rule).

The recognizer is replaced by a script of words at fixed stream times, so the test sees
exactly what each look keeps and drops: a command whose second word is still being said
is weak so far (its mean below the threshold); a look must not cut its first word away,
or the later look would judge only the rest and differ from a scan of the whole stretch.
Source: common practice, no source (a command is judged on all of its words).
"""

from types import SimpleNamespace

import numpy as np
import pytest

import wordspot.stream.scan as scan_module
from wordspot.stream.live import ListenSettings
from wordspot.stream.scan import StretchScanner

RATE = 16000
# word, start s, end s, confidence once heard whole; "oven" alone is weak, the mean is 0.45
SCRIPT = (("oven", 4.0, 4.4, 0.3), ("start", 4.6, 5.0, 0.6))


@pytest.fixture
def wave():
    # quiet, 3.5 s of loud noise (the speech detector's stretch), quiet; every sample's place
    # can be found from the samples themselves (random values)
    rng = np.random.default_rng(20261204)
    level = np.full(8 * RATE, 1e-3)
    level[3 * RATE : int(6.5 * RATE)] = 0.1
    return (rng.standard_normal(8 * RATE) * level).astype(np.float32)


@pytest.fixture
def scripted(monkeypatch, wave):
    place = {wave[i : i + 16].tobytes(): i for i in range(wave.size - 16)}

    def decode(recognizer, x, normalise_seconds=0.0):
        at = place[x[:16].tobytes()] / RATE
        until = at + x.size / RATE
        words = []
        for word, start, end, confidence in SCRIPT:
            if start < at or start >= until:
                continue  # cut away, or not said yet
            whole = until >= end + 0.3
            words.append(SimpleNamespace(word=word, start=start - at, end=min(end, until) - at,
                                         confidence=confidence if whole else 0.05, amid_talk=False))
        kept = [w for w in words if w.confidence >= recognizer.min_confidence]
        return SimpleNamespace(segments=kept, dropped=[w for w in words if w not in kept])

    monkeypatch.setattr(scan_module, "decode_stretch", decode)
    return SimpleNamespace(features=SimpleNamespace(sample_rate=RATE, window_length=400), min_confidence=0.5)


def _run(recognizer, wave, settings):
    scanner = StretchScanner(recognizer, settings.scan_settings())
    found = []
    for i in range(0, wave.size, 320):
        found += scanner.push(wave[i : i + 320])
    return [(c.words, round(c.confidence, 6)) for c in found + scanner.finish()]


def test_a_command_still_being_said_is_not_cut_by_an_early_look(scripted, wave):
    whole = ListenSettings(command_rule="mean", early_every=0.0)
    assert _run(scripted, wave, whole) == [(("oven", "start"), 0.45)]
    for span in (0.0, 3.0):
        early = ListenSettings(command_rule="mean", early_span=span)
        assert _run(scripted, wave, early) == [(("oven", "start"), 0.45)]


def test_the_word_rule_judges_each_word(scripted, wave):
    # "oven" (0.3) is below the recognizer's threshold (0.5) with either way of reporting
    for every in (0.0, 0.2):
        assert _run(scripted, wave, ListenSettings(command_rule="word", early_every=every)) == [(("start",), 0.6)]
