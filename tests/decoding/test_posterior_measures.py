"""The confidence measures from the state scorer's log posteriors."""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import pytest

from decoding_helpers import PHONES, frames_along, pause_mixtures, tiny_model, word_mixtures
from wordspot.acoustic.scorer import StateScorer
from wordspot.decoding.confidence import (BASE_MEASURE_NAMES, MEASURE_NAMES, POSTERIOR_MEASURE_NAMES, VOWEL_CLASSES,
                                          WORST_PHONE_FLOOR, path_posterior_measures)
from wordspot.decoding.decoder import DecoderSettings, build_recognizer
from wordspot.decoding.spans import piece_score_reference
from wordspot.model import load_model, save_model
from wordspot.util.logistic import Calibration

ENTRIES = {"bat": [["B", "AA", "T"]], "sack": [["S", "AA", "K"]], "tab": [["T", "AA", "B"]]}
TRANSCRIPTS = [["bat", "tab"], ["sack"], ["tab", "bat"]]
POST = slice(len(BASE_MEASURE_NAMES), len(BASE_MEASURE_NAMES) + len(POSTERIOR_MEASURE_NAMES))
OWN = slice(POST.stop, len(MEASURE_NAMES))


def random_scorer(rng, n_classes, dim=39, context=1, hidden=(10,)):
    sizes = [dim * (2 * context + 1), *hidden, n_classes]
    prior = rng.uniform(0.5, 2.0, n_classes)
    return StateScorer(context, rng.normal(size=sizes[0]), rng.uniform(0.5, 2.0, sizes[0]),
                       tuple(rng.normal(size=(a, b)) / np.sqrt(a) for a, b in zip(sizes[:-1], sizes[1:])),
                       tuple(rng.normal(size=b) for b in sizes[1:]), np.log(prior / prior.sum()))


def nearest_mean_scorer(model, sharpness=1.0):
    """A one-layer network whose logits are ``-sharpness / 2 * ||x - mean_j||^2`` up to a term
    common to every class (each mixture's first mean): it favours the states the frames were
    drawn from (a nearest-mean classifier, textbook; no source needed)."""
    mu = model.mixtures.means[:, 0, :].astype(np.float64)  # (P, D)
    p, d = mu.shape
    return StateScorer(0, np.zeros(d), np.ones(d), (sharpness * mu.T,), (-0.5 * sharpness * (mu * mu).sum(axis=1),),
                       np.full(p, -np.log(p)))


@pytest.fixture
def bat(rng):
    model = tiny_model(rng, ENTRIES, transcripts=TRANSCRIPTS)
    frames = frames_along(model, pause_mixtures(model, 6) + word_mixtures(model, ["B", "AA", "T"])
                          + pause_mixtures(model, 6), rng)
    return model, frames


def test_measures_follow_a_naive_computation_along_the_words_path(bat, rng):
    model, frames = bat
    model = replace(model, scorer=random_scorer(rng, model.mixtures.n_mixtures))
    rec = build_recognizer(model)
    seg = rec.decode(frames).segments[0]
    ll, lp = rec.emissions_and_posteriors(frames)
    np.testing.assert_array_equal(ll, rec.emissions(frames))  # the same emissions as without posteriors
    # by hand: the log posterior of every mixture id, then the state of the path at each frame
    full = model.scorer.log_posteriors(frames).astype(np.float64)
    net = rec.network
    pron = net.prons.index(tuple(seg.pronunciation)) if isinstance(net.prons[0], tuple) else \
        [list(p) for p in net.prons].index(list(seg.pronunciation))
    a, b = seg.first_frame, seg.last_frame
    piece, states, phones, _ = rec.word_path(ll, pron, a, b)
    per_frame, per_phone = [], {}
    for k, t in enumerate(range(a, b + 1)):
        mixture_id = int(net.used_mixtures[piece.mixture[states[k]]])
        per_frame.append(float(full[t, mixture_id]))
        per_phone.setdefault(int(phones[k]), []).append(float(full[t, mixture_id]))
    phone_means = [sum(v) / len(v) for _, v in sorted(per_phone.items())]
    assert len(phone_means) == 3
    filler = rec.pieces()[0]
    margin = (piece_score_reference(lp, a, b, piece) - piece_score_reference(lp, a, b, filler, 0.0)) / (b - a + 1)
    want = (sum(per_frame) / len(per_frame), sum(phone_means) / 3, min(phone_means), margin)
    assert seg.measures[POST][:4] == pytest.approx(want, rel=1e-6, abs=1e-6)
    # AA is the only vowel of these words, but the filler brings every phone: the best
    # vowel on the AA frames is the largest posterior of any vowel's state in that position
    units = model.units
    vowels = [v for members in VOWEL_CLASSES.values() for v in members if v in units]
    any_vowel = {}
    for k, t in enumerate(range(a, b + 1)):
        column = piece.mixture[states[k]]
        mixture_id = int(net.used_mixtures[column])
        unit, position = map(int, np.argwhere(units.state_mixture == mixture_id)[0])
        value = float(full[t, mixture_id])
        if units.names[unit] == "AA":
            value = max(float(full[t, units.state_mixture[units.index(v), position]]) for v in vowels)
        any_vowel.setdefault(int(phones[k]), []).append(value)
    worst_any = min(sum(v) / len(v) for v in any_vowel.values())
    ordered = sorted(phone_means)
    assert seg.measures[len(BASE_MEASURE_NAMES) + 4] == pytest.approx(worst_any, rel=1e-6, abs=1e-6)
    assert seg.measures[len(BASE_MEASURE_NAMES) + 6:POST.stop] == pytest.approx(
        (ordered[1], (ordered[0] + ordered[1]) / 2, max(ordered[0], WORST_PHONE_FLOOR)), rel=1e-6, abs=1e-6)
    assert MEASURE_NAMES[POST] == POSTERIOR_MEASURE_NAMES


