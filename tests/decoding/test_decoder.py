"""Decoder checks: exhaustive search, hmmlearn's Viterbi, the reference kernel, bad input."""

from __future__ import annotations

import numpy as np
import pytest
import soundfile as sf
from hmmlearn.base import BaseHMM

from decoding_helpers import (
    chain_graph,
    exhaustive_best,
    frames_along,
    gap_mixtures,
    pause_mixtures,
    tiny_model,
    word_mixtures,
)
from wordspot.decoding import kernels as decode_kernels
from wordspot.decoding.decoder import (
    DecoderSettings,
    build_recognizer,
    recognize_features,
    recognize_file,
    recognize_files,
)
from wordspot.errors import DecodingError, LexiconError
from wordspot.acoustic.gmm import log_likelihoods
from wordspot.language.grammar import count_bigrams, estimate_prior
from wordspot.language.lexicon import Lexicon

ENTRIES = {"bat": [["B", "AA", "T"]], "sack": [["S", "AA", "K"], ["S", "AA"]], "tab": [["T", "AA", "B"]]}
TRANSCRIPTS = [["bat", "sack"], ["sack"], ["tab", "bat", "sack"], ["bat"]]


def _random_ll(rec, rng, n_frames):
    return 4.0 * rng.normal(size=(n_frames, rec.network.used_mixtures.shape[0]))


# --- exact search -------------------------------------------------------------------


@pytest.mark.parametrize("weight,penalty,single", [(1.0, 0.0, False), (2.5, -3.0, False), (1.0, 1.5, True)])
def test_unpruned_equals_exhaustive_search(rng, weight, penalty, single):
    # Reference: plain Viterbi over the composed chain of every word sequence of up to
    # three words, scored with the same grammar (an exhaustive search, exact by
    # construction, so the unpruned token passing must find the same best path and
    # score); words need >= 6 frames and each pause >= 2, so 24 frames cannot hold four words.
    model = tiny_model(rng, ENTRIES, transcripts=TRANSCRIPTS)
    settings = DecoderSettings.unpruned(grammar_weight=weight, insertion_penalty=penalty, single_word=single)
    rec = build_recognizer(model, settings=settings)
    for n_frames in (12, 18, 24):
        for _ in range(3):
            ll = _random_ll(rec, rng, n_frames)
            got = rec.search(ll)
            want_score, want_words = exhaustive_best(model, rec.network, ll, max_words=3)
            assert got.score == pytest.approx(want_score, rel=1e-10, abs=1e-9)
            assert got.words == want_words


def test_single_word_score_equals_hmmlearn_viterbi(rng):
    # Reference: hmmlearn's Viterbi (BaseHMM.decode) on the same composed HMM, with a
    # final absorbing state reached on one extra frame so the end probabilities count.
    # One pronunciation: alternatives are each entered with the full probability (a
    # Viterbi choice, see graph.compose), which a stochastic matrix cannot express.
    entries = {"sack": [["S", "AA", "K"]]}
    model = tiny_model(rng, entries)
    settings = DecoderSettings.unpruned(grammar_weight=0.0, insertion_penalty=0.0, single_word=True,
                                        allow_empty=False, filler=False)
    rec = build_recognizer(model, settings=settings)
    graph = chain_graph(model, [model.lexicon.pronunciations("sack")])
    s = graph.n_states
    trans = np.zeros((s + 1, s + 1))
    trans[np.arange(s), np.arange(s)] = np.exp(graph.self_logp)
    np.add.at(trans, (graph.arc_src, graph.arc_dst), np.exp(graph.arc_logp))
    trans[:s, s] = np.exp(graph.final_logp)
    trans[s, s] = 1.0
    start = np.append(np.exp(graph.init_logp), 0.0)
    column = {int(p): j for j, p in enumerate(rec.network.used_mixtures)}

    class Fixed(BaseHMM):
        def _compute_log_likelihood(self, X):
            return self.table[X[:, 0].astype(int)]

    for n_frames in (13, 20, 30):
        ll = _random_ll(rec, rng, n_frames)
        table = np.full((n_frames + 1, s + 1), -np.inf)
        table[:n_frames, :s] = ll[:, [column[int(p)] for p in graph.mixture]]
        table[n_frames, s] = 0.0
        hmm = Fixed(n_components=s + 1)
        hmm.startprob_, hmm.transmat_, hmm.table = start, trans, table
        want, _ = hmm.decode(np.arange(n_frames + 1)[:, None], algorithm="viterbi")
        got = rec.search(ll)
        assert got.words == ["sack"]
        assert got.score == pytest.approx(want, rel=1e-10)


