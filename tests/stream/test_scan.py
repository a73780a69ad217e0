"""Scanning long recordings with the shipped starter model and the bakery words."""

from pathlib import Path

import numpy as np
import pytest
import soundfile as sf

from conftest import LEXICON_DIR
from long_audio import demo_items, glue
from wordspot.decoding.decoder import build_recognizer
from wordspot.errors import DecodingError
from wordspot.language.lexicon import read_lexicon
from wordspot.model import load_model
from wordspot.stream.detector import DetectorSettings
from wordspot.stream.scan import FoundWord, ScanSettings, group_words, scan_file, whole_commands

TEST_VOICES = ("flite-rms", "festival-ked", "espeak-en-029-m4")


@pytest.fixture(scope="module")
def recognizer():
    return build_recognizer(load_model("starter"), lexicon=read_lexicon(LEXICON_DIR / "bakery.txt"))


@pytest.fixture(scope="module")
def long_file(tmp_path_factory):
    rng = np.random.default_rng(20261202)
    items = demo_items("test-phrases.csv", TEST_VOICES)[:8] + demo_items("test.csv", TEST_VOICES)[::40]
    path = tmp_path_factory.mktemp("long") / "counter.wav"
    return glue(path, items, rng, gap=(1.5, 5.0), noise_dbfs=-50.0, clatter=3.0)


def _key(result):
    return [(c.words, round(c.start, 6), round(c.end, 6), round(c.confidence, 6)) for c in result.commands]


def test_blocks_give_the_same_commands_as_the_whole_file(recognizer, long_file):
    # The file is longer than the block: 2 s blocks against one block holding everything.
    whole = scan_file(recognizer, long_file.path, settings=ScanSettings(block_seconds=3600.0))
    blocks = scan_file(recognizer, long_file.path, settings=ScanSettings(block_seconds=2.0))
    assert whole.duration > 40 and whole.commands
    assert _key(blocks) == _key(whole)
    assert blocks.stretches == whole.stretches


def test_commands_are_found_where_they_were_said(recognizer, long_file):
    # The labels come from the demo manifests (speech_start / speech_end), not from us.
    # Of the commands the recognizer gets right in their own files, at least 80% must be
    # found in the long file (over a different background) with the same words, starting
    # and ending within 0.3 s of the label.
    result = scan_file(recognizer, long_file.path)
    right_alone, found = 0, 0
    for label, item in zip(long_file.commands, _items_in_order(long_file)):
        if tuple(recognizer.decode_file(item).words) != label.words:
            continue
        right_alone += 1
        found += any(c.words == label.words and abs(c.start - label.start) <= 0.3 and abs(c.end - label.end) <= 0.3
                     for c in result.commands)
    assert right_alone >= 6
    assert found >= 0.8 * right_alone, f"{found} of {right_alone} found"


def _items_in_order(rec):
    items = demo_items("test-phrases.csv", TEST_VOICES)[:8] + demo_items("test.csv", TEST_VOICES)[::40]
    return [path for path, *_ in items][: len(rec.commands)]


def test_noise_only_gives_nothing(recognizer, tmp_path, rng):
    # A minute of steady background (no speech) has no stretch, so no command.
    x = (10 ** (-40 / 20) * rng.normal(size=60 * 16000)).astype(np.float32)
    sf.write(tmp_path / "fan.wav", x, 16000)
    result = scan_file(recognizer, tmp_path / "fan.wav")
    assert result.commands == [] and result.stretches == 0 and not result.error
    assert result.duration == pytest.approx(60.0)