def test_measures_of_a_path_given_by_hand(bat):
    # Worked by hand: 5 frames, path states s0 s0 s1 s2 s2 of phones 0 0 0 1 1, log posteriors
    # on the path -1, -3, -2, -0.5, -1.5: mean -8/5, phone means -2 and -1, so -1.5 and -2.
    model, _ = bat
    rec = build_recognizer(model)
    piece = rec.word_path(np.zeros((20, rec.network.used_mixtures.size)), 0, 0, 8)[0]
    lp = np.full((7, rec.network.used_mixtures.size), -9.0)
    states = np.array([0, 0, 1, 2, 2])
    for t, v in zip(range(2, 7), (-1.0, -3.0, -2.0, -0.5, -1.5)):
        lp[t, piece.mixture[states[t - 2]]] = v
    got = rec.posterior_measures(lp, 2, 6, (piece, states, np.array([0, 0, 0, 1, 1]), 0.0))
    assert got[:3] == pytest.approx((-1.6, -1.5, -2.0), abs=1e-12)
    # a path that does not fit gives NaN
    assert np.isnan(rec.posterior_measures(lp, 2, 6, (piece, states - 10, states, -np.inf))).all()


def test_vowel_stand_ins_second_worst_and_floor_on_a_path_given_by_hand(rng):
    # Worked by hand. "bat" is B AA T, three states a phone; the path spends one frame in each
    # of its nine states (frames 1..9). Log posteriors on the path: B -0.1, AA -10 -8 -9,
    # T -0.2, so the phone means are -0.1, -9 and -0.2: worst -9, second-worst -0.2, the two
    # worst -4.6. Every other column is -20, but on the AA frames AO (a back vowel as AA) has
    # -0.5, -1, -1.5 in the same state positions and IY (a front vowel) -0.2 in the middle one.
    model = tiny_model(rng, ENTRIES, transcripts=TRANSCRIPTS, phones=PHONES + ("AO", "IY", "UW", "UH", "OW", "OY"))
    rec = build_recognizer(model)
    net = rec.network
    piece = rec.word_path(np.zeros((20, net.used_mixtures.size)), 0, 0, 8)[0]
    lp = np.full((11, net.used_mixtures.size), -20.0)
    states = np.arange(9)
    phones = np.repeat([0, 1, 2], 3)
    for t, v in zip(range(1, 10), (-0.1, -0.1, -0.1, -10.0, -8.0, -9.0, -0.2, -0.2, -0.2)):
        lp[t, piece.mixture[states[t - 1]]] = v

    def column(unit, position):
        return int(np.searchsorted(net.used_mixtures, model.units.state_mixture[model.units.index(unit), position]))

    for position, v in enumerate((-0.5, -1.0, -1.5)):
        lp[4 + position, column("AO", position)] = v
    lp[5, column("IY", 1)] = -0.2
    got = rec.posterior_measures(lp, 1, 9, (piece, states, phones, 0.0))
    named = dict(zip(POSTERIOR_MEASURE_NAMES, got))
    assert named["posterior_worst_phone"] == pytest.approx(-9.0, abs=1e-12)
    # best vowel on the AA frames: -0.5, -0.2 (IY), -1.5; mean -2.2 / 3 is the worst phone now
    assert named["posterior_worst_phone_any_vowel"] == pytest.approx(-2.2 / 3, abs=1e-12)
    # the back vowels' summed posterior: AA's own, AO's and 4 others (UW UH OW OY, all in this model) at -20
    back = [np.log(np.exp(own) + np.exp(ao) + 4 * np.exp(-20.0)) for own, ao in ((-10, -0.5), (-8, -1), (-9, -1.5))]
    assert named["posterior_worst_phone_vowel_class"] == pytest.approx(np.mean(back), abs=1e-12)
    assert -1.0 < named["posterior_worst_phone_vowel_class"] < -0.99  # about AO's mean alone
    assert named["posterior_second_worst_phone"] == pytest.approx(-0.2, abs=1e-12)
    assert named["posterior_two_worst_phones"] == pytest.approx(-4.6, abs=1e-12)
    assert named["posterior_worst_phone_floored"] == pytest.approx(max(-9.0, WORST_PHONE_FLOOR), abs=1e-12)
    assert WORST_PHONE_FLOOR > -9.0
    # the measures older than these are as before: mean -27.9 / 9, mean of phone means -9.3 / 3
    assert got[:3] == pytest.approx((-27.9 / 9, -9.3 / 3, -9.0), abs=1e-12)


