"""The state scorer in the search: the mixing of scores, weight 0 as before, recognition."""

from __future__ import annotations

from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest
import soundfile as sf

from decoding_helpers import frames_along, pause_mixtures, tiny_model, word_mixtures
from scorer_helpers import aligned_corpus
from tone_corpus import load_corpus
from wordspot.acoustic.gmm import log_likelihoods
from wordspot.acoustic.scorer import StateScorer
from wordspot.audio.features import file_features
from wordspot.cli import main
from wordspot.decoding.decoder import DecoderSettings, build_recognizer, recognize_files
from wordspot.errors import DecodingError
from wordspot.model import save_model
from wordspot.training.scorer_fit import ScorerConfig, fit_scorer

ENTRIES = {"oven": [["AA", "B", "AA"]], "start": [["S", "T", "AA", "T"]], "stop": [["S", "T", "AA", "B"]]}


def random_scorer(rng, n_classes, dim=39, context=2, hidden=(12,)):
    sizes = [dim * (2 * context + 1), *hidden, n_classes]
    prior = rng.uniform(0.5, 2.0, n_classes)
    return StateScorer(context, rng.normal(size=sizes[0]), rng.uniform(0.5, 2.0, sizes[0]),
                       tuple(rng.normal(size=(a, b)) / np.sqrt(a) for a, b in zip(sizes[:-1], sizes[1:])),
                       tuple(rng.normal(size=b) for b in sizes[1:]), np.log(prior / prior.sum()))


@pytest.fixture
def models(rng):
    plain = tiny_model(rng, ENTRIES, transcripts=[["oven", "start"], ["oven", "stop"]])
    net = replace(plain, scorer=random_scorer(rng, plain.mixtures.n_mixtures))
    path = pause_mixtures(plain, 6) + word_mixtures(plain, ENTRIES["oven"][0]) + pause_mixtures(plain, 6)
    return plain, net, frames_along(plain, path, rng)


def same_result(a, b):
    assert a.words == b.words and a.score == b.score and a.reason == b.reason
    for s, t in zip(a.segments + a.dropped, b.segments + b.dropped):
        assert (s.first_frame, s.last_frame, s.acoustic, s.confidence) == (t.first_frame, t.last_frame, t.acoustic,
                                                                           t.confidence)
        np.testing.assert_array_equal(s.measures[:8], t.measures[:8])  # the measures of every model


def test_weight_zero_is_the_mixtures_alone(models):
    plain, net, frames = models
    before = build_recognizer(plain)
    after = build_recognizer(net)  # default settings: weight 0
    assert DecoderSettings().scorer_weight == 0.0 and after.scorer is None
    np.testing.assert_array_equal(after.emissions(frames), before.emissions(frames))
    same_result(after.decode(frames), before.decode(frames))
    assert before.decode(frames).words == ["oven"]
    # the scorer still gives the posterior measures (confidence only), the plain model NaN
    assert np.isfinite(after.decode(frames).segments[0].measures[8:17]).all()  # the own_ measures need a second network
    assert np.isnan(before.decode(frames).segments[0].measures[8:]).all()


def test_weight_on_a_model_without_scorer_changes_nothing(models):
    plain, _, frames = models
    same_result(build_recognizer(plain, settings=DecoderSettings(scorer_weight=0.7)).decode(frames),
                build_recognizer(plain).decode(frames))


def test_mixed_scores_follow_the_formula(models):
    plain, net, frames = models
    rec = build_recognizer(net, settings=DecoderSettings(scorer_weight=0.25, scorer_scale=0.5))
    used = rec.network.used_mixtures
    # written out independently: the network's log posteriors in float64, the mixtures' log
    # densities in double precision (scipy's logsumexp)
    lp = net.scorer.log_posteriors(frames).astype(np.float64)
    expected = (0.25 * 0.5 * (lp[:, used] - net.scorer.log_prior[used])
                + 0.75 * log_likelihoods(frames, plain.mixtures, used))
    got = rec.emissions(frames)
    assert got.shape == (frames.shape[0], used.size)
    np.testing.assert_allclose(got, expected, rtol=1e-5, atol=2e-3)


def test_weight_one_is_the_network_alone(models, monkeypatch):
    plain, net, frames = models
    rec = build_recognizer(net, settings=DecoderSettings(scorer_weight=1.0, scorer_scale=2.0))

    def refuse(self, frames):
        raise AssertionError("the mixtures are not needed at weight 1")

    monkeypatch.setattr(type(rec), "_mixture_scores", refuse)
    used = rec.network.used_mixtures
    np.testing.assert_array_equal(rec.emissions(frames), net.scorer.scaled_log_likelihoods(frames, 2.0, columns=used))
    assert rec.decode(frames).ok


@pytest.mark.parametrize("kw, match", [
    (dict(scorer_weight=1.5), "scorer_weight .* from 0 to 1"),
    (dict(scorer_weight=-0.1), "scorer_weight"),
    (dict(scorer_weight=True), "scorer_weight"),
    (dict(scorer_scale=0.0), "scorer_scale .* > 0"),
    (dict(scorer_scale=float("inf")), "scorer_scale"),
])
def test_settings_are_checked(kw, match):
    with pytest.raises(DecodingError, match=match):
        DecoderSettings(**kw)


