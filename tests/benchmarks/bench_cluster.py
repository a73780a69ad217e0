"""Training on a Dask cluster: throughput with 1 and 2 local workers, and what it costs.

Not a test (pytest does not collect it). For each worker count it starts a
``dask.distributed.LocalCluster`` (worker processes of one thread), trains the default
recipe against it from a separate client process (``wordspot.train`` with
``TrainingConfig(cluster=...)``, as ``wordspot train --cluster`` does), and reads the
scheduler's task stream to see when the workers computed. A serial run (``jobs=1``, no
Dask) is measured the same way for reference.

Figures per run:

- wall time of the whole training, of feature extraction (audio to frames, speed and noisy
  copies) and of the passes;
- pass throughput: frames a second (frames x passes / pass wall time);
- outside the workers: the share of the passes' worker time (workers x pass wall time)
  in which no pass task ran: the client's update between passes, sending tasks and
  taking results, and workers idle at the end of a pass; ``between passes`` is the
  part when no worker computed at all;
- the client's peak memory: ``ru_maxrss`` of the client process (it counts the pages of
  the memory-mapped frames files it read, which the kernel can drop) and the peak of
  ``tracemalloc`` (memory the client allocated);
- scaling efficiency: (pass time with 1 worker / pass time with 2) / 2.

Usage::

    python tests/benchmarks/bench_cluster.py                  # demo train set, 1 and 2 workers, serial
    python tests/benchmarks/bench_cluster.py --manifest recordings/starter/train.csv
    python tests/benchmarks/bench_cluster.py --passes 2       # shorter: 2 passes a stage (first: 4)
"""

from __future__ import annotations

import os

for _var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

import argparse  # noqa: E402
import json  # noqa: E402
import subprocess  # noqa: E402
import sys  # noqa: E402
import time  # noqa: E402
from pathlib import Path  # noqa: E402

REPO = Path(__file__).resolve().parents[2]


def _config(args, cluster=None):
    from wordspot.training.trainer import TrainingConfig

    extra = {} if args.passes is None else {"first_passes": args.passes + 2, "passes_per_split": args.passes}
    return TrainingConfig(cluster=cluster, jobs=1, **extra)


def run_client(args) -> None:
    """One training (in its own process, so that its memory is the client's alone); prints JSON."""
    import resource
    import tracemalloc
    import warnings

    from wordspot.corpus import read_manifest
    from wordspot.language.lexicon import read_lexicon
    from wordspot.training.trainer import train

    tracemalloc.start()
    utts, lexicon = read_manifest(args.manifest), read_lexicon(args.lexicon)
    stamps = []
    start = time.time()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        _model, summary = train(utts, lexicon, config=_config(args, args.client or None),
                                report=lambda line: stamps.append(time.time()))
    end = time.time()
    print(json.dumps({
        "start": start, "end": end, "pass_ends": stamps, "frames": summary.n_frames,
        "utterances": summary.used, "passes": len(summary.passes),
        "maxrss_mb": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024,
        "traced_peak_mb": tracemalloc.get_traced_memory()[1] / 2**20,
    }))


def client_process(args, address: str) -> dict:
    cmd = [sys.executable, __file__, "--client", address, "--manifest", args.manifest, "--lexicon", args.lexicon]
    if args.passes is not None:
        cmd += ["--passes", str(args.passes)]
    out = subprocess.run(cmd, capture_output=True, text=True)
    if out.returncode != 0:
        sys.exit(f"client run failed:\n{out.stderr[-3000:]}")
    return json.loads(out.stdout.strip().splitlines()[-1])


def pass_windows(stream) -> list[tuple[float, float, float]]:
    """(first start, last stop, compute seconds) of each pass, from the task stream."""
    by_pass: dict[str, list] = {}
    for rec in stream:
        key = str(rec["key"])
        if "chunk_pass" not in key:
            continue
        token = key.split("-")[2]
        for ss in rec["startstops"]:
            if ss["action"] == "compute":
                by_pass.setdefault(token, []).append((ss["start"], ss["stop"]))
    windows = []
    for spans in by_pass.values():
        windows.append((min(a for a, _ in spans), max(b for _, b in spans), sum(b - a for a, b in spans)))
    return sorted(windows)


