"""Training on a Dask cluster: the same model as a serial run, lost workers, clear errors.

The clusters are real: ``dask.distributed.LocalCluster`` with worker processes, started
by the tests themselves.
"""

import os
import pickle
import re
import subprocess
import sys
import warnings

import numpy as np
import pytest

from tone_corpus import load_corpus, make_corpus
from wordspot.cli import main
from wordspot.corpus import read_manifest
from wordspot.errors import TrainingError
from wordspot.language.lexicon import read_lexicon
from wordspot.training.cluster import DaskExecutor, ProcessExecutor, _walk
from wordspot.training.trainer import TrainingConfig, train

distributed = pytest.importorskip("distributed")

# Two mixture stages and the speed and noise copies: every kind of task runs on the workers.
ARGS = ["--from-scratch", "--mixtures", "2", "--passes", "1", "--seed", "3", "--speed", "0.9", "1.0", "--noise-copies", "1"]
CONFIG = dict(mixtures=(1, 2), first_passes=3, passes_per_split=1, seed=3, speed_factors=(0.9, 1.0),
              noise_copies=1)


def local_cluster(scheduler_file=None, **config):
    """Two worker processes of one thread each (``config``: Dask settings for its scheduler)."""
    import dask

    with dask.config.set(config):
        return distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                                        dashboard_address=":0", silence_logs=40,
                                        scheduler_kwargs={"scheduler_file": scheduler_file})


@pytest.fixture(scope="module")
def cluster(tmp_path_factory):
    # The scheduler writes its address to this file, as `dask scheduler --scheduler-file` does.
    with local_cluster(str(tmp_path_factory.mktemp("scheduler") / "scheduler.json")) as c:
        yield c


@pytest.fixture(scope="module")
def corpus(tmp_path_factory):
    rng = np.random.default_rng(11)
    # 40 recordings: more than two chunks of CHUNK_SIZE (16) in every pass.
    return make_corpus(tmp_path_factory.mktemp("tones"), rng, n_utterances=40)


def saved_arrays(path):
    """Every array of a model file, and its header without what names the run (the time it
    was made and took, and the checksum that covers them)."""
    with np.load(path, allow_pickle=False) as f:
        arrays = {k: f[k] for k in f.files}
    import json

    header = json.loads(arrays.pop("header").astype(np.uint8).tobytes().decode("utf-8"))
    for key in ("created", "seconds"):
        header["info"].pop(key, None)
    header.pop("checksum")
    return arrays, header


def assert_same_model_files(a, b):
    arrays_a, header_a = saved_arrays(a)
    arrays_b, header_b = saved_arrays(b)
    assert sorted(arrays_a) == sorted(arrays_b)
    for name in arrays_a:
        np.testing.assert_array_equal(arrays_a[name], arrays_b[name], err_msg=name)
    assert header_a == header_b


def train_cli(manifest, lexicon, out, *extra):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        status = main(["--quiet", "train", str(manifest), "--lexicon", str(lexicon), "--out", str(out),
                       *ARGS, *extra])
    assert status == 0
    return out


@pytest.fixture(scope="module")
def serial_model(corpus, tmp_path_factory):
    manifest, lexicon = corpus
    return train_cli(manifest, lexicon, tmp_path_factory.mktemp("serial") / "serial.model")


@pytest.fixture(scope="module")
def plain_serial_model(corpus, tmp_path_factory):
    """As ``serial_model`` without the state scorer: the tests of the scheduler file and of a
    worker dying check the mixture passes, and the scorer's fit is three quarters of the
    time (the bit-identical test above keeps it)."""
    manifest, lexicon = corpus
    return train_cli(manifest, lexicon, tmp_path_factory.mktemp("plain") / "plain.model", "--no-scorer")


