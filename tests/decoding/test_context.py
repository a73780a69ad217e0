"""Words said amid other talk (wordspot.decoding.context) and the decoder's talk_gap.

The paths below are built by hand; each expected mark is worked out in the comment beside
it from the rule's definition (talk = filler phones or a word below the threshold; the
pause between counts pause items and the earlier word's trailing pause).
"""

from __future__ import annotations

import numpy as np
import pytest

from decoding_helpers import frames_along, pause_mixtures, tiny_model, word_mixtures
from wordspot.decoding.context import COMMAND, FILLER, PAUSE, PathItem, inside_talk
from wordspot.decoding.decoder import REASON_AMID_TALK, DecoderSettings, build_recognizer
from wordspot.errors import DecodingError


def _path(*spec):
    """Items from (kind, first, phone_end, last[, segment]) tuples."""
    return [PathItem(*s) for s in spec]


# pause 0-9 | filler 10-19 | word 0: 20-29 (phones to 27, 2 frames of trailing pause) | filler 30-39 | pause 40-49
SENTENCE = _path((PAUSE, 0, 9, 9), (FILLER, 10, 19, 19), (COMMAND, 20, 27, 29, 0), (FILLER, 30, 39, 39),
                 (PAUSE, 40, 49, 49))


def test_a_word_between_filler_phones_is_inside_talk():
    # talk right before (0 frames of pause) and 2 frames after (its own trailing pause) < 5
    assert inside_talk(SENTENCE, [0.9], 0.05, 5).tolist() == [True]
    # a gap of 2 frames is not closer than 2: the after side is no longer talk
    assert inside_talk(SENTENCE, [0.9], 0.05, 2).tolist() == [False]
    # ... but one side is enough with sides=1
    assert inside_talk(SENTENCE, [0.9], 0.05, 2, sides=1).tolist() == [True]
    # gap 0 turns the rule off; a word below the threshold is never marked (already dropped)
    assert inside_talk(SENTENCE, [0.9], 0.05, 0).tolist() == [False]
    assert inside_talk(SENTENCE, [0.01], 0.05, 5).tolist() == [False]


def test_a_command_between_pauses_or_kept_commands_is_not_inside_talk():
    alone = _path((PAUSE, 0, 29, 29), (COMMAND, 30, 39, 39, 0), (PAUSE, 40, 79, 79))
    assert inside_talk(alone, [0.9], 0.05, 50).tolist() == [False]  # the recording's ends, no talk
    # "oven three minutes": three kept words next to each other; no talk on any side
    phrase = _path((PAUSE, 0, 9, 9), (COMMAND, 10, 19, 19, 0), (COMMAND, 20, 29, 29, 1), (COMMAND, 30, 39, 39, 2),
                   (PAUSE, 40, 49, 49))
    assert inside_talk(phrase, [0.9, 0.8, 0.7], 0.05, 50).tolist() == [False, False, False]


def test_words_below_the_threshold_count_as_talk_with_their_trailing_pause():
    # word 0 (0.01, dropped) 10-19, phones to 16: 3 frames of trailing pause; pause item 20-21;
    # word 1 (kept) 22-29; word 2 (0.02, dropped) right after.
    path = _path((PAUSE, 0, 9, 9), (COMMAND, 10, 16, 19, 0), (PAUSE, 20, 21, 21), (COMMAND, 22, 29, 29, 1),
                 (COMMAND, 30, 39, 39, 2), (PAUSE, 40, 49, 49))
    conf = [0.01, 0.9, 0.02]
    # before: 2 (pause item) + 3 (word 0's trailing pause) = 5 frames; after: 0 frames
    assert inside_talk(path, conf, 0.05, 6).tolist() == [False, True, False]
    assert inside_talk(path, conf, 0.05, 5).tolist() == [False, False, False]  # 5 is not closer than 5
    # with a threshold of 0.005 the neighbours are kept words: nothing is talk
    assert inside_talk(path, conf, 0.005, 50).tolist() == [False, False, False]


