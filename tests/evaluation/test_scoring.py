"""Tests of wordspot.evaluation.scoring: alignment, error counts, tables, bootstrap interval."""

import json
import math
import re
from functools import lru_cache

import jiwer
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from wordspot.errors import WordspotError
from wordspot.evaluation.scoring import (
    DELETION,
    HIT,
    INSERTION,
    SUBSTITUTION,
    ScoredUtterance,
    ScoringError,
    align_words,
    bootstrap_wer_interval,
    confusion_matrix,
    score_utterances,
    word_error_rate,
)

VOCAB = ("oven", "on", "off", "mixer")


def _naive_edit_options(ref, hyp):
    """Naive reference: every (edits, substitutions) reachable by some alignment.

    Plain recursion over all alignments (memoised), independent of the module's matrix code.
    """
    ref, hyp = tuple(ref), tuple(hyp)

    @lru_cache(maxsize=None)
    def options(i, j):
        if i == len(ref) and j == len(hyp):
            return frozenset({(0, 0)})
        out = set()
        if i < len(ref) and j < len(hyp):
            sub = int(ref[i] != hyp[j])
            out |= {(e + sub, s + sub) for e, s in options(i + 1, j + 1)}
        if i < len(ref):
            out |= {(e + 1, s) for e, s in options(i + 1, j)}
        if j < len(hyp):
            out |= {(e + 1, s) for e, s in options(i, j + 1)}
        return frozenset(out)

    opts = options(0, 0)
    best = min(e for e, _ in opts)
    subs = [s for e, s in opts if e == best]
    return best, min(subs), max(subs)


def _random_pair(rng, max_len=7, allow_empty_reference=False):
    n = int(rng.integers(0 if allow_empty_reference else 1, max_len + 1))
    m = int(rng.integers(0, max_len + 1))
    ref = [str(w) for w in rng.choice(VOCAB[:3], size=n)]
    hyp = [str(w) for w in rng.choice(VOCAB[:3], size=m)]
    return ref, hyp


def test_counts_and_wer_match_jiwer_on_random_pairs(rng):
    # Reference library: jiwer.process_words. The total S + D + I (the edit distance) and the
    # WER are unique, so they must match exactly. The split into S, D, I can differ between
    # equally short alignments; jiwer's split must then be one of the optimal ones, and ours
    # has the fewest substitutions (tie-break rule 2). When the naive enumeration shows that
    # all optimal alignments share one split, all four counts must equal jiwer's.
    forced = 0
    pairs = [_random_pair(rng) for _ in range(400)]
    pairs += [(_random_pair(rng)[0], []) for _ in range(20)]  # empty hypotheses
    for ref, hyp in pairs:
        ours = align_words(ref, hyp)
        ref_j = jiwer.process_words(" ".join(ref), " ".join(hyp))
        j_errors = ref_j.substitutions + ref_j.deletions + ref_j.insertions
        assert ours.errors == j_errors, (ref, hyp)
        assert ours.wer == pytest.approx(ref_j.wer, rel=1e-12)
        assert ours.deletions - ours.insertions == ref_j.deletions - ref_j.insertions
        assert ours.substitutions <= ref_j.substitutions
        assert ours.hits >= ref_j.hits
        _, s_min, s_max = _naive_edit_options(ref, hyp)
        if s_min == s_max:
            forced += 1
            got = (ours.substitutions, ours.deletions, ours.insertions, ours.hits)
            want = (ref_j.substitutions, ref_j.deletions, ref_j.insertions, ref_j.hits)
            assert got == want, (ref, hyp)
    assert forced > 100  # the exact four-count comparison really ran on many pairs


def test_set_totals_match_jiwer(rng):
    # Reference library: jiwer.process_words on lists of sentences pools the counts.
    pairs = [_random_pair(rng) for _ in range(60)]
    records = [ScoredUtterance(f"u{k}.wav", "s", tuple(r), tuple(h)) for k, (r, h) in enumerate(pairs)]
    result = score_utterances(records, n_bootstrap=50, seed=1)
    ref_j = jiwer.process_words([" ".join(r) for r, _ in pairs], [" ".join(h) for _, h in pairs])
    assert result.errors == ref_j.substitutions + ref_j.deletions + ref_j.insertions
    assert result.reference_words == sum(len(r) for r, _ in pairs)
    assert result.wer == pytest.approx(ref_j.wer, rel=1e-12)


words = st.lists(st.sampled_from(["a", "b", "c"]), max_size=6)


