"""The recording server against requests a hostile web page (or a careless client) can send.

A page on any site the person has open can send requests to 127.0.0.1 without reading the
answers (``fetch(url, {mode: "no-cors"})``); these tests send what such a page, or a raw
client, can send over one socket and check that nothing changes and nothing hangs.
"""

import io
import json
import socket
import struct
import time

import numpy as np
import pytest
import soundfile as sf

from conftest import RECORDINGS
from recording_server import SESSION_HEADER, post_audio, request, served, session_key  # noqa: F401 - a fixture
from wordspot.audio.decode import MAX_CHANNELS, decode_audio_bytes
from wordspot.errors import AudioError, WordspotError
from wordspot.web.server import LOOPBACK, RecordingApp, RecordingSettings, make_server

FLAC = RECORDINGS / "audio" / "train" / "espeak-en-gb-f3" / "back-t1.flac"
ADD_KNEAD = json.dumps({"word": "knead", "phones": "N IY D"}).encode()


# -- talking over one raw socket ---------------------------------------------------------------
def raw_exchange(port, data, *, wait=5.0):
    """Send ``data`` on one connection; return (all bytes received, whether the server closed it)."""
    got = b""
    with socket.create_connection((LOOPBACK, port), timeout=wait) as sock:
        sock.sendall(data)
        try:
            while True:
                chunk = sock.recv(65536)
                if not chunk:
                    return got, True
                got += chunk
        except TimeoutError:
            return got, False
        except ConnectionResetError:
            return got, True


def http_request(method, path, port, headers, body=b""):
    lines = [f"{method} {path} HTTP/1.1", f"Host: {LOOPBACK}:{port}"]
    lines += [f"{k}: {v}" for k, v in headers.items()]
    return ("\r\n".join(lines) + "\r\n\r\n").encode() + body


def answers_in(data):
    """The status codes of the HTTP answers in ``data``, in order."""
    return [int(data[i + 9:i + 12]) for i in range(len(data)) if data.startswith(b"HTTP/1.1 ", i)]


def word_list(port):
    status, state = request(port, "GET", "/api/state")
    assert status == 200
    return [w["word"] for w in state["words"]]


# -- 1. a refused request never lets its body through as a second request ----------------------
@pytest.mark.parametrize("outer", ["other origin", "other host", "no session key", "body in pieces"])
def test_a_request_hidden_in_a_refused_body_is_never_served(served, tmp_path, outer):
    app, port = served()
    key = session_key(port)
    lexicon_before = (tmp_path / "bakery-words.txt").read_bytes()
    # the hidden request is as good as the page's own: it even carries the session key
    hidden = http_request("POST", "/api/word/add", port,
                          {"Content-Type": "application/json", SESSION_HEADER: key or "",
                           "Content-Length": len(ADD_KNEAD)}, ADD_KNEAD)
    headers = {"Content-Type": "text/plain"}  # what a no-cors fetch may send
    if outer == "other origin":
        headers.update({"Origin": "http://bakery.example", "Content-Length": len(hidden)})
        expected = 403
    elif outer == "no session key":
        headers.update({"Content-Length": len(hidden)})
        expected = 403
    elif outer == "other host":
        headers.update({SESSION_HEADER: key or "", "Content-Length": len(hidden)})
        expected = 403
    else:  # a length the server does not take: it answers before reading the body
        headers.update({SESSION_HEADER: key or "", "Transfer-Encoding": "chunked"})
        expected = 411
    data = http_request("POST", "/api/word/add", port, headers, hidden)
    if outer == "other host":
        data = data.replace(f"Host: {LOOPBACK}:{port}".encode(), f"Host: bakery.example:{port}".encode(), 1)
    received, closed = raw_exchange(port, data)
    assert answers_in(received) == [expected]
    assert closed  # the server ended the connection instead of reading on
    assert (tmp_path / "bakery-words.txt").read_bytes() == lexicon_before
    assert word_list(port) == ["back", "oven"]


