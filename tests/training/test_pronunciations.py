"""Pronunciations learned from recordings: candidates, scores, the choice, the model file."""

import numpy as np
import pytest

from wordspot.acoustic.units import PAUSE_UNIT
from wordspot.errors import TrainingError
from wordspot.language.lexicon import parse_lexicon
from wordspot.model import load_model, save_model
from wordspot.training.items import TrainingItem
from wordspot.training.pronunciations import (
    LearningConfig,
    candidates,
    choose,
    learn,
    learned_note,
    regraphed,
    with_learned,
)

LEX = parse_lexicon("timer T AY M ER\nfive F AY V\nnine N AY N\nknead N IY D\nneed N IY D\nkid K IH D\n")


def test_candidates_of_a_known_word():
    # "five" F AY V: AY's neighbours in our table are AA, EY, OY (one move each)
    assert candidates("five", LEX, moves=1) == [("F", "AA", "V"), ("F", "EY", "V"), ("F", "OY", "V")]
    got = candidates("timer", LEX, moves=2)
    # one move of AY (3), one move of ER (AH, EH), then both (3 x 2)
    assert got[:5] == [("T", "AA", "M", "ER"), ("T", "EY", "M", "ER"), ("T", "OY", "M", "ER"),
                       ("T", "AY", "M", "AH"), ("T", "AY", "M", "EH")]
    assert len(got) == 11 and ("T", "OY", "M", "EH") in got
    assert all(len(p) == 4 for p in got)


def test_candidates_never_repeat_another_words_pronunciation():
    lex = parse_lexicon("kid K IH D\nkeyed K IY D\n")
    # IH -> IY would give "keyed"; left out
    assert ("K", "IY", "D") not in candidates("kid", lex)
    assert candidates("kid", lex) == [("K", "EH", "D"), ("K", "AH", "D")]


def test_choose_needs_a_clear_share_of_one_speakers_takes():
    cfg = LearningConfig(enabled=True, min_gain=5.0, min_share=0.6, min_takes=2, per_word=1)
    v1, v2 = ("F", "AA", "V"), ("F", "EY", "V")
    gains = [("ann", {("five", v1): 20.0, ("five", v2): 8.0}),
             ("ann", {("five", v1): 12.0, ("five", v2): 30.0}),
             ("ann", {("five", v1): 9.0, ("five", v2): -4.0}),
             ("bo", {("five", v1): -30.0, ("five", v2): -30.0})]
    # ann: v1 wins 3 of 3, v2 2 of 3 (0.67 >= 0.6); v1 first, one a word
    assert choose(gains, LEX, cfg) == {"five": [v1]}
    assert choose(gains, LEX, LearningConfig(enabled=True, min_gain=5.0, per_word=2)) == {"five": [v1, v2]}
    # a higher bar: v1 wins 2 of 3 takes by more than 10 (0.67 < 0.7), v2 1 of 3
    assert choose(gains, LEX, LearningConfig(enabled=True, min_gain=10.0, min_share=0.7)) == {}
    # one take is too few
    assert choose(gains[:1], LEX, cfg) == {}


def test_choose_never_gives_two_words_one_pronunciation():
    cfg = LearningConfig(enabled=True, min_gain=1.0, min_takes=1)
    same = ("N", "AA", "N")
    gains = [("ann", {("nine", same): 5.0}), ("ann", {("five", same): 50.0})]
    # both words would take N AA N; only the first in order gets it ("five" < "nine")
    assert choose(gains, LEX, cfg) == {"five": [same]}
    # a pronunciation the lexicon already has for another word is never added
    assert choose([("ann", {("kid", ("N", "IY", "D")): 50.0})], LEX, cfg) == {}


def _synthetic_takes(model, lexicon, word, pron, n, rng, frames_per_state=4):
    """Frames drawn around the model's Gaussians along quiet + ``pron`` + quiet, as a
    recording of ``word`` said that way would align."""
    units = model.units
    mix = model.mixtures
    items = []
    for k in range(n):
        rows = []
        for unit in (PAUSE_UNIT,) + tuple(pron) + (PAUSE_UNIT,):
            u = units.index(unit)
            for s in range(int(units.n_states[u])):
                m = int(units.state_mixture[u, s])
                c = int(np.argmax(mix.weights[m]))
                sd = np.sqrt(mix.variances[m, c])
                count = frames_per_state + int(rng.integers(0, 3))
                rows.append(mix.means[m, c] + 0.3 * sd * rng.standard_normal((count, sd.size)))
        frames = np.concatenate(rows).astype(np.float32)
        items.append(TrainingItem(f"take-{word}-{k}.wav", (word,), frames, graph=None))
    return items


@pytest.fixture(scope="module")
def starter():
    return load_model("starter")


def test_recordings_that_follow_a_variant_teach_it(starter, rng):
    lexicon = parse_lexicon("timer T AY M ER\nfive F AY V\nseven S EH V AH N\n")
    variant = ("T", "AY", "M", "AH")
    items = _synthetic_takes(starter, lexicon, "timer", variant, 4, rng)
    items += _synthetic_takes(starter, lexicon, "five", ("F", "AY", "V"), 4, rng)
    items += _synthetic_takes(starter, lexicon, "seven", ("S", "IH", "V", "AH", "N"), 4, rng)
    cfg = LearningConfig(enabled=True)
    got = learn(items, ["ann"] * len(items), lexicon, starter.units, starter.mixtures, cfg)
    # timer said T AY M AH: learned; five said as listed: nothing; seven's EH said as IH: learned
    assert got == {"timer": [variant], "seven": [("S", "IH", "V", "AH", "N")]}
    assert learn(items, ["ann"] * len(items), lexicon, starter.units, starter.mixtures,
                 LearningConfig()) == {}  # off
    # the chains follow the new lexicon: timer's slot now holds both pronunciations
    new = with_learned(lexicon, got)
    assert new.pronunciations("timer") == (("T", "AY", "M", "ER"), variant)
    again = regraphed(items, new, starter.units)
    assert again[0].frames is items[0].frames
    assert again[0].graph.n_states == 3 * (2 + 4 + 4) and again[4].graph.n_states == 3 * (2 + 3)
    assert learned_note(got) == ("pronunciations learned from your recordings: 'seven' as you say it: "
                                 "S IH V AH N; 'timer' as you say it: T AY M AH")


