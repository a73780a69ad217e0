"""The filler (free phone loop) and the pause between words compete with the commands."""

from __future__ import annotations

import numpy as np
import pytest

from decoding_helpers import frames_along, gap_mixtures, pause_mixtures, tiny_model, viterbi_score, word_mixtures
from wordspot.acoustic.graph import compose
from wordspot.acoustic.units import GAP_UNIT
from wordspot.decoding.decoder import REASON_NO_COMMAND, DecoderSettings, build_recognizer
from wordspot.decoding.filler import FillerSettings
from wordspot.decoding.network import FIRST_WORD_ITEM
from wordspot.decoding.spans import piece_ends, piece_of, piece_score, piece_score_reference
from wordspot.errors import DecodingError
from wordspot.language.lexicon import Lexicon

ENTRIES = {"bat": [["B", "AA", "T"]], "sack": [["S", "AA", "K"]]}


@pytest.fixture
def rng():
    return np.random.default_rng(7)


def _settings(**kw):
    base = dict(grammar_weight=0.0, insertion_penalty=-60.0)
    base.update(kw)
    return DecoderSettings.unpruned(**base)


def test_phones_that_spell_no_word_are_absorbed_and_a_word_is_reported(rng):
    # T AA B spells no word of {bat, sack}: the filler takes it and nothing is reported;
    # B AA T spells "bat": it is reported (the same phones, in the word's order).
    model = tiny_model(rng, ENTRIES)
    rec = build_recognizer(model, settings=_settings(filler_penalty=-30.0))
    other = pause_mixtures(model, 6) + word_mixtures(model, ["T", "AA", "B"]) + pause_mixtures(model, 6)
    word = pause_mixtures(model, 6) + word_mixtures(model, ["B", "AA", "T"]) + pause_mixtures(model, 6)
    got_other = rec.decode(frames_along(model, other, rng))
    assert got_other.words == [] and got_other.reason.startswith(REASON_NO_COMMAND)
    assert "sounds more like other talk" in got_other.reason and "(any phones)" not in got_other.reason
    assert rec.decode(frames_along(model, word, rng)).words == ["bat"]
    # without the filler the same non-word comes out as some command
    plain = build_recognizer(model, settings=_settings(filler=False))
    assert plain.decode(frames_along(model, other, rng)).words != []


def test_word_against_filler_worked_by_hand(rng):
    # Worked by hand: on frames of "bat" the word's path and the filler's path B, AA, T
    # have the same acoustic score (same states, same unit transitions: the word leaves a
    # phone and enters the next through the same exit and entry probabilities as the
    # filler's items, and both may skip the word's optional gap). With grammar weight 0
    # the links cost: word = insertion penalty (-60) into "bat", 0 out, and the word
    # skips its optional gap (log of the gap unit's skip probability g); filler = three
    # phones x phone penalty, 0 out. So the filler wins iff 3 * p > -60 + log g (p above
    # about -20.2 for g = 1/2), and then the best score is higher by 3 * p + 60 - log g.
    model = tiny_model(rng, ENTRIES)
    frames = frames_along(model, pause_mixtures(model, 6) + word_mixtures(model, ["B", "AA", "T"])
                          + pause_mixtures(model, 6), rng)
    plain = build_recognizer(model, settings=_settings(filler=False)).decode(frames)
    assert plain.words == ["bat"]
    for p in (-10.0, -15.0):
        got = build_recognizer(model, settings=_settings(filler_penalty=p)).decode(frames)
        assert got.words == []
        skip = model.units.entry[model.units.index(GAP_UNIT), -1]
        assert got.score == pytest.approx(plain.score + 3 * p + 60.0 - np.log(skip), abs=1e-6)
    for p in (-25.0, -80.0):
        got = build_recognizer(model, settings=_settings(filler_penalty=p)).decode(frames)
        assert got.words == ["bat"]
        assert got.score == pytest.approx(plain.score, abs=1e-6)


def test_long_pause_between_commands_stays_a_pause(rng):
    # 60 frames of pause between two commands: the pause word takes them (for its penalty)
    # instead of a command's one-state gap or the exit pause. (Constructed example: the
    # frames are drawn along a known path, so the right answer is known by construction.)
    model = tiny_model(rng, ENTRIES)
    path = (pause_mixtures(model, 6) + word_mixtures(model, ["B", "AA", "T"]) + pause_mixtures(model, 60)
            + word_mixtures(model, ["S", "AA", "K"]) + pause_mixtures(model, 6))
    frames = frames_along(model, path, rng)
    got = build_recognizer(model, settings=DecoderSettings()).decode(frames)
    assert got.words == ["bat", "sack"]
    assert got.segments[1].first_frame >= 6 + 27 + 50  # the second word starts after the pause


