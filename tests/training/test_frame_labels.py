"""Tests for wordspot.training.frame_labels: per-frame mixture ids by forced alignment."""

import numpy as np
import pytest
from scipy.special import logsumexp

from decoding_helpers import TableHMM
from tone_corpus import add_row, load_corpus
from wordspot.acoustic.gmm import component_log_likelihoods
from wordspot.acoustic.units import GAP_UNIT, PAUSE_UNIT
from wordspot.audio.augment import NoiseSettings
from wordspot.audio.features import FeatureSettings, file_features
from wordspot.corpus import Utterance
from wordspot.training.backgrounds import MIN_BACKGROUNDS
from wordspot.audio.features import compute_features
from wordspot.audio.reading import load_audio
from wordspot.errors import TrainingError
from wordspot.training.data import chain_slots, speed_copy
from wordspot.acoustic.graph import compose
from wordspot.training.frame_labels import align_frames
from wordspot.training.trainer import TrainingConfig, train

SMALL = dict(mixtures=(1, 2), first_passes=3, passes_per_split=1, speed_factors=(1.0,), noise_copies=0,
             background_share=0.0)


@pytest.fixture(scope="module")
def tiny(tmp_path_factory):
    """A two-Gaussian model trained on the tone corpus, and that corpus."""
    rng = np.random.default_rng(20261202)
    utts, lex, _ = load_corpus(tmp_path_factory.mktemp("tones"), rng, n_utterances=12)
    model, _ = train(utts, lex, config=TrainingConfig(**SMALL))
    return model, utts


def _pause_mixtures(model):
    units = model.units
    pau = units.index(PAUSE_UNIT)
    ids = set(units.state_mixture[pau, : units.n_states[pau]].tolist())
    gap = units.index(GAP_UNIT)
    return ids | set(units.state_mixture[gap, : units.n_states[gap]].tolist())


def _hmmlearn_labels(model, utt, x=None):
    """Viterbi labels of one utterance computed apart from wordspot's kernels.

    The chain's dense transition matrix goes into hmmlearn's Viterbi (reference library),
    with the emission table scored from the mixtures by scipy's logsumexp. hmmlearn has no
    end probabilities, so one extra state E takes them: every state s moves to E with the
    chain's end probability of s, E scores 0 on one extra frame appended after the last and
    -inf everywhere else, so the best path must end in E there.
    """
    graph = compose(chain_slots(utt.words, model.lexicon, model.units), model.units)
    if x is None:
        x = file_features(utt.path, model.features)
    mixture_ll = logsumexp(component_log_likelihoods(x, model.mixtures), axis=2)
    t_len, s = x.shape[0], graph.n_states
    table = np.full((t_len + 1, s + 1), -np.inf)
    table[:t_len, :s] = mixture_ll[:, graph.mixture]
    table[t_len, s] = 0.0
    a = np.zeros((s + 1, s + 1))
    a[np.arange(s), np.arange(s)] = np.exp(graph.self_logp)
    np.add.at(a, (graph.arc_src, graph.arc_dst), np.exp(graph.arc_logp))
    a[:s, s] = np.exp(graph.final_logp)
    a[s, s] = 1.0
    ref = TableHMM(table, implementation="log")
    ref.startprob_ = np.append(np.exp(graph.init_logp), 0.0)
    with np.errstate(divide="ignore"):
        ref.transmat_ = a
    _, states = ref.decode(np.arange(t_len + 1)[:, None], algorithm="viterbi")
    assert states[-1] == s
    return graph.mixture[states[:-1]]


def test_labels_are_the_viterbi_path_of_hmmlearn(tiny):
    model, utts = tiny
    got = align_frames(model, utts)
    assert not got.skipped and len(got.items) == len(utts)
    p = model.mixtures.n_mixtures
    for it, utt in zip(got.items, utts):
        assert it.path == utt.path and it.words == utt.words and not it.background
        assert it.frames.dtype == np.float32 and it.labels.dtype == np.int32
        assert it.frames.shape[0] == it.labels.shape[0]
        assert it.labels.min() >= 0 and it.labels.max() < p
        np.testing.assert_array_equal(it.frames, file_features(utt.path, model.features))
        np.testing.assert_array_equal(it.labels, _hmmlearn_labels(model, utt))
        # the chain begins and ends with the pause
        pause = _pause_mixtures(model)
        assert it.labels[0] in pause and it.labels[-1] in pause
    assert got.n_frames == sum(len(x) for x in got.labels) == sum(len(f) for f in got.frames)
    assert got.counts(p).sum() == got.n_frames


def test_background_items_get_only_pause_mixtures_and_jobs_do_not_matter(tiny):
    model, utts = tiny
    one = align_frames(model, utts[:6], background_share=0.5, seed=4)
    two = align_frames(model, utts[:6], background_share=0.5, seed=4, jobs=2)
    backgrounds = [it for it in one.items if it.background]
    assert len(backgrounds) == MIN_BACKGROUNDS and len(one.items) == 6 + MIN_BACKGROUNDS
    pause = _pause_mixtures(model)
    for it in backgrounds:
        assert it.words == () and it.frames.shape[0] == it.labels.shape[0] > 0
        assert set(it.labels.tolist()) <= pause
    assert len(two.items) == len(one.items)
    for a, b in zip(one.items, two.items):
        assert a.path == b.path and a.background == b.background
        np.testing.assert_array_equal(a.frames, b.frames)
        np.testing.assert_array_equal(a.labels, b.labels)