@pytest.mark.parametrize("beam,word_end_beam,state_limit", [(np.inf, np.inf, 10**9), (6.0, 3.0, 10**9), (15.0, 15.0, 12), (30.0, 8.0, 5)])
def test_compiled_kernel_equals_reference(rng, beam, word_end_beam, state_limit):
    # Reference: decode_kernels.decode_reference, the same rules over every state in Python.
    model = tiny_model(rng, ENTRIES, transcripts=TRANSCRIPTS)
    rec = build_recognizer(
        model, settings=DecoderSettings(beam=beam, word_end_beam=word_end_beam, state_limit=state_limit,
                                        insertion_penalty=-1.0)
    )
    for n_frames in (10, 25, 60):
        ll = _random_ll(rec, rng, n_frames)
        fast = rec.search(ll)
        slow = rec.search(ll, kernel=decode_kernels.decode_reference)
        assert fast.reason.split(":")[0] == slow.reason.split(":")[0]
        assert fast.words == slow.words
        assert [(w.first_frame, w.last_frame) for w in fast.segments] == [
            (w.first_frame, w.last_frame) for w in slow.segments
        ]
        if np.isfinite(slow.score):
            assert fast.score == pytest.approx(slow.score, rel=1e-12)


def test_pruning_is_a_subset_of_the_exact_search(rng):
    # A pruned search can only lose paths, never find a better one (definition of a beam).
    model = tiny_model(rng, ENTRIES, transcripts=TRANSCRIPTS)
    exact = build_recognizer(model, settings=DecoderSettings.unpruned())
    pruned = build_recognizer(model, settings=DecoderSettings(beam=5.0, word_end_beam=2.0, state_limit=8))
    for _ in range(5):
        ll = _random_ll(exact, rng, 40)
        assert pruned.search(ll).score <= exact.search(ll).score + 1e-9


# --- the prior ----------------------------------------------------------------------


def test_bigram_prior_moves_a_tie_in_the_expected_direction(rng):
    # Two words with the same pronunciation tie acoustically; the prior must decide.
    # Expected by construction: the word the counts favour after "bat" wins.
    entries = {"bat": [["B", "AA", "T"]], "sack": [["S", "AA", "K"]], "sock": [["S", "AA", "K"]]}
    model = tiny_model(rng, entries)
    path = pause_mixtures(model, 6) + word_mixtures(model, ["B", "AA", "T"]) + word_mixtures(model, ["S", "AA", "K"]) + pause_mixtures(model, 6)
    frames = frames_along(model, path, rng)
    for favoured, other in (("sack", "sock"), ("sock", "sack")):
        counts = count_bigrams([["bat", favoured]] * 5 + [["bat", other]], model.lexicon.words)
        got = recognize_features(model, frames, prior=estimate_prior(counts))
        assert got.words == ["bat", favoured]
        # A heavier weight on the same prior keeps the choice and widens the gap.
        assert recognize_features(model, frames, prior=estimate_prior(counts),
                                  settings=DecoderSettings(grammar_weight=3.0)).words == ["bat", favoured]


def test_insertion_penalty_direction(rng):
    # A path of two short words vs one: a strong negative penalty must not add words
    # (expected direction by definition of the penalty).
    model = tiny_model(rng, ENTRIES, transcripts=TRANSCRIPTS)
    rec_free = build_recognizer(model, settings=DecoderSettings.unpruned(insertion_penalty=50.0))
    rec_tight = build_recognizer(model, settings=DecoderSettings.unpruned(insertion_penalty=-50.0))
    counts_free, counts_tight = [], []
    for _ in range(5):
        ll = _random_ll(rec_free, rng, 40)
        counts_free.append(len(rec_free.search(ll).words))
        counts_tight.append(len(rec_tight.search(ll).words))
    assert all(a >= b for a, b in zip(counts_free, counts_tight))
    assert sum(counts_free) > sum(counts_tight)