def test_changes_need_the_session_key_even_without_an_origin(served, tmp_path):
    app, port = served()
    lexicon_before = (tmp_path / "bakery-words.txt").read_bytes()
    status, answer = request(port, "POST", "/api/word/add", ADD_KNEAD, key=False)
    assert status == 403 and "session key" in answer["error"] and SESSION_HEADER in answer["error"]
    status, answer = request(port, "POST", "/api/word/add", ADD_KNEAD, {SESSION_HEADER: "guessed"}, key=False)
    assert status == 403 and "session key" in answer["error"]
    status, answer = request(port, "POST", "/api/take?word=back", FLAC.read_bytes(),
                             {"Content-Type": "audio/flac"}, key=False)
    assert status == 403
    status, answer = request(port, "POST", "/api/train", b"", key=False)
    assert status == 403
    assert (tmp_path / "bakery-words.txt").read_bytes() == lexicon_before
    assert not (app.takes.folder / "train.csv").exists() and not (app.takes.folder / "audio").exists()
    # the page's own requests carry the key it was served with
    status, answer = request(port, "POST", "/api/word/add", ADD_KNEAD)
    assert status == 200 and "knead" in word_list(port)


def test_the_page_cannot_be_shown_inside_another_page(served):
    # a page framed by another could be steered with the person's own clicks and keys
    _, port = served()
    received, _ = raw_exchange(port, http_request("GET", "/", port, {"Connection": "close"}))
    head = received.split(b"\r\n\r\n", 1)[0].lower()
    assert b"content-security-policy: frame-ancestors 'none'" in head and b"x-frame-options: deny" in head


def test_every_server_has_its_own_random_key_in_its_page(served):
    _, port_a = served()
    _, port_b = served()
    key_a, key_b = session_key(port_a), session_key(port_b)
    assert key_a and key_b and key_a != key_b and len(key_a) >= 32
    assert session_key(port_a) == key_a  # the same for the life of the server
    status, answer = request(port_b, "POST", "/api/word", json.dumps({"word": "back"}).encode(),
                             {SESSION_HEADER: key_a}, key=False)
    assert status == 403


# -- 2. uploads judged by their header before decoding -----------------------------------------
def sound(frames):
    """A loud enough tone (0.3 of full scale) that no upload is refused for being silent."""
    return (0.3 * np.sin(2 * np.pi * 0.05 * np.arange(frames))).astype("<f4")


def float_wav(rate, frames, channels=1):
    """A 32-bit float WAV file built by hand, so any declared rate can be written."""
    data = np.repeat(sound(frames), channels).tobytes()
    fmt = struct.pack("<HHIIHH", 3, channels, rate, rate * 4 * channels, 4 * channels, 32)
    return (b"RIFF" + struct.pack("<I", 36 + len(data)) + b"WAVE" + b"fmt " + struct.pack("<I", 16) + fmt
            + b"data" + struct.pack("<I", len(data)) + data)


def encoded(seconds, rate, fmt, subtype, *, loud_seconds=None):
    """``seconds`` of audio, the tone throughout or (``loud_seconds``) only in the middle."""
    frames = int(seconds * rate)
    wave = sound(frames)
    if loud_seconds is not None:
        quiet = (frames - int(loud_seconds * rate)) // 2
        wave[:quiet] = 0.0
        wave[frames - quiet:] = 0.0
    buffer = io.BytesIO()
    sf.write(buffer, wave, rate, format=fmt, subtype=subtype)
    return buffer.getvalue()


UPLOADS = {
    # 32 KB declaring 8000 s: converting it to 16 kHz took gigabytes
    "1 Hz": (float_wav(1, 8000), "1 Hz"),
    "300 kHz": (float_wav(300_000, 30_000), "300000 Hz"),
    "40 s of 8 kHz": (encoded(40, 8000, "WAV", "PCM_16"), "40.0 s"),
    "ten minutes, quiet but for one second": (encoded(600, 16000, "FLAC", "PCM_16", loud_seconds=1), "600.0 s"),
    "too many channels": (float_wav(16000, 1600, channels=MAX_CHANNELS + 1), f"{MAX_CHANNELS + 1} channels"),
}