def cluster_run(args, n_workers: int) -> dict:
    import distributed

    with distributed.LocalCluster(n_workers=n_workers, threads_per_worker=1, processes=True,
                                  dashboard_address=":0", silence_logs=40) as cluster, \
            distributed.Client(cluster) as client:
        client.get_task_stream()  # installs the scheduler's task stream recorder
        res = client_process(args, cluster.scheduler_address)
        stream = client.get_task_stream(start=res["start"] - 1)
    windows = pass_windows(stream)
    first, last = windows[0][0], res["pass_ends"][-1]
    compute = sum(w[2] for w in windows)
    gaps = sum(b[0] - a[1] for a, b in zip(windows[:-1], windows[1:]))
    res.update(workers=n_workers, features=first - res["start"], pass_wall=last - first,
               outside=1 - compute / (n_workers * (last - first)), between=gaps / (last - first),
               compute=compute)
    return res


def serial_run(args) -> dict:
    res = client_process(args, "")
    ends = res["pass_ends"]
    per_pass = (ends[-1] - ends[0]) / max(len(ends) - 1, 1)
    first = ends[0] - per_pass  # pass 1 started about one pass before it ended
    res.update(workers=0, features=first - res["start"], pass_wall=ends[-1] - first,
               outside=float("nan"), between=float("nan"))
    return res


def table(runs: list[dict]) -> str:
    lines = ["| run | total s | features s | passes s | frames/s in passes | outside workers | "
             "between passes | client peak RSS MB | client peak traced MB |",
             "| --- | ---: | ---: | ---: | ---: | ---: | ---: | ---: | ---: |"]
    for r in runs:
        name = "serial (jobs 1, no Dask)" if r["workers"] == 0 else f"cluster, {r['workers']} worker(s)"
        rate = r["frames"] * r["passes"] / r["pass_wall"]
        outside = "-" if r["workers"] == 0 else f"{100 * r['outside']:.1f}%"
        between = "-" if r["workers"] == 0 else f"{100 * r['between']:.1f}%"
        lines.append(f"| {name} | {r['end'] - r['start']:.1f} | {r['features']:.1f} | {r['pass_wall']:.1f} | "
                     f"{rate:,.0f} | {outside} | {between} | {r['maxrss_mb']:.0f} | {r['traced_peak_mb']:.1f} |")
    return "\n".join(lines)


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--manifest", default=str(REPO / "recordings" / "train.csv"))
    parser.add_argument("--lexicon", default=str(REPO / "lexicon" / "bakery.txt"))
    parser.add_argument("--workers", type=int, nargs="+", default=[1, 2])
    parser.add_argument("--passes", type=int, default=None, help="passes after each mixture growth")
    parser.add_argument("--no-serial", action="store_true", help="skip the serial reference run")
    parser.add_argument("--client", default=None, help=argparse.SUPPRESS)  # internal: one client run
    args = parser.parse_args()
    if args.client is not None:
        run_client(args)
        return 0
    if not Path(args.manifest).exists():
        print(f"{args.manifest} not found: generate the demo recordings first", file=sys.stderr)
        return 1
    runs = [cluster_run(args, n) for n in args.workers]
    if not args.no_serial:
        runs.append(serial_run(args))
    r0 = runs[0]
    print(f"{r0['utterances']} recordings, {r0['frames']:,} frames, {r0['passes']} passes; "
          f"load average {os.getloadavg()[0]:.1f} at the end")
    print(table(runs))
    one = [r for r in runs if r["workers"] == 1]
    two = [r for r in runs if r["workers"] == 2]
    if one and two:
        print(f"scaling efficiency 1 -> 2 workers: passes {one[0]['pass_wall'] / two[0]['pass_wall'] / 2:.2f}, "
              f"whole training {(one[0]['end'] - one[0]['start']) / (two[0]['end'] - two[0]['start']) / 2:.2f}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
