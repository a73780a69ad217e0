"""Listening from the page: /api/listen/start, /api/listen/block and /api/listen/stop over real HTTP.

The model is the starter adapted to four bakery words (tests/listen_audio.py, a few
seconds); the sound is demo recordings of those words by another voice, sent the way the
page sends it: raw samples in blocks of a quarter of a second.
"""

import json
import time

import numpy as np
import pytest
import soxr

from listen_audio import WORDS, said_commands, train_small_model
from recording_server import SESSION_HEADER, request, served, session_key  # noqa: F401 - a fixture
from test_server_guards import answers_in, http_request, raw_exchange
from wordspot.web.listening import ListenSessions, block_samples, check_listen_request
from wordspot.errors import WordspotError

RAW = {"Content-Type": "application/octet-stream"}


@pytest.fixture(scope="module")
def model_file(tmp_path_factory):
    return train_small_model(tmp_path_factory.mktemp("listen-model"))


@pytest.fixture
def listening(served, model_file, tmp_path):
    """``start(**settings)``: a server whose takes folder holds the small model; ``(app, port)``."""

    def start(**changes):
        folder = tmp_path / "takes"
        folder.mkdir(exist_ok=True)
        (folder / "words.model").write_bytes(model_file.read_bytes())
        return served(**changes)

    return start


def start_listening(port, rate=48000, fmt="float32", **kw):
    return request(port, "POST", "/api/listen/start", json.dumps({"rate": rate, "format": fmt}).encode(), **kw)


def send(port, listen_id, samples, fmt="float32", **kw):
    body = (samples.astype("<f4") if fmt == "float32" else np.round(samples * 32767).astype("<i2")).tobytes()
    return request(port, "POST", f"/api/listen/block?id={listen_id}", body, RAW, **kw)


def listen_to(port, samples, rate, fmt="float32", block_seconds=0.25):
    """Send ``samples`` block by block, then stop; every command answered, in order."""
    status, started = start_listening(port, rate, fmt)
    assert status == 200, started
    found, step = [], int(block_seconds * rate)
    for at in range(0, samples.size, step):
        status, answer = send(port, started["id"], samples[at:at + step], fmt)
        assert status == 200, answer
        found += answer["commands"]
    status, answer = request(port, "POST", f"/api/listen/stop?id={started['id']}", b"")
    assert status == 200, answer
    return found + answer["commands"], started


def test_commands_come_back_as_they_are_said(listening):
    _, port = listening()
    order = ("oven", "stop", "timer", "start")
    samples, said = said_commands(order, rate=48000, level=-60.0)
    found, started = listen_to(port, samples, 48000)
    assert started["words"] == sorted(WORDS) and started["rate"] == 48000
    assert started["max_block_bytes"] == 48000 * 4  # one second of float32 samples
    # each command said is found once, with its words, within 0.3 s of where the demo
    # manifest says it is spoken (speech_start / speech_end, measured when it was made)
    hits = [c for c in found for s in said
            if tuple(c["words"]) == s.words and abs(c["start"] - s.start) <= 0.3 and abs(c["end"] - s.end) <= 0.3]
    assert len(hits) >= 3, found
    assert len(found) <= len(said) + 1
    for c in found:
        assert 0.0 <= c["confidence"] <= 1.0 and c["text"] == " ".join(c["words"]) and c["start"] < c["end"]


def test_sixteen_bit_blocks_at_another_rate_give_the_same_commands(listening):
    _, port = listening()
    a, _ = said_commands(("start", "oven"), rate=48000, level=-60.0)
    b = soxr.resample(a, 48000, 16000)  # the same sound, as a 16 kHz device would send it
    found_a, _ = listen_to(port, a, 48000, "float32", block_seconds=0.25)
    found_b, _ = listen_to(port, b, 16000, "int16", block_seconds=0.7)
    assert [c["words"] for c in found_a] == [c["words"] for c in found_b] == [["start"], ["oven"]]
    for x, y in zip(found_a, found_b):
        assert x["start"] == pytest.approx(y["start"], abs=0.05) and x["end"] == pytest.approx(y["end"], abs=0.05)


