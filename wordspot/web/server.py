"""The recording page's HTTP server: standard library only, bound to 127.0.0.1.

Nothing here listens beyond this computer: the address is fixed to the loopback
interface, requests naming another host are refused (so a web page elsewhere cannot
reach the server through a look-alike name), and posts from another origin are refused.
Other web pages open in the same browser can still send requests here without reading the
answers, so every request that changes something must also carry the session key: a
random value made when the server starts, written into the page it serves (a ``<meta
name="wordspot-session">`` tag, which other pages cannot read) and sent back by the page
in the ``Wordspot-Session`` header. A request answered before its body is read (refused,
too large, of unknown length) ends its connection, so a body can never be taken for a
second request. Connections that stay idle are closed after ``idle_seconds``, and at most
``max_connections`` are served at once (beyond that: 503 and closed). An audio upload is
judged by its header (sample rate, channels, length) before a sample is decoded.

Every answer of the interface is JSON; errors are ``{"error": "..."}`` in plain words with
the HTTP status that fits (400 bad request, 403 outside the folder, another origin or no
session key, 404, 411 no length, 413 too large, 415 not audio, 409 busy, 503 too many
connections).

Interface (all under the page's own address):

========================== ======================================================================
``GET /``                  the page (``page/index.html``); ``GET /page/NAME`` its files
``GET /takes/PATH``        a saved take (only files inside the takes folder)
``GET /api/state``         words, takes per word (``?speaker=NAME``), notes, training
``POST /api/word``         ``{"word": W}``: known pronunciations or a suggestion
``POST /api/word/add``     ``{"word": W, "phones": "P H O N E S"}``: add to the lexicon
``POST /api/check``        audio body: where the speech is, and what is wrong with it
``POST /api/take``         audio body, ``?word=W&speaker=S&held_out=0|1``: save a take
``POST /api/train``        start ``wordspot train``; ``GET /api/train``: its progress
``POST /api/try``          audio body: the words the trained model recognises
``POST /api/listen/start`` ``{"rate": R, "format": "float32"|"int16"}``: start listening, its ``id``
                           (409 without a trained model, or with too many listening)
``POST /api/listen/block`` ``?id=ID``, raw samples (at most 1 s): the commands completed since the
                           last answer (:mod:`wordspot.web.listening`)
``POST /api/listen/stop``  ``?id=ID``: finish the stretch in progress; its commands
========================== ======================================================================
"""

from __future__ import annotations

import hmac
import io
import json
import mimetypes
import os
import re
import secrets
import socket
import sys
import threading
import time
from dataclasses import dataclass, replace
from http import HTTPStatus
from http.server import BaseHTTPRequestHandler, ThreadingHTTPServer
from pathlib import Path
from urllib.parse import parse_qs, unquote, urlsplit

import soundfile

from wordspot.audio.decode import check_audio_header, decode_audio_bytes
from wordspot.audio.trim import check_take
from wordspot.errors import WordspotError
from wordspot.web.listening import ListenSessions
from wordspot.web.takes import HELD_OUT_MANIFEST, TRAIN_MANIFEST, TakeFolder, folder_pronunciations, speaker_slug
from wordspot.web.training_job import TrainingJob, train_command
from wordspot.web.words import WordList

__all__ = ["LOOPBACK", "MAX_UPLOAD_BYTES", "SESSION_HEADER", "RecordingSettings", "RecordingApp", "make_server",
           "serve"]

#: The only address the server binds to.
LOOPBACK = "127.0.0.1"
#: Largest audio upload accepted (about 80 s of the page's 48 kHz float samples).
MAX_UPLOAD_BYTES = 16 * 1024 * 1024
_MAX_JSON_BYTES = 16 * 1024
#: The request header that carries the session key on every request that changes something.
SESSION_HEADER = "Wordspot-Session"
# The tag of index.html that receives the session key when the page is served.
_SESSION_TAG = b'<meta name="wordspot-session" content="">'
# After an answer given with the body unread, at most this many bytes are read and dropped
# (for at most _DROP_SECONDS) before the connection is closed: closing with unread bytes
# would reset the connection, and the client could lose the answer.
_DROP_LIMIT = 64 * 1024
_DROP_SECONDS = 2.0
# Paths, names and words longer than this are cut short in messages.
_SHOWN = 60
_DIGITS = re.compile(r"[0-9]+\Z")
PAGE_DIR = Path(__file__).resolve().parent / "page"
MODEL_NAME = "words.model"