# --- results on constructed audio features -------------------------------------------


def test_words_times_and_confidence_on_clean_frames(rng):
    # Frames generated along a known path (pause, bat, pause, tab, pause): the words and
    # their frame spans are known by construction.
    model = tiny_model(rng, ENTRIES, transcripts=TRANSCRIPTS)
    path = (pause_mixtures(model, 8) + word_mixtures(model, ["B", "AA", "T"], 2) + gap_mixtures(model, 7)
            + word_mixtures(model, ["T", "AA", "B"], 3) + pause_mixtures(model, 8))
    frames = frames_along(model, path, rng)
    got = recognize_features(model, frames)
    assert got.words == ["bat", "tab"]
    assert got.reason == ""
    bat, tab = got.segments
    assert (bat.first_frame, bat.last_frame) == (8, 8 + 18 - 1)
    assert (tab.first_frame, tab.last_frame) == (8 + 18 + 7, 8 + 18 + 7 + 27 - 1)
    assert bat.start == pytest.approx(8 * 0.01, abs=1e-9)
    assert tab.end == pytest.approx((8 + 18 + 7 + 27) * 0.01, abs=1e-9)
    for seg in got.segments:
        assert 0.0 <= seg.confidence <= 1.0
        assert seg.confidence > 0.5


def test_wrong_word_gets_lower_confidence(rng):
    # Force the only word of a lexicon onto frames of another word: its confidence must
    # drop below that of the right word on the same frames (the measure's purpose). The
    # filler is off: it would reject the forced word outright (tests/decoding/test_filler.py).
    model = tiny_model(rng, ENTRIES)
    path = pause_mixtures(model, 6) + word_mixtures(model, ["B", "AA", "T"]) + pause_mixtures(model, 6)
    frames = frames_along(model, path, rng)
    right = recognize_features(model, frames, lexicon=Lexicon({"bat": [["B", "AA", "T"]]}))
    wrong = recognize_features(model, frames, lexicon=Lexicon({"tab": [["T", "AA", "B"]]}),
                               settings=DecoderSettings.unpruned(filler=False))
    assert right.words == ["bat"] and wrong.words == ["tab"]
    assert wrong.segments[0].confidence < right.segments[0].confidence


def test_new_vocabulary_at_recognition_time(rng):
    # A word the model never saw ("cab", made of its phones) is recognised via --lexicon.
    model = tiny_model(rng, ENTRIES, transcripts=TRANSCRIPTS)
    path = pause_mixtures(model, 6) + word_mixtures(model, ["K", "AA", "B"]) + pause_mixtures(model, 6)
    frames = frames_along(model, path, rng)
    lex = Lexicon({"cab": [["K", "AA", "B"]], "bat": [["B", "AA", "T"]]})
    assert recognize_features(model, frames, lexicon=lex).words == ["cab"]


def test_unknown_unit_in_new_lexicon_is_named(rng):
    model = tiny_model(rng, ENTRIES)
    with pytest.raises(LexiconError, match=r"word 'zed'.*unit 'Z'"):
        build_recognizer(model, lexicon=Lexicon({"zed": [["Z", "AA"]]}))


# --- bad input --------------------------------------------------------------------


def test_too_short_gives_empty_result_with_reason(rng):
    model = tiny_model(rng, ENTRIES)
    rec = build_recognizer(model)
    need = rec.network.min_frames
    assert need == 2 + 6 + 2  # two pauses of >= 2 frames and the 2-phone "sack" (3 frames each)
    got = rec.decode(frames_along(model, [0] * (need - 1), rng))
    assert got.words == [] and got.reason.startswith("too short")
    assert "record a longer take" in got.reason and f"({need * model.features.hop_ms / 1000:.2f} s" in got.reason


def test_silence_only_gives_empty_result(rng):
    model = tiny_model(rng, ENTRIES)
    frames = frames_along(model, pause_mixtures(model, 80), rng)
    got = recognize_features(model, frames)
    assert got.words == [] and got.reason.startswith("silence or noise only")
    assert np.isfinite(got.score)