def test_stop_finishes_the_stretch_in_progress(listening):
    _, port = listening()
    samples, said = said_commands(("timer",), rate=16000, pause=0.5)
    samples = samples[:int((said[0].end + 0.05) * 16000)]  # switched off just after the word
    status, started = start_listening(port, 16000)
    answers = [send(port, started["id"], samples[at:at + 4000]) for at in range(0, samples.size, 4000)]
    assert [status for status, _ in answers] == [200] * len(answers)
    assert [a["commands"] for _, a in answers] == [[]] * len(answers)  # the stretch had not ended
    assert answers[-1][1]["heard_seconds"] == pytest.approx(samples.size / 16000, abs=0.01)
    status, last = request(port, "POST", f"/api/listen/stop?id={started['id']}", b"")
    assert status == 200 and [c["words"] for c in last["commands"]] == [["timer"]]
    status, again = request(port, "POST", f"/api/listen/stop?id={started['id']}", b"")
    assert status == 404 and "Listen was switched off" in again["error"]
    status, late = send(port, started["id"], samples[:100])
    assert status == 404 and "switch Listen on again" in late["error"]


# -- guards --------------------------------------------------------------------------------------
def test_listening_needs_the_session_key_and_the_page_origin(listening):
    app, port = listening()
    status, answer = start_listening(port, key=False)
    assert status == 403 and "session key" in answer["error"] and len(app.listening) == 0
    status, answer = start_listening(port, headers={"Origin": "http://bakery.example"})
    assert status == 403 and len(app.listening) == 0
    status, started = start_listening(port)
    assert status == 200
    tone = (0.3 * np.sin(np.arange(4800) / 5.0)).astype(np.float32)
    status, answer = send(port, started["id"], tone, key=False)
    assert status == 403 and "session key" in answer["error"]
    status, answer = request(port, "POST", f"/api/listen/stop?id={started['id']}", b"", key=False)
    assert status == 403 and len(app.listening) == 1
    status, answer = send(port, started["id"], tone)
    assert status == 200 and answer["heard_seconds"] == 0.1  # only the block with the key was heard


@pytest.mark.parametrize(("data", "said"), [({"rate": 1}, "1 Hz"), ({"rate": 300000}, "300000 Hz"),
                                            ({"rate": "48k"}, "whole number of Hz"), ({}, "got nothing"),
                                            ({"rate": 44100.5}, "whole number"), ({"rate": True}, "whole number"),
                                            ({"rate": float("nan")}, "got nan"), ({"rate": float("inf")}, "got inf"),
                                            ({"rate": [48000]}, "whole number"),
                                            ({"rate": 48000, "format": "mp3"}, "float32, int16"),
                                            ({"rate": 48000, "format": ["float32"]}, "float32, int16")])
def test_a_bad_rate_or_format_is_refused(listening, data, said):
    app, port = listening()
    status, answer = request(port, "POST", "/api/listen/start", json.dumps(data).encode())
    assert status == 400 and said in answer["error"], answer
    assert len(app.listening) == 0


def test_without_a_model_listening_is_refused(served):
    app, port = served()
    status, answer = start_listening(port)
    assert status == 409 and "no trained model" in answer["error"] and len(app.listening) == 0


def test_an_oversize_block_is_refused_before_it_is_read(listening):
    app, port = listening()
    status, started = start_listening(port, 16000)
    limit = started["max_block_bytes"]
    assert limit == 16000 * 4
    # only the header is sent: the answer must come at once, and the connection end
    head = http_request("POST", f"/api/listen/block?id={started['id']}", port,
                        {SESSION_HEADER: session_key(port), "Content-Type": "application/octet-stream",
                         "Content-Length": limit + 4})
    received, closed = raw_exchange(port, head)
    assert answers_in(received) == [413] and closed
    assert b"the block of sound is 63 KB; at most 62 KB is accepted" in received
    status, answer = send(port, started["id"], np.zeros(16000, np.float32))  # exactly the limit
    assert status == 200 and answer["heard_seconds"] == 1.0


def test_odd_blocks_are_explained(listening):
    _, port = listening()
    status, started = start_listening(port, 16000)
    path = f"/api/listen/block?id={started['id']}"
    status, answer = request(port, "POST", path, b"\x00" * 7, RAW)
    assert status == 400 and "multiple of 4 bytes" in answer["error"]
    status, answer = request(port, "POST", path, np.array([0.1, np.nan], "<f4").tobytes(), RAW)
    assert status == 400 and "not numbers" in answer["error"]
    status, answer = request(port, "POST", path, b"\x00" * 8, {"Content-Type": "audio/wav"})
    assert status == 415 and "raw samples" in answer["error"]
    status, answer = request(port, "POST", "/api/listen/block", b"\x00" * 8, RAW)
    assert status == 400 and "id=" in answer["error"]
    status, answer = request(port, "POST", "/api/listen/block?id=made-up", b"\x00" * 8, RAW)
    assert status == 404 and "no such listening session" in answer["error"]
    status, answer = request(port, "POST", "/api/listen/stop?id=made-up", b"")
    assert status == 404
    status, answer = request(port, "POST", path, b"", RAW)  # an empty block only asks for news
    assert status == 200 and answer == {"id": started["id"], "commands": [], "dropped": 0, "heard_seconds": 0.0}


