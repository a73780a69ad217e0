"""Embedded re-estimation: invariants, bad input, parallel = serial, real demo data."""

import warnings

import numpy as np
import pytest

from tone_corpus import RATE, add_row, make_corpus
from wordspot.cli import main
from wordspot.corpus import read_manifest
from wordspot.errors import ManifestError, TrainingError, TrainingWarning
from wordspot.language.lexicon import read_lexicon
from wordspot.model import load_model
from wordspot.training.trainer import PASS_LEGEND, TrainingConfig, train
from wordspot.cli.train_cmd import mixture_schedule

from conftest import LEXICON_DIR, RECORDINGS

SMALL = dict(mixtures=(1, 2), first_passes=3, passes_per_split=2, speed_factors=(1.0,))


def check_probabilities(model):
    """Every transition row and every mixture's weights sum to one; nothing NaN."""
    u = model.units
    for k in range(u.n_units):
        n = int(u.n_states[k])
        np.testing.assert_allclose(u.trans[k, :n].sum(axis=1), 1.0, rtol=1e-12)
        np.testing.assert_allclose(u.entry[k].sum(), 1.0, rtol=1e-12)
    np.testing.assert_allclose(model.mixtures.weights.sum(axis=1), 1.0, rtol=1e-12)
    for a in (u.trans, u.entry, model.mixtures.weights, model.mixtures.means, model.mixtures.variances):
        assert np.all(np.isfinite(a))
    assert np.all(model.mixtures.variances > 0)
    u.validate()


def test_training_with_silent_and_short_files(tmp_path, rng):
    manifest, lex_path = make_corpus(tmp_path, rng, n_utterances=16)
    add_row(manifest, "silent.wav", np.zeros(RATE), "key")
    add_row(manifest, "short.wav", 0.1 * rng.normal(size=int(0.12 * RATE)), "bake seat")
    add_row(manifest, "tiny.wav", 0.1 * rng.normal(size=int(0.02 * RATE)), "bake")
    utts = read_manifest(manifest)
    lexicon = read_lexicon(lex_path)
    lines = []
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        model, summary = train(utts, lexicon, config=TrainingConfig(**SMALL), report=lines.append)
    messages = [str(w.message) for w in caught if issubclass(w.category, TrainingWarning)]
    assert any("short.wav" in m and "too short" in m for m in messages), messages
    assert any("tiny.wav" in m for m in messages), messages
    skipped = {s.path.name for s in summary.skipped}
    assert skipped == {"short.wav", "tiny.wav"}
    assert summary.used == 17  # 16 tone utterances and the silent one
    assert len(summary.passes) == 5 and lines[0] == PASS_LEGEND and len(lines) == 1 + 5
    assert lines[1].split()[:2] == ["pass", "1"] and "detail 1" in lines[1] and "fit " in lines[1]
    check_probabilities(model)
    assert model.mixtures.n_components == 2
    assert model.info["utterances"] == 17 and len(model.info["loglik_per_pass"]) == 5
    # Word-pair counts: every used utterance opens once with some word.
    assert model.bigrams.counts[0].sum() == 17
    text = "\n".join(summary.lines())
    assert "short.wav" in text and "recordings used: 17 (" in text and "recordings skipped: 2" in text
    assert "utterance" not in text and "frames per unit" not in text and "units with no data" not in text


def test_likelihood_rises_on_tone_corpus(tmp_path, rng):
    manifest, lex_path = make_corpus(tmp_path, rng, n_utterances=16)
    _, summary = train(read_manifest(manifest), read_lexicon(lex_path), config=TrainingConfig(**SMALL))
    ll = summary.passes
    for (m0, a), (m1, b) in zip(ll[:-1], ll[1:]):
        if m0 == m1:
            # EM never lowers the likelihood (Dempster, Laird & Rubin 1977; from memory).
            assert b >= a - 1e-6, ll


