"""The recording page's HTTP server: standard library only, bound to 127.0.0.1.

Nothing here listens beyond this computer: the address is fixed to the loopback
interface, requests naming another host are refused (so a web page elsewhere cannot
reach the server through a look-alike name), and posts from another origin are refused.
Every answer of the interface is JSON; errors are ``{"error": "..."}`` in plain words with
the HTTP status that fits (400 bad request, 403 outside the folder or another origin, 404,
413 too large, 415 not audio, 409 busy).

Interface (all under the page's own address):

=====================  ==========================================================
``GET /``               the page (``page/index.html``); ``GET /page/NAME`` its files
``GET /takes/PATH``     a saved take (only files inside the takes folder)
``GET /api/state``      words, takes per word (``?speaker=NAME``), notes, training
``POST /api/word``      ``{"word": W}``: known pronunciations or a suggestion
``POST /api/word/add``  ``{"word": W, "phones": "P H O N E S"}``: add to the lexicon
``POST /api/check``     audio body: where the speech is, and what is wrong with it
``POST /api/take``      audio body, ``?word=W&speaker=S&held_out=0|1``: save a take
``POST /api/train``     start ``wordspot train``; ``GET /api/train``: its progress
``POST /api/try``       audio body: the words the trained model recognises
=====================  ==========================================================
"""

from __future__ import annotations

import io
import json
import mimetypes
import os
import sys
import threading
from dataclasses import dataclass, replace
from http import HTTPStatus
from http.server import BaseHTTPRequestHandler, ThreadingHTTPServer
from pathlib import Path
from urllib.parse import parse_qs, unquote, urlsplit

import soundfile

from wordspot.audio.decode import decode_audio_bytes
from wordspot.audio.trim import check_take
from wordspot.errors import WordspotError
from wordspot.web.takes import HELD_OUT_MANIFEST, TRAIN_MANIFEST, TakeFolder, folder_pronunciations, speaker_slug
from wordspot.web.training_job import TrainingJob, train_command
from wordspot.web.words import WordList

__all__ = ["LOOPBACK", "MAX_UPLOAD_BYTES", "RecordingSettings", "RecordingApp", "make_server", "serve"]