@dataclass(frozen=True)
class RecordingSettings:
    """What ``wordspot record`` was asked for.

    Attributes
    ----------
    folder : Path
        The takes folder.
    lexicon : Path or None
        The lexicon file; None: the takes folder's own
        (:func:`wordspot.web.takes.folder_pronunciations`).
    takes : int
        Takes of every word each speaker is asked for.
    speaker : str
        The speaker name the page starts with.
    sample_rate : int
        The model rate; takes are saved at it.
    min_train_takes : int
        Training takes every word needs before the page offers training.
    from_scratch : bool
        Train every phone from the takes alone instead of adapting the starter model.
    max_take_seconds : float
        Longest upload accepted (the page itself stops recording after 15 s).
    idle_seconds : float
        A connection that sends nothing for this long is closed.
    max_connections : int
        Connections served at once; more are answered 503 and closed.
    max_listening : int
        Listening sessions open at once (Listen switched on in that many tabs); more are
        refused.
    listen_idle_seconds : float
        A listening session that receives no sound for this long is stopped and freed.
    """

    folder: Path
    lexicon: Path | None = None
    takes: int = 3
    speaker: str = "baker-a"
    sample_rate: int = 16000
    min_train_takes: int = 2
    from_scratch: bool = False
    max_take_seconds: float = 30.0
    idle_seconds: float = 30.0
    max_connections: int = 32
    max_listening: int = 2
    listen_idle_seconds: float = 15.0


class HttpProblem(Exception):
    """An answer other than 200, with its status and a plain-language message."""

    def __init__(self, status: HTTPStatus, message: str):
        super().__init__(message)
        self.status = status


def _shown(text: str, limit: int = _SHOWN) -> str:
    """``text`` cut to ``limit`` characters, so that it fits in a message."""
    return text if len(text) <= limit else text[:limit] + "..."


def _size(n: int) -> str:
    """A byte count in the unit that suits it (KB and MB of 1024)."""
    if n < 1024:
        return f"{n} bytes"
    if n < 1024 * 1024:
        return f"{n / 1024:.0f} KB"
    return f"{n / (1024 * 1024):.1f} MB"


def _relative_to_cwd(path: Path) -> str:
    try:
        rel = os.path.relpath(path)
    except ValueError:  # another drive (Windows)
        return str(path)
    return str(path) if rel.startswith("..") else rel