def test_looking_past_kept_commands_judges_words_said_together_as_one_group():
    # filler | A 10-19 (phones to 17) | pause 20-21 | B 22-29 | filler: A and B are kept and
    # close (2 + 2 = 4 frames apart), said together inside talk
    inside = _path((FILLER, 0, 9, 9), (COMMAND, 10, 17, 19, 0), (PAUSE, 20, 21, 21), (COMMAND, 22, 29, 29, 1),
                   (FILLER, 30, 39, 39))
    # each word stops at its kept neighbour: one side only, not marked
    assert inside_talk(inside, [0.9, 0.9], 0.05, 10).tolist() == [False, False]
    # looking past the neighbour (4 frames < 10) finds the filler on both sides of the group
    assert inside_talk(inside, [0.9, 0.9], 0.05, 10, through=True).tolist() == [True, True]
    # a gap of 4 frames or less separates them: each word's far side ends at the other word
    assert inside_talk(inside, [0.9, 0.9], 0.05, 4, through=True).tolist() == [False, False]
    # the same two words between pauses of 30 frames: no talk within 10 frames of the group
    between = _path((PAUSE, 0, 29, 29), (COMMAND, 30, 37, 39, 0), (PAUSE, 40, 41, 41), (COMMAND, 42, 49, 49, 1),
                    (PAUSE, 50, 79, 79))
    assert inside_talk(between, [0.9, 0.9], 0.05, 10, through=True).tolist() == [False, False]


def test_a_side_needs_enough_talk_when_asked():
    # pause | filler 10-12 (3 frames: a noise blip) | word 13-22 | pause 23-40 | filler 41-70 (30 frames)
    path = _path((PAUSE, 0, 9, 9), (FILLER, 10, 12, 12), (COMMAND, 13, 22, 22, 0), (PAUSE, 23, 40, 40),
                 (FILLER, 41, 70, 70))
    # one side is enough: the blip before counts as talk without a least amount ...
    assert inside_talk(path, [0.9], 0.05, 5, sides=1).tolist() == [True]
    # ... but not with at least 10 frames asked; the long talk after is 18 frames away (>= 5)
    assert inside_talk(path, [0.9], 0.05, 5, sides=1, min_talk=10).tolist() == [False]
    # with a gap of 20 the talk after is within reach and is 30 frames long
    assert inside_talk(path, [0.9], 0.05, 20, sides=1, min_talk=10).tolist() == [True]
    # going back, talk is summed over filler and dropped words (their trailing pauses do not
    # end it while shorter than the gap): dropped word 0-7 (phones to 5) | filler 8-12 | word
    back = _path((COMMAND, 0, 5, 7, 0), (FILLER, 8, 12, 12), (COMMAND, 13, 22, 22, 1), (PAUSE, 23, 60, 60))
    assert inside_talk(back, [0.01, 0.9], 0.05, 5, sides=1, min_talk=11).tolist() == [False, True]  # 6 + 5 = 11
    assert inside_talk(back, [0.01, 0.9], 0.05, 5, sides=1, min_talk=12).tolist() == [False, False]
    assert inside_talk(back, [0.01, 0.9], 0.05, 2, sides=1, min_talk=11).tolist() == [False, False]  # 2 >= 2


def test_sides_must_be_one_or_two():
    with pytest.raises(ValueError, match="sides"):
        inside_talk(SENTENCE, [0.9], 0.05, 5, sides=3)


def test_talk_gap_setting_is_checked():
    with pytest.raises(DecodingError, match="talk_gap"):
        DecoderSettings(talk_gap=-0.1)
    with pytest.raises(DecodingError, match="talk_gap"):
        DecoderSettings(talk_gap=float("inf"))
    with pytest.raises(DecodingError, match="talk_length"):
        DecoderSettings(talk_length=-1.0)


ENTRIES = {"bat": [["B", "AA", "T"]], "sack": [["S", "AA", "K"]]}