def test_a_request_hidden_in_a_refused_block_is_never_served(listening, tmp_path):
    _, port = listening()
    key = session_key(port)
    lexicon_before = (tmp_path / "bakery-words.txt").read_bytes()
    add = json.dumps({"word": "knead", "phones": "N IY D"}).encode()
    hidden = http_request("POST", "/api/word/add", port, {"Content-Type": "application/json", SESSION_HEADER: key,
                                                          "Content-Length": len(add)}, add)
    data = http_request("POST", "/api/listen/block?id=made-up", port,
                        {SESSION_HEADER: key, "Content-Type": "application/octet-stream",
                         "Content-Length": len(hidden)}, hidden)
    received, closed = raw_exchange(port, data)
    assert answers_in(received) == [404] and closed
    assert (tmp_path / "bakery-words.txt").read_bytes() == lexicon_before


def test_too_many_listening_at_once_are_refused(listening):
    app, port = listening(max_listening=2)
    ids = [start_listening(port)[1]["id"] for _ in range(2)]
    status, answer = start_listening(port)
    assert status == 409 and "already listening in 2 places" in answer["error"] and len(app.listening) == 2
    status, _ = request(port, "POST", f"/api/listen/stop?id={ids[0]}", b"")
    assert status == 200
    status, started = start_listening(port)
    assert status == 200 and started["id"] not in ids and len(app.listening) == 2


def test_an_idle_listening_session_is_freed(listening):
    app, port = listening(max_listening=1, listen_idle_seconds=0.5)
    status, started = start_listening(port)
    assert status == 200
    status, answer = start_listening(port)
    assert status == 409
    time.sleep(1.0)
    status, answer = send(port, started["id"], np.zeros(480, np.float32))
    assert status == 404 and "after 0.5 s without sound" in answer["error"]
    assert len(app.listening) == 0
    status, again = start_listening(port)  # its place is free again
    assert status == 200
    # a session that keeps sending stays open past the idle time
    for _ in range(4):
        time.sleep(0.2)
        status, answer = send(port, again["id"], np.zeros(480, np.float32))
        assert status == 200


# -- the parts, without a server ----------------------------------------------------------------
def test_block_samples_reads_both_formats():
    x = np.array([0.0, 0.5, -1.0, 0.999], dtype=np.float32)
    np.testing.assert_array_equal(block_samples(x.astype("<f4").tobytes(), "float32"), x)
    ints = np.array([0, 16384, -32768, 32767], dtype="<i2")
    # 16-bit PCM to float as soundfile reads it: divided by 2^15 (soundfile's PCM_16 -> float)
    np.testing.assert_array_equal(block_samples(ints.tobytes(), "int16"), ints / 32768.0)
    assert block_samples(np.array([3.0, -7.0], "<f4").tobytes(), "float32").tolist() == [1.0, -1.0]
    assert check_listen_request(16000.0, "int16") == (16000, "int16")
    with pytest.raises(WordspotError, match="multiple of 2 bytes"):
        block_samples(b"\x00" * 3, "int16")


def test_waiting_commands_are_bounded(model_file, monkeypatch):
    # three commands completed within one push, with room for two: the oldest is dropped
    # and counted
    from wordspot.decoding.decoder import build_recognizer
    from wordspot.model import load_model
    from wordspot.stream.live import LiveListener
    import wordspot.web.listening as listening_module

    monkeypatch.setattr(listening_module, "MAX_WAITING", 2)
    rec = build_recognizer(load_model(model_file))
    sessions = ListenSessions(max_open=1, idle_seconds=60)
    opened = sessions.open(lambda rate: LiveListener(rec, input_rate=rate), 16000, "int16")
    s = sessions.find(opened["id"])
    samples, said = said_commands(("oven", "stop", "timer"), rate=16000, level=-60.0)
    s.hold(s.listener.push(samples))
    answer = s.answer()
    assert [c["words"] for c in answer["commands"]] == [["stop"], ["timer"]] and answer["dropped"] == 1
    assert s.answer() == {"id": opened["id"], "commands": [], "dropped": 0, "heard_seconds": 0.0}
    assert sessions.open(lambda rate: None, 16000, "int16") is None  # one place, taken