class RecordingApp:
    """Everything the page works on: the folder, the word list, training, the model."""

    def __init__(self, settings: RecordingSettings):
        found = None
        if settings.lexicon is None:
            lexicon, found = folder_pronunciations(settings.folder)
            settings = replace(settings, lexicon=lexicon)
        self.settings = settings
        self.takes = TakeFolder(settings.folder, sample_rate=settings.sample_rate)
        self.words = WordList(settings.lexicon)
        self.training = TrainingJob()
        self.notes = ([found] if found else []) + self.takes.reconcile().notes()
        self._model_lock = threading.Lock()
        self._recognizer = None
        self._model_stamp = None
        self.listening = ListenSessions(max_open=settings.max_listening, idle_seconds=settings.listen_idle_seconds)

    @property
    def model_path(self) -> Path:
        return self.takes.folder / MODEL_NAME

    # -- the page's view of things -------------------------------------------------------
    def state(self, speaker: str | None = None) -> dict:
        s = self.settings
        who = speaker_slug(speaker or s.speaker)
        mine = self.takes.counts(who)
        everyone = self.takes.counts()
        words = []
        for w in self.words.words:
            train, held = mine.get(w, [0, 0])
            words.append({"word": w, "pronunciations": self.words.pronunciations(w), "train": train,
                          "held_out": held, "to_record": max(0, s.takes - train - held),
                          "train_all_speakers": everyone.get(w, [0, 0])[0]})
        short = [w["word"] for w in words if w["train_all_speakers"] < s.min_train_takes]
        folder = self.takes.folder
        command = train_command(_relative_to_cwd(folder / TRAIN_MANIFEST), _relative_to_cwd(s.lexicon),
                                _relative_to_cwd(self.model_path), sample_rate=s.sample_rate,
                                from_scratch=s.from_scratch)
        evaluate = None
        if (folder / HELD_OUT_MANIFEST).is_file():
            evaluate = ["wordspot", "evaluate", "--model", _relative_to_cwd(self.model_path),
                        _relative_to_cwd(folder / HELD_OUT_MANIFEST), "--report",
                        _relative_to_cwd(folder / "report")]
        return {
            "folder": str(folder),
            "lexicon": str(s.lexicon),
            "speaker": who,
            "takes_per_word": s.takes,
            "sample_rate": s.sample_rate,
            "words": words,
            "notes": self.notes,
            "ready_to_train": bool(words) and not short,
            "words_short_of_takes": short,
            "min_train_takes": s.min_train_takes,
            "train_command": " ".join(command),
            "evaluate_command": " ".join(evaluate) if evaluate else None,
            "model": _relative_to_cwd(self.model_path) if self.model_path.is_file() else None,
            "training": self.training.status(),
            "max_upload_bytes": MAX_UPLOAD_BYTES,
        }

    def _decode(self, body: bytes, rate: int):
        return decode_audio_bytes(body, rate, source="the recording", max_seconds=self.settings.max_take_seconds)

    def check(self, body: bytes) -> dict:
        wave = self._decode(body, self.settings.sample_rate)
        found = check_take(wave, self.settings.sample_rate)
        out = found.to_dict(self.settings.sample_rate)
        out["seconds"] = wave.size / self.settings.sample_rate
        return out

    def save(self, body: bytes, word: str, speaker: str, held_out: bool) -> dict:
        if not word:
            raise WordspotError("say which word the take is of (word=...)")
        if word.lower() not in self.words.lexicon:
            raise WordspotError(f"{_shown(word)!r} is not in the lexicon {self.settings.lexicon}; "
                                "add it on the page first")
        rate = self.settings.sample_rate
        wave = self._decode(body, rate)
        found = check_take(wave, rate)
        if found.end <= found.start:
            raise WordspotError("the take is silent, so it was not saved; check the microphone and record again")
        saved = self.takes.add_take(wave[found.start:found.end], word, speaker or self.settings.speaker,
                                    held_out=held_out)
        out = found.to_dict(rate)
        out.update({"path": saved.path, "manifest": saved.manifest, "word": saved.word,
                    "speaker": saved.speaker, "seconds": (found.end - found.start) / rate})
        return out

    def start_training(self) -> dict:
        state = self.state()
        if not state["ready_to_train"]:
            raise HttpProblem(HTTPStatus.CONFLICT, "not enough takes yet: every word needs "
                              f"{self.settings.min_train_takes} training takes "
                              f"(still short: {', '.join(state['words_short_of_takes']) or 'no words listed'})")
        folder = self.takes.folder
        started = self.training.start(folder / TRAIN_MANIFEST, self.settings.lexicon.resolve(),
                                      self.model_path, jobs=1, sample_rate=self.settings.sample_rate,
                                      from_scratch=self.settings.from_scratch)
        if not started:
            raise HttpProblem(HTTPStatus.CONFLICT, "training is already running; wait for it to finish")
        return self.training.status()

    def recognizer(self):
        """The trained model's recognizer, built again when the model file changes.

        Raises
        ------
        HttpProblem
            409 when there is no trained model yet.
        """
        from wordspot.decoding.decoder import build_recognizer
        from wordspot.model import load_model

        if not self.model_path.is_file():
            raise HttpProblem(HTTPStatus.CONFLICT, "there is no trained model yet; train one first")
        with self._model_lock:
            stamp = self.model_path.stat().st_mtime_ns
            if self._recognizer is None or stamp != self._model_stamp:
                self._recognizer = build_recognizer(load_model(self.model_path))
                self._model_stamp = stamp
            return self._recognizer

    def recognise(self, body: bytes) -> dict:
        from wordspot.audio.features import compute_features

        rec = self.recognizer()
        wave = self._decode(body, rec.features.sample_rate)
        result = rec.decode(compute_features(wave, rec.features))
        return {
            "text": result.text,
            "words": [{"word": s.word, "start": round(s.start, 2), "end": round(s.end, 2),
                       "confidence": round(float(s.confidence), 3)} for s in result.segments],
            "reason": result.reason,
        }

    def start_listening(self, rate, sample_format) -> dict:
        """A new listening session on the trained model (see :mod:`wordspot.web.listening`)."""
        from wordspot.stream.live import LiveListener

        rec = self.recognizer()
        started = self.listening.open(lambda r: LiveListener(rec, input_rate=r, path="page"), rate, sample_format)
        if started is None:
            limit = self.listening.max_open
            raise HttpProblem(HTTPStatus.CONFLICT,
                              f"already listening in {limit} {'place' if limit == 1 else 'places'} (other tabs or "
                              "windows of this page); switch Listen off there, or wait "
                              f"{self.listening.idle_seconds:g} s after closing them")
        started["words"] = list(rec.network.words)
        return started

    def stop(self) -> None:
        self.training.stop()
        self.listening.stop_all()