def test_single_word_mode_gives_one_command_or_none(rng):
    model = tiny_model(rng, ENTRIES)
    two = (pause_mixtures(model, 6) + word_mixtures(model, ["B", "AA", "T"]) + gap_mixtures(model, 3)
           + word_mixtures(model, ["S", "AA", "K"]) + pause_mixtures(model, 6))
    frames = frames_along(model, two, rng)
    rec = build_recognizer(model, settings=DecoderSettings(single_word=True))
    assert len(rec.decode(frames).words) == 1
    # link tables: after a command only the exit or the background copies after it
    # (the rule as designed, read back from the tables; no outside reference)
    net = rec.network
    bg = net.background
    for v in range(1, net.n_words + 1):
        row = net.link_row(v)
        assert np.all(np.isneginf(row[1:net.n_words + 1]))
        assert np.all(np.isneginf(row[list(bg.fillers[:1]) + list(bg.pauses[:1])]))


def test_without_empty_result_the_filler_before_a_command_cannot_end(rng):
    model = tiny_model(rng, ENTRIES)
    net = build_recognizer(model, settings=DecoderSettings(allow_empty=False)).network
    bg = net.background
    assert len(bg.fillers) == 2
    assert np.isneginf(net.link_row(bg.fillers[0])[0]) and np.isneginf(net.link_row(0)[0])
    assert net.link_row(bg.fillers[1])[0] == 0.0


def test_extend_links_keeps_the_command_links(rng):
    # Command-to-command links are unchanged by the background words (the prior is a
    # bigram over commands; what the filler adds are listed pairs of its own).
    model = tiny_model(rng, ENTRIES, transcripts=[["bat", "sack"], ["sack"]])
    on = build_recognizer(model, settings=DecoderSettings(grammar_weight=3.0)).network
    off = build_recognizer(model, settings=DecoderSettings(grammar_weight=3.0, filler=False)).network
    for v in range(0, 3):
        np.testing.assert_array_equal(on.link_row(v)[:3], off.link_row(v))


def test_piece_score_matches_textbook_viterbi(rng):
    # A command's piece scored over exactly its frames equals a dense textbook Viterbi
    # over the same composed chain, the word and its optional gap, as the network lays it
    # out (decoding_helpers.viterbi_score, itself checked against hmmlearn in
    # test_decoder.py); the compiled loop equals its plain reference.
    model = tiny_model(rng, ENTRIES)
    rec = build_recognizer(model, settings=DecoderSettings())
    net = rec.network
    frames = frames_along(model, word_mixtures(model, ["S", "AA", "K"]) + gap_mixtures(model, 2), rng)
    ll = np.asarray(rec.emissions(frames), dtype=np.float64)
    u = model.units
    graph = compose([[[u.index(x) for x in ("S", "AA", "K")]], [[u.index(GAP_UNIT)]]], u)
    column = {int(p): j for j, p in enumerate(net.used_mixtures)}
    want = viterbi_score(graph, ll[:, [column[int(p)] for p in graph.mixture]])
    sack = net.words.index("sack") + 1
    piece = piece_of(net, net.word_pron[net.word_first[sack]:net.word_first[sack + 1]] + FIRST_WORD_ITEM)
    got = piece_score(ll, 0, ll.shape[0] - 1, piece)
    assert np.isfinite(got) and got == pytest.approx(want, abs=1e-6)
    assert got == pytest.approx(piece_score_reference(ll, 0, ll.shape[0] - 1, piece), abs=1e-9)
    # all commands in one pass: sack's states give sack's own score
    _, commands, state_word = rec.pieces()
    ends = piece_ends(ll, 0, ll.shape[0] - 1, commands)
    assert ends[state_word == sack].max() == pytest.approx(got, abs=1e-9)


def test_filler_piece_reenters(rng):
    # The filler loop over frames of T AA B: with no re-entry cost it scores at least the
    # best single phone item; the compiled loop equals the reference.
    model = tiny_model(rng, ENTRIES)
    rec = build_recognizer(model, settings=DecoderSettings())
    frames = frames_along(model, word_mixtures(model, ["T", "AA", "B"]), rng)
    ll = np.asarray(rec.emissions(frames), dtype=np.float64)
    filler, _, _ = rec.pieces()
    for reenter in (0.0, -5.0):
        a = piece_score(ll, 0, ll.shape[0] - 1, filler, reenter)
        b = piece_score_reference(ll, 0, ll.shape[0] - 1, filler, reenter)
        assert np.isfinite(a) and a == pytest.approx(b, abs=1e-9)
    # one phone held over all three phones' frames explains them worse than three phones
    assert piece_score(ll, 0, ll.shape[0] - 1, filler) < piece_score(ll, 0, ll.shape[0] - 1, filler, -5.0)


def test_bad_filler_settings_are_named():
    with pytest.raises(DecodingError, match="phone_penalty must be a finite number <= 0"):
        FillerSettings(phone_penalty=5.0)
    with pytest.raises(DecodingError, match=r"pause_penalty \(--pause-penalty\) must be a finite number <= 0"):
        DecoderSettings(pause_penalty=float("nan"))
    with pytest.raises(DecodingError, match=r"^filler_penalty \(--filler-penalty\) must be"):
        DecoderSettings(filler_penalty=5.0)
