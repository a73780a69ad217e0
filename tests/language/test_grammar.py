"""Grammar prior: smoothing, normalisation, prior files, settings."""

from __future__ import annotations

import numpy as np
import pytest

from wordspot.errors import GrammarError
from wordspot.language.grammar import (
    BigramCounts,
    GrammarSettings,
    count_bigrams,
    estimate_prior,
    prior_for_vocabulary,
    read_prior,
    uniform_prior,
)

WORDS = ("oven", "start", "stop", "timer", "five", "minutes")


def _random_counts(rng, v=6, density=0.4):
    c = rng.integers(1, 6, size=(v + 1, v + 1)) * (rng.random((v + 1, v + 1)) < density)
    return BigramCounts(WORDS[:v], c.astype(np.int64))


def test_rows_sum_to_one_and_nothing_is_zero(rng):
    # Probability axioms: each row P(. | v) is a distribution with no zero entry.
    for _ in range(20):
        prior = estimate_prior(_random_counts(rng))
        p = np.exp(prior.log_matrix())
        np.testing.assert_allclose(p.sum(axis=1), 1.0, rtol=1e-12)
        assert np.all(p > 0)


def test_rows_sum_to_one_in_edge_cases():
    # An empty table, and a row in which every successor was seen.
    empty = estimate_prior(BigramCounts(("a", "b"), np.zeros((3, 3), dtype=np.int64)))
    np.testing.assert_allclose(np.exp(empty.log_matrix()), 1.0 / 3.0, rtol=1e-12)
    full = estimate_prior(BigramCounts(("a", "b"), np.array([[0, 3, 1], [1, 1, 2], [1, 0, 0]])))
    np.testing.assert_allclose(np.exp(full.log_matrix()).sum(axis=1), 1.0, rtol=1e-12)
    np.testing.assert_allclose(np.exp(full.log_row(1)), [0.25, 0.25, 0.5], rtol=1e-12)


def test_absolute_discounting_matches_the_formula_worked_by_hand():
    # Ney, Essen & Kneser 1994: P(w|v) = (c - D)/N for seen pairs, the rest
    # alpha(v) = D n(v) / N shared in proportion to the unigram U; D = n1 / (n1 + 2 n2).
    transcripts = [["oven", "start"]] * 2 + [["oven", "stop"]] + [["timer"]]
    counts = count_bigrams(transcripts, ("oven", "start", "stop", "timer"))
    # pairs: ^oven 3, oven-start 2, oven-stop 1, start$ 2, stop$ 1, ^timer 1, timer$ 1
    n1, n2 = 4, 2
    d = n1 / (n1 + 2 * n2)  # 0.5
    column_totals = np.array([4, 3, 2, 1, 1], dtype=float)  # how often each index follows
    u = (column_totals + 1) / (column_totals.sum() + 5)
    # Row "oven" (index 1): seen start (2) and stop (1); N = 3, n(v) = 2.
    p_start, p_stop = (2 - d) / 3, (1 - d) / 3
    alpha = d * 2 / 3
    unseen = [0, 1, 4]
    expected = np.zeros(5)
    expected[2], expected[3] = p_start, p_stop
    expected[unseen] = alpha * u[unseen] / u[unseen].sum()
    prior = estimate_prior(counts)
    np.testing.assert_allclose(np.exp(prior.log_row(1)), expected, rtol=1e-12)
    assert prior.logprob("oven", "start") == pytest.approx(np.log(p_start), rel=1e-12)
    assert "Ney" in prior.method


def test_uniform_prior():
    prior = uniform_prior(WORDS)
    np.testing.assert_allclose(np.exp(prior.log_matrix()), 1.0 / (len(WORDS) + 1), rtol=1e-12)


def test_prior_file_equals_counts(tmp_path):
    f = tmp_path / "orders.txt"
    f.write_text(
        "# bakery orders\n^ oven 2\noven start 2  # common\n\nOVEN stop 1\nstart $ 2\nstop $ 1\n^ timer 1\ntimer $ 1\n",
        encoding="utf-8",
    )
    words = ("oven", "start", "stop", "timer")
    from_file = read_prior(f, words)
    from_counts = estimate_prior(
        count_bigrams([["oven", "start"]] * 2 + [["oven", "stop"]] + [["timer"]], words)
    )
    # The file says "^ oven 2" where the transcripts give 3: fix that one cell and compare.
    c = count_bigrams([["oven", "start"]] * 2 + [["oven", "stop"]] + [["timer"]], words).counts.copy()
    c[0, 1] = 2
    np.testing.assert_allclose(from_file.log_matrix(), estimate_prior(BigramCounts(words, c)).log_matrix(),
                               rtol=1e-12)
    assert not np.allclose(from_file.log_matrix(), from_counts.log_matrix())


@pytest.mark.parametrize(
    "text,pattern",
    [
        ("oven start\n", r"line 1: expected 'previous next count'"),
        ("# ok\noven start -2\n", r"line 2: count must be a whole number >= 0"),
        ("oven start 1.5\n", r"line 1: count must be a whole number"),
        ("oven bagel 1\n", r"line 1: word 'bagel' is not in the vocabulary"),
        ("$ oven 1\n", r"line 1: '\$' may only be a next word"),
    ],
)
def test_prior_file_errors_name_the_line(tmp_path, text, pattern):
    f = tmp_path / "prior.txt"
    f.write_text(text, encoding="utf-8")
    with pytest.raises(GrammarError, match=pattern):
        read_prior(f, ("oven", "start"))