def test_scorer_of_another_model_is_refused(models, rng):
    plain, _, _ = models
    other = replace(plain, scorer=random_scorer(rng, plain.mixtures.n_mixtures + 1))
    with pytest.raises(DecodingError, match="state scorer has .* classes"):
        build_recognizer(other, settings=DecoderSettings(scorer_weight=0.5))


# --- a scorer trained on the tone corpus (each phone a tone) -----------------------------

FIT = ScorerConfig(hidden=(32,), context=2, max_epochs=15, patience=3, learning_rate=0.01, held_out_share=0.2)


@pytest.fixture(scope="module")
def tones(tmp_path_factory):
    from wordspot.training.trainer import TrainingConfig, train

    rng = np.random.default_rng(20261202)
    utts, lexicon, _ = load_corpus(tmp_path_factory.mktemp("tones"), rng, 40)
    model, _ = train(utts[:30], lexicon, config=TrainingConfig(mixtures=(1,), first_passes=3, passes_per_split=2,
                                                               speed_factors=(1.0,)))
    data = aligned_corpus(model, utts)
    return model, data[:30], data[30:], utts[30:]


def test_scorer_from_tone_corpus_recognises_its_words(tones):
    model, train_data, test_data, test_utts = tones
    scorer = fit_scorer([x for x, _ in train_data], [y for _, y in train_data], model.mixtures.n_mixtures, FIT)
    # frames of unseen utterances get their aligned state
    hits = np.concatenate([np.argmax(scorer.log_posteriors(x), axis=1) == y for x, y in test_data])
    assert hits.mean() > 0.8
    net = replace(model, scorer=scorer)
    for w in (0.5, 1.0):
        rec = build_recognizer(net, settings=DecoderSettings(scorer_weight=w))
        right = [rec.decode(file_features(u.path, model.features)).words == list(u.words) for u in test_utts]
        assert sum(right) >= 9, (w, right)


def test_scorer_with_wrong_labels_misleads_the_search(tones):
    # The same fit on labels swapped among the classes: the network alone now points the
    # search at the wrong states, so most words come out wrong (the scores do steer it).
    model, train_data, _, test_utts = tones
    p = model.mixtures.n_mixtures
    swap = np.roll(np.arange(p), 3)
    scorer = fit_scorer([x for x, _ in train_data], [swap[y] for _, y in train_data], p, FIT)
    rec = build_recognizer(replace(model, scorer=scorer), settings=DecoderSettings(scorer_weight=1.0))
    right = [rec.decode(file_features(u.path, model.features)).words == list(u.words) for u in test_utts]
    assert sum(right) <= 3, right


# --- command line --------------------------------------------------------------------------

def test_command_line_options(models, rng, tmp_path, capsys):
    plain, net, _ = models
    wav = tmp_path / "oven.wav"
    sf.write(wav, 0.1 * rng.normal(size=12000).astype(np.float32), 16000)
    plain_path, net_path = save_model(plain, tmp_path / "plain.model"), save_model(net, tmp_path / "net.model")

    for option, value in (("--scorer-weight", "1.5"), ("--scorer-scale", "0")):
        with pytest.raises(SystemExit) as stop:
            main(["recognize", "--model", str(net_path), option, value, str(wav)])
        assert stop.value.code == 2 and f"argument {option}: must be" in capsys.readouterr().err

    assert main(["recognize", "--model", str(plain_path), "--scorer-weight", "0.5", str(wav)]) == 0
    out, err = capsys.readouterr()
    assert "has no state scorer" in err

    settings = DecoderSettings(scorer_weight=0.5, scorer_scale=2.0)
    assert main(["recognize", "--model", str(net_path), "--format", "jsonl", "--scorer-weight", "0.5",
                 "--scorer-scale", "2", str(wav)]) == 0
    out, err = capsys.readouterr()
    expected = recognize_files(net, [wav], settings=settings)[0]
    assert "no state scorer" not in err
    assert f'"score": {round(expected.score, 4)}' in out or (expected.score == -np.inf and '"score": null' in out)
    assert expected.score != recognize_files(net, [wav])[0].score  # the option reached the search


def test_scan_and_evaluate_take_the_options(models, rng, tmp_path, capsys):
    plain, _, _ = models
    wav = tmp_path / "oven.wav"
    sf.write(wav, 0.1 * rng.normal(size=12000).astype(np.float32), 16000)
    (tmp_path / "m.csv").write_text("path,transcript,speaker\noven.wav,oven,a\n")
    plain_path = save_model(plain, tmp_path / "plain.model")
    assert main(["scan", "--model", str(plain_path), "--scorer-weight", "0.5", str(wav)]) == 0
    assert "has no state scorer" in capsys.readouterr().err
    main(["evaluate", "--model", str(plain_path), "--scorer-weight", "0.5", "--report", str(tmp_path / "report"),
          str(tmp_path / "m.csv")])
    assert "has no state scorer" in capsys.readouterr().err
