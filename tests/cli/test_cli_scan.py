"""``wordspot scan``: the three output formats parse back, -o, --reference, bad input."""

import csv
import io
import json

import numpy as np
import pytest

from conftest import LEXICON_DIR
from long_audio import demo_items, glue
from wordspot.cli import main
from wordspot.cli.scan_cmd import format_clock
from wordspot.evaluation.time_labels import read_time_labels, write_time_labels

VOICES = ("flite-rms", "espeak-en-gb-scotland-f2")
BASE = ["scan", "--model", "starter", "--lexicon", str(LEXICON_DIR / "bakery.txt")]


@pytest.fixture(scope="module")
def recording(tmp_path_factory):
    folder = tmp_path_factory.mktemp("scan")
    rng = np.random.default_rng(20261203)
    rec = glue(folder / "counter.wav", demo_items("test-phrases.csv", VOICES)[:5], rng, gap=(2.0, 4.0),
               noise_dbfs=-55.0)
    quiet = folder / "night.wav"
    glue(quiet, [], rng, minutes=0.5, noise_dbfs=-55.0)
    return rec, quiet


def _run(capsys, argv):
    status = main(argv)
    out, err = capsys.readouterr()
    return status, out, err


def test_clock_format():
    # worked by hand: 3723.456 s = 1 h 2 min 3.46 s
    assert format_clock(3723.456) == "01:02:03.46"
    assert format_clock(59.999) == "00:01:00.00"


def test_text_jsonl_and_csv_agree(recording, capsys):
    rec, quiet = recording
    status, text, _ = _run(capsys, BASE + ["-q", str(rec.path), str(quiet)])
    assert status == 0
    status, jsonl, _ = _run(capsys, BASE + ["-q", "--format", "jsonl", str(rec.path), str(quiet)])
    assert status == 0
    records = [json.loads(line) for line in jsonl.splitlines()]
    assert all(set(r) == {"path", "start", "end", "words", "confidence"} for r in records)
    status, table, _ = _run(capsys, BASE + ["-q", "--format", "csv", str(rec.path), str(quiet)])
    rows = list(csv.DictReader(io.StringIO(table)))
    assert [r["words"] for r in rows] == [r["words"] for r in records]
    for row, r in zip(rows, records):
        if r["start"] is None:
            assert row["start"] == row["end"] == row["confidence"] == ""
        else:
            assert float(row["start"]) == pytest.approx(r["start"], abs=1e-3)
            assert float(row["confidence"]) == pytest.approx(r["confidence"], abs=1e-4)
    # the night recording (background only) gets one record without words
    assert [r for r in records if r["path"] == str(quiet)] == [
        {"path": str(quiet), "start": None, "end": None, "words": "", "confidence": None}]
    found = [r for r in records if r["path"] == str(rec.path)]
    assert len(found) >= 3
    lines = text.splitlines()
    assert lines[0] == f"{rec.path} ({format_clock(_duration(rec.path))}, {len(found)} commands)"
    first = lines[1].split("  ")
    assert first[1:] == [format_clock(found[0]["start"]), format_clock(found[0]["end"]), found[0]["words"],
                         f"{found[0]['confidence']:.2f}"]


def _duration(path):
    import soundfile as sf

    return sf.info(str(path)).duration


def test_csv_output_file_is_a_time_label_file(recording, capsys, tmp_path):
    rec, quiet = recording
    out = tmp_path / "found.csv"
    status, stdout, _ = _run(capsys, BASE + ["-q", "--format", "csv", "-o", str(out), str(rec.path), str(quiet)])
    assert status == 0 and stdout == ""
    labels = read_time_labels(out)
    assert [str(r.path) for r in labels] == [str(rec.path), str(quiet)]
    assert labels[1].commands == () and len(labels[0].commands) >= 3


def test_reference_scores_the_labelled_recordings(recording, capsys, tmp_path):
    rec, quiet = recording
    labels = write_time_labels(tmp_path / "long.csv", [rec, type(rec)(quiet, ())])
    status, out, err = _run(capsys, BASE + ["-q", "--reference", str(labels)])
    assert status == 0
    assert f"{len(rec.commands)} labelled commands" in out
    assert "found with the right words" in out and "per hour" in out
    status, out, err = _run(capsys, BASE + ["-q", "--format", "jsonl", "--reference", str(labels)])
    assert "found with the right words" in err and all(json.loads(line) for line in out.splitlines())


def test_bad_input_gives_one_message(recording, capsys, tmp_path):
    rec, _ = recording
    (tmp_path / "junk.flac").write_bytes(b"\x00garbage" * 50)
    (tmp_path / "empty.wav").write_bytes(b"")
    status, out, err = _run(capsys, BASE + ["-q", str(tmp_path / "junk.flac"), str(tmp_path / "gone.wav"),
                                            str(tmp_path / "empty.wav")])
    assert status == 1 and "Traceback" not in err
    assert "junk.flac" in err and "gone.wav: audio file not found" in err and "empty.wav" in err
    assert "3 of 3 files could not be scanned" in err
    (tmp_path / "bad.model").write_bytes(b"not a model")
    status, _, err = _run(capsys, ["scan", "--model", str(tmp_path / "bad.model"), str(rec.path)])
    assert status == 2 and "bad.model" in err and "Traceback" not in err
    status, _, err = _run(capsys, BASE + [])
    assert status == 2 and "no audio files given" in err
    status, _, err = _run(capsys, BASE + ["--reference", str(tmp_path / "none.csv")])
    assert status == 2 and "none.csv" in err and "not found" in err


def test_min_confidence_drops_weaker_words(recording, capsys):
    # With --min-confidence P every command found has a confidence of P or above (a command
    # is judged whole: its confidence is its words' mean); a lower P keeps as many or more.
    rec, _ = recording
    status, out, _ = _run(capsys, BASE + ["-q", "--format", "jsonl", str(rec.path)])
    assert status == 0
    default = [json.loads(line) for line in out.splitlines() if json.loads(line)["start"] is not None]
    status, out, _ = _run(capsys, BASE + ["-q", "--format", "jsonl", "--min-confidence", "0.01", str(rec.path)])
    low = [json.loads(line) for line in out.splitlines() if json.loads(line)["start"] is not None]
    assert len(low) >= len(default) and all(r["confidence"] >= 0.01 for r in low)
    status, out, _ = _run(capsys, BASE + ["-q", "--format", "jsonl", "--min-confidence", "0.99", str(rec.path)])
    high = [json.loads(line) for line in out.splitlines() if json.loads(line)["start"] is not None]
    assert len(high) <= len(default) and all(r["confidence"] >= 0.99 for r in high)