def test_noisy_copies_take_their_recordings_labels(tiny):
    model, utts = tiny
    got = align_frames(model, utts[:4], noise=NoiseSettings(copies=1, kinds=("steady",)), seed=1)
    clean = [it for it in got.items if not it.noisy]
    noisy = [it for it in got.items if it.noisy]
    assert len(clean) == len(noisy) == 4
    for a, b in zip(clean, noisy):
        assert a.path == b.path
        np.testing.assert_array_equal(a.labels, b.labels)
        assert not np.array_equal(a.frames, b.frames)


def test_speed_copies_get_their_own_alignment(tiny):
    model, utts = tiny
    got = align_frames(model, utts[:3], speeds=(0.9, 1.0, 1.1))
    # the recordings first, then one copy per factor other than 1 (factor-major)
    assert [(it.path, it.speed) for it in got.items] == (
        [(u.path, 1.0) for u in utts[:3]] + [(u.path, 0.9) for u in utts[:3]] + [(u.path, 1.1) for u in utts[:3]])
    rate = model.features.sample_rate
    for it, utt in zip(got.items[3:], utts[:3] * 2):
        assert not it.noisy and not it.background and it.words == utt.words
        x = compute_features(speed_copy(load_audio(utt.path, sample_rate=rate), rate, it.speed), model.features)
        np.testing.assert_allclose(it.frames, x, rtol=1e-5, atol=1e-5)
        # played slower gives more frames, faster fewer; the labels are the copy's own best path
        clean = got.items[utts.index(utt)]
        assert (it.frames.shape[0] > clean.frames.shape[0]) == (it.speed < 1)
        np.testing.assert_array_equal(it.labels, _hmmlearn_labels(model, utt, x))
    again = align_frames(model, utts[:3], speeds=(0.9, 1.1), jobs=2)
    for a, b in zip(got.items, again.items):
        np.testing.assert_array_equal(a.labels, b.labels)
    with pytest.raises(TrainingError, match="speed factors"):
        align_frames(model, utts[:1], speeds=(0.0,))


def test_speed_and_noisy_copies_together_keep_their_kinds(tiny):
    model, utts = tiny
    got = align_frames(model, utts[:4], noise=NoiseSettings(copies=1, kinds=("steady",)), speeds=(1.1,),
                       background_share=0.5, seed=2)
    kinds = [("background" if it.background else "noisy" if it.noisy else it.speed) for it in got.items]
    assert kinds == [1.0] * 4 + [1.1] * 4 + ["noisy"] * 4 + ["background"] * MIN_BACKGROUNDS
    for clean, copy in zip(got.items[:4], got.items[8:12]):
        assert clean.path == copy.path
        np.testing.assert_array_equal(clean.labels, copy.labels)


def test_unusable_utterances_are_skipped_and_listed(tiny, tmp_path):
    model, utts = tiny
    rate = model.features.sample_rate
    manifest = tmp_path / "m.csv"
    manifest.write_text("path,transcript,speaker\n")
    add_row(manifest, "short.wav", 0.01 * np.random.default_rng(3).standard_normal(int(0.15 * rate)),
            "bake toss")  # 0.15 s: too short for a chain of six phones
    broken = tmp_path / "broken.wav"
    broken.write_bytes(b"not audio at all")
    bad = [
        Utterance(utts[0].path, ("bake", "croissant"), "x", 2),  # word not in the lexicon
        Utterance(tmp_path / "short.wav", ("bake", "toss"), "x", 3),
        Utterance(broken, ("bake",), "x", 4),
    ]
    got = align_frames(model, bad + utts[:2])
    assert [it.path for it in got.items] == [u.path for u in utts[:2]]
    reasons = {str(s.path): s.reason for s in got.skipped}
    assert len(reasons) == 3
    assert "croissant" in reasons[str(utts[0].path)] and "lexicon" in reasons[str(utts[0].path)]
    assert "too short" in reasons[str(tmp_path / "short.wav")]
    assert "could not be loaded" in reasons[str(broken)]
    assert align_frames(model, bad[:1]).items == []


def test_a_chain_with_no_path_is_skipped(tiny):
    model, utts = tiny
    # every mixture but the pause's scores -inf (all weights zero): no chain with a word fits
    broken = type(model)(**{**model.__dict__})
    mix = model.mixtures
    weights = mix.weights.copy()
    keep = sorted(_pause_mixtures(model))
    others = np.setdiff1d(np.arange(mix.n_mixtures), keep)
    weights[others] = 0.0
    broken.mixtures = type(mix)(weights, mix.means, mix.variances)
    got = align_frames(broken, utts[:3], background_share=0.5, seed=0)
    assert [str(s.path) for s in got.skipped] == [str(u.path) for u in utts[:3]]
    assert all("no path" in s.reason for s in got.skipped)
    assert got.items and all(it.background for it in got.items)  # pause-only chains still fit