@settings(max_examples=300, deadline=None)
@given(ref=words, hyp=words)
def test_alignment_is_minimal_and_prefers_hits(ref, hyp):
    # Naive reference: exhaustive enumeration of alignments (_naive_edit_options).
    best, s_min, _ = _naive_edit_options(ref, hyp)
    a = align_words(ref, hyp)
    assert a.errors == best
    assert a.substitutions == s_min
    assert [p.reference for p in a.pairs if p.reference is not None] == ref
    assert [p.recognised for p in a.pairs if p.recognised is not None] == hyp
    for p in a.pairs:
        assert (p.operation == HIT) == (p.reference is not None and p.reference == p.recognised)
        assert (p.operation == SUBSTITUTION) == (
            p.reference is not None and p.recognised is not None and p.reference != p.recognised
        )


def test_worked_example():
    # (worked by hand) "set timer ten minutes" heard as "set ten minute":
    # set=set (hit), timer deleted, ten=ten (hit), minutes -> minute (substitution).
    # S=1, D=1, I=0, H=2, N=4, WER = 2/4 = 0.5. No other 2-edit alignment exists.
    a = align_words("set timer ten minutes".split(), "set ten minute".split())
    assert [(p.operation, p.reference, p.recognised) for p in a.pairs] == [
        (HIT, "set", "set"),
        (DELETION, "timer", None),
        (HIT, "ten", "ten"),
        (SUBSTITUTION, "minutes", "minute"),
    ]
    assert (a.substitutions, a.deletions, a.insertions, a.hits) == (1, 1, 0, 2)
    assert a.wer == pytest.approx(0.5, rel=1e-12)


def test_tie_break_rules():
    # (worked by hand) "a b" vs "b c": two 2-edit alignments, S S (0 hits) or D H I (1 hit);
    # rule 2 takes the one with more hits.
    a = align_words(["a", "b"], ["b", "c"])
    assert [p.operation for p in a.pairs] == [DELETION, HIT, INSERTION]
    # (worked by hand) "a b" vs "c": S+D either way; rule 3 (trace back from the end,
    # substitution before deletion) pairs b with c and deletes a.
    a = align_words(["a", "b"], ["c"])
    assert [(p.operation, p.reference, p.recognised) for p in a.pairs] == [
        (DELETION, "a", None),
        (SUBSTITUTION, "b", "c"),
    ]


def test_empty_sequences_and_zero_reference_words():
    # (worked by hand) N = 0: no errors gives 0.0, any insertion gives inf (documented rule).
    assert align_words([], []).wer == 0.0
    assert align_words([], ["oven"]).wer == math.inf
    assert word_error_rate(0, 0) == 0.0
    assert word_error_rate(2, 0) == math.inf
    # (worked by hand) everything deleted: D = N = 3, WER = 1.
    a = align_words(["oven", "on", "now"], [])
    assert (a.deletions, a.wer) == (3, 1.0)


def test_bad_words_raise():
    with pytest.raises(ScoringError, match="split it first"):
        align_words("oven on", ["oven"])
    with pytest.raises(ScoringError, match="not a single non-empty word"):
        align_words(["oven on"], ["oven"])
    with pytest.raises(ValueError, match="not a single non-empty word"):
        align_words(["oven"], [""])


def test_only_no_command_recordings_are_scored_for_false_accepts():
    # Every transcript empty (a set of distractors alone): N = 0, so the WER is 0 with no
    # word heard and infinite otherwise (word_error_rate's convention, as jiwer's
    # process_words insertions against an empty reference count every heard word), and
    # every heard word is a false accept.
    quiet = [ScoredUtterance("a.wav", "s", (), ("oven",)), ScoredUtterance("b.wav", "s", (), ())]
    result = score_utterances(quiet)
    assert result.reference_words == 0 and result.insertions == 1 and result.wer == float("inf")
    assert result.non_command_utterances == 2 and result.false_accepts == 1 and result.miss_rate is None
    assert score_utterances(quiet[1:]).wer == 0.0
    from wordspot.evaluation.report import render_summary

    text = render_summary(result)
    assert re.search(r"word error rate +n/a", text) and "false accepts" in text


def test_score_utterances_rejects_empty_input():
    with pytest.raises(ScoringError, match="no recordings"):
        score_utterances([])
    with pytest.raises(ScoringError, match="bad.wav: .*not a single non-empty word"):
        score_utterances([ScoredUtterance("bad.wav", "s", ("oven on",), ())])
    with pytest.raises(ScoringError, match="b.wav: speaker must be a string, got None"):
        score_utterances([ScoredUtterance("b.wav", None, ("oven",), ())])
    ok = [ScoredUtterance("a.wav", "s", ("oven",), ("oven",))]
    with pytest.raises(ScoringError, match="n_bootstrap must be a whole number >= 1, got 0"):
        score_utterances(ok, n_bootstrap=0)


