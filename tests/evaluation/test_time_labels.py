"""Time-label files: writing and reading back, and one clear error per problem."""

from pathlib import Path

import pytest

from wordspot.errors import ManifestError
from wordspot.evaluation.time_labels import LabelledRecording, TimedCommand, read_time_labels, write_time_labels


def test_round_trip(tmp_path):
    recs = [
        LabelledRecording(tmp_path / "long" / "morning.flac",
                          (TimedCommand(1.25, 2.5, ("oven", "start")), TimedCommand(95.021, 96.3, ("timer",)))),
        LabelledRecording(tmp_path / "long" / "night.flac", ()),
        LabelledRecording(Path("/elsewhere/evening.wav"), (TimedCommand(0.0, 0.75, ("stop",)),)),
    ]
    out = write_time_labels(tmp_path / "long.csv", recs)
    text = out.read_text()
    assert text.splitlines()[:2] == ["path,start,end,words", "long/morning.flac,1.250,2.500,oven start"]
    assert "long/night.flac,,," in text and "/elsewhere/evening.wav" in text
    assert read_time_labels(out) == recs


def test_reading_sorts_commands_and_lower_cases(tmp_path):
    (tmp_path / "l.csv").write_text("path,start,end,words,speaker\n"
                                    "a.wav,5,6,Timer Five,x\n"
                                    "a.wav,1,2,OVEN,x\n")
    (rec,) = read_time_labels(tmp_path / "l.csv")
    assert rec.path == tmp_path / "a.wav"
    assert rec.commands == (TimedCommand(1.0, 2.0, ("oven",)), TimedCommand(5.0, 6.0, ("timer", "five")))


@pytest.mark.parametrize("body, message", [
    ("path,start,words\n", "lacks column.*end"),
    ("", "empty"),
    ("path,start,end,words\n", "no rows"),
    ("path,start,end,words\na.wav,x,2,oven\n", "line 2: start and end must be seconds"),
    ("path,start,end,words\na.wav,3,2,oven\n", "line 2: end 2 s is before start 3 s"),
    ("path,start,end,words\na.wav,1,2,\n", "line 2: times without words"),
    ("path,start,end,words\na.wav,1,3,oven\na.wav,2,4,stop\n", "lines 2 and 3: commands of a.wav overlap"),
    ("path,start,end,words\na.wav,,,\na.wav,1,2,oven\n", "line 2: a.wav is listed without commands and with 1"),
    ("path,start,end,words\n,1,2,oven\n", "line 2: empty path"),
])
def test_errors_name_the_file_and_line(tmp_path, body, message):
    (tmp_path / "l.csv").write_text(body)
    with pytest.raises(ManifestError, match=f"(?s)l.csv.*{message}"):
        read_time_labels(tmp_path / "l.csv")


def test_missing_file(tmp_path):
    with pytest.raises(ManifestError, match="nope.csv.*not found"):
        read_time_labels(tmp_path / "nope.csv")