def test_no_complete_path_gives_empty_result(rng):
    # Frames that end in the middle of a word: with a narrow beam every exit-pause token
    # is pruned at the last frame, so no complete path exists.
    model = tiny_model(rng, ENTRIES)
    path = pause_mixtures(model, 6) + word_mixtures(model, ["B", "AA", "T"])[:12]
    got = recognize_features(model, frames_along(model, path, rng), settings=DecoderSettings(beam=10.0, insertion_penalty=0.0))
    assert got.words == [] and got.reason.startswith("no complete path")
    # what happened and what to do, in plain words (no "entry pause")
    assert "lost track of the recording" in got.reason and "larger --beam" in got.reason
    assert "entry pause" not in got.reason


def test_bad_features_and_settings_raise_clear_errors(rng):
    model = tiny_model(rng, ENTRIES)
    with pytest.raises(DecodingError, match=r"shape \(frames, 39\)"):
        recognize_features(model, np.zeros((50, 13)))
    bad = np.zeros((50, 39))
    bad[3, 4] = np.nan
    with pytest.raises(DecodingError, match="NaN"):
        recognize_features(model, bad)
    with pytest.raises(DecodingError, match="beam must be a number > 0"):
        DecoderSettings(beam=-1.0)
    with pytest.raises(DecodingError, match="state_limit"):
        DecoderSettings(state_limit=0)
    with pytest.raises(DecodingError, match="grammar weight"):
        DecoderSettings(grammar_weight=-2.0)


def test_files_batch_continues_past_failures(rng, tmp_path):
    model = tiny_model(rng, ENTRIES, transcripts=TRANSCRIPTS)
    good = tmp_path / "oven-start.wav"
    sf.write(good, 0.05 * rng.normal(size=16000).astype(np.float32), 16000)
    broken = tmp_path / "broken.wav"
    broken.write_bytes(b"not audio at all")
    missing = tmp_path / "missing.wav"
    tiny = tmp_path / "click.wav"
    sf.write(tiny, 0.05 * rng.normal(size=480).astype(np.float32), 16000)  # 30 ms
    clipped = recognize_file(model, tiny)
    assert clipped.ok and clipped.words == [] and clipped.reason.startswith("too short: 0.030 s")
    results = recognize_files(model, [good, broken, missing])
    assert [r.ok for r in results] == [True, False, False]
    assert "broken.wav" in results[1].error and "missing.wav" in results[2].error
    assert results[0].duration == pytest.approx(1.0, abs=0.05)
    single = recognize_file(model, good)
    assert single.words == results[0].words and single.score == results[0].score
    parallel = recognize_files(model, [good, broken, missing, good], jobs=2)
    assert [r.words for r in parallel] == [r.words for r in results + [results[0]]]
    assert [bool(r.error) for r in parallel] == [False, True, True, False]


def test_emissions_equal_mixture_scoring(rng):
    # Reference: wordspot.acoustic.gmm.log_likelihoods (double precision, scipy logsumexp) on the
    # network's mixture_ids, and the compiled log-sum-exp against scipy's on random component
    # scores. Emissions are scored in float32: IEEE 754 single precision has unit roundoff
    # 2^-24 = 6e-8, so a score of magnitude ~200 built from ~80 products may be off by a
    # few 1e-5 relative at worst (rounding-error bound n u, Higham 2002, ch. 3).
    model = tiny_model(rng, ENTRIES, n_components=3)
    rec = build_recognizer(model)
    frames = rng.normal(size=(50, 39)) * 3.0
    want = log_likelihoods(frames, model.mixtures, rec.network.used_mixtures)
    got = rec.emissions(frames)
    assert got.dtype == np.float64 and got.shape == want.shape
    np.testing.assert_allclose(got, want, rtol=2e-5, atol=1e-3)
    comp = rng.normal(size=(7, 5, 4)) * 30.0
    comp[2, 1, :] = -np.inf
    comp[3, 2, 1:] = -np.inf
    ref = decode_kernels.mixture_logsumexp_reference(comp)
    # float64 input: only the terms exp(score - max) <= 1 are summed in float32 (error ~1e-7)
    np.testing.assert_allclose(decode_kernels.mixture_logsumexp(comp), ref, rtol=0, atol=1e-6)
    big = rng.normal(size=(40, 30, 8)) * 30.0  # more than one block of mixtures
    np.testing.assert_allclose(decode_kernels.mixture_logsumexp(big),
                               decode_kernels.mixture_logsumexp_reference(big), rtol=0, atol=1e-6)
    # float32 input: the scores themselves are rounded (|score| ~ 100 -> ~4e-6)
    np.testing.assert_allclose(decode_kernels.mixture_logsumexp(comp.astype(np.float32)), ref, rtol=0, atol=2e-5)