def _bakery_records():
    return [
        ScoredUtterance.from_text("ann/1.wav", "ann", "oven on", "oven on"),
        ScoredUtterance.from_text("ann/2.wav", "ann", "mixer off", "mixer of off"),
        ScoredUtterance.from_text("bo/1.wav", "bo", "set timer ten minutes", "set ten minute"),
        ScoredUtterance.from_text("bo/2.wav", "bo", "Oven off", ""),
    ]


def test_tables_on_small_example():
    # (worked by hand) four utterances:
    #   ann/1 oven on -> oven on                  : no errors
    #   ann/2 mixer off -> mixer of off           : I(of)
    #   bo/1  set timer ten minutes -> set ten minute : D(timer), S(minutes->minute)
    #   bo/2  oven off -> (nothing)               : D(oven), D(off)   ("Oven" case-folded)
    # totals: N = 2+2+4+2 = 10, S=1, D=3, I=1, H=6, WER = 5/10, 3 of 4 utterances wrong.
    r = score_utterances(_bakery_records(), n_bootstrap=200, seed=3)
    assert (r.substitutions, r.deletions, r.insertions, r.hits) == (1, 3, 1, 6)
    assert r.reference_words == 10 and r.recognised_words == 8
    assert r.wer == pytest.approx(0.5, rel=1e-12)
    assert r.utterance_errors == 3
    assert r.sentence_error_rate == pytest.approx(0.75, rel=1e-12)
    # per word (worked by hand): oven said 2, deleted once; off said 2, deleted once;
    # timer said 1, deleted; minutes said 1, heard as minute; "of" only inserted once.
    table = {row.word: row for row in r.word_table}
    assert (table["oven"].reference_count, table["oven"].errors, table["oven"].confusions) == (2, 1, ((None, 1),))
    assert (table["off"].reference_count, table["off"].deletions, table["off"].error_rate) == (2, 1, 0.5)
    assert table["timer"].confusions == ((None, 1),)
    assert (table["minutes"].substitutions, table["minutes"].confusions) == (1, (("minute", 1),))
    assert (table["of"].reference_count, table["of"].inserted, table["of"].errors) == (0, 1, 0)
    assert (table["set"].reference_count, table["set"].errors) == (1, 0)
    assert "minute" not in table  # recognised only as a substitution, never said or inserted
    assert r.word_table[0].errors == max(row.errors for row in r.word_table)  # most errors first
    # per speaker (worked by hand): ann N=4, I=1, WER 1/4, 1 utterance wrong;
    # bo N=6, S=1, D=3, WER 4/6, 2 utterances wrong.
    ann, bo = r.speaker_table
    assert (ann.speaker, ann.utterances, ann.reference_words, ann.insertions, ann.errors) == ("ann", 2, 4, 1, 1)
    assert ann.wer == pytest.approx(0.25, rel=1e-12) and ann.utterance_errors == 1
    assert (bo.speaker, bo.reference_words, bo.substitutions, bo.deletions, bo.insertions) == ("bo", 6, 1, 3, 0)
    assert bo.wer == pytest.approx(4 / 6, rel=1e-12) and bo.utterance_errors == 2


def test_confusions_ranked_and_limited():
    # (worked by hand) "proof" said 5 times: heard as "oven" twice, deleted twice,
    # "off" once, right never; ranking: count first, words before deletion on equal counts.
    recs = [ScoredUtterance("x.wav", "s", ("proof",), h) for h in
            [("oven",), ("oven",), (), (), ("off",)]]
    row = next(r for r in score_utterances(recs, n_bootstrap=10).word_table if r.word == "proof")
    assert row.confusions == (("oven", 2), (None, 2), ("off", 1))
    assert row.errors == 5


def test_to_dict_has_required_fields_and_is_json():
    r = score_utterances(_bakery_records(), n_bootstrap=100, seed=0)
    d = json.loads(json.dumps(r.to_dict()))
    required = ["wer", "substitutions", "deletions", "insertions", "reference_words", "utterances",
                "utterance_errors", "wer_ci95", "sentence_error_rate", "words", "speakers"]
    assert set(required) <= set(d)
    assert (d["substitutions"], d["deletions"], d["insertions"], d["utterances"]) == (1, 3, 1, 4)
    assert d["wer"] == pytest.approx(r.wer, rel=1e-12)
    assert isinstance(d["wer_ci95"], list) and len(d["wer_ci95"]) == 2
    assert d["wer_ci95"] == pytest.approx(list(r.wer_ci95), rel=1e-12)
    assert [s["speaker"] for s in d["speakers"]] == ["ann", "bo"]
    assert next(w for w in d["words"] if w["word"] == "of")["error_rate"] is None


