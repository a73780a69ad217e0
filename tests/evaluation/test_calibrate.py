"""Fitting the confidence calibration at training time: the split, the skips, the order of work."""

from __future__ import annotations

import warnings
from collections import Counter
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest

from decoding_helpers import tiny_model
from wordspot.corpus import Utterance
from wordspot.decoding.confidence import BASE_MEASURE_NAMES, MEASURE_NAMES
from wordspot.errors import TrainingError, TrainingWarning
from wordspot.evaluation import calibrate
from wordspot.util.logistic import Calibration
from wordspot.evaluation.calibrate import (CALIBRATION_POSTERIOR_MEASURES, CalibrationConfig, CalibrationExamples,
                                           fit_calibration, split_held_out, train_calibrated)

WORDS = ("oven", "stop", "start")


def _utterances(speakers=5, takes=4, transcripts=(("oven",), ("stop",), ("oven", "start"))):
    out = []
    for words in transcripts:
        for s in range(speakers):
            for t in range(takes):
                out.append(Utterance(Path(f"{'-'.join(words)}-{s}-{t}.wav"), words, f"baker-{s}", len(out) + 2))
    return out


def test_split_is_a_partition_in_manifest_order():
    utts = _utterances()
    rest, held = split_held_out(utts, 0.15, seed=3)
    assert sorted(u.row for u in rest + held) == [u.row for u in utts]
    assert [u.row for u in rest] == sorted(u.row for u in rest) and [u.row for u in held] == sorted(u.row for u in held)
    assert split_held_out(utts, 0.15, seed=3) == (rest, held)  # seeded
    assert split_held_out(utts, 0.15, seed=4)[1] != held


def test_split_takes_the_share_of_every_transcript_spread_over_speakers():
    # 20 recordings a transcript (5 speakers x 4 takes) and a share of 1/4: exactly 5 held
    # out per transcript, evenly spaced in speaker order, so one per speaker (stratified
    # hold-out, common practice)
    rest, held = split_held_out(_utterances(), 0.25, seed=0)
    assert Counter(u.words for u in held) == {("oven",): 5, ("stop",): 5, ("oven", "start"): 5}
    for words in {u.words for u in held}:
        assert sorted(u.speaker for u in held if u.words == words) == [f"baker-{s}" for s in range(5)]
    # a share that does not divide: 0.15 x 20 = 3 held out per transcript
    _, held = split_held_out(_utterances(), 0.15, seed=0)
    assert set(Counter(u.words for u in held).values()) == {3}


def test_split_keeps_one_recording_of_every_transcript_for_training():
    utts = _utterances(speakers=1, takes=2) + _utterances(speakers=1, takes=1, transcripts=(("start",),))
    for seed in range(20):
        rest, held = split_held_out(utts, 0.9, seed=seed)
        assert {u.words for u in rest} == {u.words for u in utts}
        assert all(u.words != ("start",) for u in held)


def _examples(right, wrong, recordings=40, rng=None, posteriors=False):
    rng = rng or np.random.default_rng(5)
    # one column per measure of MEASURE_NAMES, in its order
    good = rng.normal([-50.0, -1.0, 2.0, -0.5, 3.0, 0.0, 4.0, -0.3], 1.0, size=(right, 8))
    bad = rng.normal([-60.0, -6.0, 2.5, -3.0, 0.0, 1.0, 3.0, -2.0], 1.0, size=(wrong, 8))
    labels = np.r_[np.ones(right, bool), np.zeros(wrong, bool)]
    if posteriors:  # right words' states are the likelier ones under the network (POSTERIOR_MEASURE_NAMES' order)
        post = np.vstack([rng.normal([-1.0, -1.2, -2.5, 0.0, -2.0, -2.2, -1.5, -2.0, -2.5], 0.5, size=(right, 9)),
                          rng.normal([-3.0, -3.2, -5.0, -2.0, -4.5, -4.8, -3.5, -4.2, -4.0], 0.5, size=(wrong, 9))])
    else:  # a model without a state scorer: NaN
        post = np.full((right + wrong, 9), np.nan)
    own = np.full((right + wrong, 9), np.nan)  # no second network (own_ measures)
    return CalibrationExamples(np.hstack([np.vstack([good, bad]), post, own]), labels, ~labels, recordings=recordings)


