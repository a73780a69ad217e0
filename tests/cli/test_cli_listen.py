"""``wordspot listen``: a real pipe paced as live audio, WAV and raw input, broken streams, Ctrl+C."""

import csv
import io
import json
import os
import signal
import subprocess
import sys
import threading
import time
from pathlib import Path

import numpy as np
import pytest
import soundfile as sf

from conftest import LEXICON_DIR
from stream_feed import feed, raw_bytes, wav_stream_bytes
from wordspot.cli import main
from wordspot.decoding.decoder import build_recognizer
from wordspot.evaluation.time_labels import read_time_labels
from wordspot.language.lexicon import read_lexicon
from wordspot.model import load_model
from wordspot.stream.live import ListenSettings
from wordspot.stream.scan import scan_file

REPO = Path(__file__).resolve().parents[2]
# a demo long recording (recordings/long.csv): talk, kitchen noise and 13 commands, 85 s at 16 kHz
LONG = REPO / "recordings" / "audio" / "long" / "festival-ked" / "long-02.flac"
BASE = ["listen", "--model", "starter", "--lexicon", str(LEXICON_DIR / "bakery.txt")]


@pytest.fixture(scope="module")
def wave():
    x, rate = sf.read(LONG, dtype="float32")
    assert rate == 16000
    # the file's 16-bit samples exactly (what a recorder would send)
    return x


@pytest.fixture(scope="module")
def scanned():
    """``wordspot scan``'s commands for the file with the live detector settings."""
    recognizer = build_recognizer(load_model("starter"), lexicon=read_lexicon(LEXICON_DIR / "bakery.txt"))
    result = scan_file(recognizer, LONG, settings=ListenSettings().scan_settings())
    assert not result.error and len(result.commands) >= 8
    return [(c.start, c.end, c.text, c.confidence) for c in result.commands]


def _parse_jsonl(text):
    return [(r["start"], r["end"], r["words"], r["confidence"]) for r in map(json.loads, text.splitlines())]


def _same(found, expected):
    # the same words, times within one frame step (10 ms) and confidence as printed
    assert [f[2] for f in found] == [e[2] for e in expected]
    for f, e in zip(found, expected):
        assert abs(f[0] - e[0]) <= 0.011 and abs(f[1] - e[1]) <= 0.011
        assert f[3] == pytest.approx(e[3], abs=1e-4)


def _env():
    env = dict(os.environ, PYTHONPATH=str(REPO) + os.pathsep + os.environ.get("PYTHONPATH", ""),
               OPENBLAS_NUM_THREADS="1")
    return env


def _start(args):
    return subprocess.Popen([sys.executable, "-m", "wordspot.cli", *BASE, *args], stdin=subprocess.PIPE,
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, env=_env(), cwd=REPO)


def _lines_with_times(stream, into):
    for line in iter(stream.readline, b""):
        into.append((time.monotonic(), line.decode("utf-8").rstrip("\n")))


def test_a_paced_pipe_gives_the_commands_of_a_scan(wave, scanned):
    # Raw PCM written into a real pipe at 16 times real time, 20 ms pieces: the same
    # commands, times and confidences as the scan of the file with the same detector.
    proc = _start(["--rate", "16000", "--format", "jsonl", "-"])
    lines = []
    reader = threading.Thread(target=_lines_with_times, args=(proc.stdout, lines))
    reader.start()
    feed(proc.stdin, raw_bytes(wave), 32000, speed=16.0)
    assert proc.wait(timeout=120) == 0, proc.stderr.read().decode()
    reader.join()
    _same(_parse_jsonl("\n".join(text for _, text in lines)), scanned)
    # printed as they were said: the first command long before the stream ended
    assert lines[0][0] < lines[-1][0] - 1.0


def test_wav_stream_and_raw_pcm_agree(wave, scanned, tmp_path, capsys):
    wav = tmp_path / "stream.wav"
    wav.write_bytes(wav_stream_bytes(wave, 16000))  # length unknown, as piped by a recorder
    raw = tmp_path / "stream.raw"
    raw.write_bytes(raw_bytes(wave))
    assert main(BASE + ["--format", "jsonl", str(wav)]) == 0
    from_wav = _parse_jsonl(capsys.readouterr().out)
    assert main(BASE + ["--format", "csv", "--rate", "16000", str(raw)]) == 0
    rows = list(csv.DictReader(io.StringIO(capsys.readouterr().out)))
    from_raw = [(float(r["start"]), float(r["end"]), r["words"], float(r["confidence"])) for r in rows]
    _same(from_wav, scanned)
    _same(from_raw, scanned)