@pytest.mark.parametrize("name", list(UPLOADS))
def test_uploads_that_declare_too_much_are_refused_before_decoding(served, name):
    body, said = UPLOADS[name]
    assert len(body) < 1024 * 1024  # small uploads, far below the size limit
    app, port = served()
    for path in ("/api/take?word=back", "/api/check", "/api/try"):
        started = time.monotonic()
        status, answer = post_audio(port, path, body, "audio/wav")
        assert status == 400 and said in answer["error"], (path, answer)
        assert time.monotonic() - started < 5.0
    assert not (app.takes.folder / "audio").exists() and not (app.takes.folder / "train.csv").exists()


def test_decoding_checks_the_header_first():
    with pytest.raises(AudioError, match="1 Hz"):
        decode_audio_bytes(float_wav(1, 8000), 16000)
    with pytest.raises(AudioError, match=r"lasts 40\.0 s; at most 30 s"):
        decode_audio_bytes(encoded(40, 8000, "WAV", "PCM_16"), 16000, max_seconds=30)
    wave = decode_audio_bytes(encoded(2, 8000, "WAV", "PCM_16"), 16000, max_seconds=30)
    assert wave.shape == (32000,)


# -- 3. idle connections and too many connections -----------------------------------------------
def test_an_idle_connection_is_closed(served):
    _, port = served(idle_seconds=0.5)
    for sent in (b"", f"GET /api/state HTTP/1.1\r\nHost: {LOOPBACK}:{port}\r\n".encode()):  # nothing, half a request
        started = time.monotonic()
        received, closed = raw_exchange(port, sent, wait=10.0)
        assert closed and time.monotonic() - started < 5.0
        assert b"200 OK" not in received


def test_connections_over_the_cap_are_refused(served):
    _, port = served(max_connections=2)
    held = [socket.create_connection((LOOPBACK, port), timeout=10) for _ in range(2)]
    try:
        received, closed = raw_exchange(port, http_request("GET", "/api/state", port, {}))
        assert answers_in(received) == [503] and closed and b"too many connections" in received
        # the two held connections are still served
        held[0].sendall(http_request("GET", "/api/state", port, {}))
        assert held[0].recv(12) == b"HTTP/1.1 200"
        held[1].close()  # a place comes free
        end = time.monotonic() + 10
        while time.monotonic() < end:
            received, _ = raw_exchange(port, http_request("GET", "/api/state", port, {"Connection": "close"}))
            if answers_in(received) == [200]:
                break
            time.sleep(0.1)
        assert answers_in(received) == [200]
    finally:
        for sock in held:
            sock.close()


# -- 4. limits and clear answers --------------------------------------------------------------
def test_word_length_is_limited_when_the_word_is_added(served, tmp_path):
    app, port = served()
    lexicon_before = (tmp_path / "bakery-words.txt").read_bytes()
    for path in ("/api/word", "/api/word/add"):
        status, answer = request(port, "POST", path, json.dumps({"word": "k" * 300, "phones": "K"}).encode())
        assert status == 400 and "at most 40 characters" in answer["error"] and len(answer["error"]) < 200
    assert (tmp_path / "bakery-words.txt").read_bytes() == lexicon_before
    longest = "k" * 40
    status, answer = request(port, "POST", "/api/word/add", json.dumps({"word": longest, "phones": "K"}).encode())
    assert status == 200
    status, saved = post_audio(port, f"/api/take?word={longest}", FLAC.read_bytes())
    assert status == 200 and saved["path"] == f"audio/baker-a/{longest}-1.wav"