def test_fit_needs_both_kinds_of_word():
    with pytest.warns(TrainingWarning, match=r"calibration skipped: 40 held-out recording\(s\) gave 30 right and 0 wrong"):
        assert fit_calibration(_examples(30, 0)) is None
    with pytest.warns(TrainingWarning, match="it needs 20 recordings"):
        assert fit_calibration(_examples(30, 30, recordings=12)) is None
    cal = fit_calibration(_examples(30, 30))
    assert cal.names == BASE_MEASURE_NAMES  # no state scorer: the posterior measures are NaN and left out
    assert cal.coefficients[1] > 0  # right words have the larger free margin in these examples


def test_fit_uses_the_posterior_measures_when_the_model_has_a_scorer():
    cal = fit_calibration(_examples(30, 30, posteriors=True))
    assert cal.names == BASE_MEASURE_NAMES + CALIBRATION_POSTERIOR_MEASURES
    assert set(cal.names) <= set(MEASURE_NAMES)
    # a chosen subset is fitted on exactly those columns
    names = ("posterior_mean", "free_margin")
    sub = fit_calibration(_examples(30, 30, posteriors=True), names=names)
    assert sub.names == names
    assert sub.means[0] == pytest.approx(_examples(30, 30, posteriors=True).measures[:, 8].mean(), rel=1e-12)


def test_train_calibrated_trains_on_the_rest_then_on_everything(rng, monkeypatch):
    utts = _utterances(speakers=5, takes=6)  # 30 a transcript; a share of 0.3 holds out 9 of each
    model = tiny_model(rng, {w: [["AA", "B"]] for w in WORDS})
    calls = []

    def fake_train(part):
        calls.append(list(part))
        return replace(model, info={"call": len(calls)}), f"summary {len(calls)}"

    def fake_examples(m, held, **_):
        assert m.info == {"call": 1} and len(held) == 27  # the model trained without the held-out part
        return _examples(20, 25, recordings=len(held))

    monkeypatch.setattr(calibrate, "calibration_examples", fake_examples)
    lines = []
    out, summary = train_calibrated(fake_train, utts, config=CalibrationConfig(held_out_share=0.3, refit=True),
                                   report=lines.append)
    assert [len(c) for c in calls] == [90 - 27, 90] and summary == "summary 2"
    assert out.info["call"] == 2 and out.calibration is not None
    assert out.info["calibration"]["right_words"] == 20 and out.info["calibration"]["wrong_words"] == 25
    assert lines[0] == "confidence calibration: training on 63 recordings, 27 held out"
    calls.clear()
    out, summary = train_calibrated(fake_train, utts, config=CalibrationConfig(held_out_share=0.3, refit=False))
    assert [len(c) for c in calls] == [63] and out.info["call"] == 1 and out.calibration is not None
    assert out.info["calibration"]["refit_on_all"] is False


def test_too_few_recordings_train_once_without_calibration(rng):
    model = tiny_model(rng, {w: [["AA", "B"]] for w in WORDS})
    calls = []

    def fake_train(part):
        calls.append(len(part))
        return model, None

    utts = _utterances(speakers=2, takes=3)
    with pytest.warns(TrainingWarning, match=r"calibration skipped: 18 recordings are fewer than the 20 needed"):
        out, _ = train_calibrated(fake_train, utts)
    assert calls == [len(utts)] and out.calibration is None


def _starter_calibration(names):
    k = len(names)
    return Calibration(tuple(names), np.zeros(k), np.ones(k), np.full(k, 0.5), -1.0)