def test_min_confidence_judges_whole_commands(wave, scanned, tmp_path, capsys):
    # As in wordspot scan: --min-confidence P replaces the whole-command threshold, so every
    # command printed has a mean confidence of P or above; a lower P keeps as many or more.
    raw = tmp_path / "stream.raw"
    raw.write_bytes(raw_bytes(wave))
    found = {}
    for p in ("0.01", "0.99"):
        assert main(BASE + ["--format", "jsonl", "--rate", "16000", "--min-confidence", p, str(raw)]) == 0
        found[p] = _parse_jsonl(capsys.readouterr().out)
        assert all(f[3] >= float(p) for f in found[p])
    assert len(found["0.01"]) >= len(scanned) >= len(found["0.99"])
    assert len(found["0.01"]) > len(found["0.99"])


def test_declared_length_two_channels_and_text(wave, tmp_path, capsys):
    # A WAV file with its real length and a chunk after the samples (read up to the
    # length), and stereo raw input at 8 kHz: text lines in the scan's clock format.
    short = wave[: 16000 * 20]
    wav = tmp_path / "sized.wav"
    wav.write_bytes(wav_stream_bytes(short, 16000, data_size=2 * short.size) + b"LIST\x04\x00\x00\x00junk")
    assert main(BASE + [str(wav)]) == 0
    out, err = capsys.readouterr()
    assert out and not err
    assert all(len(line.split("  ")) == 4 and line.startswith("00:00:") for line in out.splitlines())
    import soxr

    raw = tmp_path / "stereo.raw"
    raw.write_bytes(raw_bytes(soxr.resample(short, 16000, 8000), channels=2))
    assert main(BASE + ["--rate", "8000", "--channels", "2", str(raw)]) == 0
    assert capsys.readouterr().out.strip()


def _one_error(err):
    lines = err.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("wordspot: error: ") and "Traceback" not in err
    return lines[0]


def test_broken_streams_end_with_one_line(wave, tmp_path, capsys):
    stream = wav_stream_bytes(wave[: 16000 * 40], 16000)
    cases = {
        "truncated.wav": (stream[:30], [], "inside the WAV header"),
        "notwav.wav": (b"hello, this is not audio", [], "does not start with a WAV header"),
        "odd.raw": (raw_bytes(wave[: 16000 * 40]) + b"\x01", ["--rate", "16000"], "middle of a sample"),
        "wav-as-raw.raw": (stream, ["--rate", "16000"], "leave out --rate"),
        "empty.wav": (b"", [], "empty"),
    }
    for name, (data, extra, what) in cases.items():
        path = tmp_path / name
        path.write_bytes(data)
        status = main(BASE + extra + [str(path)])
        out, err = capsys.readouterr()
        assert status == 1, name
        assert what in _one_error(err) and str(path) in err
    # the odd byte: the commands heard before it are printed
    assert main(BASE + ["--rate", "16000", str(tmp_path / "odd.raw")]) == 1
    out, err = capsys.readouterr()
    assert out.strip() and "heard 40.0 s" in _one_error(err)
    assert main(BASE + [str(tmp_path / "missing.wav")]) == 2
    assert "cannot open" in _one_error(capsys.readouterr().err)


def test_a_stream_that_stops_mid_sample_through_a_pipe(wave):
    proc = _start(["--rate", "16000", "-"])
    out, err = proc.communicate(raw_bytes(wave[: 16000 * 30]) + b"\x7f", timeout=120)
    assert proc.returncode == 1
    assert out.decode().strip()  # commands before the fault
    assert "middle of a sample after 30.00 s" in _one_error(err.decode())


def test_sigint_prints_the_stretch_in_progress(wave):
    # Audio up to just after a command's labelled end is sent and the pipe left open: the
    # command cannot be complete (the hangover has not passed), so it is printed only after
    # SIGINT, which finishes the stretch in progress and exits with status 0.
    labels = {r.path.name: r for r in read_time_labels(REPO / "recordings" / "long.csv")}[LONG.name]
    target = labels.commands[4]
    proc = _start(["--rate", "16000", "--format", "jsonl", "-"])
    lines = []
    reader = threading.Thread(target=_lines_with_times, args=(proc.stdout, lines))
    reader.start()
    upto = int((target.end + 0.05) * 16000)
    feed(proc.stdin, raw_bytes(wave[:upto]), 32000, speed=16.0, close=False)
    time.sleep(6.0)  # ample time to recognise what was sent, on a loaded machine
    sent = time.monotonic()
    proc.send_signal(signal.SIGINT)
    assert proc.wait(timeout=60) == 0, proc.stderr.read().decode()
    proc.stdin.close()
    reader.join()
    last = json.loads(lines[-1][1])
    assert lines[-1][0] >= sent
    assert abs(last["end"] - target.end) < 0.3 and last["start"] < target.end
    assert "Traceback" not in proc.stderr.read().decode()