def test_second_worst_of_one_phone_is_that_phone():
    # one phone of two frames (-1, -3): every phone measure is its mean -2; no vowel stand-in moves it
    x = np.array([-1.0, -3.0])
    got = path_posterior_measures(x, np.zeros(2, dtype=np.int64), x, x)
    assert got == pytest.approx((-2.0, -2.0, -2.0, -2.0, -2.0, -2.0, -2.0, max(-2.0, WORST_PHONE_FLOOR)), abs=1e-12)


def test_a_calibration_over_the_older_posterior_measures_reads_the_same_values(bat, rng, tmp_path):
    # a model file calibrated over the twelve measures of before (the starters' shipped files)
    older = ("acoustic_per_frame", "free_margin", "frames_per_phone", "filler_margin", "runner_up_margin",
             "next_to_filler", "phones", "phone_filler_margin", "posterior_mean", "posterior_phone_mean",
             "posterior_worst_phone", "posterior_filler_margin")
    assert MEASURE_NAMES[:12] == older  # the older measures keep their places
    model, frames = bat
    cal = Calibration(older, np.linspace(-40.0, 0.0, 12), np.linspace(1.0, 3.0, 12), np.linspace(-1.0, 1.0, 12), 0.5)
    saved = load_model(save_model(replace(model, calibration=cal, scorer=random_scorer(rng, model.mixtures.n_mixtures)),
                                  tmp_path / "older.model"))
    assert saved.calibration.names == older
    seg = build_recognizer(saved, settings=DecoderSettings(min_confidence=0.0)).decode(frames).segments[0]
    assert len(seg.measures) == len(MEASURE_NAMES) and np.isfinite(seg.measures[:POST.stop]).all()
    assert np.isnan(seg.measures[OWN]).all()  # no second network
    assert seg.confidence == pytest.approx(float(cal.predict(np.array(seg.measures[:12]))), rel=1e-12)


def test_no_scorer_no_posterior_measures_and_old_calibrations_give_the_same_confidences(bat, rng, tmp_path):
    model, frames = bat
    k = len(BASE_MEASURE_NAMES)
    # a calibration over the eight measures every model file calibrated before the posterior ones names
    old = Calibration(BASE_MEASURE_NAMES, np.linspace(-40.0, 0.0, k), np.linspace(1.0, 3.0, k),
                      np.linspace(-1.0, 1.0, k), 0.5)
    plain = load_model(save_model(replace(model, calibration=old), tmp_path / "old.model"))
    got = build_recognizer(plain, settings=DecoderSettings(min_confidence=0.0)).decode(frames)
    seg = got.segments[0]
    assert np.isnan(seg.measures[POST]).all()
    assert seg.confidence == pytest.approx(float(old.predict(np.array(seg.measures[:k]))), rel=1e-12)
    # the same file with a scorer: posterior measures appear, the old calibration ignores them
    with_net = replace(plain, scorer=random_scorer(rng, model.mixtures.n_mixtures))
    again = build_recognizer(with_net, settings=DecoderSettings(min_confidence=0.0)).decode(frames).segments[0]
    assert np.isfinite(again.measures[POST]).all()
    assert again.measures[:k] == seg.measures[:k] and again.confidence == seg.confidence