def test_confusion_matrix_margins(rng):
    # Invariants (worked by hand from the definition): every aligned pair lands in one cell;
    # the diagonal holds the hits, the deletion column the deletions, the insertion row the
    # insertions, and the remaining off-diagonal cells the substitutions.
    records = [ScoredUtterance(f"{k}.wav", "s", tuple(r), tuple(h))
               for k, (r, h) in enumerate(_random_pair(rng) for _ in range(40))]
    r = score_utterances(records, n_bootstrap=10)
    cm = confusion_matrix(r)
    c = cm.counts
    assert c.shape == (len(cm.words) + 1,) * 2
    assert c.sum() == r.hits + r.substitutions + r.deletions + r.insertions
    assert np.trace(c[:-1, :-1]) == r.hits
    assert c[:-1, -1].sum() == r.deletions
    assert c[-1, :-1].sum() == r.insertions
    assert c[:-1, :-1].sum() - np.trace(c[:-1, :-1]) == r.substitutions
    assert c[-1, -1] == 0


def _records_with_rate(n_utterances):
    # Repeating pattern of 10 utterances with 3 reference words each and 3 errors per 10
    # utterances in total: WER = 3 / 30 = 0.1 for any multiple of 10 (worked by hand).
    recs = []
    for k in range(n_utterances):
        ref = ("oven", "on", "now")
        hyp = ("oven", "off", "now") if k % 10 in (0, 3, 7) else ref
        recs.append(ScoredUtterance(f"{k}.wav", "s", ref, hyp))
    return recs


def test_bootstrap_interval_contains_estimate_and_narrows():
    # Bisani and Ney (2004): the percentile interval brackets the point estimate and
    # shrinks roughly like 1/sqrt(number of utterances).
    small = score_utterances(_records_with_rate(50), n_bootstrap=1000, seed=7)
    large = score_utterances(_records_with_rate(800), n_bootstrap=1000, seed=7)
    assert small.wer == pytest.approx(0.1, rel=1e-12) and large.wer == pytest.approx(0.1, rel=1e-12)
    for r in (small, large):
        low, high = r.wer_ci95
        assert low <= r.wer <= high
        assert low < high
    width_small = small.wer_ci95[1] - small.wer_ci95[0]
    width_large = large.wer_ci95[1] - large.wer_ci95[0]
    # 1/sqrt(U) scaling of a standard error (Cochran, Sampling Techniques, 3rd ed. 1977,
    # ch. 2): 800 utterances give about 1/4 of the width at 50.
    assert width_large < 0.5 * width_small


def test_bootstrap_matches_normal_approximation(rng):
    # Delta-method (linearised) standard error of a ratio of sums, the ratio estimator of
    # Cochran, Sampling Techniques, 3rd ed. 1977, ch. 6 (large-sample variance):
    #   se^2 = sum_i (e_i - w n_i)^2 / (sum_i n_i)^2, and a 95% interval of about +-1.96 se.
    # With 400 utterances the bootstrap percentile interval should be close to it.
    n_ref = rng.integers(1, 6, size=400)
    errs = rng.binomial(n_ref, 0.15)
    w = errs.sum() / n_ref.sum()
    se = math.sqrt(((errs - w * n_ref) ** 2).sum()) / n_ref.sum()
    low, high = bootstrap_wer_interval(errs, n_ref, n_bootstrap=4000, seed=11)
    assert (high - low) == pytest.approx(2 * 1.96 * se, rel=0.15)
    assert (low + high) / 2 == pytest.approx(w, abs=0.5 * se)


def test_bootstrap_invariants(rng):
    # (worked by hand) a replicate's WER is a weighted mean of per-utterance rates e_i/n_i
    # (weights n_i), so it lies between the smallest and largest of them; when every
    # utterance has the same rate, every replicate does, and the interval collapses to it.
    n_ref = rng.integers(1, 8, size=30)
    errs = rng.integers(0, 3, size=30)
    low, high = bootstrap_wer_interval(errs, n_ref, n_bootstrap=500, seed=5)
    rates = errs / n_ref
    assert rates.min() <= low <= high <= rates.max()
    same = bootstrap_wer_interval(np.full(30, 2), np.full(30, 4), n_bootstrap=200, seed=5)
    assert same == pytest.approx((0.5, 0.5), rel=1e-12)
    # seeded: the same seed gives the same interval, another seed (almost surely) another
    assert bootstrap_wer_interval(errs, n_ref, n_bootstrap=500, seed=5) == (low, high)
    assert bootstrap_wer_interval(errs, n_ref, n_bootstrap=500, seed=6) != (low, high)


def test_bootstrap_bad_settings():
    with pytest.raises(ScoringError, match="n_bootstrap must be a whole number"):
        bootstrap_wer_interval([1], [2], n_bootstrap=2.5)
    with pytest.raises(ScoringError, match="equal-length, non-empty"):
        bootstrap_wer_interval([1, 2], [2], n_bootstrap=10)