def test_parallel_equals_serial(tmp_path, rng):
    manifest, lex_path = make_corpus(tmp_path, rng, n_utterances=40)  # more than one chunk
    utts, lexicon = read_manifest(manifest), read_lexicon(lex_path)
    cfg = dict(mixtures=(1, 2), first_passes=2, passes_per_split=1, seed=3, speed_factors=(0.9, 1.0),
               voice_components=4)
    a, _ = train(utts, lexicon, config=TrainingConfig(**cfg, jobs=1))
    b, _ = train(utts, lexicon, config=TrainingConfig(**cfg, jobs=2))
    for name in ("weights", "means", "variances"):
        np.testing.assert_array_equal(getattr(a.mixtures, name), getattr(b.mixtures, name))
    np.testing.assert_array_equal(a.units.trans, b.units.trans)
    np.testing.assert_array_equal(a.units.entry, b.units.entry)
    assert a.info["loglik_per_pass"] == b.info["loglik_per_pass"]
    for name in ("weights", "means", "variances"):  # the voice mixture too
        np.testing.assert_array_equal(getattr(a.voice, name), getattr(b.voice, name))


def test_from_scratch_model_carries_a_voice_mixture_of_its_recordings(tmp_path, rng):
    from wordspot.training.voice import voice_of_recordings

    manifest, lex_path = make_corpus(tmp_path, rng, n_utterances=16)
    utts, lexicon = read_manifest(manifest), read_lexicon(lex_path)
    model, _ = train(utts, lexicon, config=TrainingConfig(**SMALL, voice_components=4))
    expected = voice_of_recordings([u.path for u in utts], model.features, 4, seed=TrainingConfig().seed)
    assert model.voice.n_components == 4 and model.voice.dim == model.features.dim
    for name in ("weights", "means", "variances"):
        np.testing.assert_array_equal(getattr(model.voice, name), getattr(expected, name))
    none, _ = train(utts, lexicon, config=TrainingConfig(**SMALL))  # the default: none
    assert none.voice is None


def test_missing_words_listed_before_any_work(tmp_path, rng):
    manifest, lex_path = make_corpus(tmp_path, rng, n_utterances=2)
    with open(manifest, "a") as f:
        f.write("u00.wav,bake proof,x\nu01.wav,knead,x\n")
    with pytest.raises(ManifestError, match=r"(?s)'proof'.*'knead'"):
        train(read_manifest(manifest), read_lexicon(lex_path))


def test_nothing_usable_is_an_error(tmp_path, rng):
    manifest, lex_path = make_corpus(tmp_path, rng, n_utterances=0)
    add_row(manifest, "short.wav", 0.1 * rng.normal(size=int(0.11 * RATE)), "bake seat")
    with pytest.warns(TrainingWarning, match="short.wav"):
        with pytest.raises(TrainingError, match="none of the 1 recordings is usable"):
            train(read_manifest(manifest), read_lexicon(lex_path))


@pytest.mark.parametrize(
    "kwargs,match",
    [
        ({"mixtures": (2, 1)}, "mixtures must be increasing"),
        ({"first_passes": 0}, "first_passes must be"),
        ({"jobs": 0}, "jobs must be"),
        ({"variance_floor": 0.0}, "variance_floor must be"),
    ],
)
def test_config_is_checked(kwargs, match):
    with pytest.raises(TrainingError, match=match):
        TrainingConfig(**kwargs)


def test_mixture_schedule():
    assert mixture_schedule(8) == (1, 2, 4, 8)
    assert mixture_schedule(6) == (1, 2, 4, 6)
    assert mixture_schedule(1) == (1,)


def test_train_command_writes_a_model(tmp_path, rng, capsys):
    manifest, lex_path = make_corpus(tmp_path / "c", rng, n_utterances=12)
    out = tmp_path / "tones.model"
    status = main(["train", str(manifest), "--lexicon", str(lex_path), "--out", str(out),
                   "--from-scratch", "--mixtures", "2", "--passes", "1", "--speed", "1.0",
                   "--background-share", "0.5"])
    assert status == 0
    printed = capsys.readouterr().out
    assert PASS_LEGEND in printed and "wrote" in printed and "(12 recordings, trained from scratch" in printed
    assert "background sounds added (no command): 20" in printed  # 0.5 x 12 recordings, at least 20
    model = load_model(out)
    assert model.info["background_share"] == 0.5 and model.info["background_items"] == 20
    assert model.mixtures.n_components == 2
    assert model.info["passes"] == 3 + 1  # first stage N+2, then N after the split
    assert model.info["speed_factors"] == [1.0]
    check_probabilities(model)