def test_a_calibration_over_posterior_measures_without_a_scorer_falls_back_to_the_heuristic(bat):
    model, frames = bat
    names = BASE_MEASURE_NAMES + POSTERIOR_MEASURE_NAMES
    k = len(names)
    cal = Calibration(names, np.zeros(k), np.ones(k), np.full(k, 0.1), 0.0)
    seg = build_recognizer(replace(model, calibration=cal),
                           settings=DecoderSettings(min_confidence=0.0)).decode(frames).segments[0]
    from wordspot.decoding.confidence import heuristic_confidence

    assert seg.confidence == heuristic_confidence(seg.measures)


def test_a_scorer_that_favours_the_right_states_scores_the_right_word_higher(bat):
    model, frames = bat
    model = replace(model, scorer=nearest_mean_scorer(model, sharpness=0.5))
    rec = build_recognizer(model)
    net = rec.network
    ll, lp = rec.emissions_and_posteriors(frames)
    seg = rec.decode(frames).segments[0]
    assert seg.word == "bat"
    a, b = seg.first_frame, seg.last_frame
    prons = {w: int(net.word_pron[net.word_first[net.words.index(w) + 1]]) for w in ENTRIES}
    right = rec.posterior_measures(lp, a, b, rec.word_path(ll, prons["bat"], a, b))
    for wrong_word in ("sack", "tab"):
        wrong = rec.posterior_measures(lp, a, b, rec.word_path(ll, prons[wrong_word], a, b))
        for name, r, w in zip(POSTERIOR_MEASURE_NAMES, right, wrong):
            assert r > w + 0.5, (wrong_word, name, r, w)
    # the right word's own states are almost certain: mean log posterior near 0, margin near 0
    assert right[0] > -0.5 and right[3] > -0.5


def test_word_path_pieces_agree_when_threads_make_them_together(bat, monkeypatch):
    # Recognition threads share one recogniser. Two threads asking for the same
    # pronunciation's piece at once (held together inside piece_of by a barrier) must end up
    # with the same piece, and the vowel tables of the posterior measures must find it: a
    # piece replaced by the other thread's once gave StopIteration in the demo run.
    import threading

    from wordspot.decoding import decoder as decoder_module

    model, _ = bat
    rec = build_recognizer(model)
    ll = np.zeros((20, rec.network.used_mixtures.size))
    made = decoder_module.piece_of
    both_inside = threading.Barrier(2, timeout=10)

    def slow_piece_of(net, items):
        piece = made(net, items)
        if len(items) == 1:
            both_inside.wait()
        return piece

    monkeypatch.setattr(decoder_module, "piece_of", slow_piece_of)
    got, errors = [None, None], []

    def ask(k):
        try:
            piece = rec.word_path(ll, 0, 0, 8)[0]
            got[k] = (piece, rec._vowel_columns(piece))
        except Exception as exc:  # handed to the test thread
            errors.append(exc)

    threads = [threading.Thread(target=ask, args=(k,)) for k in range(2)]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    assert not errors, errors
    assert got[0][0] is got[1][0]
    assert all(np.array_equal(a, b) for a, b in zip(got[0][1], got[1][1]))


def test_a_second_network_gives_the_own_measures_it_would_give_alone(bat, rng, tmp_path):
    model, frames = bat
    first, second = (random_scorer(rng, model.mixtures.n_mixtures) for _ in range(2))
    assert [n[len("own_"):] for n in MEASURE_NAMES[OWN]] == list(POSTERIOR_MEASURE_NAMES)
    both = replace(model, scorer=first, own_scorer=second)
    got = build_recognizer(both).decode(frames).segments
    plain = build_recognizer(replace(model, scorer=first)).decode(frames).segments
    alone = build_recognizer(replace(model, scorer=second)).decode(frames).segments
    assert [s.word for s in got] == [s.word for s in plain] == [s.word for s in alone] == ["bat"]
    m, p, a = (np.array(x[0].measures) for x in (got, plain, alone))
    np.testing.assert_array_equal(m[:POST.stop], p[:POST.stop])  # the first network's measures unchanged
    np.testing.assert_array_equal(m[OWN], a[POST])  # the second's, as if it were the model's only one
    assert np.isfinite(m[OWN]).all() and np.isnan(p[OWN]).all() and not np.array_equal(m[OWN], m[POST])
    # the file keeps both networks
    back = load_model(save_model(both, tmp_path / "both.model"))
    again = build_recognizer(back).decode(frames).segments[0]
    np.testing.assert_array_equal(np.array(again.measures), m)
