"""``wordspot record`` as a user starts it: the address printed, the page served, Ctrl+C stops it."""

import json
import re
import signal
import subprocess
import sys
import urllib.request

import pytest


def _ctrl_c_as_in_a_terminal():
    """SIGINT back to its default in the child, as in a terminal's foreground job.

    A shell without job control (a script, a CI runner) starts background commands with
    SIGINT ignored (POSIX shell rules for asynchronous lists) and children inherit that;
    Python then never turns Ctrl+C into KeyboardInterrupt, and a test of Ctrl+C would hang.
    """
    signal.signal(signal.SIGINT, signal.SIG_DFL)


def _start_record(folder, *options, ctrl_c=True):
    """``wordspot record FOLDER`` on a free port, and the page's state once it answers."""
    proc = subprocess.Popen(
        [sys.executable, "-m", "wordspot.cli", "record", str(folder), "--port", "0", *options],
        stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
        preexec_fn=_ctrl_c_as_in_a_terminal if ctrl_c else _ctrl_c_ignored,
    )
    line = proc.stdout.readline()
    match = re.search(r"http://127\.0\.0\.1:(\d+)/", line)
    if not match:
        proc.kill()
        raise AssertionError(line + proc.stderr.read())
    with urllib.request.urlopen(match.group(0) + "api/state", timeout=30) as answer:
        return proc, json.load(answer)


def test_record_serves_the_page_and_stops_cleanly(tmp_path):
    folder = tmp_path / "my takes"
    proc, state = _start_record(folder, "--takes", "2")
    try:
        assert state["words"] == [] and state["takes_per_word"] == 2
        assert state["lexicon"].endswith("pronunciations.txt") and folder.is_dir()
        assert state["notes"] == []
    finally:
        proc.send_signal(signal.SIGINT)
        _, err = proc.communicate(timeout=30)
    assert proc.returncode == 0
    assert "stopped" in err and "Traceback" not in err


def test_record_reads_an_old_folder_lexicon_txt_and_says_so_once(tmp_path):
    # A takes folder from before the file was called pronunciations.txt.
    folder = tmp_path / "old takes"
    folder.mkdir()
    (folder / "lexicon.txt").write_text("back B AE K\noven AH V AH N\n", encoding="utf-8")
    proc, state = _start_record(folder)
    try:
        assert [w["word"] for w in state["words"]] == ["back", "oven"]
        assert state["lexicon"].endswith("lexicon.txt")
    finally:
        proc.send_signal(signal.SIGINT)
        _, err = proc.communicate(timeout=30)
    assert proc.returncode == 0 and "Traceback" not in err
    notes = [ln for ln in err.splitlines() if "lexicon.txt" in ln]
    assert len(notes) == 1 and notes[0].startswith("wordspot: note: ") and "pronunciations.txt" in notes[0]
    assert not (folder / "pronunciations.txt").exists()


def _ctrl_c_ignored():
    signal.signal(signal.SIGINT, signal.SIG_IGN)


def test_record_stops_cleanly_on_a_term_signal_even_when_ctrl_c_is_ignored(tmp_path):
    # Started as a background command of a script: SIGINT ignored; `kill PID` still stops it.
    proc, state = _start_record(tmp_path / "takes", ctrl_c=False)
    try:
        assert state["words"] == []
    finally:
        proc.send_signal(signal.SIGTERM)
        _, err = proc.communicate(timeout=30)
    assert proc.returncode == 0
    assert "recording page stopped" in err and "Traceback" not in err


@pytest.mark.parametrize(("args", "message"), [(["--takes", "0"], "--takes must be 1 or more"),
                                                (["--sample-rate", "44100"], "--sample-rate must be 16000 or 8000"),
                                                (["--port", "99999"], "--port must be 0-65535 (0 = any free port)"),
                                                (["--port", "-1"], "--port must be 0-65535 (0 = any free port)")])
def test_bad_options_give_one_line(tmp_path, args, message):
    done = subprocess.run([sys.executable, "-m", "wordspot.cli", "record", str(tmp_path), *args],
                          capture_output=True, text=True, timeout=60)
    assert done.returncode == 2
    assert message in done.stderr and "Traceback" not in done.stderr
    assert len(done.stderr.strip().splitlines()) == 1