def test_train_command_refuses_a_bad_background_share(tmp_path, rng, capsys):
    manifest, lex_path = make_corpus(tmp_path, rng, n_utterances=2)
    for extra in ([], ["--from-scratch"]):  # adapting and from scratch
        status = main(["train", str(manifest), "--lexicon", str(lex_path), "--out", str(tmp_path / "m"),
                       "--background-share", "1.5", *extra])
        err = capsys.readouterr().err
        assert status == 2 and "--background-share" in err and "from 0 to 1" in err and err.count("\n") == 1


def test_train_command_reports_missing_lexicon(tmp_path, rng, capsys):
    manifest, _ = make_corpus(tmp_path, rng, n_utterances=1)
    status = main(["train", str(manifest), "--lexicon", str(tmp_path / "nope.txt"), "--out", str(tmp_path / "m")])
    assert status == 2
    assert "nope.txt" in capsys.readouterr().err


@pytest.mark.skipif(not (RECORDINGS / "train.csv").exists(), reason="demo recordings not generated")
def test_likelihood_never_falls_on_demo_data():
    utts = read_manifest(RECORDINGS / "train.csv")
    subset, seen = [], {}
    for u in utts:  # every word, from two different voices: small but covers every phone
        voices = seen.setdefault(u.words, set())
        if len(voices) < 2 and u.speaker not in voices:
            voices.add(u.speaker)
            subset.append(u)
    lexicon = read_lexicon(LEXICON_DIR / "bakery.txt")
    config = TrainingConfig(mixtures=(1, 2), first_passes=4, passes_per_split=3, speed_factors=(1.0,))
    _, summary = train(subset, lexicon, config=config)
    ll = summary.passes
    rises = 0
    for (m0, a), (m1, b) in zip(ll[:-1], ll[1:]):
        if m0 == m1:
            # EM never lowers the likelihood (Dempster, Laird & Rubin 1977; from memory);
            # the variance floor and dropped components allow a tiny slack.
            assert b >= a - 1e-3 * abs(a), ll
            rises += b > a
    assert rises >= 4


def test_speed_copy_scales_frequency_and_length(rng):
    from wordspot.training.data import speed_copy

    rate = 16000
    t = np.arange(rate) / rate
    wave = np.sin(2 * np.pi * 1000.0 * t).astype(np.float32)
    for factor in (0.9, 1.1):
        fast = speed_copy(wave, rate, factor)
        # Playing f times faster: length / f and every frequency * f (speed perturbation as
        # defined by Ko et al. 2015, "Audio augmentation for speech recognition", Interspeech).
        assert abs(fast.size - rate / factor) <= 1
        spectrum = np.abs(np.fft.rfft(fast * np.hanning(fast.size)))
        peak = np.argmax(spectrum) * rate / fast.size
        np.testing.assert_allclose(peak, 1000.0 * factor, rtol=2e-3)
    assert speed_copy(wave, rate, 1.0) is wave


def test_speed_factors_add_copies(tmp_path, rng):
    manifest, lex_path = make_corpus(tmp_path, rng, n_utterances=8)
    cfg = TrainingConfig(mixtures=(1,), first_passes=2, speed_factors=(0.9, 1.0, 1.1), noise_copies=0,
                         background_share=0)
    model, summary = train(read_manifest(manifest), read_lexicon(lex_path), config=cfg)
    plain, plain_summary = train(read_manifest(manifest), read_lexicon(lex_path),
                                 config=TrainingConfig(mixtures=(1,), first_passes=2, speed_factors=(1.0,),
                                                       noise_copies=0, background_share=0))
    assert summary.used == plain_summary.used == 8  # recordings, not copies
    # Copies at 0.9 and 1.1 hold about 1/0.9 + 1/1.1 = 2.02 times the plain frames.
    np.testing.assert_allclose(summary.n_frames / plain_summary.n_frames, 1 + 1 / 0.9 + 1 / 1.1, rtol=0.03)
    assert model.info["speed_factors"] == [0.9, 1.0, 1.1]
    check_probabilities(model)
    with pytest.raises(TrainingError, match="speed_factors must be"):
        TrainingConfig(speed_factors=(0.9, 0.9))