def test_trainer_does_not_import_dask():
    code = ("import sys, wordspot.training.trainer, wordspot.cli.train_cmd; "
            "print(sorted(m for m in sys.modules if m.split('.')[0] in ('dask', 'distributed')))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "[]"


@pytest.mark.slow
def test_cluster_model_is_bit_identical_to_serial(cluster, corpus, serial_model, tmp_path):
    manifest, lexicon = corpus
    out = train_cli(manifest, lexicon, tmp_path / "cluster.model", "--cluster", cluster.scheduler_address)
    assert_same_model_files(serial_model, out)
    # The shared folder of frames files is gone afterwards.
    assert not any(n.startswith("wordspot-cluster-") for n in os.listdir(os.path.dirname(out)))


@pytest.mark.slow
def test_scheduler_file_and_shared_dir(cluster, corpus, plain_serial_model, tmp_path):
    scheduler_file = cluster.scheduler.scheduler_file
    shared = tmp_path / "shared"
    shared.mkdir()
    manifest, lexicon = corpus
    out = train_cli(manifest, lexicon, tmp_path / "cluster.model", "--cluster", str(scheduler_file),
                    "--shared-dir", str(shared), "--no-scorer")
    assert_same_model_files(plain_serial_model, out)
    assert os.listdir(shared) == []  # its frames folder removed at the end


class _KillOnce(distributed.WorkerPlugin):
    """Ends the worker process that starts pass chunk number ``nth`` (counted on each
    worker); ``marker`` is created first, so only one worker in the cluster dies."""

    def __init__(self, marker, nth=2, every_time=False):
        self.marker, self.nth, self.every_time = str(marker), nth, every_time
        self.seen = 0

    def transition(self, key, start, finish, **kwargs):
        if finish != "executing" or "chunk_pass" not in str(key):
            return
        self.seen += 1
        if self.seen < self.nth:
            return
        if not self.every_time:
            try:
                os.close(os.open(self.marker, os.O_CREAT | os.O_EXCL))
            except FileExistsError:
                return
        os._exit(1)  # the worker process dies in the middle of its task


@pytest.mark.slow
def test_worker_killed_mid_pass_gives_the_same_model(corpus, plain_serial_model, tmp_path):
    marker = tmp_path / "killed"
    with local_cluster() as c, distributed.Client(c) as client:
        client.register_plugin(_KillOnce(marker, nth=3), name="kill-once")
        manifest, lexicon = corpus
        out = train_cli(manifest, lexicon, tmp_path / "cluster.model", "--cluster", c.scheduler_address,
                        "--no-scorer")
    assert marker.exists()  # a worker did die while it ran a pass chunk
    # Dask ran that worker's chunks again elsewhere; each counted exactly once.
    assert_same_model_files(plain_serial_model, out)


@pytest.mark.slow
def test_chunk_given_up_is_a_clear_error(corpus, tmp_path):
    utts, lex = read_manifest(corpus[0]), read_lexicon(corpus[1])
    # No retries allowed: the first worker death gives the chunk up.
    with local_cluster(**{"distributed.scheduler.allowed-failures": 0}) as c, distributed.Client(c) as client:
        client.register_plugin(_KillOnce(tmp_path / "unused", nth=1, every_time=True), name="kill-always")
        config = TrainingConfig(mixtures=(1,), first_passes=1, speed_factors=(1.0,), noise_copies=0, background_share=0,
                                cluster=c.scheduler_address)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            with pytest.raises(TrainingError, match=r"pass 1/1 \(1 mix\): part \d+ of 3 was given up after the workers"):
                train(utts, lex, config=config)


def test_unreachable_scheduler_is_one_line(corpus, capsys):
    import dask

    manifest, lexicon = corpus
    with dask.config.set({"distributed.comm.timeouts.connect": "1s"}):
        status = main(["train", str(manifest), "--lexicon", str(lexicon), "--out", "x.model",
                       "--from-scratch", "--cluster", "tcp://127.0.0.1:9", "--no-calibration"])
    err = capsys.readouterr().err
    assert status == 2
    assert err.startswith("wordspot: error: could not reach the Dask scheduler at tcp://127.0.0.1:9")
    assert "dask scheduler" in err and err.count("\n") == 1


def test_scheduler_without_workers_is_one_line():
    import dask

    with dask.config.set({"distributed.comm.timeouts.connect": "1s"}):
        with distributed.LocalCluster(n_workers=0, processes=False, dashboard_address=":0") as empty:
            address = empty.scheduler_address
            with pytest.raises(TrainingError, match=re.escape(f"has no workers; start some with `dask worker {address}`")):
                DaskExecutor(address)


def test_missing_dask_names_the_extra(corpus, monkeypatch):
    monkeypatch.setitem(sys.modules, "distributed", None)  # as if it were not installed
    with pytest.raises(TrainingError, match=r'pip install "wordspot\[cluster\]"'):
        train(read_manifest(corpus[0]), read_lexicon(corpus[1]), config=TrainingConfig(cluster="tcp://127.0.0.1:9"))


def test_workers_must_see_the_recordings(cluster, tmp_path):
    with pytest.raises(TrainingError, match=r"cannot see the recording .*nowhere\.wav.*2 problem\(s\) on 2 worker"):
        DaskExecutor(cluster.scheduler_address, check_paths=[tmp_path / "nowhere.wav"])


def test_shared_dir_must_exist(cluster, tmp_path):
    with pytest.raises(TrainingError, match=r"--shared-dir .*missing: cannot create a folder there"):
        DaskExecutor(cluster.scheduler_address, tmp_path / "missing")


def test_config_checks_cluster_options():
    with pytest.raises(TrainingError, match=r"cluster \(--cluster\) must be a Dask scheduler address"):
        TrainingConfig(cluster=" ")
    with pytest.raises(TrainingError, match=r"shared_dir \(--shared-dir\) only applies with cluster"):
        TrainingConfig(shared_dir="/tmp")


def test_tasks_carry_file_rows_not_frames(tmp_path, rng):
    """What a pass sends per chunk: file names and row numbers, a few hundred bytes."""
    frames = [rng.normal(size=(n, 39)).astype(np.float32) for n in (300, 120, 451)]
    with ProcessExecutor(2) as ex:
        kept = ex.keep_on_disk(frames)
        for a, b in zip(frames, kept):
            np.testing.assert_array_equal(a, b)
            assert isinstance(b, np.memmap)
        # A second call finds them in their file and writes nothing new.
        again = ex.keep_on_disk(kept)
        assert all(np.shares_memory(a, b) for a, b in zip(kept, again))
        task = [(f, "graph") for f in kept]
        sent = _walk(task, ex._files.locate)
        assert len(pickle.dumps(sent)) < 1000 < sum(f.nbytes for f in frames)
        assert [(r.start, r.stop) for r, _ in sent] == [(0, 300), (300, 420), (420, 871)]


def test_prepare_items_on_cluster_equals_local(cluster, tmp_path, rng):
    """Features computed by the workers and kept on disk equal those computed here."""
    from wordspot.audio.augment import NoiseSettings
    from wordspot.audio.features import FeatureSettings
    from wordspot.training.data import prepare_items

    utts, lex, units = load_corpus(tmp_path / "c", rng, n_utterances=20)
    kw = dict(speeds=(1.0, 1.1), noise=NoiseSettings(copies=1), seed=5)
    here, _ = prepare_items(utts, lex, units, FeatureSettings(), **kw)
    with DaskExecutor(cluster.scheduler_address) as ex:
        there, _ = prepare_items(utts, lex, units, FeatureSettings(), executor=ex, **kw)
        assert len(here) == len(there) == 60
        for a, b in zip(here, there):
            assert a.path == b.path and a.words == b.words
            assert isinstance(b.frames.base, np.memmap) or isinstance(b.frames, np.memmap)
            np.testing.assert_array_equal(a.frames, b.frames)