def test_listed_takes_teach_nothing(starter, rng):
    lexicon = parse_lexicon("timer T AY M ER\nstop S T AA P\n")
    items = _synthetic_takes(starter, lexicon, "timer", ("T", "AY", "M", "ER"), 4, rng)
    items += _synthetic_takes(starter, lexicon, "stop", ("S", "T", "AA", "P"), 4, rng)
    got = learn(items, ["ann"] * len(items), lexicon, starter.units, starter.mixtures, LearningConfig(enabled=True))
    assert got == {}


def test_learning_settings_are_checked():
    with pytest.raises(TrainingError, match="moves must be 1 or 2"):
        LearningConfig(moves=3)
    with pytest.raises(TrainingError, match="min_share"):
        LearningConfig(min_share=0.0)
    with pytest.raises(TrainingError, match="per_word"):
        LearningConfig(per_word=0)


def test_learned_pronunciations_survive_the_model_file(starter, tmp_path):
    lexicon = parse_lexicon("timer T AY M ER\nfive F AY V\n")
    learned = {"timer": [("T", "AY", "M", "AH")]}
    model = type(starter)(starter.features, starter.units, starter.mixtures, with_learned(lexicon, learned),
                          starter.bigrams, {"learned_pronunciations": {"timer": ["T AY M AH"]}})
    back = load_model(save_model(model, tmp_path / "m.model"))
    assert back.lexicon.pronunciations("timer") == (("T", "AY", "M", "ER"), ("T", "AY", "M", "AH"))
    assert back.info["learned_pronunciations"] == {"timer": ["T AY M AH"]}
    assert back.lexicon == model.lexicon


def _espeak_takes(folder, said, rates=(140, 165, 190)):
    """WAV takes of (word, espeak-ng phoneme input) pairs by espeak-ng's en+m3 voice (a demo
    dev voice, recordings/voices.csv) at several rates; None without espeak-ng."""
    import shutil
    import subprocess

    if shutil.which("espeak-ng") is None:
        return None
    rows = []
    for word, phonemes in said:
        for rate in rates:
            path = folder / f"{word}-{rate}.wav"
            subprocess.run(["espeak-ng", "-v", "en+m3", "-s", str(rate), "-w", str(path), phonemes], check=True)
            rows.append((path, word))
    return rows


@pytest.mark.slow
def test_adapting_learns_how_the_takes_say_a_word(starter, tmp_path):
    from wordspot.corpus import Utterance
    from wordspot.training.adapt import AdaptationConfig, adapt

    # "five" said F EY V ("eI" in espeak-ng's phoneme input), "stop" as listed (S T AA P);
    # the espeak-ng phoneme spellings (eI for the FACE vowel, A: for the LOT vowel in an
    # American voice) are from espeak-ng's English phoneme tables, from memory; the ARPAbet
    # pronunciations of the two words are those of the CMU pronouncing dictionary
    rows = _espeak_takes(tmp_path, [("five", "[[f'eIv]]"), ("stop", "[[st'A:p]]")])
    if rows is None:
        pytest.skip("espeak-ng is not installed (Debian package espeak-ng)")
    utts = [Utterance(path, (word,), "ann", k + 2) for k, (path, word) in enumerate(rows)]
    lexicon = parse_lexicon("five F AY V\nstop S T AA P\n")
    config = AdaptationConfig(strength=0, scorer=None, pronunciations=LearningConfig(enabled=True))
    model, summary = adapt(utts, lexicon, starter, config=config)
    assert model.lexicon.pronunciations("five") == (("F", "AY", "V"), ("F", "EY", "V"))
    assert model.lexicon.pronunciations("stop") == (("S", "T", "AA", "P"),)
    assert model.info["learned_pronunciations"] == {"five": ["F EY V"]}
    assert "pronunciations learned from your recordings: 'five' as you say it: F EY V" in summary.lines()
    back = load_model(save_model(model, tmp_path / "m.model"))
    assert back.lexicon == model.lexicon
    # off (the default): the lexicon as given, nothing recorded
    plain, summary = adapt(utts, lexicon, starter, config=AdaptationConfig(strength=0, scorer=None))
    assert plain.lexicon == lexicon and "learned_pronunciations" not in plain.info
    assert not any("learned" in line for line in summary.lines())


def test_model_files_written_before_load_as_they_were(starter, tmp_path):
    # the shipped starter was written before pronunciations were learned (format version 2):
    # its lexicon has one line a pronunciation as before, no learned entries, and it is
    # written back with the same lexicon text and no new info keys
    assert "learned_pronunciations" not in starter.info and "learning_cpu_seconds" not in starter.info
    back = load_model(save_model(starter, tmp_path / "again.model"))
    assert back.lexicon.to_text() == starter.lexicon.to_text() and back.info == starter.info