class _Handler(BaseHTTPRequestHandler):
    server_version = "wordspot-record"
    protocol_version = "HTTP/1.1"

    @property
    def app(self) -> RecordingApp:
        return self.server.app

    def setup(self):
        self.timeout = self.server.app.settings.idle_seconds  # read by the base class
        self._body_read = False
        super().setup()

    # -- plumbing ------------------------------------------------------------------------
    def log_message(self, format, *args):  # noqa: A002 - the base class's name
        if self.server.verbose:
            sys.stderr.write("wordspot record: " + (format % args) + "\n")

    def _send(self, status: int, body: bytes, content_type: str) -> None:
        self.send_response(status)
        if not self._body_read and self._declared_length() != 0:
            self.send_header("Connection", "close")  # the unread body must never be read as a request
        self.send_header("Content-Type", content_type)
        self.send_header("Content-Length", str(len(body)))
        self.send_header("Cache-Control", "no-store")
        self.send_header("X-Content-Type-Options", "nosniff")
        # no other page may show this one in a frame (and steer it with the person's clicks and keys)
        self.send_header("Content-Security-Policy", "frame-ancestors 'none'")
        self.send_header("X-Frame-Options", "DENY")
        self.end_headers()
        if self.command != "HEAD":
            self.wfile.write(body)

    def _json(self, status: int, data) -> None:
        self._send(status, json.dumps(data, ensure_ascii=False).encode("utf-8"), "application/json; charset=utf-8")

    def _check_host(self) -> None:
        port = self.server.server_address[1]
        host = (self.headers.get("Host") or "").strip().lower()
        if host not in {f"{LOOPBACK}:{port}", f"localhost:{port}"}:
            raise HttpProblem(HTTPStatus.FORBIDDEN, f"this page answers only at http://{LOOPBACK}:{port}/")
        if self.command in ("GET", "HEAD"):
            return
        origin = self.headers.get("Origin")
        if origin is not None and origin.lower() not in {f"http://{LOOPBACK}:{port}", f"http://localhost:{port}"}:
            raise HttpProblem(HTTPStatus.FORBIDDEN, "requests from other web pages are refused")
        given = (self.headers.get(SESSION_HEADER) or "").encode("utf-8", "replace")
        if not hmac.compare_digest(given, self.server.session_key.encode("ascii")):
            raise HttpProblem(HTTPStatus.FORBIDDEN,
                              f"this request does not carry the page's session key ({SESSION_HEADER} header); "
                              f"changes are accepted only from the page at http://{LOOPBACK}:{port}/ "
                              "(reload it if the server was restarted)")

    def _declared_length(self) -> int | None:
        """Bytes the request says follow its header: 0 for none, None if that is not known."""
        if self.headers.get("Transfer-Encoding") is not None:
            return None
        lengths = self.headers.get_all("Content-Length") or []
        if not lengths:
            return 0
        if len(lengths) > 1 or not _DIGITS.match(lengths[0].strip()):
            return None
        return int(lengths[0].strip())

    def _body(self, limit: int, what: str = "the request body") -> bytes:
        n = self._declared_length()
        if n is None:
            raise HttpProblem(HTTPStatus.LENGTH_REQUIRED,
                              "send the body with one length (Content-Length), not in pieces")
        if n > limit:
            hint = " (a take should last a few seconds)" if what == "the upload" else ""
            raise HttpProblem(HTTPStatus.REQUEST_ENTITY_TOO_LARGE,
                              f"{what} is {_size(n)}; at most {_size(limit)} is accepted{hint}")
        data = self.rfile.read(n)
        if len(data) < n:
            self.close_connection = True
            raise HttpProblem(HTTPStatus.BAD_REQUEST, f"{what} ended after {_size(len(data))} of {_size(n)}")
        self._body_read = True
        return data

    def _linger(self) -> None:
        """End an answer given with the body unread: send the end of the answer, then read
        and drop what the client still sends (at most ``_DROP_LIMIT`` bytes, for at most
        ``_DROP_SECONDS``), so that closing does not reset the connection before the client
        has read the answer. Nothing read here is ever taken for a request."""
        try:
            self.wfile.flush()
            self.connection.shutdown(socket.SHUT_WR)
            end = time.monotonic() + _DROP_SECONDS
            left = _DROP_LIMIT
            while left > 0 and time.monotonic() < end:
                self.connection.settimeout(max(0.01, end - time.monotonic()))
                chunk = self.rfile.read1(left)
                if not chunk:
                    break
                left -= len(chunk)
        except OSError:  # timed out or reset: the connection closes either way
            pass

    def _audio_body(self) -> bytes:
        kind = (self.headers.get("Content-Type") or "").split(";")[0].strip().lower()
        if kind and not (kind.startswith("audio/") or kind == "application/octet-stream"):
            self._body(MAX_UPLOAD_BYTES, "the upload")  # read and drop, to keep the connection usable
            raise HttpProblem(HTTPStatus.UNSUPPORTED_MEDIA_TYPE,
                              f"expected a recording (audio/wav), got {_shown(kind)}")
        body = self._body(MAX_UPLOAD_BYTES, "the upload")
        if not body:
            raise HttpProblem(HTTPStatus.BAD_REQUEST, "the upload is empty; record again")
        try:  # a cheap look at the header before decoding
            soundfile.info(io.BytesIO(body))
        except (RuntimeError, soundfile.SoundFileError, TypeError, ValueError):
            raise HttpProblem(HTTPStatus.UNSUPPORTED_MEDIA_TYPE,
                              "the upload is not audio that can be read; send a WAV, FLAC or OGG file") from None
        # rate, channels and length from the header, before anything is decoded (400 if wrong)
        check_audio_header(body, max_seconds=self.app.settings.max_take_seconds, source="the recording")
        return body

    def _json_body(self) -> dict:
        try:
            data = json.loads(self._body(_MAX_JSON_BYTES).decode("utf-8") or "{}")
        except (UnicodeDecodeError, json.JSONDecodeError):
            raise HttpProblem(HTTPStatus.BAD_REQUEST, "the request body is not JSON") from None
        if not isinstance(data, dict):
            raise HttpProblem(HTTPStatus.BAD_REQUEST, "the request body must be a JSON object")
        return data

    def _handle(self, route) -> None:
        self._body_read = False
        try:
            self._check_host()
            route()
        except HttpProblem as exc:
            self._json(exc.status, {"error": str(exc)})
        except WordspotError as exc:
            self._json(HTTPStatus.BAD_REQUEST, {"error": str(exc)})
        except (BrokenPipeError, ConnectionResetError, TimeoutError):
            self.close_connection = True
            return
        except Exception as exc:  # one clear line for the page, never a traceback
            sys.stderr.write(f"wordspot record: internal error on {self.command} {_shown(self.path)}: {exc!r}\n")
            self._json(HTTPStatus.INTERNAL_SERVER_ERROR, {"error": f"internal error: {exc}"})
        if self.close_connection and not self._body_read and self._declared_length() != 0:
            self._linger()

    # -- routes --------------------------------------------------------------------------
    def do_GET(self):
        self._handle(self._get)

    def do_HEAD(self):
        self._handle(self._get)

    def do_POST(self):
        self._handle(self._post)

    def _get(self):
        url = urlsplit(self.path)
        path = unquote(url.path)
        query = parse_qs(url.query)
        if path in ("/", "/index.html"):
            self._page_file("index.html")
        elif path.startswith("/page/"):
            self._page_file(path[len("/page/"):])
        elif path.startswith("/takes/"):
            self._take_file(path[len("/takes/"):])
        elif path == "/api/state":
            self._json(200, self.app.state((query.get("speaker") or [None])[0]))
        elif path == "/api/train":
            self._json(200, self.app.training.status())
        else:
            raise HttpProblem(HTTPStatus.NOT_FOUND, f"nothing at {_shown(path)}")

    def _page_file(self, name: str) -> None:
        files = {p.name: p for p in PAGE_DIR.iterdir() if p.is_file()}
        if name not in files:
            raise HttpProblem(HTTPStatus.NOT_FOUND, f"the page has no file {_shown(name)}")
        kind = mimetypes.guess_type(name)[0] or "application/octet-stream"
        if kind.startswith("text/") or kind.endswith("javascript"):
            kind += "; charset=utf-8"
        data = files[name].read_bytes()
        if name == "index.html":  # the session key, for the page's own requests
            filled = _SESSION_TAG.replace(b'content=""', b'content="' + self.server.session_key.encode("ascii") + b'"')
            data = data.replace(_SESSION_TAG, filled)
        self._send(200, data, kind)

    def _take_file(self, relative: str) -> None:
        if "\x00" in relative:
            raise HttpProblem(HTTPStatus.BAD_REQUEST, "a take's path cannot hold a NUL character")
        try:
            full = self.app.takes.resolve(relative)
        except WordspotError as exc:
            raise HttpProblem(HTTPStatus.FORBIDDEN, _shown(str(exc), 3 * _SHOWN)) from None
        except (OSError, ValueError):  # a name too long for the file system, and the like
            full = None
        try:
            data = full.read_bytes() if full is not None and full.is_file() else None
        except (OSError, ValueError):
            data = None
        if data is None:
            raise HttpProblem(HTTPStatus.NOT_FOUND, f"no take {_shown(relative)} in the folder")
        self._send(200, data, mimetypes.guess_type(full.name)[0] or "application/octet-stream")

    def _post(self):
        url = urlsplit(self.path)
        query = {k: v[-1] for k, v in parse_qs(url.query).items()}
        app = self.app
        if url.path == "/api/check":
            self._json(200, app.check(self._audio_body()))
        elif url.path == "/api/take":
            body = self._audio_body()
            held = query.get("held_out", "0").lower() in ("1", "true", "yes")
            self._json(200, app.save(body, query.get("word", ""), query.get("speaker", ""), held))
        elif url.path == "/api/word":
            self._json(200, app.words.suggest(self._json_body().get("word", "")))
        elif url.path == "/api/word/add":
            data = self._json_body()
            self._json(200, app.words.add(data.get("word", ""), data.get("phones", "")))
        elif url.path == "/api/train":
            self._body(_MAX_JSON_BYTES)
            self._json(200, app.start_training())
        elif url.path == "/api/try":
            self._json(200, app.recognise(self._audio_body()))
        elif url.path == "/api/listen/start":
            data = self._json_body()
            self._json(200, app.start_listening(data.get("rate"), data.get("format", "float32")))
        elif url.path == "/api/listen/block":
            session = self._listen_session(query)
            kind = (self.headers.get("Content-Type") or "").split(";")[0].strip().lower()
            if kind and kind != "application/octet-stream":
                raise HttpProblem(HTTPStatus.UNSUPPORTED_MEDIA_TYPE,
                                  f"expected raw samples (application/octet-stream), got {_shown(kind)}")
            answer = app.listening.feed(session, self._body(app.listening.block_limit(session), "the block of sound"))
            if answer is None:
                raise HttpProblem(HTTPStatus.NOT_FOUND, app.listening.why_not_found(session.id))
            self._json(200, answer)
        elif url.path == "/api/listen/stop":
            session = self._listen_session(query)
            self._body(_MAX_JSON_BYTES)
            answer = app.listening.stop(session)
            if answer is None:
                raise HttpProblem(HTTPStatus.NOT_FOUND, app.listening.why_not_found(session.id))
            self._json(200, answer)
        else:
            self._body(MAX_UPLOAD_BYTES)
            raise HttpProblem(HTTPStatus.NOT_FOUND, f"nothing to post to at {_shown(url.path)}")


    def _listen_session(self, query: dict):
        listen_id = query.get("id", "")
        if not listen_id:
            raise HttpProblem(HTTPStatus.BAD_REQUEST, "say which listening session this is for (id=...)")
        session = self.app.listening.find(listen_id)
        if session is None:
            raise HttpProblem(HTTPStatus.NOT_FOUND, self.app.listening.why_not_found(listen_id))
        return session