@pytest.mark.parametrize("shape", [(7, 5, 4), (40, 30, 8), (3, 700, 16), (5, 4, 1)])
def test_log_sum_exp_by_component_is_the_same_numbers(rng, shape):
    # The component-major loop the emissions use against the mixture-major one (the same
    # terms summed in the same order: equal to the last bit), float32 as the emissions
    # give it, with -inf components and whole -inf mixtures; and against scipy's logsumexp
    # (reference library) within the tolerance above.
    comp = (rng.normal(size=shape) * 30.0).astype(np.float32)
    comp[rng.random(shape) < 0.1] = -np.inf
    comp[0, 1, :] = -np.inf
    by_component = np.ascontiguousarray(comp.transpose(0, 2, 1))
    got = decode_kernels.mixture_logsumexp_by_component(by_component)
    np.testing.assert_array_equal(got, decode_kernels.mixture_logsumexp(comp))
    assert got[0, 1] == -np.inf
    ref = decode_kernels.mixture_logsumexp_reference(comp.astype(np.float64))
    np.testing.assert_allclose(got, ref, rtol=0, atol=2e-5)


def test_single_precision_exp_over_its_whole_range():
    # exp of values <= 0 against numpy's double-precision exp (reference: numpy), relative error
    # within a few float32 roundoffs (2^-24 = 6e-8, IEEE 754), down to exp(-87) ~ 1.6e-38
    x = np.concatenate([np.linspace(-87.0, 0.0, 100_001), [-1e-7, -0.34657, -0.34658, 0.0]]).astype(np.float32)
    out = np.empty_like(x)
    decode_kernels._exp_nonpositive(x, out, np.empty(x.shape, dtype=np.int32))
    want = np.exp(x.astype(np.float64))
    np.testing.assert_allclose(out, want, rtol=5e-7, atol=0)
    tiny = np.array([-100.0, -np.inf], dtype=np.float32)
    decode_kernels._exp_nonpositive(tiny, out[:2], np.empty(2, dtype=np.int32))
    assert np.all(out[:2] >= 0) and np.all(out[:2] < 2e-38)

def test_decoding_with_fewer_words_shares_the_state_scores_and_finds_the_same(rng):
    # The calibration recognises each held-out clip with the whole lexicon and without its
    # own words: the same model, so the state scores are computed once (decode_with); the
    # recognitions must be those of decoding twice.
    model = tiny_model(rng, ENTRIES, transcripts=TRANSCRIPTS, n_components=2)
    settings = DecoderSettings(min_confidence=0.0)
    full = build_recognizer(model, settings=settings)
    fewer = build_recognizer(model, settings=settings, lexicon=model.lexicon.restricted_to(["bat", "tab"]))
    assert full.shares_scores_with(fewer)  # with the background words every phone is scored in both
    other = build_recognizer(model, settings=DecoderSettings(min_confidence=0.0, beam=50.0))
    assert not full.shares_scores_with(other)
    x = frames_along(model, pause_mixtures(model, 10) + word_mixtures(model, ["S", "AA", "K"])
                     + pause_mixtures(model, 10), rng)
    for others in ([fewer], [fewer, other], []):
        got = full.decode_with(x, others, path="clip.wav")
        want = [r.decode(x, path="clip.wav") for r in [full] + others]
        assert len(got) == len(want)
        for a, b in zip(got, want):
            assert [s.word for s in a.segments] == [s.word for s in b.segments]
            assert a.score == b.score and a.reason == b.reason
            np.testing.assert_array_equal([s.measures for s in a.segments + a.dropped],
                                          [s.measures for s in b.segments + b.dropped])
    assert [s.word for s in full.decode_with(x, [fewer])[0].segments] == ["sack"]
    short = x[:2]  # too short for the network: both say why, as decode does
    assert [r.reason for r in full.decode_with(short, [fewer])] == [full.decode(short).reason, fewer.decode(short).reason]
