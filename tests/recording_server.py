"""The recording page's server in a thread for the web tests, and requests to it as the page sends them.

:func:`request` sends the session key with every request that changes something, read
from the page the server serves (the ``wordspot-session`` tag), the way ``page.js`` does.
"""

import http.client
import json
import re
import threading

import pytest

from wordspot.web.server import LOOPBACK, RecordingApp, RecordingSettings, make_server

# the request header page.js sends the key in (written out here, as the page has it)
SESSION_HEADER = "Wordspot-Session"
_TAG = re.compile(rb'<meta name="wordspot-session" content="([^"]*)">')


@pytest.fixture
def served(tmp_path):
    """``start(**settings)`` starts a server on a free port and returns ``(app, port)``."""
    lexicon = tmp_path / "bakery-words.txt"
    lexicon.write_text("back B AE K\noven AH V AH N\n", encoding="utf-8")
    started = []

    def start(**changes):
        settings = dict(folder=tmp_path / "takes", lexicon=lexicon, takes=2)
        settings.update(changes)
        app = RecordingApp(RecordingSettings(**settings))
        server = make_server(app)
        threading.Thread(target=server.serve_forever, daemon=True).start()
        started.append(server)
        return app, server.server_address[1]

    yield start
    for server in started:
        server.shutdown()
        server.server_close()
        server.app.stop()


def _exchange(port, method, path, body=None, headers=None):
    conn = http.client.HTTPConnection(LOOPBACK, port, timeout=60)
    try:
        conn.request(method, path, body=body, headers=headers or {})
        answer = conn.getresponse()
        data = answer.read()
    finally:
        conn.close()
    kind = answer.getheader("Content-Type", "")
    return answer.status, (json.loads(data) if kind.startswith("application/json") else data)


def session_key(port):
    """The key in the page the server serves (None if the page has none)."""
    status, page = _exchange(port, "GET", "/")
    found = _TAG.search(page) if status == 200 else None
    return found.group(1).decode("ascii") if found else None


def request(port, method, path, body=None, headers=None, *, key=True):
    """``(status, JSON or bytes)``; with ``key`` a changing request carries the page's session key."""
    headers = dict(headers or {})
    if key and method not in ("GET", "HEAD"):
        found = session_key(port)
        if found is not None:
            headers.setdefault(SESSION_HEADER, found)
    return _exchange(port, method, path, body, headers)


def post_audio(port, path, body, kind="audio/flac"):
    return request(port, "POST", path, body, {"Content-Type": kind})