_BUSY = json.dumps({"error": "too many connections to the recording page at once; try again in a moment"}).encode()
_BUSY_ANSWER = (b"HTTP/1.1 503 Service Unavailable\r\nContent-Type: application/json; charset=utf-8\r\n"
                b"Content-Length: " + str(len(_BUSY)).encode() + b"\r\nConnection: close\r\n\r\n" + _BUSY)


class _Server(ThreadingHTTPServer):
    """The threading server with a session key and a cap on connections served at once."""

    daemon_threads = True
    allow_reuse_address = True

    def __init__(self, app: RecordingApp, port: int, verbose: bool):
        self.app = app
        self.verbose = verbose
        self.session_key = secrets.token_urlsafe(32)
        self._open = 0
        self._open_lock = threading.Lock()
        super().__init__((LOOPBACK, port), _Handler)

    def process_request(self, request, client_address):
        with self._open_lock:
            room = self._open < self.app.settings.max_connections
            if room:
                self._open += 1
        if not room:
            self._refuse(request)
            return
        try:
            super().process_request(request, client_address)  # a thread runs process_request_thread
        except BaseException:
            self._closed_one()
            raise

    def process_request_thread(self, request, client_address):
        try:
            super().process_request_thread(request, client_address)
        finally:
            self._closed_one()

    def handle_error(self, request, client_address):
        """A client that went away is no error; anything else is one line, never a traceback."""
        exc = sys.exc_info()[1]
        if isinstance(exc, (ConnectionError, TimeoutError)):
            return
        sys.stderr.write(f"wordspot record: a connection ended with an error: {exc!r}\n")

    def _closed_one(self) -> None:
        with self._open_lock:
            self._open -= 1

    def _refuse(self, request) -> None:
        """Answer 503 and close, in the listening thread (a short wait at most)."""
        try:
            request.settimeout(0.1)
            try:  # take in what the client sent already, so closing does not reset the answer away
                request.recv(_DROP_LIMIT)
            except (TimeoutError, OSError):
                pass
            request.settimeout(1.0)
            request.sendall(_BUSY_ANSWER)
        except OSError:
            pass
        self.shutdown_request(request)


def make_server(app: RecordingApp, *, port: int = 0, verbose: bool = False) -> _Server:
    """A server for ``app`` on 127.0.0.1 (``port`` 0 picks a free one); call ``serve_forever``.

    Raises
    ------
    WordspotError
        The port is taken or not allowed (0-65535, 0 = any free port).
    """
    if not 0 <= port <= 65535:
        raise WordspotError(f"port must be 0-65535 (0 = any free port), got {port}")
    try:
        return _Server(app, port, verbose)
    except OSError as exc:
        raise WordspotError(f"cannot listen on {LOOPBACK}:{port} ({exc.strerror or exc}); "
                            "choose another --port") from None


def serve(app: RecordingApp, *, port: int = 0, verbose: bool = False, ready=None) -> None:
    """Serve until interrupted; ``ready(url)`` is called once the server listens."""
    server = make_server(app, port=port, verbose=verbose)
    url = f"http://{LOOPBACK}:{server.server_address[1]}/"
    if ready is not None:
        ready(url)
    try:
        server.serve_forever()
    finally:
        server.server_close()
        app.stop()
