"""Tests for wordspot.corpus: reading manifests and checking them against files and the lexicon."""

import os
import tempfile
from pathlib import Path

import pytest
from hypothesis import given, settings as hsettings, strategies as st

from wordspot.corpus import MAX_LISTED_PROBLEMS, Utterance, check_manifest, read_manifest
from wordspot.errors import ManifestError, WordspotError
from wordspot.language.lexicon import parse_lexicon

LEXICON = parse_lexicon("knead N IY D\nthe DH AH\ndough D OW\noven AH V AH N\non AA N\n")


def write(path: Path, text: str) -> Path:
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_text(text, encoding="utf-8")
    return path


def test_read_manifest_paths_words_speakers(tmp_path):
    absolute = tmp_path / "elsewhere" / "oven-on.flac"
    manifest = write(
        tmp_path / "takes" / "train.csv",
        "path,transcript,speaker,note\n"
        "knead-01.wav,Knead the  DOUGH,ana,first take\n"
        f"{absolute},oven on,,\n"
        "\n"
        "sub/oven-02.wav,\"oven on\",ben\n",
    )
    utts = read_manifest(manifest)
    assert utts == [
        Utterance(path=tmp_path / "takes" / "knead-01.wav", words=("knead", "the", "dough"), speaker="ana", row=2),
        Utterance(path=absolute, words=("oven", "on"), speaker="unknown", row=3),
        Utterance(path=tmp_path / "takes" / "sub" / "oven-02.wav", words=("oven", "on"), speaker="ben", row=5),
    ]


def test_speaker_column_is_optional_and_header_order_free(tmp_path):
    manifest = write(tmp_path / "m.csv", "\ufefftranscript , Path\nknead,a.wav\n")
    (utt,) = read_manifest(manifest)
    assert utt.path == tmp_path / "a.wav" and utt.words == ("knead",) and utt.speaker == "unknown"


@pytest.mark.parametrize(
    "content,message",
    [
        (b"", r"m\.csv: manifest is empty"),
        (b"\n\n", r"m\.csv: manifest is empty"),
        (b"file,transcript\na.wav,knead\n", r"m\.csv, line 1: header lacks column\(s\) path"),
        (b"path;transcript\na.wav;knead\n", r"header lacks column\(s\) path, transcript"),
        (b"path,transcript\n", r"m\.csv: manifest has a header but no recordings"),
        (b"path,transcript\na.wav,kn\xe9ad\n", r"m\.csv, line 2: not valid UTF-8"),
        (b"path,transcript\n\"a.wav,knead\n", r"m\.csv, line \d+: not valid CSV"),
        (b"path,transcript\na.wav,\n,knead\nb.wav\n,oven\n", r"2 row\(s\) to fix:\n  line 3: empty path\n  line 5: empty path$"),
    ],
)
def test_bad_manifests(tmp_path, content, message):
    (tmp_path / "m.csv").write_bytes(content)
    with pytest.raises(ManifestError, match=message):
        read_manifest(tmp_path / "m.csv")


def test_empty_transcript_reads_back_as_no_command(tmp_path):
    # An empty transcript marks a recording with no command in it (the mixer running).
    manifest = write(tmp_path / "m.csv", 'path,transcript,speaker\nmixer.wav,,ana\nb.wav,"  ",ben\nc.wav,oven on,ana\n')
    utts = read_manifest(manifest)
    assert [(u.path.name, u.words, u.speaker, u.row) for u in utts] == [
        ("mixer.wav", (), "ana", 2), ("b.wav", (), "ben", 3), ("c.wav", ("oven", "on"), "ana", 4)]


def test_missing_manifest(tmp_path):
    with pytest.raises(ManifestError, match=r"none\.csv: manifest not found"):
        read_manifest(tmp_path / "none.csv")
    with pytest.raises(ManifestError, match="is a folder"):
        read_manifest(tmp_path)


def test_check_passes_when_all_is_there(tmp_path):
    write(tmp_path / "a.wav", "x")
    manifest = write(tmp_path / "m.csv", "path,transcript\na.wav,knead the dough\n")
    assert check_manifest(read_manifest(manifest), LEXICON, manifest=manifest) is None


def test_check_lists_every_problem_at_once(tmp_path):
    write(tmp_path / "a.wav", "x")
    (tmp_path / "folder.wav").mkdir()
    manifest = write(
        tmp_path / "m.csv",
        "path,transcript,speaker\n"
        "a.wav,knead the dough,ana\n"      # line 2: fine
        "b.wav,proof the dough,ana\n"      # line 3: missing file, unknown word proof
        "a.wav,proof proof loaf,ben\n"     # line 4: unknown proof (once for the line), loaf
        "folder.wav,oven on,ben\n"        # line 5: a folder
        "a.wav,\"knead, the dough\",ana\n",  # line 6: punctuation in the transcript
    )
    with pytest.raises(ManifestError) as info:
        check_manifest(read_manifest(manifest), LEXICON, manifest=manifest)
    text = str(info.value)
    assert text.startswith(f"{manifest}: 5 problem(s):")
    assert "transcript word 'knead,' holds ',' (line 6); write transcripts as plain words" in text
    assert f"line 3: audio file not found: {tmp_path / 'b.wav'}" in text
    assert f"line 5: is a folder, not an audio file: {tmp_path / 'folder.wav'}" in text
    assert "word 'proof' is not in the lexicon (lines 3, 4)" in text
    assert "word 'loaf' is not in the lexicon (line 4)" in text
    assert "`wordspot lexicon suggest proof loaf`" in text


def test_check_caps_the_list(tmp_path):
    n = MAX_LISTED_PROBLEMS + 7
    utts = [Utterance(path=tmp_path / f"take-{i}.wav", words=("knead",), speaker="ana", row=i + 2) for i in range(n)]
    with pytest.raises(ManifestError, match=rf"{n} problem\(s\):(\n  line \d+: audio file not found: [^\n]+){{{MAX_LISTED_PROBLEMS}}}\n  \.\.\. and 7 more"):
        check_manifest(utts, LEXICON)


@hsettings(max_examples=100, deadline=None)
@given(st.binary(max_size=400) | st.text(st.sampled_from(list('path,transcript,speaker"\n\r ab\x00é')), max_size=120).map(str.encode))
def test_random_bytes_give_only_manifest_errors(data):
    folder = tempfile.mkdtemp()
    name = os.path.join(folder, "m.csv")
    try:
        with open(name, "wb") as fh:
            fh.write(data)
        try:
            utts = read_manifest(name)
        except WordspotError as exc:
            assert isinstance(exc, ManifestError) and "m.csv" in str(exc)
            return
        assert utts and all(u.words and u.path.is_absolute() for u in utts)
        try:
            check_manifest(utts, LEXICON, manifest=name)
        except WordspotError as exc:
            assert isinstance(exc, ManifestError)
    finally:
        os.unlink(name)
        os.rmdir(folder)
