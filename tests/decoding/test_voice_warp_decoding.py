"""Recognition with a frequency warp chosen per file (DecoderSettings.voice_warp), and the
voice mixture a model trained from scratch gets."""

import csv
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest

from wordspot.audio.features import compute_features
from wordspot.audio.reading import load_audio
from wordspot.audio.voice_warp import choose_warp
from wordspot.decoding.decoder import DecoderSettings, build_recognizer
from wordspot.errors import DecodingError, TrainingError
from wordspot.language.lexicon import read_lexicon
from wordspot.model import load_model
from wordspot.training.trainer import TrainingConfig
from wordspot.training.voice import voice_of_recordings

REPO = Path(__file__).resolve().parents[2]
REC = REPO / "recordings"


def _rows():
    with open(REC / "train.csv", newline="", encoding="utf-8") as fh:
        return list(csv.DictReader(fh))


@pytest.fixture(scope="module")
def starter_with_voice():
    """The starter with a voice mixture of 40 demo training recordings of other voices than
    the files recognised below (the last voice's)."""
    rows = _rows()
    last = sorted({r["speaker"] for r in rows})[-1]
    others = [REC / r["path"] for r in rows if r["speaker"] != last][::7][:40]
    model = load_model("starter")
    voice = voice_of_recordings(others, model.features, 8, seed=0)
    assert voice is not None and voice.dim == model.features.dim
    files = [REC / r["path"] for r in rows if r["speaker"] == last][:4]
    return model, replace(model, voice=voice), files


def _same(a, b):
    assert [s.word for s in a.segments] == [s.word for s in b.segments]
    assert a.score == b.score
    assert [s.confidence for s in a.segments] == [s.confidence for s in b.segments]


def test_warp_off_or_no_mixture_recognises_as_before(starter_with_voice):
    plain, voiced, files = starter_with_voice
    lex = read_lexicon(REPO / "lexicon" / "bakery.txt")
    before = build_recognizer(plain, lexicon=lex)
    for rec in (build_recognizer(voiced, lexicon=lex),  # a mixture, warp off (the default)
                build_recognizer(plain, lexicon=lex, settings=DecoderSettings(voice_warp=True))):  # on, none there
        for f in files:
            got = rec.decode_file(f)
            assert got.warp == 1.0
            _same(got, before.decode_file(f))


def test_warp_on_recognises_the_chosen_warps_features(starter_with_voice):
    _, voiced, files = starter_with_voice
    lex = read_lexicon(REPO / "lexicon" / "bakery.txt")
    rec = build_recognizer(voiced, lexicon=lex, settings=DecoderSettings(voice_warp=True))
    warps = []
    for f in files:
        wave = load_audio(f, sample_rate=voiced.features.sample_rate)
        warp, frames = choose_warp(wave, voiced.features, voiced.voice)
        np.testing.assert_array_equal(frames, compute_features(wave, voiced.features, warp=warp))
        got = rec.decode_file(f)
        assert got.warp == warp
        _same(got, rec.decode(frames))
        _same(got, rec.decode_file(f))  # deterministic
        warps.append(warp)
    assert any(w != 1.0 for w in warps)  # else this would not tell a warped recognition from an unwarped one


def test_voice_warp_setting_is_checked():
    with pytest.raises(DecodingError, match="voice_warp"):
        DecoderSettings(voice_warp="yes")


def test_training_config_voice_components_is_checked():
    with pytest.raises(TrainingError, match="voice_components"):
        TrainingConfig(voice_components=-1)
    assert TrainingConfig(voice_components=0).voice_components == 0


def test_voice_of_too_few_recordings_is_none(tmp_path):
    model = load_model("starter")
    one = REC / _rows()[0]["path"]
    assert voice_of_recordings([one], model.features, 64) is None
    assert voice_of_recordings([tmp_path / "missing.wav"], model.features, 2) is None