def test_the_decoder_drops_a_word_inside_other_talk_and_says_why():
    # Frames: pause, non-word phones (T K S) the filler takes, "bat", non-word phones again,
    # pause. The word is right on the best path; with talk_gap it has filler phones on both
    # sides with no pause between, so it is dropped, and the reason names other talk.
    rng = np.random.default_rng(11)
    model = tiny_model(rng, ENTRIES)
    mixtures = (pause_mixtures(model, 8) + word_mixtures(model, ["T", "K", "S"]) + word_mixtures(model, ["B", "AA", "T"])
                + word_mixtures(model, ["K", "T", "S"]) + pause_mixtures(model, 8))
    frames = frames_along(model, mixtures, rng)
    base = dict(grammar_weight=0.0, insertion_penalty=-20.0, filler_penalty=-10.0, min_confidence=0.001,
                talk_length=0.0)
    plain = build_recognizer(model, settings=DecoderSettings.unpruned(**base, talk_gap=0.0)).decode(frames)
    assert plain.words == ["bat"]
    kinds = [it.kind for it in plain.path_items]
    i = kinds.index(COMMAND)
    assert kinds[i - 1] == FILLER and kinds[i + 1] == FILLER  # the path the rule reads
    got = build_recognizer(model, settings=DecoderSettings.unpruned(**base, talk_gap=0.1)).decode(frames)
    assert got.words == [] and [s.word for s in got.dropped] == ["bat"]
    assert got.reason.startswith(REASON_AMID_TALK) and got.dropped[0].amid_talk
    assert not plain.segments[0].amid_talk
    # the talk on each side is 3 phones x 3 states x 3 frames = 27 frames (0.27 s at the 10 ms
    # hop): with at least 0.5 s of talk asked (the default) it is too short to count
    short = build_recognizer(model, settings=DecoderSettings.unpruned(**{**base, "talk_length": 0.5},
                                                                      talk_gap=0.1)).decode(frames)
    assert short.words == ["bat"]
    # threshold 0 keeps every word: the rule does not apply
    keep = build_recognizer(model, settings=DecoderSettings.unpruned(**{**base, "min_confidence": 0.0},
                                                                     talk_gap=0.1)).decode(frames)
    assert keep.words == ["bat"]


def test_the_decoder_keeps_a_word_said_between_pauses():
    rng = np.random.default_rng(12)
    model = tiny_model(rng, ENTRIES)
    frames = frames_along(model, pause_mixtures(model, 8) + word_mixtures(model, ["B", "AA", "T"])
                          + pause_mixtures(model, 8), rng)
    settings = DecoderSettings.unpruned(grammar_weight=0.0, insertion_penalty=-20.0, filler_penalty=-10.0,
                                        min_confidence=0.001, talk_gap=0.5)
    assert build_recognizer(model, settings=settings).decode(frames).words == ["bat"]


# Runs of words between pauses (word_rule="run"): the expected runs and means are worked out
# by hand in the comments from the definition (a new run after more than `pause` frames
# between one word's last phone frame and the next word's first frame).

# pause | A 10-19 (phones to 17) | pause 20-22 | B 23-30 | filler 31-60 | C 61-70 | pause
RUNS = _path((PAUSE, 0, 9, 9), (COMMAND, 10, 17, 19, 0), (PAUSE, 20, 22, 22), (COMMAND, 23, 30, 30, 1),
             (FILLER, 31, 60, 60), (COMMAND, 61, 70, 70, 2), (PAUSE, 71, 90, 90))


def test_word_runs_split_at_longer_pauses():
    from wordspot.decoding.context import word_runs

    # A to B: frames 18-22 lie between (5); B to C: frames 31-60 (30)
    assert word_runs(RUNS, 5).tolist() == [0, 0, 1]
    assert word_runs(RUNS, 4).tolist() == [0, 1, 2]  # 5 > 4: A and B apart
    assert word_runs(RUNS, 30).tolist() == [0, 0, 0]  # filler between counts only as time
    assert word_runs([PathItem(PAUSE, 0, 9, 9)], 5).tolist() == []


def test_run_confidences_are_the_run_means():
    from wordspot.decoding.context import run_confidences, word_runs

    conf = [0.9, 0.1, 0.4]
    # runs [A B] [C]: (0.9 + 0.1) / 2 = 0.5 for A and B, C keeps its own
    assert np.allclose(run_confidences(RUNS, conf, 5), [0.5, 0.5, 0.4])
    assert np.allclose(run_confidences(RUNS, conf, 4), conf)  # every word alone: unchanged
    assert np.allclose(run_confidences(RUNS, conf, 30), [np.mean(conf)] * 3)
    # a floor leaves the words below it out: B (0.1) alone; A and C are 43 frames apart
    # (18-60), one run across B at 45 ((0.9 + 0.4) / 2 = 0.65), each alone at 30
    assert np.allclose(run_confidences(RUNS, conf, 45, floor=0.2), [0.65, 0.1, 0.65])
    assert np.allclose(run_confidences(RUNS, conf, 30, floor=0.2), conf)
    assert word_runs(RUNS, 45, among=[True, False, True]).tolist() == [0, -1, 0]