def test_too_few_takes_keep_the_starting_models_calibration_and_say_so(rng, recwarn):
    model = tiny_model(rng, {w: [["AA", "B"]] for w in WORDS})
    start_cal = _starter_calibration(BASE_MEASURE_NAMES)
    lines = []
    out, _ = train_calibrated(lambda part: (model, None), _utterances(speakers=2, takes=3), fallback=start_cal,
                              report=lines.append)
    assert out.calibration is start_cal and out.info["calibration"]["kept_from_start"] is True
    assert not [w for w in recwarn.list if issubclass(w.category, TrainingWarning)]
    assert any("keeps the calibration it started with" in line and "fewer than the 20 needed" in line
               for line in lines)


def test_enough_takes_but_too_few_words_of_a_kind_also_keep_it(rng, monkeypatch):
    model = tiny_model(rng, {w: [["AA", "B"]] for w in WORDS})
    monkeypatch.setattr(calibrate, "calibration_examples", lambda m, held, **_: _examples(30, 0, recordings=len(held)))
    start_cal = _starter_calibration(BASE_MEASURE_NAMES)
    lines = []
    out, _ = train_calibrated(lambda part: (model, None), _utterances(speakers=5, takes=6), fallback=start_cal,
                              config=CalibrationConfig(held_out_share=0.3, refit=False), report=lines.append)
    assert out.calibration is start_cal
    assert "30 right and 0 wrong words, too few to fit one for your voice" in lines[-1]


def test_a_starting_calibration_over_posterior_measures_needs_a_scorer(rng):
    # without a state scorer the adapted model cannot compute the posterior measures: the
    # starter's calibration is not kept and training warns as before
    model = tiny_model(rng, {w: [["AA", "B"]] for w in WORDS})
    start_cal = _starter_calibration(BASE_MEASURE_NAMES + CALIBRATION_POSTERIOR_MEASURES)
    with pytest.warns(TrainingWarning, match="uncalibrated heuristic"):
        out, _ = train_calibrated(lambda part: (model, None), _utterances(speakers=2, takes=3), fallback=start_cal)
    assert out.calibration is None


def test_refit_default_depends_on_the_kind_of_training():
    assert CalibrationConfig().decided(adapting=True).refit is True
    assert CalibrationConfig().decided(adapting=False).refit is False
    assert CalibrationConfig(refit=True).decided(adapting=False).refit is True


@pytest.mark.parametrize("share", [0.0, 1.0, -0.2, True])
def test_bad_share_is_refused(share):
    with pytest.raises(TrainingError, match="held-out share for calibration must be between 0 and 1"):
        CalibrationConfig(held_out_share=share)


def test_cli_refuses_a_bad_share(tmp_path, capsys):
    from wordspot.cli import main

    manifest = tmp_path / "train.csv"
    manifest.write_text("path,transcript,speaker\na.wav,oven,ann\n")
    (tmp_path / "lex.txt").write_text("oven AH V AH N\n")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        status = main(["train", str(manifest), "--lexicon", str(tmp_path / "lex.txt"), "--out",
                       str(tmp_path / "m.model"), "--calibration-share", "2"])
    assert status == 2
    assert "held-out share for calibration must be between 0 and 1" in capsys.readouterr().err


def test_held_out_recordings_are_also_heard_faster():
    # Each recording is recognised once per speed factor; played 1.25 times faster it lasts
    # 1 / 1.25 as long (speed perturbation as in Ko et al. 2015: resample, read at the old
    # rate), within a frame or two.
    from wordspot.evaluation.calibrate import held_out_recognitions
    from wordspot.language.lexicon import read_lexicon
    from wordspot.model import load_model

    repo = Path(__file__).resolve().parents[2]
    model = load_model("starter")
    model.lexicon = read_lexicon(repo / "lexicon" / "bakery.txt")
    utt = Utterance(repo / "recordings" / "audio" / "test" / "flite-rms" / "oven-t1.flac", ("oven",), "rms", 2)
    got = list(held_out_recognitions(model, [utt], speeds=(1.0, 1.25)))
    assert len(got) == 2 and all(u is utt and whole is not None and without is not None for u, whole, without in got)
    assert got[1][1].duration == pytest.approx(got[0][1].duration / 1.25, abs=0.02)
    assert "oven" not in got[0][2].words  # its own word was taken out of the vocabulary


