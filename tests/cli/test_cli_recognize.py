"""``wordspot recognize`` in all three output formats, with failures in the batch."""

from __future__ import annotations

import csv
import io
import json

import numpy as np
import pytest
import soundfile as sf

from decoding_helpers import tiny_model
from wordspot.cli import main
from wordspot.decoding.decoder import recognize_files
from wordspot.model import save_model

ENTRIES = {"oven": [["AA", "B", "AA"]], "start": [["S", "T", "AA", "T"]], "stop": [["S", "T", "AA", "B"]]}


@pytest.fixture
def setup(rng, tmp_path):
    model = tiny_model(rng, ENTRIES, transcripts=[["oven", "start"], ["oven", "stop"]])
    model_path = save_model(model, tmp_path / "bakery.model")
    files = []
    for name in ("oven-start.wav", "timer.wav"):
        path = tmp_path / name
        sf.write(path, 0.1 * rng.normal(size=12000).astype(np.float32), 16000)
        files.append(str(path))
    missing = str(tmp_path / "missing.wav")
    return model, str(model_path), files, missing


def _run(capsys, argv):
    status = main(argv)
    out, err = capsys.readouterr()
    return status, out, err


def test_text_format(setup, capsys):
    model, model_path, files, missing = setup
    status, out, err = _run(capsys, ["recognize", "--model", model_path, *files, missing])
    assert status == 1
    lines = out.splitlines()
    assert len(lines) == 3
    expected = recognize_files(model, files)
    for line, path, r in zip(lines, files, expected):
        assert line.startswith(path + "\t")
        assert line.split("\t", 1)[1] == (r.text or f"(nothing recognised: {r.reason})")
    assert "missing.wav" in lines[2] and "not found" in err
    assert "1 of 3 files could not be processed" in err


def test_text_with_times(setup, capsys):
    model, model_path, files, _ = setup
    status, out, _ = _run(capsys, ["recognize", "--model", model_path, "--times", files[0]])
    assert status == 0
    r = recognize_files(model, files[:1])[0]
    if r.segments:
        body = out.split("\t", 1)[1].split()
        assert body[0::2] == r.words
        assert body[1] == f"{r.segments[0].start:.2f}-{r.segments[0].end:.2f}"


def test_jsonl_format(setup, capsys):
    model, model_path, files, missing = setup
    status, out, _ = _run(capsys, ["recognize", "--model", model_path, "--format", "jsonl", *files, missing])
    assert status == 1
    records = [json.loads(line) for line in out.splitlines()]
    assert [r["path"] for r in records] == files + [missing]
    expected = recognize_files(model, files)
    for rec, r in zip(records, expected):
        assert rec["words"] == r.words
        assert [s["word"] for s in rec["segments"]] == r.words
        for s, seg in zip(rec["segments"], r.segments):
            assert s["start"] == pytest.approx(seg.start, abs=1e-3)
            assert s["end"] == pytest.approx(seg.end, abs=1e-3)
            assert 0.0 <= s["confidence"] <= 1.0
        assert "error" not in rec
    assert "not found" in records[2]["error"] and records[2]["words"] == []


def test_csv_format_single_word(setup, capsys):
    model, model_path, files, missing = setup
    status, out, _ = _run(capsys, ["recognize", "-m", model_path, "--format", "csv", "--single-word", *files, missing])
    assert status == 1
    rows = list(csv.DictReader(io.StringIO(out)))
    assert list(rows[0]) == ["path", "index", "word", "start", "end", "confidence", "note"]
    for path in files:
        mine = [r for r in rows if r["path"] == path]
        assert len(mine) == 1  # one word at most, or one row with a note
    assert rows[-1]["path"] == missing and rows[-1]["note"].startswith("error:")


def test_new_lexicon_and_prior_options(setup, capsys, tmp_path):
    _, model_path, files, _ = setup
    lex = tmp_path / "more.txt"
    lex.write_text("oven AA B AA\nproof S AA B\n", encoding="utf-8")
    prior = tmp_path / "prior.txt"
    prior.write_text("^ proof 4\nproof $ 4\n", encoding="utf-8")
    status, out, _ = _run(capsys, ["recognize", "-m", model_path, "--lexicon", str(lex), "--prior", str(prior),
                                   "--format", "jsonl", files[0]])
    assert status == 0
    assert set(json.loads(out)["words"]) <= {"oven", "proof"}


def test_bad_prior_and_model_are_one_line_errors(setup, capsys, tmp_path):
    _, model_path, files, _ = setup
    prior = tmp_path / "prior.txt"
    prior.write_text("^ bagel 4\n", encoding="utf-8")
    status, _, err = _run(capsys, ["recognize", "-m", model_path, "--prior", str(prior), files[0]])
    assert status == 2 and "line 1: word 'bagel'" in err and "Traceback" not in err
    status, _, err = _run(capsys, ["recognize", "-m", str(tmp_path / "none.model"), files[0]])
    assert status == 2 and err.startswith("wordspot: error:")


def test_state_limit_option(setup, capsys):
    model, model_path, files, _ = setup
    status, _, err = _run(capsys, ["recognize", "-m", model_path, "--state-limit", "0", files[0]])
    assert status == 2 and "state_limit must be a whole number > 0" in err and "Traceback" not in err
    # A generous limit prunes nothing the beams keep: the default words come out.
    status, out, _ = _run(capsys, ["recognize", "-m", model_path, "--state-limit", "100000", "--format", "jsonl",
                                   files[0]])
    assert status == 0 and json.loads(out)["words"] == recognize_files(model, files[:1])[0].words


def test_warp_voice_option(setup, capsys, tmp_path, rng):
    from dataclasses import replace

    from wordspot.audio.voice_warp import VoiceMixture
    from wordspot.decoding.decoder import DecoderSettings

    model, model_path, files, _ = setup
    # a model without a voice mixture: a note, and the files recognised unwarped
    status, out, err = _run(capsys, ["recognize", "--model", model_path, "--warp-voice", *files])
    assert status == 0 and "--warp-voice has no effect" in err
    assert out == _run(capsys, ["recognize", "--model", model_path, *files])[1]
    # with one: the words of the warped recognition, no note
    d = model.mixtures.dim
    voiced = replace(model, voice=VoiceMixture(np.ones(2) / 2, rng.normal(size=(2, d)), np.ones((2, d))))
    voiced_path = str(save_model(voiced, tmp_path / "voiced.model"))
    status, out, err = _run(capsys, ["recognize", "--model", voiced_path, "--warp-voice", *files])
    assert status == 0 and "no effect" not in err
    expected = recognize_files(voiced, files, settings=DecoderSettings(voice_warp=True))
    assert [line.split("\t", 1)[1] for line in out.splitlines()] == [
        r.text or f"(nothing recognised: {r.reason})" for r in expected]