def test_keep_words_keeps_or_drops_whole_runs():
    from wordspot.decoding.context import keep_words

    # "timer three minutes" between pauses, "three" weak: mean (0.8 + 0.02 + 0.7) / 3 = 0.507
    phrase = _path((PAUSE, 0, 9, 9), (COMMAND, 10, 19, 19, 0), (COMMAND, 20, 29, 29, 1), (COMMAND, 30, 39, 39, 2),
                   (PAUSE, 40, 79, 79))
    conf = [0.8, 0.02, 0.7]
    # the weak word's 10 frames are too little talk (15 asked) to drop its neighbours as amid talk
    word, _ = keep_words(phrase, conf, 0.05, 20, 15)
    assert word.tolist() == [True, False, True]  # word by word: "timer minutes", a wrong command
    run, _ = keep_words(phrase, conf, 0.05, 20, 15, run_pause=5)
    assert run.tolist() == [True, True, True]  # the whole phrase
    # a threshold of 0.6 drops the phrase whole (0.507 < 0.6), where word by word keeps two
    assert keep_words(phrase, conf, 0.6, 20, 15, run_pause=5)[0].tolist() == [False, False, False]
    assert keep_words(phrase, conf, 0.6, 20, 15)[0].tolist() == [True, False, True]
    # with no least talk the weak word is talk right beside both others: word by word drops all three
    assert keep_words(phrase, conf, 0.05, 20, 0)[0].tolist() == [False, False, False]


def test_keep_words_inner_keeps_weak_words_only_between_confident_ones():
    from wordspot.decoding.context import keep_words

    # one run of five words (no pauses): a weak word at the start, "timer [three] minutes",
    # and a weak word at the end; mean (0.01 + 0.8 + 0.02 + 0.7 + 0.01) / 5 = 0.308
    run = _path((PAUSE, 0, 9, 9), (COMMAND, 10, 19, 19, 0), (COMMAND, 20, 29, 29, 1), (COMMAND, 30, 39, 39, 2),
                (COMMAND, 40, 49, 49, 3), (COMMAND, 50, 59, 59, 4), (PAUSE, 60, 99, 99))
    conf = [0.01, 0.8, 0.02, 0.7, 0.01]
    inner, _ = keep_words(run, conf, 0.05, 0, 0, run_pause=5, inner=True)
    assert inner.tolist() == [False, True, True, True, False]  # the weak ends stay dropped
    whole, _ = keep_words(run, conf, 0.05, 0, 0, run_pause=5)
    assert whole.tolist() == [True] * 5  # the mean rule keeps them all
    # threshold 0.4: the run's mean (0.308) is below it, so inner drops the run whole even
    # though 0.8 and 0.7 reach it; word by word they are kept
    assert keep_words(run, conf, 0.4, 0, 0, run_pause=5, inner=True)[0].tolist() == [False] * 5
    assert keep_words(run, conf, 0.4, 0, 0)[0].tolist() == [False, True, False, True, False]
    # one confident word only: nothing lies between two, so only it is kept
    one = [0.01, 0.8, 0.02, 0.03, 0.01]  # mean 0.174
    assert keep_words(run, one, 0.05, 0, 0, run_pause=5, inner=True)[0].tolist() == [False, True, False, False,
                                                                                       False]
    # runs split by a longer pause are judged apart: at -1 frames every word is a run of its own
    assert keep_words(run, conf, 0.05, 0, 0, run_pause=-1, inner=True)[0].tolist() == \
        keep_words(run, conf, 0.05, 0, 0)[0].tolist()


def test_keep_words_by_word_is_the_threshold_then_the_amid_talk_rule():
    from wordspot.decoding.context import keep_words

    # SENTENCE: a kept word between filler phones; one side of talk is enough (the decoder's way)
    kept, inside = keep_words(SENTENCE, [0.9], 0.05, 5, 0)
    assert kept.tolist() == [False] and inside.tolist() == [True]
    assert inside.tolist() == inside_talk(SENTENCE, [0.9], 0.05, 5, sides=1, through=True).tolist()
    # gap 0 or threshold 0: no word is marked; the threshold alone decides
    assert keep_words(SENTENCE, [0.9], 0.05, 0, 0)[0].tolist() == [True]
    assert keep_words(SENTENCE, [0.01], 0.0, 5, 0)[0].tolist() == [True]
    assert keep_words(SENTENCE, [0.01], 0.05, 5, 0)[0].tolist() == [False]
    # a single word between pauses: the run rule is the word rule at every threshold
    alone = _path((PAUSE, 0, 29, 29), (COMMAND, 30, 39, 39, 0), (PAUSE, 40, 79, 79))
    for t in (0.0, 0.05, 0.3, 0.31, 0.9):
        for inner in (False, True):
            assert [a.tolist() for a in keep_words(alone, [0.3], t, 10, 5)] == \
                [a.tolist() for a in keep_words(alone, [0.3], t, 10, 5, run_pause=50, inner=inner)]