@pytest.mark.parametrize("speeds", [(), (0.1,), (1.0, 3.0)])
def test_bad_calibration_speeds_are_refused(speeds):
    with pytest.raises(TrainingError, match="calibration speeds must be factors from 0.5 to 2"):
        CalibrationConfig(speeds=speeds)


def test_backwards_takes_add_only_wrong_words(monkeypatch):
    # A recording played backwards says no command (its phones in reverse order): every
    # word heard there is labelled wrong, beside the ordinary examples. (Our own labelling
    # rule, checked by counting; no outside reference.)
    from wordspot.evaluation.calibrate import backwards_recognitions, calibration_examples
    from wordspot.language.lexicon import read_lexicon
    from wordspot.model import load_model

    repo = Path(__file__).resolve().parents[2]
    model = load_model("starter")
    model.lexicon = read_lexicon(repo / "lexicon" / "bakery.txt")
    utts = [Utterance(repo / "recordings" / "audio" / "test" / "flite-rms" / f"{w}-t1.flac", (w,), "rms", 2)
            for w in ("oven", "minutes", "resume")]
    heard_backwards = sum(len(r.segments) + len(r.dropped) for r in backwards_recognitions(model, utts))
    plain = calibration_examples(model, utts)
    both = calibration_examples(model, utts, backwards=True)
    assert both.right.size == plain.right.size + heard_backwards and heard_backwards > 0
    assert both.right.sum() == plain.right.sum() and not both.right[plain.right.size:].any()


def test_jumbled_speech_adds_only_wrong_words_and_is_seeded():
    # Jumbled clips say no command (pieces of the takes, at most half a word each, in
    # random order): every word heard there is labelled wrong and marked, beside the
    # ordinary examples; the same seed gives the same words. (Our own labelling rule,
    # checked by counting; no outside reference.)
    from wordspot.evaluation.calibrate import calibration_examples, jumbled_recognitions
    from wordspot.language.lexicon import read_lexicon
    from wordspot.model import load_model

    repo = Path(__file__).resolve().parents[2]
    model = load_model("starter")
    model.lexicon = read_lexicon(repo / "lexicon" / "bakery.txt")
    utts = [Utterance(repo / "recordings" / "audio" / "test" / "flite-rms" / f"{w}-t1.flac", (w,), "rms", 2)
            for w in ("oven", "minutes", "resume", "cancel")]
    heard = [s.word for r in jumbled_recognitions(model, utts, 6, seed=1) for s in r.segments + r.dropped]
    assert heard and heard == [s.word for r in jumbled_recognitions(model, utts, 6, seed=1)
                               for s in r.segments + r.dropped]
    plain = calibration_examples(model, utts)
    both = calibration_examples(model, utts, jumbled=6, seed=1)
    assert both.right.size == plain.right.size + len(heard)
    assert both.right.sum() == plain.right.sum() and not both.right[plain.right.size:].any()
    assert both.jumbled.sum() == len(heard) and both.jumbled[plain.right.size:].all()
    assert both.own_words_removed[plain.right.size:].all()


@pytest.mark.parametrize("n", [-1, 1.5, True, "10"])
def test_bad_number_of_jumbled_clips_is_refused(n):
    with pytest.raises(TrainingError, match="number of jumbled clips"):
        CalibrationConfig(jumbled=n)


