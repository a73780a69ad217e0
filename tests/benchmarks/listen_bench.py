"""Latency, CPU and memory of ``wordspot listen`` fed through a real pipe.

Not a test (pytest does not collect it). Goals: a command printed within 0.5 s of its end
(median) and 1 s (95th percentile); at most 10% of one core in silence and 30% in
continuous talk; memory flat over an hour, no growth in threads or open files.

What it does, each part in a child ``wordspot listen --debug --format jsonl --rate 16000 -``
(raw 16-bit PCM on its standard input, 20 ms pieces written on a clock schedule by
tests/stream_feed.py; every thread pool limited to one thread; feeding starts once the
child says it is ready):

(a) latency: the demo's long recordings (recordings/long.csv: commands among talk and
    kitchen noise) one after the other at real time; for each labelled command, the first
    printed command overlapping it in time; latency = the clock time its line arrived
    minus the clock time the command's labelled end was written (start of feeding + end
    time in the stream). ``latency_dev``: the same on 5 minutes of the demo's dev voices
    0.6-8 s apart over a -45 dBFS bed with clatter (the material the detector was tuned on,
    a new seed): commands with background, not talk, around them;
(b) CPU: 60 s of a quiet noise bed (-60 dBFS), then 60 s of continuous talk (utterances of
    the demo's dev voices 0.1-0.4 s apart over a -50 dBFS bed, tests/long_audio.py), at
    real time; the child's CPU time (utime + stime from /proc) over each part per second of
    audio;
(c) memory: the long recordings looped to one hour, fed as fast as the child reads;
    resident memory (VmRSS) sampled each second and the peak (VmHWM), threads and open
    files at the start and the end.

Usage::

    python tests/benchmarks/listen_bench.py                 # all four, about 16 minutes
    python tests/benchmarks/listen_bench.py --parts cpu memory
"""

from __future__ import annotations

import os

for _var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS", "NUMBA_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

import argparse  # noqa: E402
import json  # noqa: E402
import subprocess  # noqa: E402
import sys  # noqa: E402
import tempfile  # noqa: E402
import threading  # noqa: E402
import time  # noqa: E402
from pathlib import Path  # noqa: E402

import numpy as np  # noqa: E402
import soundfile as sf  # noqa: E402

HERE = Path(__file__).resolve().parent
REPO = HERE.parents[1]
sys.path.insert(0, str(HERE.parent))

from long_audio import DEV_VOICES, demo_items, glue  # noqa: E402
from stream_feed import feed, raw_bytes  # noqa: E402
from wordspot.evaluation.time_labels import read_time_labels  # noqa: E402

RATE = 16000
BYTES_PER_SECOND = 2 * RATE
TICK = os.sysconf("SC_CLK_TCK")


class Child:
    """A ``wordspot listen`` process with its output lines timed as they arrive."""

    def __init__(self, model: str, lexicon: str | None):
        argv = [sys.executable, "-m", "wordspot.cli", "listen", "--debug", "--model", model, "--format", "jsonl",
                "--rate", str(RATE), "-"]
        if lexicon:
            argv[5:5] = ["--lexicon", lexicon]
        env = dict(os.environ, PYTHONPATH=str(REPO))
        self.proc = subprocess.Popen(argv, stdin=subprocess.PIPE, stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                                     env=env, cwd=REPO)
        self.lines: list[tuple[float, dict]] = []
        self.ready = threading.Event()
        self.errors: list[str] = []
        threading.Thread(target=self._out, daemon=True).start()
        threading.Thread(target=self._err, daemon=True).start()
        if not self.ready.wait(120):
            raise SystemExit("the listener did not start: " + "".join(self.errors))

    def _out(self):
        for line in iter(self.proc.stdout.readline, b""):
            self.lines.append((time.monotonic(), json.loads(line)))

    def _err(self):
        for line in iter(self.proc.stderr.readline, b""):
            text = line.decode()
            if "ready" in text:
                self.ready.set()
            elif "error" in text or "Traceback" in text:
                self.errors.append(text)

    def cpu_seconds(self) -> float:
        fields = Path(f"/proc/{self.proc.pid}/stat").read_text().rsplit(")", 1)[1].split()
        return (int(fields[11]) + int(fields[12])) / TICK  # utime, stime (proc(5))

    def status(self) -> dict:
        out = {}
        for line in Path(f"/proc/{self.proc.pid}/status").read_text().splitlines():
            key, _, value = line.partition(":")
            if key in ("VmRSS", "VmHWM", "Threads"):
                out[key] = int(value.split()[0])
        out["files"] = len(os.listdir(f"/proc/{self.proc.pid}/fd"))
        return out

    def close(self) -> int:
        self.proc.stdin.close()
        status = self.proc.wait(300)
        time.sleep(0.2)
        return status


def _long_recordings():
    recs = read_time_labels(REPO / "recordings" / "long.csv")
    waves, labels, at = [], [], 0.0
    for r in recs:
        x, rate = sf.read(r.path, dtype="float32")
        assert rate == RATE
        waves.append(x)
        labels += [(at + c.start, at + c.end, " ".join(c.words)) for c in r.commands]
        at += x.size / RATE
    return np.concatenate(waves), labels


def _glued_dev(minutes: float):
    """Commands of the demo's dev voices 0.6-8 s apart over a -45 dBFS bed with clatter (as tune_detector.py)."""
    rng = np.random.default_rng(20261204)
    items = demo_items("train.csv", DEV_VOICES)
    items = [items[i] for i in rng.permutation(len(items))]
    with tempfile.TemporaryDirectory() as tmp:
        rec = glue(Path(tmp) / "dev.wav", items, rng, minutes=minutes, gap=(0.6, 8.0), noise_dbfs=-45.0, clatter=4.0)
        wave = sf.read(rec.path, dtype="float32")[0]
    return wave, [(c.start, c.end, " ".join(c.words)) for c in rec.commands]


