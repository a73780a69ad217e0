"""Tests of wordspot.util.atomic: the old file or the new one, never half."""

import pytest

from wordspot.util.atomic import is_temporary, write_atomically, write_bytes_atomically


def test_replaces_whole(tmp_path):
    target = tmp_path / "train.csv"
    target.write_text("old\n")
    write_bytes_atomically(target, b"new\n")
    assert target.read_text() == "new\n"
    assert [p.name for p in tmp_path.iterdir()] == ["train.csv"]


def test_a_failed_write_leaves_the_old_file(tmp_path):
    target = tmp_path / "train.csv"
    target.write_text("old\n")

    def half(handle):
        handle.write(b"ne")
        raise RuntimeError("killed halfway")

    with pytest.raises(RuntimeError, match="killed halfway"):
        write_atomically(target, half)
    assert target.read_text() == "old\n"
    assert [p.name for p in tmp_path.iterdir()] == ["train.csv"]


def test_temporary_names_are_recognised(tmp_path):
    seen = []
    write_atomically(tmp_path / "x.wav", lambda h: seen.append(h.name))
    assert is_temporary(seen[0]) and not is_temporary(tmp_path / "x.wav")