def test_missing_prior_file(tmp_path):
    with pytest.raises(GrammarError, match="prior file not found"):
        read_prior(tmp_path / "nope.txt", ("oven",))


def test_prior_for_vocabulary_fallbacks(tmp_path):
    counts = count_bigrams([["oven", "start"]], ("oven", "start"))
    same = prior_for_vocabulary(("oven", "start"), counts)
    np.testing.assert_allclose(same.log_matrix(), estimate_prior(counts).log_matrix())
    # Same words in another order: the counts are reordered, not dropped.
    swapped = prior_for_vocabulary(("start", "oven"), counts)
    assert swapped.logprob("oven", "start") == pytest.approx(same.logprob("oven", "start"), rel=1e-12)
    new = prior_for_vocabulary(("oven", "start", "proof"), counts)
    np.testing.assert_allclose(np.exp(new.log_matrix()), 0.25, rtol=1e-12)
    f = tmp_path / "p.txt"
    f.write_text("oven proof 3\n", encoding="utf-8")
    from_file = prior_for_vocabulary(("oven", "start", "proof"), counts, f)
    assert from_file.logprob("oven", "proof") > from_file.logprob("oven", "start")


def test_grammar_settings_validation():
    assert GrammarSettings().weight == 1.0
    with pytest.raises(GrammarError, match="grammar weight"):
        GrammarSettings(weight=-1.0)
    with pytest.raises(GrammarError, match="insertion penalty"):
        GrammarSettings(insertion_penalty=float("nan"))


def test_words_no_transcript_holds_get_the_mean_recorded_share(tmp_path):
    # The rule (ours, documented in wordspot.language.grammar): an unrecorded vocabulary
    # word counts as often as the mean recorded word in the add-one unigram U.
    words = ("oven", "start", "stop")
    counts = count_bigrams([["oven", "start"]] * 3 + [["oven"]] * 2, words)  # "stop" never said
    prior = estimate_prior(counts)
    col = counts.counts.sum(axis=0).astype(float)  # exit, oven, start, stop
    assert col[3] == 0
    fair = col.copy()
    fair[3] = (col[1] + col[2]) / 2  # mean of the recorded words (oven 5, start 3)
    expected = (fair + 1) / (fair + 1).sum()
    np.testing.assert_allclose(np.exp(prior.unigram), expected, rtol=1e-12)
    # after the start of an utterance, "stop" is now about as likely as the recorded
    # "start" (was: one add-one count against four)
    p = np.exp(prior.log_row(0))
    assert p[3] > 0.5 * p[2]
    np.testing.assert_allclose(p.sum(), 1.0, rtol=1e-12)
    # a prior file keeps exactly what the user wrote (no fair share added)
    (tmp_path / "p.txt").write_text("^ oven 5\noven start 3\n", encoding="utf-8")
    assert np.exp(read_prior(tmp_path / "p.txt", words).unigram)[3] < expected[3]



def test_unrecorded_words_are_as_likely_as_the_mean_recorded_word_after_every_word(monkeypatch):
    # The rule (ours, documented in wordspot.language.grammar): after every previous word
    # with counts, an unrecorded word is as likely as the mean recorded word is there;
    # the recorded words keep their ratios to each other (the row is only rescaled) and
    # every row still sums to one (a probability distribution: a fact of the trade).
    words = ("oven", "start", "stop", "proof", "dough")
    sentences = [["oven", "start"]] * 6 + [["oven"]] * 3 + [["stop"]] * 2 + [["start", "stop"]]
    counts = count_bigrams(sentences, words)
    unrecorded = [4, 5]  # proof, dough: no transcript holds them
    assert counts.counts[:, unrecorded].sum() == 0
    fair = np.exp(estimate_prior(counts).log_matrix())
    before = np.exp(_prior_without_fair_rows(counts, monkeypatch).log_matrix())
    np.testing.assert_allclose(fair.sum(axis=1), 1.0, rtol=1e-12)
    recorded = [1, 2, 3]
    for v in range(len(words) + 1):
        row_has_counts = counts.counts[v].sum() > 0
        if not row_has_counts:  # a row with no counts is the unigram, as before
            np.testing.assert_allclose(fair[v], before[v], rtol=1e-12)
            continue
        np.testing.assert_allclose(fair[v, unrecorded], fair[v, recorded].mean(), rtol=1e-12)
        kept = [0] + recorded  # the exit and the recorded words: the same ratios as before
        np.testing.assert_allclose(fair[v, kept] / fair[v, 1], before[v, kept] / before[v, 1], rtol=1e-10)
    # after the start, "dough" is now as likely as the mean of oven/start/stop (it was far below)
    assert before[0, 5] < 0.5 * before[0, recorded].mean()


def _prior_without_fair_rows(counts, monkeypatch):
    """The prior as it was before unrecorded words got their share in every row."""
    from wordspot.language import grammar

    with monkeypatch.context() as m:
        m.setattr(grammar, "_fair_row", lambda seen, logp, backoff, *_: (seen, logp, backoff))
        return estimate_prior(counts)
