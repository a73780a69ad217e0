"""The model file: identical round trip, refusal of damaged, altered or foreign files."""

import json
import os
import zipfile
from dataclasses import replace

import numpy as np
import pytest

from wordspot.errors import ModelFileError
from wordspot.audio.features import FeatureSettings
from wordspot.acoustic.gmm import Mixtures
from wordspot.language.grammar import count_bigrams
from wordspot.language.lexicon import parse_lexicon
from wordspot.model import FORMAT_VERSION, AcousticModel, _checksum, load_model, save_model
from wordspot.acoustic.scorer import StateScorer
from wordspot.acoustic.units import PAUSE_UNIT, default_unit_set
from wordspot.util.logistic import Calibration


@pytest.fixture
def model(rng):
    lexicon = parse_lexicon("oven AH V AH N\nstart S T AA R T\nstop S T AA P\n", source="test")
    units = default_unit_set(sorted(lexicon.units_used()))
    units.trans[0, 0, :2] = [0.55, 0.45]
    settings = FeatureSettings()
    p, m, d = units.n_mixtures, 3, settings.dim
    w = rng.uniform(0.1, 1.0, (p, m))
    w[1, 2] = 0.0
    w /= w.sum(axis=1, keepdims=True)
    mix = Mixtures(w, rng.normal(size=(p, m, d)), rng.uniform(0.5, 2.0, (p, m, d)))
    bigrams = count_bigrams([("oven", "start"), ("stop",)], vocabulary=lexicon.words)
    info = {"created": "2026-12-01T00:00:00+00:00", "loglik_per_pass": [-90.5, -88.25]}
    return AcousticModel(settings, units, mix, lexicon, bigrams, info)


def assert_same(a: AcousticModel, b: AcousticModel):
    assert a.features == b.features
    assert a.units.names == b.units.names
    for name in ("n_states", "state_mixture", "trans", "entry"):
        np.testing.assert_array_equal(getattr(a.units, name), getattr(b.units, name))
    for name in ("weights", "means", "variances"):
        np.testing.assert_array_equal(getattr(a.mixtures, name), getattr(b.mixtures, name))
    assert a.lexicon == b.lexicon
    assert a.bigrams.words == b.bigrams.words
    np.testing.assert_array_equal(a.bigrams.counts, b.bigrams.counts)
    assert a.info == b.info
    assert (a.calibration is None) == (b.calibration is None)
    if a.calibration is not None:
        assert a.calibration.to_dict() == b.calibration.to_dict()
    for key in ("scorer", "own_scorer"):
        assert (getattr(a, key) is None) == (getattr(b, key) is None)
        if getattr(a, key) is not None:
            assert getattr(a, key).same_as(getattr(b, key))


def test_round_trip_is_identical(model, tmp_path):
    path = save_model(model, tmp_path / "bakery.model")
    assert path == tmp_path / "bakery.model"
    assert_same(model, load_model(path))
    # No temporary file left behind; an existing model is replaced in place.
    save_model(model, path)
    assert sorted(p.name for p in tmp_path.iterdir()) == ["bakery.model"]


def test_file_holds_no_pickled_objects(model, tmp_path):
    path = save_model(model, tmp_path / "m.model")
    with np.load(path, allow_pickle=False) as data:
        for name in data.files:
            assert data[name].dtype != object


def test_missing_file(tmp_path):
    with pytest.raises(ModelFileError, match=r"nope\.model: model file not found.*wordspot train"):
        load_model(tmp_path / "nope.model")


@pytest.mark.parametrize("keep", [0.0, 0.3, 0.9, 0.999])
def test_truncated_file_is_refused(model, tmp_path, keep):
    path = save_model(model, tmp_path / "m.model")
    data = path.read_bytes()
    path.write_bytes(data[: int(len(data) * keep)])
    with pytest.raises(ModelFileError, match=r"m\.model: .*(damaged|altered).*wordspot train"):
        load_model(path)