def test_min_confidence_drops_words(recognizer, long_file):
    # the rule that judges each word by itself
    every = scan_file(recognizer, long_file.path, settings=ScanSettings(command_rule="word"))
    confidences = sorted(w.confidence for c in every.commands for w in c.parts)
    threshold = confidences[len(confidences) // 2]
    kept = scan_file(recognizer, long_file.path, settings=ScanSettings(min_confidence=threshold, command_rule="word"))
    kept_words = [w for c in kept.commands for w in c.parts]
    assert kept_words == [w for c in every.commands for w in c.parts if w.confidence >= threshold]
    assert all(c.confidence == min(w.confidence for w in c.parts) for c in kept.commands)


def test_commands_are_kept_or_dropped_whole(recognizer, long_file):
    # The "mean" rule: a command's confidence is the mean of its words' and reaches the threshold.
    every = scan_file(recognizer, long_file.path, settings=ScanSettings(command_rule="mean", command_confidence=0.0))
    means = sorted(c.confidence for c in every.commands)
    assert all(c.confidence == pytest.approx(np.mean([w.confidence for w in c.parts])) for c in every.commands)
    threshold = means[len(means) // 2]
    kept = scan_file(recognizer, long_file.path, settings=ScanSettings(command_rule="mean", command_confidence=threshold))
    assert [(c.words, c.start, c.end) for c in kept.commands] == [
        (c.words, c.start, c.end) for c in every.commands if c.confidence >= threshold]
    # a word below the threshold stays inside a kept command
    assert len(kept.commands) < len(every.commands)


def test_whole_commands_worked_by_hand():
    # worked by hand: "oven four minutes" (0.9, 0.01, 0.8; mean 0.57, best 0.9) and "yes" (0.1)
    words = [FoundWord("oven", 1.0, 1.4, 0.9), FoundWord("four", 1.5, 1.8, 0.01), FoundWord("minutes", 1.9, 2.4, 0.8),
             FoundWord("yes", 3.5, 3.8, 0.1)]
    (mean,) = whole_commands("f.wav", words, 0.35, 0.5, "mean")
    assert mean.words == ("oven", "four", "minutes") and mean.confidence == pytest.approx(0.57)
    assert (mean.start, mean.end) == (1.0, 2.4)
    (best,) = whole_commands("f.wav", words, 0.35, 0.5, "best")
    assert best.words == ("oven", "four", "minutes") and best.confidence == pytest.approx(0.9)
    assert whole_commands("f.wav", words, 0.6, 0.5, "mean") == []
    assert [c.words for c in whole_commands("f.wav", words, 0.1, 0.5, "mean")] == [("oven", "four", "minutes"),
                                                                                  ("yes",)]
    with pytest.raises(DecodingError, match="rule"):
        whole_commands("f.wav", words, 0.35, 0.5, "lowest")


def test_by_default_a_weak_word_inside_a_command_keeps_the_command_whole():
    # A stretch's recognition, worked by hand: "oven" 0.9 and "minutes" 0.8 kept by the
    # decoder's threshold 0.05, "four" 0.01 below it, "yes" 0.9 dropped as said amid talk.
    # By default (whole commands by their mean, 0.35) the command is "oven four minutes"
    # with (0.9 + 0.01 + 0.8) / 3 = 0.57; word by word it is "oven minutes" (a wrong
    # command). The word amid talk joins no command either way.
    from types import SimpleNamespace

    from wordspot.stream.scan import stretch_commands

    def seg(word, a, b, c, talk=False):
        return SimpleNamespace(word=word, start=a, end=b, confidence=c, amid_talk=talk)

    result = SimpleNamespace(segments=[seg("oven", 0.0, 0.4, 0.9), seg("minutes", 0.9, 1.4, 0.8)],
                             dropped=[seg("four", 0.5, 0.8, 0.01), seg("yes", 3.0, 3.3, 0.9, talk=True)])
    (whole,) = stretch_commands(result, 10.0, 0.05, ScanSettings(), "f.wav")
    assert whole.words == ("oven", "four", "minutes") and whole.confidence == pytest.approx(0.57)
    assert (whole.start, whole.end) == (10.0, 11.4)
    (alone,) = stretch_commands(result, 10.0, 0.05, ScanSettings(command_rule="word"), "f.wav")
    assert alone.words == ("oven", "minutes")
    # below the command threshold the whole command goes: 0.57 < 0.6
    assert stretch_commands(result, 10.0, 0.05, ScanSettings(command_confidence=0.6), "f.wav") == []


@pytest.mark.parametrize("bad", [{"command_rule": "lowest"}, {"command_confidence": 1.5},
                                 {"command_confidence": True}, {"normalise_seconds": -1.0}])
def test_scan_settings_refuse_bad_values(bad):
    with pytest.raises(DecodingError, match=next(iter(bad))):
        ScanSettings(**bad)


def test_long_stretches_are_capped(recognizer, long_file):
    # With a 1 s cap on speech, every stretch handed to the decoder is short.
    result = scan_file(recognizer, long_file.path,
                       settings=ScanSettings(detector=DetectorSettings(max_stretch=1.0)))
    assert all(c.end - c.start <= 1.0 + 2 * 0.25 for c in result.commands)


def test_grouping_splits_at_long_pauses():
    # worked by hand: pauses 0.2 s and 0.9 s with split_pause 0.5 give two commands
    words = [FoundWord("oven", 1.0, 1.4, 0.9), FoundWord("start", 1.6, 2.0, 0.7), FoundWord("yes", 2.9, 3.2, 0.8)]
    a, b = group_words("f.wav", words, 0.5)
    assert (a.words, a.start, a.end, a.confidence) == (("oven", "start"), 1.0, 2.0, 0.7)
    assert (b.words, b.start, b.end, b.confidence) == (("yes",), 2.9, 3.2, 0.8)


def test_unreadable_files_are_results_with_an_error(recognizer, tmp_path):
    result = scan_file(recognizer, tmp_path / "gone.flac")
    assert "gone.flac" in result.error and "not found" in result.error and result.commands == []
    with pytest.raises(DecodingError, match="min_confidence"):
        ScanSettings(min_confidence=1.5)


def test_api_min_confidence_judges_whole_commands(long_file):
    from wordspot import api

    results = api.scan("starter", long_file.path, lexicon=LEXICON_DIR / "bakery.txt", min_confidence=0.9)
    assert results[0].commands and all(c.confidence >= 0.9 for c in results[0].commands)
    low = api.scan("starter", long_file.path, lexicon=LEXICON_DIR / "bakery.txt", min_confidence=0.0)
    assert len(low[0].commands) > len(results[0].commands)
