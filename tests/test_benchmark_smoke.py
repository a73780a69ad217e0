"""Smoke test of the benchmark baselines (tests/benchmarks/baselines.py) on a tiny made-up problem.

Two well-separated "words", each a sequence of Gaussian frames around its own two means
(first half, second half); both recognisers must tell them apart. Not the benchmark itself.
"""

import re
import sys
from pathlib import Path

import numpy as np
import pytest

sys.path.insert(0, str(Path(__file__).resolve().parent / "benchmarks"))
from baselines import TemplateDTW, WholeWordHMM, dtw_costs, frame_distances, uniform_segments  # noqa: E402


def _word(rng, means, length):
    half = length // 2
    a = rng.normal(means[0], 0.3, size=(half, 4))
    b = rng.normal(means[1], 0.3, size=(length - half, 4))
    return np.concatenate([a, b])


@pytest.fixture
def problem(rng):
    means = {"up": (np.full(4, -2.0), np.full(4, 2.0)), "down": (np.full(4, 2.0), np.full(4, -2.0))}
    train = {w: [_word(rng, m, int(rng.integers(18, 30))) for _ in range(4)] for w, m in means.items()}
    test = [(w, _word(rng, m, int(rng.integers(15, 35)))) for w, m in means.items() for _ in range(3)]
    return train, test


def test_uniform_segments_cover_all_parts():
    seg = uniform_segments(10, 3)
    assert seg[0] == 0 and seg[-1] == 2 and np.all(np.diff(seg) >= 0)
    assert set(seg.tolist()) == {0, 1, 2}


def test_frame_distances_match_direct(rng):
    q, t = rng.normal(size=(5, 3)), rng.normal(size=(7, 3))
    direct = np.sqrt(((t[:, None, :] - q[None, :, :]) ** 2).sum(-1))
    np.testing.assert_allclose(frame_distances(q, t), direct, rtol=1e-9, atol=1e-9)


@pytest.mark.parametrize("n_mix", [1, 2])
def test_whole_word_hmm_separates_words(problem, n_mix):
    train, test = problem
    rec = WholeWordHMM(n_states=2, n_mix=n_mix, n_iter=5).fit(train)
    assert [rec.predict(x) for _, x in test] == [w for w, _ in test]


@pytest.mark.parametrize("per_word,band", [(None, None), (2, 0.5)])
def test_template_dtw_separates_words(problem, per_word, band):
    train, test = problem
    rec = TemplateDTW(per_word=per_word, band=band).fit(train)
    assert len(rec.templates_) == (8 if per_word is None else 4)
    assert [rec.predict(x) for _, x in test] == [w for w, _ in test]


@pytest.mark.parametrize("band", [None, 0.0, 0.1, 0.25, 0.5, 1.0])
def test_compiled_dtw_equals_librosa(rng, band):
    # Reference: librosa.sequence.dtw (default steps and weights; band via its
    # fill_off_diagonal), called once per template; the compiled copy must give the same
    # doubles, for templates shorter, as long as and longer than the query.
    query = rng.normal(size=(23, 5))
    lengths = [1, 2, 7, 22, 23, 24, 40, 61]
    templates = [rng.normal(size=(n, 5)) for n in lengths]
    stack = np.concatenate(templates)
    edges = np.cumsum([0] + lengths)
    want = dtw_costs(query, stack, edges, band, engine="librosa")
    got = dtw_costs(query, stack, edges, band, engine="compiled")
    np.testing.assert_array_equal(got, want)


def test_template_dtw_engines_agree(problem):
    # Same costs (previous test), hence the same medoids and the same scores.
    train, test = problem
    a = TemplateDTW(per_word=2, band=0.25, engine="librosa").fit(train)
    b = TemplateDTW(per_word=2, band=0.25, engine="compiled").fit(train)
    assert [len(t) for t in a.templates_] == [len(t) for t in b.templates_]
    for _, x in test:
        np.testing.assert_array_equal(a.scores(x), b.scores(x))


def test_profile_rows_name_files_without_this_machines_paths(tmp_path):
    from compare_measure import REPO, profile_top, source_name

    # common practice, no source: a results file names files relative to the repository
    assert source_name(str(REPO / "wordspot" / "decoding" / "kernels.py")) == "wordspot/decoding/kernels.py"
    checkout = tmp_path / "checkout"
    assert source_name(str(checkout / "wordspot" / "api.py"), repo=checkout) == "wordspot/api.py"
    assert source_name("/opt/venv/lib/python3.11/site-packages/numpy/fft/_pocketfft.py") == "numpy/fft/_pocketfft.py"
    assert source_name("/usr/lib/python3.11/json/decoder.py") == "json/decoder.py"
    assert source_name("/somewhere/else/helper.py") == "helper.py"
    assert source_name("~") == "~"
    from wordspot.audio.features import FeatureSettings, compute_features

    rows = profile_top(lambda: compute_features(np.zeros(16000, dtype=np.float32), FeatureSettings()), top=50)
    assert rows and not any(name.startswith("/") for name, *_ in rows)
    assert any(name.startswith("wordspot/audio/features.py:") for name, *_ in rows)


def test_results_file_holds_no_absolute_paths():
    text = (Path(__file__).resolve().parent / "benchmarks" / "results.md").read_text(encoding="utf-8")
    assert not re.search(r"`/(?:work|home|root|tmp|Users|opt|usr)/", text)