def _rewrite(path, change):
    """Rewrite the archive with ``change(arrays)`` applied, keeping the old header."""
    with np.load(path, allow_pickle=False) as data:
        arrays = {k: np.array(data[k]) for k in data.files}
    change(arrays)
    with open(path, "wb") as f:
        np.savez(f, **arrays)


def test_altered_parameters_are_refused(model, tmp_path):
    path = save_model(model, tmp_path / "m.model")

    def nudge(arrays):
        arrays["mix_means"][0, 0, 0] += 1e-9

    _rewrite(path, nudge)
    with pytest.raises(ModelFileError, match=r"m\.model: checksum mismatch"):
        load_model(path)


def test_altered_bytes_are_refused(model, tmp_path):
    path = save_model(model, tmp_path / "m.model")
    data = bytearray(path.read_bytes())
    data[len(data) // 2] ^= 0xFF
    path.write_bytes(bytes(data))
    with pytest.raises(ModelFileError, match=r"m\.model: "):
        load_model(path)


def _set_header(path, **fields):
    def edit(arrays):
        header = json.loads(arrays["header"].tobytes().decode())
        header.update(fields)
        arrays["header"] = np.frombuffer(json.dumps(header).encode(), dtype=np.uint8)

    _rewrite(path, edit)


def test_wrong_version_is_refused(model, tmp_path):
    path = save_model(model, tmp_path / "m.model")
    _set_header(path, version=FORMAT_VERSION + 1)
    with pytest.raises(ModelFileError, match=rf"format version {FORMAT_VERSION + 1}.*reads versions 1, 2, {FORMAT_VERSION}"
                                             r".*wordspot train"):
        load_model(path)
    _set_header(path, version=True)  # JSON true is not the number 1
    with pytest.raises(ModelFileError, match=r"format version True"):
        load_model(path)


def _old_unit_names(names):
    """Unit names as format versions 1 and 2 wrote them: the pause unit was called ``pau``."""
    return ["pau" if n == PAUSE_UNIT else n for n in names]


def _as_version_1(path):
    """Rewrite a saved model in the layout of format version 1, which called each unit
    state's mixture table ``unit_state_pdf`` and the pause unit ``pau``, with that version's
    checksum over the names."""
    def edit(arrays):
        header = json.loads(arrays.pop("header").tobytes().decode())
        arrays["unit_state_pdf"] = arrays.pop("unit_state_mixture")
        header["version"] = 1
        header["units"] = _old_unit_names(header["units"])
        header["checksum"] = _checksum(arrays, header)
        arrays["header"] = np.frombuffer(json.dumps(header).encode(), dtype=np.uint8)

    _rewrite(path, edit)


def test_version_1_file_still_loads(model, tmp_path):
    assert FORMAT_VERSION == 3
    path = save_model(model, tmp_path / "m.model")
    _as_version_1(path)
    with np.load(path, allow_pickle=False) as data:
        assert "unit_state_pdf" in data.files and "unit_state_mixture" not in data.files
        assert "pau" in json.loads(data["header"].tobytes().decode())["units"]
    assert_same(model, load_model(path))


def _as_version_2(path, names=_old_unit_names):
    """Rewrite a saved model as format version 2 wrote it: the pause unit called ``pau``,
    with that version's checksum over the header as written."""
    def edit(arrays):
        header = json.loads(arrays.pop("header").tobytes().decode())
        header["version"] = 2
        header["units"] = names(header["units"])
        header["checksum"] = _checksum(arrays, header)
        arrays["header"] = np.frombuffer(json.dumps(header).encode(), dtype=np.uint8)

    _rewrite(path, edit)


def test_version_2_file_still_loads_with_the_pause_unit_renamed(model, tmp_path):
    assert PAUSE_UNIT == "quiet"
    path = save_model(model, tmp_path / "m.model")
    with np.load(path, allow_pickle=False) as data:
        header = json.loads(data["header"].tobytes().decode())
        assert header["version"] == 3 and "quiet" in header["units"] and "pau" not in header["units"]
    _as_version_2(path)
    with np.load(path, allow_pickle=False) as data:
        old = json.loads(data["header"].tobytes().decode())["units"]
    assert "pau" in old and PAUSE_UNIT not in old
    back = load_model(path)
    assert back.units.index(PAUSE_UNIT) == old.index("pau") and "pau" not in back.units
    assert_same(model, back)
    # Saved again it is a version-3 file under the new name, loading the same.
    again = save_model(back, tmp_path / "again.model")
    assert_same(model, load_model(again))


def test_version_2_file_is_still_checked(model, tmp_path):
    path = save_model(model, tmp_path / "m.model")
    _as_version_2(path)

    def nudge(arrays):
        arrays["unit_entry"][0, 0] += 1e-9

    _rewrite(path, nudge)
    with pytest.raises(ModelFileError, match=r"m\.model: checksum mismatch"):
        load_model(path)
    # The checksum covers the unit names as written: changing them alone is refused too.
    path = save_model(model, tmp_path / "m.model")
    _as_version_2(path)
    _set_header(path, units=list(model.units.names))
    with pytest.raises(ModelFileError, match=r"m\.model: checksum mismatch"):
        load_model(path)


def test_old_file_whose_phone_took_the_new_name_is_refused(model, tmp_path):
    # A version-2 lexicon could spell a word with a unit called "quiet"; renaming "pau" would
    # give two units one name, which is refused in one line instead of mixing them up.
    path = save_model(model, tmp_path / "m.model")
    _as_version_2(path, names=lambda names: ["quiet" if n == "AH" else "pau" if n == PAUSE_UNIT else n
                                             for n in names])
    with pytest.raises(ModelFileError, match=r"m\.model: unit name\(s\) 'quiet' occur more than once"):
        load_model(path)


def test_version_1_file_is_still_checked(model, tmp_path):
    path = save_model(model, tmp_path / "m.model")
    _as_version_1(path)

    def nudge(arrays):
        arrays["unit_trans"][0, 0, 0] += 1e-9

    _rewrite(path, nudge)
    with pytest.raises(ModelFileError, match=r"m\.model: checksum mismatch"):
        load_model(path)
    # A version-1 header over the new table name is not a file any version wrote.
    path = save_model(model, tmp_path / "m.model")
    _set_header(path, version=1)
    with pytest.raises(ModelFileError, match=r"m\.model: does not hold the expected tables"):
        load_model(path)


def test_foreign_files_are_refused(model, tmp_path):
    path = save_model(model, tmp_path / "m.model")
    _set_header(path, format="something-else")
    with pytest.raises(ModelFileError, match="not a wordspot model"):
        load_model(path)
    other = tmp_path / "other.npz"
    np.savez(other, a=np.zeros(3))
    with pytest.raises(ModelFileError, match="no header"):
        load_model(other)
    text = tmp_path / "notes.model"
    text.write_text("bake at 220 degrees\n")
    with pytest.raises(ModelFileError, match="cannot be read"):
        load_model(text)
    with pytest.raises(ModelFileError, match="is a folder"):
        load_model(tmp_path)


def test_inconsistent_tables_are_refused(model, tmp_path):
    bad = AcousticModel(model.features, model.units, Mixtures(
        model.mixtures.weights, model.mixtures.means[:, :, :13], model.mixtures.variances[:, :, :13]),
        model.lexicon, model.bigrams, model.info)
    path = save_model(bad, tmp_path / "m.model")
    with pytest.raises(ModelFileError, match="13 dimensions but the feature settings give 39"):
        load_model(path)


def test_save_into_missing_folder(model, tmp_path):
    with pytest.raises(ModelFileError, match="does not exist"):
        save_model(model, tmp_path / "no" / "m.model")


def test_failed_write_leaves_old_model(model, tmp_path, monkeypatch):
    path = save_model(model, tmp_path / "m.model")
    before = path.read_bytes()

    def broken_replace(src, dst):
        raise OSError(28, "No space left on device")

    monkeypatch.setattr(os, "replace", broken_replace)
    with pytest.raises(ModelFileError, match="cannot write the model"):
        save_model(model, path)
    assert path.read_bytes() == before
    assert sorted(p.name for p in tmp_path.iterdir()) == ["m.model"]


def _calibrated(model):
    cal = Calibration(("acoustic_per_frame", "free_margin"), np.array([-60.5, -2.25]), np.array([4.0, 1.5]),
                      np.array([0.25, 1.75]), -0.5)
    return AcousticModel(model.features, model.units, model.mixtures, model.lexicon, model.bigrams, model.info, cal)


def test_calibration_round_trip(model, tmp_path):
    calibrated = _calibrated(model)
    path = save_model(calibrated, tmp_path / "m.model")
    back = load_model(path)
    assert_same(calibrated, back)
    rows = np.array([[-61.0, -1.0], [-50.0, -4.0]])
    np.testing.assert_array_equal(back.calibration.predict(rows), calibrated.calibration.predict(rows))
    assert load_model(save_model(model, tmp_path / "plain.model")).calibration is None


def test_calibration_limits_round_trip(model, tmp_path):
    calibrated = _calibrated(model)
    capped = replace(calibrated, calibration=replace(calibrated.calibration, upper=np.array([-58.0, np.inf])))
    back = load_model(save_model(capped, tmp_path / "m.model"))
    assert_same(capped, back)
    rows = np.array([[-61.0, -1.0], [-50.0, -4.0]])
    np.testing.assert_array_equal(back.calibration.predict(rows), capped.calibration.predict(rows))
    assert back.calibration.predict(rows)[1] == capped.calibration.predict(np.array([-58.0, -4.0]))


def _with_header(path, **fields):
    """Change header fields and write a matching checksum (a file the writer could have made)."""
    def edit(arrays):
        header = json.loads(arrays.pop("header").tobytes().decode())
        header.update(fields)
        header["checksum"] = _checksum(arrays, header)
        arrays["header"] = np.frombuffer(json.dumps(header).encode(), dtype=np.uint8)

    _rewrite(path, edit)


def test_file_without_calibration_key_loads_without_calibration(model, tmp_path):
    # Files written before calibrations existed have no such key (same format version all the same).
    path = save_model(_calibrated(model), tmp_path / "m.model")

    def drop(arrays):
        h = json.loads(arrays.pop("header").tobytes().decode())
        assert h["version"] == FORMAT_VERSION and "calibration" in h
        h.pop("calibration")
        h["checksum"] = _checksum(arrays, h)
        arrays["header"] = np.frombuffer(json.dumps(h).encode(), dtype=np.uint8)

    _rewrite(path, drop)
    assert load_model(path).calibration is None


@pytest.mark.parametrize("calibration, match", [
    ({"names": ["a"], "means": [0.0]}, "expected the keys"),
    ({"names": ["a"], "means": [0.0], "scales": [-1.0], "coefficients": [1.0], "intercept": 0.0}, "scales must be > 0"),
    (None, "expected the keys"),
    ({"names": ["a"], "means": [0.0], "scales": [1.0], "coefficients": [1.0], "intercept": 0.0, "upper": [1, 2]},
     "upper must be 1 numbers"),
])
def test_malformed_calibration_is_refused_naming_the_file(model, tmp_path, calibration, match):
    path = save_model(model, tmp_path / "m.model")
    _with_header(path, calibration=calibration)
    with pytest.raises(ModelFileError, match=rf"m\.model: the confidence calibration is malformed \(.*{match}.*wordspot train"):
        load_model(path)


def _with_scorer(model, rng, hidden=(6, 5), context=2):
    p, d = model.units.n_mixtures, model.features.dim
    sizes = [d * (2 * context + 1), *hidden, p]
    prior = rng.uniform(0.5, 2.0, p)
    scorer = StateScorer(context, rng.normal(size=sizes[0]), rng.uniform(0.5, 2.0, sizes[0]),
                         tuple(rng.normal(size=(a, b)) for a, b in zip(sizes[:-1], sizes[1:])),
                         tuple(rng.normal(size=b) for b in sizes[1:]), np.log(prior / prior.sum()))
    return replace(model, scorer=scorer)


def test_scorer_round_trip_is_bit_exact_without_pickle(model, rng, tmp_path):
    net = _with_scorer(model, rng)
    path = save_model(net, tmp_path / "m.model")
    with np.load(path, allow_pickle=False) as data:
        names = set(data.files)
        assert {"scorer_input_mean", "scorer_input_scale", "scorer_log_prior", "scorer_weight_0", "scorer_bias_2"} <= names
        assert all(data[n].dtype == np.float32 for n in names if n.startswith("scorer_"))
    back = load_model(path)
    assert_same(net, back)
    assert back.scorer.same_as(net.scorer)
    frames = rng.normal(size=(12, model.features.dim))
    np.testing.assert_array_equal(back.scorer.log_posteriors(frames), net.scorer.log_posteriors(frames))
    # without a scorer: no scorer tables, no header key, and nothing on loading
    plain = save_model(model, tmp_path / "plain.model")
    with np.load(plain, allow_pickle=False) as data:
        assert not [n for n in data.files if n.startswith("scorer")]
        assert "scorer" not in json.loads(data["header"].tobytes().decode())
    assert load_model(plain).scorer is None


def _with_input_kind(model, rng, kind, context=1):
    from wordspot.audio.scorer_inputs import input_dim

    p, d = model.units.n_mixtures, input_dim(kind, model.features.dim)
    sizes = [d * (2 * context + 1), 4, p]
    prior = rng.uniform(0.5, 2.0, p)
    scorer = StateScorer(context, rng.normal(size=sizes[0]), rng.uniform(0.5, 2.0, sizes[0]),
                         tuple(rng.normal(size=(a, b)) for a, b in zip(sizes[:-1], sizes[1:])),
                         tuple(rng.normal(size=b) for b in sizes[1:]), np.log(prior / prior.sum()), inputs=kind)
    return replace(model, scorer=scorer)


@pytest.mark.parametrize("kind", ["log-mel", "cepstra+log-mel"])
def test_scorer_input_kind_round_trips(model, rng, tmp_path, kind):
    net = _with_input_kind(model, rng, kind)
    path = save_model(net, tmp_path / "m.model")
    with np.load(path, allow_pickle=False) as data:
        assert json.loads(data["header"].tobytes().decode())["scorer"]["inputs"] == kind
    back = load_model(path)
    assert back.scorer.inputs == kind and back.scorer.same_as(net.scorer)
    frames = rng.normal(size=(9, net.scorer.frame_dim))
    np.testing.assert_array_equal(back.scorer.log_posteriors(frames), net.scorer.log_posteriors(frames))


def test_cepstra_scorer_writes_no_input_kind_and_an_absent_one_reads_as_cepstra(model, rng, tmp_path):
    # A scorer reading the model's features is stored as before the kinds existed (no header
    # key), and a file without the key (every one written before) loads as "cepstra".
    path = save_model(_with_scorer(model, rng), tmp_path / "m.model")
    with np.load(path, allow_pickle=False) as data:
        assert set(json.loads(data["header"].tobytes().decode())["scorer"]) == {"context", "layers", "hidden"}
    assert load_model(path).scorer.inputs == "cepstra"


def test_unknown_or_mismatched_input_kind_is_refused(model, rng, tmp_path):
    path = save_model(_with_scorer(model, rng), tmp_path / "m.model")
    _rewrite_checked(path, lambda a, h: h["scorer"].update(inputs="spectrogram"))
    with pytest.raises(ModelFileError, match=r"m\.model: .*state scorer entry this wordspot cannot use.*wordspot train"):
        load_model(path)
    path = save_model(_with_scorer(model, rng), tmp_path / "n.model")  # cepstra-sized tables called log-mel
    _rewrite_checked(path, lambda a, h: h["scorer"].update(inputs="log-mel"))
    with pytest.raises(ModelFileError, match=r"n\.model: the state scorer has .* over frames of 39 values, but .* "
                                             r"its log-mel inputs have 40; .*wordspot train"):
        load_model(path)


def test_scorer_tables_are_under_the_checksum(model, rng, tmp_path):
    path = save_model(_with_scorer(model, rng), tmp_path / "m.model")

    def nudge(arrays):
        arrays["scorer_weight_1"][0, 0] += 1e-3

    _rewrite(path, nudge)
    with pytest.raises(ModelFileError, match=r"m\.model: checksum mismatch"):
        load_model(path)


def _rewrite_checked(path, change):
    """Apply ``change(arrays, header)`` and write a matching checksum (damage the checksum cannot see)."""
    def edit(arrays):
        header = json.loads(arrays.pop("header").tobytes().decode())
        change(arrays, header)
        header["checksum"] = _checksum(arrays, header)
        arrays["header"] = np.frombuffer(json.dumps(header).encode(), dtype=np.uint8)

    _rewrite(path, edit)


@pytest.mark.parametrize("change, match", [
    (lambda a, h: a.update(scorer_weight_1=a["scorer_weight_1"][:-1]), r"state scorer is malformed \(layer 1"),
    (lambda a, h: a.update(scorer_bias_2=a["scorer_bias_2"][:3]), r"state scorer is malformed \(layer 2"),
    (lambda a, h: a.update(scorer_input_scale=a["scorer_input_scale"][:10]), r"state scorer is malformed \(input scale"),
    (lambda a, h: a.update(scorer_log_prior=a["scorer_log_prior"] * np.nan), r"state scorer is malformed \(.*finite"),
    (lambda a, h: a.pop("scorer_bias_0"), "does not hold the expected tables"),
    (lambda a, h: h["scorer"].update(layers=2), "does not hold the expected tables"),
    (lambda a, h: h["scorer"].update(layers="3"), "state scorer entry with '3' layers"),
    (lambda a, h: h.update(scorer=[1, 2]), "state scorer entry with None layers"),
    (lambda a, h: h["scorer"].update(hidden="tanh"), "state scorer entry this wordspot cannot use"),
    (lambda a, h: a.update(scorer_weight_0=a["scorer_weight_0"].astype(np.float64)), "not float32"),
    (lambda a, h: h.pop("scorer"), "does not hold the expected tables"),
])
def test_damaged_scorer_is_refused_naming_the_file(model, rng, tmp_path, change, match):
    path = save_model(_with_scorer(model, rng), tmp_path / "m.model")
    _rewrite_checked(path, change)
    with pytest.raises(ModelFileError, match=rf"m\.model: .*{match}.*wordspot train"):
        load_model(path)


def test_scorer_must_fit_the_model(model, rng, tmp_path):
    net = _with_scorer(model, rng).scorer  # cut to one class less than the model's mixtures
    p = net.n_classes - 1
    prior = np.log(np.full(p, 1.0 / p))
    small = StateScorer(net.context, net.input_mean, net.input_scale, net.weights[:-1] + (net.weights[-1][:, :p],),
                        net.biases[:-1] + (net.biases[-1][:p],), prior)
    path = save_model(replace(model, scorer=small), tmp_path / "m.model")
    with pytest.raises(ModelFileError, match=rf"m\.model: the state scorer has {p} classes .* the model has {p + 1} "
                                             r"mixtures.*wordspot train"):
        load_model(path)


def _with_two_scorers(model, rng):
    first = _with_scorer(model, rng)
    return replace(first, own_scorer=_with_scorer(model, rng, hidden=(4,), context=1).scorer)


def test_a_second_scorer_round_trips_under_its_own_names(model, rng, tmp_path):
    both = _with_two_scorers(model, rng)
    path = save_model(both, tmp_path / "m.model")
    with np.load(path, allow_pickle=False) as data:
        header = json.loads(data["header"].tobytes().decode())
        assert header["own_scorer"] == {"context": 1, "layers": 2, "hidden": "relu"}
        assert {"own_scorer_input_mean", "own_scorer_weight_1", "own_scorer_bias_1"} <= set(data.files)
    back = load_model(path)
    assert_same(both, back)
    assert back.own_scorer.same_as(both.own_scorer) and not back.own_scorer.same_as(back.scorer)
    assert load_model(save_model(model, tmp_path / "plain.model")).own_scorer is None


@pytest.mark.parametrize("change, match", [
    (lambda a, h: a.pop("own_scorer_bias_1"), "does not hold the expected tables"),
    (lambda a, h: h.pop("own_scorer"), "does not hold the expected tables"),
    (lambda a, h: a.update(own_scorer_weight_0=a["own_scorer_weight_0"][:-1]), r"state scorer is malformed"),
    (lambda a, h: h["own_scorer"].update(hidden="tanh"), "state scorer entry this wordspot cannot use"),
])
def test_a_damaged_second_scorer_is_refused_naming_the_file(model, rng, tmp_path, change, match):
    path = save_model(_with_two_scorers(model, rng), tmp_path / "m.model")
    _rewrite_checked(path, change)
    with pytest.raises(ModelFileError, match=rf"m\.model: .*{match}.*wordspot train"):
        load_model(path)


@pytest.mark.parametrize("keep", [0.5, 0.95])
def test_truncated_file_with_scorer_is_refused(model, rng, tmp_path, keep):
    path = save_model(_with_scorer(model, rng), tmp_path / "m.model")
    data = path.read_bytes()
    path.write_bytes(data[: int(len(data) * keep)])
    with pytest.raises(ModelFileError, match=r"m\.model: .*(damaged|altered).*wordspot train"):
        load_model(path)


def _voice(rng, k=4, dim=39):
    from wordspot.audio.voice_warp import VoiceMixture

    w = rng.uniform(0.5, 1.0, k)
    return VoiceMixture(w / w.sum(), rng.normal(size=(k, dim)), rng.uniform(0.5, 2.0, (k, dim)))


def test_voice_mixture_round_trips_without_pickle(model, rng, tmp_path):
    with_voice = replace(model, voice=_voice(rng))
    path = save_model(with_voice, tmp_path / "v.model")
    back = load_model(path)
    assert_same(with_voice, back)
    for name in ("weights", "means", "variances"):
        np.testing.assert_array_equal(getattr(back.voice, name), getattr(with_voice.voice, name))
    with np.load(path, allow_pickle=False) as data:
        assert {"voice_weights", "voice_means", "voice_variances"} <= set(data.files)
        assert all(data[name].dtype != object for name in data.files)
        assert json.loads(data["header"].tobytes().decode())["voice"] == {"components": 4}


def test_model_without_voice_mixture_writes_no_voice_tables(model, tmp_path):
    path = save_model(model, tmp_path / "m.model")
    with np.load(path, allow_pickle=False) as data:
        assert not any(name.startswith("voice") for name in data.files)
        assert "voice" not in json.loads(data["header"].tobytes().decode())
    assert load_model(path).voice is None


def test_shipped_starter_without_voice_mixture_still_loads():
    assert load_model("starter").voice is None


def test_altered_voice_mixture_is_refused(model, rng, tmp_path):
    path = save_model(replace(model, voice=_voice(rng)), tmp_path / "v.model")

    def nudge(arrays):
        arrays["voice_means"] = arrays["voice_means"] + 1e-6

    _rewrite(path, nudge)
    with pytest.raises(ModelFileError, match="checksum"):
        load_model(path)


def test_voice_mixture_of_the_wrong_width_is_refused(model, rng, tmp_path):
    path = save_model(replace(model, voice=_voice(rng, dim=12)), tmp_path / "v.model")
    with pytest.raises(ModelFileError, match="voice mixture has 4 Gaussians over 12 values"):
        load_model(path)