def test_running_sum_has_the_bits_of_numpy_mean_and_var(rng):
    # flat_start reads the pause frames recording by recording; its mean and variance must be
    # numpy's own (np.mean / np.var over the stacked frames) to the last bit, so that models
    # do not depend on how the frames are read.
    from wordspot.training.trainer import _running_sum

    blocks = [rng.normal(size=(30, 39)) * rng.uniform(0.1, 100) for _ in range(500)]
    stacked = np.concatenate(blocks)
    mean = _running_sum(blocks) / stacked.shape[0]
    var = _running_sum(np.square(b - mean) for b in blocks) / stacked.shape[0]
    np.testing.assert_array_equal(mean, stacked.mean(axis=0))
    np.testing.assert_array_equal(var, stacked.var(axis=0))


def test_recording_with_no_command_trains_the_pause(tmp_path, rng):
    # An empty transcript ("no command here") is one pause unit from end to end: it is used,
    # and it adds no word pairs (every used command recording opens once with some word).
    manifest, lex_path = make_corpus(tmp_path, rng, n_utterances=12)
    add_row(manifest, "mixer.wav", 0.01 * rng.normal(size=RATE), "")
    utts = read_manifest(manifest)
    assert utts[-1].words == ()
    with warnings.catch_warnings():
        warnings.simplefilter("error", TrainingWarning)
        model, summary = train(utts, read_lexicon(lex_path), config=TrainingConfig(**SMALL))
    assert summary.used == 13 and not summary.skipped
    assert model.bigrams.counts[0].sum() == 12 and model.bigrams.counts[0, 0] == 0
    check_probabilities(model)


def _tiny_scorer():
    from dataclasses import replace

    from wordspot.training.own_scorer import SCRATCH_SCORER

    return replace(SCRATCH_SCORER, hidden=(16,), context=2, max_epochs=4, learning_rate=0.01)


def test_from_scratch_model_carries_its_own_scorer(tmp_path, rng):
    from wordspot.model import save_model

    manifest, lex_path = make_corpus(tmp_path, rng, n_utterances=12)
    utts, lexicon = read_manifest(manifest), read_lexicon(lex_path)
    cfg = dict(SMALL, seed=5, noise_copies=1, background_share=0.0)
    a, summary = train(utts, lexicon, config=TrainingConfig(**cfg, scorer=_tiny_scorer()))
    assert a.scorer is not None and a.scorer.n_classes == a.mixtures.n_mixtures
    assert a.scorer.frame_dim == a.features.dim and a.scorer.context == 2
    assert a.info["scorer"]["fitted"] and a.info["scorer"]["seed"] == 5  # the training's seed
    assert a.info["scorer"]["items"] == 2 * len(utts)  # each recording and its noisy copy
    assert summary.scorer_note in summary.lines() and "fitted on" in summary.scorer_note
    assert load_model(save_model(a, tmp_path / "a.model")).scorer.same_as(a.scorer)
    # deterministic for a seed
    b, _ = train(utts, lexicon, config=TrainingConfig(**cfg, scorer=_tiny_scorer()))
    assert b.scorer.same_as(a.scorer)
    # turned off: no scorer, and the rest of the model as it was
    c, summary_c = train(utts, lexicon, config=TrainingConfig(**cfg, scorer=None))
    assert c.scorer is None and "scorer" not in c.info and summary_c.scorer_note == ""
    for name in ("weights", "means", "variances"):
        np.testing.assert_array_equal(getattr(a.mixtures, name), getattr(c.mixtures, name))
    np.testing.assert_array_equal(a.units.trans, c.units.trans)
    assert a.info["loglik_per_pass"] == c.info["loglik_per_pass"]


def test_scorer_setting_is_checked():
    with pytest.raises(TrainingError, match="scorer must be a ScorerConfig or None"):
        TrainingConfig(scorer="yes")


def test_train_command_no_scorer(tmp_path, rng, capsys):
    manifest, lex_path = make_corpus(tmp_path / "c", rng, n_utterances=12)
    out = tmp_path / "m.model"
    assert main(["--quiet", "train", str(manifest), "--lexicon", str(lex_path), "--out", str(out),
                 "--from-scratch", "--no-scorer", "--mixtures", "1", "--passes", "1", "--speed", "1.0",
                 "--noise-copies", "0", "--background-share", "0", "--no-calibration"]) == 0
    assert load_model(out).scorer is None
    assert main(["--quiet", "train", str(manifest), "--lexicon", str(lex_path), "--out", str(out),
                 "--no-scorer"]) != 0
    assert "--no-scorer only apply with --from-scratch" in capsys.readouterr().err