#: The only address the server binds to.
LOOPBACK = "127.0.0.1"
#: Largest audio upload accepted (about 80 s of the page's 48 kHz float samples).
MAX_UPLOAD_BYTES = 16 * 1024 * 1024
_MAX_JSON_BYTES = 16 * 1024
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
    """

    folder: Path
    lexicon: Path | None = None
    takes: int = 3
    speaker: str = "baker-a"
    sample_rate: int = 16000
    min_train_takes: int = 2
    from_scratch: bool = False


class HttpProblem(Exception):
    """An answer other than 200, with its status and a plain-language message."""

    def __init__(self, status: HTTPStatus, message: str):
        super().__init__(message)
        self.status = status


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

    def check(self, body: bytes) -> dict:
        wave = decode_audio_bytes(body, self.settings.sample_rate, source="the recording")
        found = check_take(wave, self.settings.sample_rate)
        out = found.to_dict(self.settings.sample_rate)
        out["seconds"] = wave.size / self.settings.sample_rate
        return out

    def save(self, body: bytes, word: str, speaker: str, held_out: bool) -> dict:
        if not word:
            raise WordspotError("say which word the take is of (word=...)")
        if word.lower() not in self.words.lexicon:
            raise WordspotError(f"{word!r} is not in the lexicon {self.settings.lexicon}; add it on the page first")
        rate = self.settings.sample_rate
        wave = decode_audio_bytes(body, rate, source="the recording")
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

    def recognise(self, body: bytes) -> dict:
        from wordspot.audio.features import compute_features
        from wordspot.decoding.decoder import build_recognizer
        from wordspot.model import load_model

        if not self.model_path.is_file():
            raise HttpProblem(HTTPStatus.CONFLICT, "there is no trained model yet; train one first")
        with self._model_lock:
            stamp = self.model_path.stat().st_mtime_ns
            if self._recognizer is None or stamp != self._model_stamp:
                self._recognizer = build_recognizer(load_model(self.model_path))
                self._model_stamp = stamp
            rec = self._recognizer
        wave = decode_audio_bytes(body, rec.features.sample_rate, source="the recording")
        result = rec.decode(compute_features(wave, rec.features))
        return {
            "text": result.text,
            "words": [{"word": s.word, "start": round(s.start, 2), "end": round(s.end, 2),
                       "confidence": round(float(s.confidence), 3)} for s in result.segments],
            "reason": result.reason,
        }

    def stop(self) -> None:
        self.training.stop()


class _Handler(BaseHTTPRequestHandler):
    server_version = "wordspot-record"
    protocol_version = "HTTP/1.1"

    @property
    def app(self) -> RecordingApp:
        return self.server.app

    # -- plumbing ------------------------------------------------------------------------
    def log_message(self, format, *args):  # noqa: A002 - the base class's name
        if self.server.verbose:
            sys.stderr.write("wordspot record: " + (format % args) + "\n")

    def _send(self, status: int, body: bytes, content_type: str) -> None:
        self.send_response(status)
        self.send_header("Content-Type", content_type)
        self.send_header("Content-Length", str(len(body)))
        self.send_header("Cache-Control", "no-store")
        self.send_header("X-Content-Type-Options", "nosniff")
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
        origin = self.headers.get("Origin")
        if self.command == "POST" and origin is not None and origin.lower() not in {
            f"http://{LOOPBACK}:{port}", f"http://localhost:{port}"}:
            raise HttpProblem(HTTPStatus.FORBIDDEN, "requests from other web pages are refused")

    def _body(self, limit: int) -> bytes:
        length = self.headers.get("Content-Length")
        if length is None or not length.isdigit():
            raise HttpProblem(HTTPStatus.LENGTH_REQUIRED, "send the length of the body (Content-Length)")
        n = int(length)
        if n > limit:
            self.close_connection = True
            raise HttpProblem(HTTPStatus.REQUEST_ENTITY_TOO_LARGE,
                              f"the upload is {n / 1e6:.1f} MB; at most {limit / 1e6:.1f} MB is accepted "
                              "(a take should last a few seconds)")
        return self.rfile.read(n)

    def _audio_body(self) -> bytes:
        kind = (self.headers.get("Content-Type") or "").split(";")[0].strip().lower()
        if kind and not (kind.startswith("audio/") or kind == "application/octet-stream"):
            self._body(MAX_UPLOAD_BYTES)  # read and drop, to keep the connection usable
            raise HttpProblem(HTTPStatus.UNSUPPORTED_MEDIA_TYPE,
                              f"expected a recording (audio/wav), got {kind}")
        body = self._body(MAX_UPLOAD_BYTES)
        if not body:
            raise HttpProblem(HTTPStatus.BAD_REQUEST, "the upload is empty; record again")
        try:  # a cheap look at the header before decoding
            soundfile.info(io.BytesIO(body))
        except (RuntimeError, soundfile.SoundFileError, TypeError, ValueError):
            raise HttpProblem(HTTPStatus.UNSUPPORTED_MEDIA_TYPE,
                              "the upload is not audio that can be read; send a WAV, FLAC or OGG file") from None
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
        try:
            self._check_host()
            route()
        except HttpProblem as exc:
            self._json(exc.status, {"error": str(exc)})
        except WordspotError as exc:
            self._json(HTTPStatus.BAD_REQUEST, {"error": str(exc)})
        except (BrokenPipeError, ConnectionResetError):
            self.close_connection = True
        except Exception as exc:  # one clear line for the page, never a traceback
            sys.stderr.write(f"wordspot record: internal error on {self.command} {self.path}: {exc!r}\n")
            self._json(HTTPStatus.INTERNAL_SERVER_ERROR, {"error": f"internal error: {exc}"})

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
            raise HttpProblem(HTTPStatus.NOT_FOUND, f"nothing at {path}")

    def _page_file(self, name: str) -> None:
        files = {p.name: p for p in PAGE_DIR.iterdir() if p.is_file()}
        if name not in files:
            raise HttpProblem(HTTPStatus.NOT_FOUND, f"the page has no file {name}")
        kind = mimetypes.guess_type(name)[0] or "application/octet-stream"
        if kind.startswith("text/") or kind.endswith("javascript"):
            kind += "; charset=utf-8"
        self._send(200, files[name].read_bytes(), kind)

    def _take_file(self, relative: str) -> None:
        try:
            full = self.app.takes.resolve(relative)
        except WordspotError as exc:
            raise HttpProblem(HTTPStatus.FORBIDDEN, str(exc)) from None
        if not full.is_file():
            raise HttpProblem(HTTPStatus.NOT_FOUND, f"no take {relative} in the folder")
        self._send(200, full.read_bytes(), mimetypes.guess_type(full.name)[0] or "application/octet-stream")

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
        else:
            self._body(MAX_UPLOAD_BYTES)
            raise HttpProblem(HTTPStatus.NOT_FOUND, f"nothing to post to at {url.path}")


class _Server(ThreadingHTTPServer):
    daemon_threads = True
    allow_reuse_address = True

    def __init__(self, app: RecordingApp, port: int, verbose: bool):
        self.app = app
        self.verbose = verbose
        super().__init__((LOOPBACK, port), _Handler)


def make_server(app: RecordingApp, *, port: int = 0, verbose: bool = False) -> _Server:
    """A server for ``app`` on 127.0.0.1 (``port`` 0 picks a free one); call ``serve_forever``.

    Raises
    ------
    WordspotError
        The port is taken or not allowed.
    """
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