def latency(args, material: str = "long") -> dict:
    wave, labels = _long_recordings() if material == "long" else _glued_dev(args.dev_minutes)
    child = Child(args.model, args.lexicon)
    start = feed(child.proc.stdin, raw_bytes(wave), BYTES_PER_SECOND, close=False)
    time.sleep(2.0)
    child.close()
    delays, right = [], 0
    for a, b, words in labels:
        match = [(t, c) for t, c in child.lines if c["start"] < b and a < c["end"]]
        if match:
            t, c = match[0]
            delays.append(t - (start + b))
            right += c["words"] == words
    d = np.array(delays)
    return {"audio s": round(wave.size / RATE, 1), "labelled": len(labels), "matched": len(d),
            "right words": right, "printed": len(child.lines), "median s": round(float(np.median(d)), 3),
            "p95 s": round(float(np.percentile(d, 95)), 3), "max s": round(float(d.max()), 3),
            "min s": round(float(d.min()), 3)}


def cpu(args) -> dict:
    rng = np.random.default_rng(20261202)
    with tempfile.TemporaryDirectory() as tmp:
        quiet = glue(Path(tmp) / "quiet.wav", [], rng, minutes=1.0, noise_dbfs=-60.0)
        talk = glue(Path(tmp) / "talk.wav", demo_items("train.csv", DEV_VOICES), rng, minutes=1.0, gap=(0.1, 0.4),
                    noise_dbfs=-50.0, lead=0.2)
        parts = {"silence": sf.read(quiet.path, dtype="float32")[0], "talk": sf.read(talk.path, dtype="float32")[0]}
    child = Child(args.model, args.lexicon)
    out = {}
    start = time.monotonic()
    for name, x in parts.items():
        before = child.cpu_seconds()
        start = feed(child.proc.stdin, raw_bytes(x), BYTES_PER_SECOND, close=False, start=start)
        start += x.size / RATE
        time.sleep(max(0.0, start - time.monotonic()))
        time.sleep(0.5)  # the last stretch recognised
        used = child.cpu_seconds() - before
        out[name] = {"audio s": round(x.size / RATE, 1), "CPU s": round(used, 2),
                     "% of one core": round(100 * used / (x.size / RATE), 1)}
        start = time.monotonic()
    out["talk"]["commands printed"] = len(child.lines)
    child.close()
    return out


def latency_dev(args) -> dict:
    return latency(args, "dev")


def memory(args) -> dict:
    wave, _ = _long_recordings()
    loops = int(np.ceil(args.hours * 3600 * RATE / wave.size))
    data = raw_bytes(wave)
    child = Child(args.model, args.lexicon)
    first = child.status()
    samples = []
    done = threading.Event()

    def watch():
        while not done.is_set():
            try:
                samples.append((time.monotonic(), child.status()))
            except OSError:
                return
            time.sleep(1.0)

    watcher = threading.Thread(target=watch)
    watcher.start()
    began, cpu0 = time.monotonic(), child.cpu_seconds()
    for _ in range(loops):
        child.proc.stdin.write(data)
    child.proc.stdin.flush()
    # wait until the child has read everything (its CPU time stops growing)
    last = -1.0
    while (now := child.cpu_seconds()) != last:
        last = now
        time.sleep(2.0)
    end = child.status()
    done.set()
    watcher.join()
    wall, cpu_used = time.monotonic() - began, child.cpu_seconds() - cpu0
    status = child.close()
    rss = [s["VmRSS"] / 1024 for _, s in samples]
    tenth = max(1, len(rss) // 10)
    return {"audio h": round(loops * wave.size / RATE / 3600, 2), "wall s": round(wall, 1),
            "CPU s": round(cpu_used, 1), "exit": status, "commands printed": len(child.lines),
            "RSS MB ready": round(first["VmRSS"] / 1024, 1),
            "RSS MB first tenth (mean)": round(float(np.mean(rss[:tenth])), 1),
            "RSS MB last tenth (mean)": round(float(np.mean(rss[-tenth:])), 1),
            "RSS MB max sampled": round(max(rss), 1),
            "RSS MB at each tenth": [round(float(np.mean(rss[i * len(rss) // 10 : (i + 1) * len(rss) // 10 or 1])), 1)
                                     for i in range(10)], "peak RSS MB (VmHWM)": round(end["VmHWM"] / 1024, 1),
            "threads start/end": f"{first['Threads']}/{end['Threads']}",
            "open files start/end": f"{first['files']}/{end['files']}"}


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--model", default="starter")
    ap.add_argument("--lexicon", default=str(REPO / "lexicon" / "bakery.txt"), help="'' for the model's words")
    parts = ["latency", "latency_dev", "cpu", "memory"]
    ap.add_argument("--parts", nargs="+", default=parts, choices=parts)
    ap.add_argument("--dev-minutes", type=float, default=5.0, help="length of the dev-voice latency run")
    ap.add_argument("--hours", type=float, default=1.0, help="length of the memory run")
    args = ap.parse_args()
    print(f"load average at start: {os.getloadavg()[0]:.2f}", flush=True)
    for part in args.parts:
        began = time.monotonic()
        result = {"latency": latency, "latency_dev": latency_dev, "cpu": cpu, "memory": memory}[part](args)
        print(f"{part} ({time.monotonic() - began:.0f} s): {json.dumps(result)}", flush=True)
    print(f"load average at end: {os.getloadavg()[0]:.2f}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