def _unique_utterances(n=60, speakers=3):
    """Recordings whose transcripts never repeat (one take of each sentence)."""
    return [Utterance(Path(f"sentence-{i}.wav"), (WORDS[i % 3],) * (1 + i // 3), f"baker-{i % speakers}", i + 2)
            for i in range(n)]


def test_unique_transcripts_are_held_out_across_the_whole_set():
    utts = _unique_utterances(150)
    assert split_held_out(utts, 0.15)[1] == []  # per transcript: nothing to hold out
    parts, how = calibrate.held_out_parts(utts, CalibrationConfig())
    assert how == "across the set" and len(parts) == 1
    rest, held = parts[0]
    assert sorted(u.row for u in rest + held) == [u.row for u in utts]
    # 15% of each speaker's 50, rounded at random: 7 or 8 of each
    assert all(Counter(u.speaker for u in held)[s] in (7, 8) for s in ("baker-0", "baker-1", "baker-2"))


def test_too_few_for_a_share_hold_out_every_recording_once_in_folds():
    utts = _unique_utterances(60)
    parts, how = calibrate.held_out_parts(utts, CalibrationConfig())
    assert how == "folds" and len(parts) == calibrate.CALIBRATION_FOLDS
    held_rows = sorted(u.row for _, held in parts for u in held)
    assert held_rows == [u.row for u in utts]  # each recording held out exactly once
    for rest, held in parts:
        assert not {u.row for u in rest} & {u.row for u in held}
        assert len(rest) + len(held) == len(utts)
    assert calibrate.held_out_parts(utts, CalibrationConfig()) == (parts, how)  # seeded
    assert calibrate.held_out_parts(utts[:19], CalibrationConfig()) == ([], "too few")


def test_unique_transcripts_still_give_a_calibration(rng, monkeypatch):
    utts = _unique_utterances(60)
    model = tiny_model(rng, {w: [["AA", "B"]] for w in WORDS})
    calls, agains = [], []

    def fake_train(part, held_out=None, again=True):
        calls.append((len(part), None if held_out is None else len(held_out)))
        agains.append(again)
        return replace(model, info={"call": len(calls)}), None

    fake_train.takes_held_out = True
    monkeypatch.setattr(calibrate, "calibration_examples", lambda m, held, **_: _examples(4, 5, recordings=len(held)))
    lines = []
    out, _ = train_calibrated(fake_train, utts, config=CalibrationConfig(refit=True), report=lines.append)
    # five folds, each trained with its held-out part handed in, then once on everything
    assert calls == [(48, 12)] * 5 + [(60, None)]
    assert agains == [True] * 6  # each fold's training is told that a training on everything follows
    calls.clear(), agains.clear()
    train_calibrated(fake_train, utts, config=CalibrationConfig(refit=False))
    assert calls == [(48, 12)] * 5 and agains == [False] * 5
    assert out.calibration is not None and out.info["calibration"]["held_out"] == "folds"
    assert out.info["calibration"]["held_out_recordings"] == 60 and out.info["calibration"]["right_words"] == 20
    assert "each held out once in 5 folds" in calibrate.calibration_note(out)
    assert lines[0].startswith("confidence calibration: fold 1 of 5")


def test_whole_speakers_named_by_the_training_function_are_held_out(rng, monkeypatch):
    utts = _utterances(speakers=8, takes=5)  # 120 recordings, 40 a transcript
    model = tiny_model(rng, {w: [["AA", "B"]] for w in WORDS})
    calls, recognised = [], []

    def fake_train(part, held_out=None, again=True):
        calls.append((list(part), None if held_out is None else list(held_out)))
        return replace(model, info={"call": len(calls)}), None

    def apart(utterances):
        return ([u for u in utterances if u.speaker not in ("baker-1", "baker-6")],
                [u for u in utterances if u.speaker in ("baker-1", "baker-6")])

    fake_train.takes_held_out = True
    fake_train.speakers_apart = apart

    def fake_examples(m, held, **_):
        assert m.info == {"call": 1}
        recognised.extend(held)
        return _examples(20, 25, recordings=len(held))

    monkeypatch.setattr(calibrate, "calibration_examples", fake_examples)
    lines = []
    config = CalibrationConfig(held_out_share=0.15, min_items=5, refit=True)
    out, _ = train_calibrated(fake_train, utts, config=config, report=lines.append)
    (rest, held), (everything, none) = calls
    # the first training leaves the two speakers out and is handed all their 30 recordings
    assert len(rest) == 90 and {u.speaker for u in held} == {"baker-1", "baker-6"} and len(held) == 30
    assert len(everything) == 120 and none is None
    # about the calibration's share of all recordings is recognised (18 of 120), from those
    # speakers only, every transcript alike (6 of each)
    assert len(recognised) == 18 and {u.speaker for u in recognised} <= {"baker-1", "baker-6"}
    assert Counter(u.words for u in recognised) == {w: 6 for w in {u.words for u in utts}}
    assert out.info["calibration"]["held_out"] == "whole speakers"
    assert out.info["calibration"]["held_out_speakers"] == 2
    assert lines[0] == "confidence calibration: training on 90 recordings, 2 speakers' 30 recordings held out, " \
                       "as voices it has not heard"
    assert "of 2 speakers held out whole" in calibrate.calibration_note(out)
    # a training function that names none: takes of every voice, as before
    fake_train.speakers_apart = lambda utterances: None
    calls.clear()
    out, _ = train_calibrated(fake_train, utts, config=config)
    assert out.info["calibration"]["held_out"] == "per transcript" and len(calls[0][1]) == 18


def test_the_recognised_share_keeps_few_held_out_recordings_whole():
    utts = _utterances(speakers=2, takes=5)  # 30
    config = CalibrationConfig(held_out_share=0.15, min_items=40)
    assert calibrate.recognised_share(utts, 100, config) == utts  # 15 of 100 wanted, but at least 40
    assert calibrate.recognised_share(utts, 200, CalibrationConfig(held_out_share=0.15)) == utts  # 30 wanted
    part = calibrate.recognised_share(utts, 150, CalibrationConfig(held_out_share=0.15, min_items=5))
    # round(0.15 * 150) = 22 wanted: a share 22/30 of each transcript's 10, rounded at random (7 or 8)
    assert 21 <= len(part) <= 24 and set(part) <= set(utts)
    assert set(Counter(u.words for u in part).values()) <= {7, 8}


def test_recognising_the_held_out_recordings_in_threads_changes_nothing(tmp_path):
    from wordspot.corpus import read_manifest
    from wordspot.evaluation.calibrate import held_out_recognitions
    from wordspot.language.lexicon import read_lexicon
    from wordspot.model import load_model

    repo = Path(__file__).resolve().parents[2]
    model = load_model("starter")
    model.lexicon = read_lexicon(repo / "lexicon" / "bakery.txt")
    utts = read_manifest(repo / "recordings" / "train.csv")[:600:100]
    broken = tmp_path / "broken.wav"
    broken.write_bytes(b"not audio")
    utts = utts[:3] + [Utterance(broken, ("oven",), "x", 99)] + utts[3:]
    one = list(held_out_recognitions(model, utts, speeds=(1.0, 1.25)))
    two = list(held_out_recognitions(model, utts, speeds=(1.0, 1.25), jobs=2))
    assert len(one) == len(two) == 2 * 6 + 1 and one[6][1] is None and two[6][1] is None
    for (ua, wa, xa), (ub, wb, xb) in zip(one, two):
        assert ua is ub
        if wa is None:
            continue
        assert [(s.word, s.start, s.end) for s in wa.segments] == [(s.word, s.start, s.end) for s in wb.segments]
        assert [s.measures for s in wa.segments + wa.dropped] == [s.measures for s in wb.segments + wb.dropped]
        assert [s.word for s in xa.segments] == [s.word for s in xb.segments]