def test_a_long_word_already_in_the_lexicon_gets_a_clear_answer(served, tmp_path):
    lexicon = tmp_path / "long.txt"
    lexicon.write_text("k" * 300 + " K\n", encoding="utf-8")
    app, port = served(lexicon=lexicon)
    status, answer = post_audio(port, "/api/take?word=" + "k" * 300, FLAC.read_bytes())
    assert status == 400 and "too long for a file name" in answer["error"]
    assert not (app.takes.folder / "train.csv").exists()


@pytest.mark.parametrize(("path", "expected"), [("/takes/a%00b.wav", 400), ("/takes/" + "a" * 5000, 404),
                                                ("/takes/" + "a/" * 3000 + "b.wav", 404),
                                                ("/page/" + "a" * 5000, 404)])
def test_odd_paths_get_a_clear_answer(served, path, expected):
    _, port = served()
    status, answer = request(port, "GET", path)
    assert status == expected and len(answer["error"]) < 200


def test_phones_must_all_be_phones(served, tmp_path):
    _, port = served()
    lexicon_before = (tmp_path / "bakery-words.txt").read_bytes()
    for phones, bad in (("AH # x", "'#'"), ("N IY D;", "'D;'"), ("N IY D 9", "'9'")):
        body = json.dumps({"word": "knead", "phones": phones}).encode()
        status, answer = request(port, "POST", "/api/word/add", body)
        assert status == 400 and bad in answer["error"], answer
    assert (tmp_path / "bakery-words.txt").read_bytes() == lexicon_before


@pytest.mark.parametrize(("data", "said"), [({"word": None, "phones": "N IY D"}, "the word must be text, got null"),
                                            ({"word": 5, "phones": "N IY D"}, "the word must be text, got a number"),
                                            ({"word": ["knead"]}, "the word must be text, got a list"),
                                            ({"word": "knead", "phones": None}, "the phones must be text, got null"),
                                            ({"word": "knead", "phones": ["N"]}, "the phones must be text")])
def test_words_and_phones_must_be_text(served, tmp_path, data, said):
    _, port = served()
    lexicon_before = (tmp_path / "bakery-words.txt").read_bytes()
    path = "/api/word/add" if "phones" in data else "/api/word"
    status, answer = request(port, "POST", path, json.dumps(data).encode())
    assert status == 400 and said in answer["error"]
    assert (tmp_path / "bakery-words.txt").read_bytes() == lexicon_before
    assert "none" not in word_list(port)


def test_too_large_bodies_are_named_in_fitting_units(served):
    _, port = served()
    status, answer = request(port, "POST", "/api/word", b" " * 20_000)
    assert status == 413 and answer["error"] == "the request body is 20 KB; at most 16 KB is accepted"
    # a large upload's size, without sending it: the answer comes at once
    received, closed = raw_exchange(port, http_request("POST", "/api/take?word=back", port,
                                                       {SESSION_HEADER: session_key(port), "Content-Type": "audio/wav",
                                                        "Content-Length": 20 * 1024 * 1024}))
    assert answers_in(received) == [413] and closed
    assert b"the upload is 20.0 MB; at most 16.0 MB is accepted (a take should last a few seconds)" in received


@pytest.mark.parametrize("length", ["\u00b2", "12x", "-5", "10, 12"])
def test_a_length_that_is_not_one_number_is_refused(served, length):
    _, port = served()
    data = http_request("POST", "/api/word", port, {SESSION_HEADER: session_key(port), "Content-Length": length},
                        b'{"word": "back"}')
    received, closed = raw_exchange(port, data.replace(b"\xc2\xb2", b"\xb2"))
    assert answers_in(received) == [411] and closed


@pytest.mark.parametrize("port", [-1, 65536, 99999])
def test_make_server_names_a_bad_port(tmp_path, port):
    app = RecordingApp(RecordingSettings(folder=tmp_path / "t", lexicon=tmp_path / "lex.txt"))
    with pytest.raises(WordspotError, match=r"port must be 0-65535 \(0 = any free port\)"):
        make_server(app, port=port)