def test_word_rule_setting_is_checked():
    with pytest.raises(DecodingError, match="word_rule"):
        DecoderSettings(word_rule="mean")
    assert DecoderSettings().word_rule == "word"
    with pytest.raises(DecodingError, match="run_pause"):
        DecoderSettings(run_pause=-0.5)


def _two_word_frames(rng, model, pause_between: int):
    """Frames: pause, "bat", ``pause_between`` pause states, "sack" (drawn with more noise,
    so that it fits less well), pause."""
    return np.concatenate([
        frames_along(model, pause_mixtures(model, 8) + word_mixtures(model, ["B", "AA", "T"])
                     + pause_mixtures(model, pause_between), rng),
        frames_along(model, word_mixtures(model, ["S", "AA", "K"]), rng, noise=1.5),
        frames_along(model, pause_mixtures(model, 8), rng)])


def test_the_decoder_judges_a_phrase_whole_with_the_run_rule():
    # The two words' own confidences come from a first decoding with no threshold; a
    # threshold between the lower one and their mean drops one word by word but keeps both
    # as a run, and one between the mean and the higher one keeps one word by word and none
    # as a run. Deterministic: the same frames give the same result twice.
    rng = np.random.default_rng(13)
    model = tiny_model(rng, ENTRIES)
    frames = _two_word_frames(rng, model, 1)
    # the amid-talk rule off here (its part is in test_keep_words_keeps_or_drops_whole_runs)
    base = dict(grammar_weight=0.0, insertion_penalty=-20.0, filler_penalty=-10.0, talk_gap=0.0)

    def decode(**kw):
        return build_recognizer(model, settings=DecoderSettings.unpruned(**base, **kw)).decode(frames)

    free = decode(min_confidence=0.0)
    assert free.words == ["bat", "sack"]
    c = [s.confidence for s in free.segments]
    lo, hi, mean = min(c), max(c), float(np.mean(c))
    assert hi - lo > 1e-3, c  # the test needs two different confidences
    weak = ["bat", "sack"][int(np.argmin(c))]
    strong = ["bat", "sack"][int(np.argmax(c))]
    low_t, high_t = (lo + mean) / 2, (mean + hi) / 2
    assert decode(min_confidence=low_t).words == [strong]
    got = decode(min_confidence=low_t, word_rule="run")
    assert got.words == ["bat", "sack"] and got.dropped == []
    assert [s.confidence for s in got.segments] == c  # each word keeps its own confidence
    assert decode(min_confidence=high_t).words == [strong]
    none = decode(min_confidence=high_t, word_rule="run")
    assert none.words == [] and sorted(s.word for s in none.dropped) == sorted([weak, strong])
    assert decode(min_confidence=low_t, word_rule="run").words == got.words
    # inner: the weak word is at an end of the run, so it stays dropped at the lower
    # threshold; at the higher one the run's mean is below it and both are dropped
    assert decode(min_confidence=low_t, word_rule="inner").words == [strong]
    assert decode(min_confidence=high_t, word_rule="inner").words == []
    # a run pause shorter than the pause between the words: each word judged alone again
    assert decode(min_confidence=low_t, word_rule="run", run_pause=0.0).words == [strong]


def test_a_single_word_file_is_the_same_under_both_rules():
    rng = np.random.default_rng(14)
    model = tiny_model(rng, ENTRIES)
    frames = frames_along(model, pause_mixtures(model, 8) + word_mixtures(model, ["S", "AA", "K"])
                          + pause_mixtures(model, 8), rng)
    base = dict(grammar_weight=0.0, insertion_penalty=-20.0, filler_penalty=-10.0)
    conf = build_recognizer(model, settings=DecoderSettings.unpruned(**base, min_confidence=0.0)).decode(frames)
    assert conf.words == ["sack"]
    own = conf.segments[0].confidence
    for t in (0.0, own / 2, own, min(1.0, own * 1.5 + 0.01)):
        a, *others = (build_recognizer(model, settings=DecoderSettings.unpruned(**base, min_confidence=t,
                                                                                word_rule=r)).decode(frames)
                      for r in ("word", "run", "inner"))
        for b in others:
            assert (a.words, [s.word for s in a.dropped], a.reason) == \
                (b.words, [s.word for s in b.dropped], b.reason)
            assert [s.confidence for s in a.segments + a.dropped] == [s.confidence for s in b.segments + b.dropped]
