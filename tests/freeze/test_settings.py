"""Settings files: round trip for every estimator, strict reading with matched messages."""

from __future__ import annotations

import json
import re
from pathlib import Path

import numpy as np
import pytest
from freeze_support import make_state

import specbench as sb
from specbench.estimators import estimator_classes
from specbench.freeze import SETTINGS_SCHEMA, Selection, load_settings, read_settings, save_settings, save_state


def _every_estimator():
    """Defaults of every registered estimator, and one with every field changed from its default."""
    out = []
    for kind, cls in sorted(estimator_classes().items()):
        if cls.__name__.startswith("_") or kind in ("SpectralEstimator", "Estimator") or not cls.params():
            continue
        out.append(cls())
    out += [
        sb.Welch(window=("kaiser", 8.6), segment_length=4096, overlap=0.75, average="median", detrend="linear",
                 scaling="spectrum", sides="twosided", nfft=8192, confidence=0.9, gaps="skip"),
        sb.Welch(window=("general_cosine", (0.42, 0.5, 0.08)), overlap=0.1 + 0.2),
        sb.Periodogram(window="hann", detrend="none", scaling="spectrum", sides="onesided", nfft=65536,
                       confidence=0.99),
        sb.Multitaper(bandwidth=2.5, tapers=4, adaptive=False, segment_length=2048, detrend="linear",
                      scaling="spectrum", sides="twosided", nfft=4096, confidence=0.8),
        sb.Correlogram(max_lag=100, lag_window="bartlett", detrend="none", scaling="spectrum",
                       sides="twosided", nfft=1000, confidence=0.68),
        sb.Autocorrelation(max_lag=0.123456789, normalize=False, unbiased=True, band="bartlett",
                           detrend="linear", confidence=0.999),
        sb.CrossCorrelation(max_lag=2.5, normalize=False, band="bartlett", detrend="none", confidence=0.5),
    ]
    return out


EVERY = _every_estimator()


def test_the_list_covers_every_registered_kind():
    kinds = {e.kind for e in EVERY}
    assert {"Welch", "Periodogram", "Multitaper", "Correlogram", "Autocorrelation", "CrossCorrelation"} <= kinds


@pytest.mark.parametrize("est", EVERY, ids=repr)
def test_round_trip_every_estimator(tmp_path, est):
    path = save_settings(est, tmp_path / "s.json")
    back = load_settings(path)
    assert back == est and type(back) is type(est) and repr(back) == repr(est)
    assert back.to_dict() == est.to_dict()


def test_file_is_human_readable_and_versioned(tmp_path):
    est = sb.Welch(segment_length=4096, overlap=0.75)
    sel = Selection(channel="frame", span=(2.5, 60.0), fs=2048.0)
    path = save_settings(est, tmp_path / "psd.json", sel, correlation=sb.Autocorrelation(max_lag=0.5))
    text = path.read_text()
    assert text.endswith("\n") and text.count("\n") > 20  # indented, one entry a line
    doc = json.loads(text)
    assert doc["specbench_settings"] == SETTINGS_SCHEMA == 2
    assert doc["specbench_version"] == sb.__version__
    assert re.fullmatch(r"\d{4}-\d\d-\d\dT\d\d:\d\d:\d\d[+-]\d\d:\d\d", doc["created"])
    assert list(doc["analyses"]) == ["psd", "acf"]
    assert doc["analyses"]["psd"] == est.to_dict()
    assert doc["analyses"]["psd"]["fields"]["segment_length"] == 4096
    assert doc["analyses"]["acf"]["kind"] == "Autocorrelation"
    assert doc["selection"] == {"fs": 2048.0, "channel": "frame", "span": [2.5, 60.0]}
    s = read_settings(path)
    assert s.estimator == est and s.correlation == sb.Autocorrelation(max_lag=0.5)
    assert s.analyses == {"psd": est, "acf": sb.Autocorrelation(max_lag=0.5)}
    assert s.selection == sel and s.version == sb.__version__ and s.schema == 2 and s.path == path


def test_selection_as_dict_or_none(tmp_path):
    p = save_settings(sb.Periodogram(), tmp_path / "a.json", {"channel": "x", "span": None, "fs": None})
    assert read_settings(p).selection == Selection(channel="x")
    p = save_settings(sb.Periodogram(), tmp_path / "b.json")
    assert json.loads(p.read_text())["selection"] is None and read_settings(p).selection is None


def test_state_round_trip_with_data_origin(tmp_path, signal):
    sig = sb.demo("white-noise", duration=20.0).span(1.0, 19.0)
    state = make_state(sig, sb.Multitaper(segment_length=1024), sb.Autocorrelation(max_lag=0.1),
                       span=(2.0, 10.0), compute=False)
    s = read_settings(save_state(state, tmp_path / "state.json"))
    assert s.estimator == state.estimator and s.correlation == state.correlation_estimator
    assert s.selection == state.selection
    assert s.data == {"kind": "demo", "name": "white-noise", "kwargs": {"duration": 20.0},
                      "steps": [["span", 1.0, 19.0]]}
    # the in-memory signal has no origin: no data entry
    plain = make_state(signal, sb.Welch(), channel="frame", compute=False)
    assert read_settings(save_state(plain, tmp_path / "plain.json")).data is None


def test_overwrites_atomically_and_leaves_no_temporary(tmp_path):
    path = tmp_path / "s.json"
    save_settings(sb.Welch(), path)
    save_settings(sb.Welch(segment_length=64), path)
    assert load_settings(path) == sb.Welch(segment_length=64)
    assert sorted(p.name for p in tmp_path.iterdir()) == ["s.json"]


# --------------------------------------------------------------------------- writing errors


def test_write_errors(tmp_path):
    with pytest.raises(sb.SettingsError, match="stores a specbench estimator such as sb.Welch"):
        save_settings({"kind": "Welch"}, tmp_path / "s.json")
    with pytest.raises(sb.SettingsError, match="correlation must be an Autocorrelation or CrossCorrelation"):
        save_settings(sb.Welch(), tmp_path / "s.json", correlation=sb.Welch())
    with pytest.raises(sb.SettingsError, match="the folder .* does not exist. Create it first"):
        save_settings(sb.Welch(), tmp_path / "missing" / "s.json")
    with pytest.raises(sb.SettingsError, match="is a folder; give a file name"):
        save_settings(sb.Welch(), tmp_path)
    with pytest.raises(sb.SettingsError, match="selection must be None, a Selection or a dict"):
        save_settings(sb.Welch(), tmp_path / "s.json", selection=("x", 1.0))
    with pytest.raises(sb.SettingsError, match=r"selection has unknown entry 'start'"):
        save_settings(sb.Welch(), tmp_path / "s.json", selection={"start": 1.0})
    assert list(tmp_path.iterdir()) == []  # nothing half-written


# --------------------------------------------------------------------------- reading errors


def _good() -> dict:
    return {
        "specbench_settings": 1,
        "specbench_version": "0.1.0",
        "created": "2024-05-06T07:08:09+00:00",
        "estimator": sb.Welch(segment_length=2048).to_dict(),
        "correlation": sb.Autocorrelation().to_dict(),
        "selection": {"fs": None, "channel": "x", "span": [0.0, 10.0]},
    }


def _with(**changes) -> dict:
    doc = _good()
    for key, value in changes.items():
        if value is _DROP:
            doc.pop(key)
        else:
            doc[key] = value
    return doc


_DROP = object()


def _fields(**changes) -> dict:
    d = sb.Welch().to_dict()
    d["fields"].update(changes)
    return d


BAD = [
    ("not-a-dict", [1, 2], r"is not a specbench settings file \(it has no 'specbench_settings' entry\)"),
    ("other-json", {"name": "x"}, r"is not a specbench settings file"),
    ("newer-schema", _with(specbench_settings=3, specbench_version="9.0"),
     r"uses settings schema 3 \(written by specbench 9.0\); this specbench .* reads schema 1 to 2\. "
     r"Upgrade specbench"),
    ("bad-schema", _with(specbench_settings="1"), r"'specbench_settings' must be a schema number"),
    ("bool-schema", _with(specbench_settings=True), r"'specbench_settings' must be a schema number"),
    ("unknown-top", _with(colour="red"), r"unknown entry 'colour'; schema 1 has"),
    ("no-estimator", _with(estimator=_DROP), r"it has no 'estimator' entry"),
    ("unknown-kind", _with(estimator={"kind": "Lomb", "schema": 1, "fields": {}}),
     r"in 'estimator': Unknown estimator kind 'Lomb'. Known kinds: .*Welch"),
    ("unknown-field", _with(estimator=_fields(segment_lenght=512)),
     r"in 'estimator': Welch has no parameter 'segment_lenght'. Its parameters are: window, segment_length"),
    ("wrong-type", _with(estimator=_fields(overlap="half")),
     r"in 'estimator': The 'overlap' parameter of Welch must be a float in the range \[0, 1\). "
     r"Got 'half' instead"),
    ("out-of-range", _with(estimator=_fields(segment_length=2)),
     r"The 'segment_length' parameter of Welch must be an integer in the range \[4, inf\). Got 2 instead"),
    ("bool-for-int", _with(estimator=_fields(segment_length=True)),
     r"The 'segment_length' parameter of Welch must be an integer"),
    ("bad-window", _with(estimator=_fields(window=["kaiser"])), r"The 'window' parameter of Welch must be"),
    ("newer-estimator", _with(estimator={**sb.Welch().to_dict(), "schema": 5}),
     r"in 'estimator': The estimator description has schema 5; .* Upgrade specbench"),
    ("fields-not-dict", _with(estimator={"kind": "Welch", "schema": 1, "fields": [1]}),
     r"The 'fields' of a Welch description must be a mapping"),
    ("estimator-not-dict", _with(estimator="Welch(segment_length=512)"),
     r"An estimator description must be a mapping with 'kind' and 'fields'"),
    ("correlation-kind", _with(correlation=sb.Welch().to_dict()),
     r"'correlation' is a Welch; it must be an Autocorrelation or CrossCorrelation"),
    ("correlation-field", _with(correlation={**sb.Autocorrelation().to_dict(), "fields": {"lag": 3}}),
     r"in 'correlation': Autocorrelation has no parameter 'lag'"),
    ("selection-span", _with(selection={"span": [10.0]}), r"selection.span must be \[start_s, stop_s\]"),
    ("selection-order", _with(selection={"span": [10.0, 2.0]}), r"selection.span must have start_s < stop_s"),
    ("selection-fs", _with(selection={"fs": -5}), r"selection.fs must be a positive sample rate"),
    ("selection-channel", _with(selection={"channel": 3}), r"selection.channel must be a channel name"),
    ("selection-key", _with(selection={"chanel": "x"}), r"selection has unknown entry 'chanel'"),
    ("data-kind", _with(data={"kind": "ftp"}), r"data must be an object with kind 'load' or 'demo'"),
    ("data-steps", _with(data={"kind": "load", "path": "a.csv", "steps": [["resample", 2]]}),
     r"data.steps must be a list of"),
    ("created-type", _with(created=5), r"'created' and 'specbench_version' must be strings"),
]


@pytest.mark.parametrize("name, doc, pattern", BAD, ids=[b[0] for b in BAD])
def test_malformed_files_are_rejected_with_a_clear_message(tmp_path, name, doc, pattern):
    path = tmp_path / f"{name}.json"
    path.write_text(json.dumps(doc))
    with pytest.raises(sb.SettingsError, match=pattern) as info:
        read_settings(path)
    assert str(path) in str(info.value)  # the message names the file
    with pytest.raises(sb.SettingsError):
        load_settings(path)


def test_the_good_document_reads(tmp_path):
    path = tmp_path / "good.json"
    path.write_text(json.dumps(_good()))
    s = read_settings(path)
    assert s.estimator == sb.Welch(segment_length=2048) and s.selection == Selection(channel="x", span=(0.0, 10.0))


def test_missing_fields_take_their_defaults(tmp_path):
    """A file from before a field existed still reads: the field takes its default (documented)."""
    doc = _good()
    del doc["estimator"]["fields"]["gaps"]
    path = tmp_path / "old.json"
    path.write_text(json.dumps(doc))
    assert read_settings(path).estimator == sb.Welch(segment_length=2048)


def test_file_level_errors(tmp_path):
    with pytest.raises(sb.SettingsError, match=r"'.*nope.json': no such file. Check the path"):
        read_settings(tmp_path / "nope.json")
    with pytest.raises(sb.SettingsError, match=r"is a folder, not a file"):
        read_settings(tmp_path)
    bad = tmp_path / "bad.json"
    bad.write_text('{\n  "specbench_settings": 1,\n  "estimator": {"kind": "Welch" "fields": {}}\n}\n')
    with pytest.raises(sb.SettingsError, match=r"is not valid JSON: Expecting ',' delimiter at line 3, column 33"):
        read_settings(bad)
    binary = tmp_path / "bin.json"
    binary.write_bytes(b"\xff\xfe\x00\x01")
    with pytest.raises(sb.SettingsError, match=r"is not a text file"):
        read_settings(binary)
    dup = tmp_path / "dup.json"
    dup.write_text('{"specbench_settings": 1, "specbench_settings": 2}')
    with pytest.raises(sb.SettingsError, match=r"the key 'specbench_settings' appears twice"):
        read_settings(dup)
    nan = tmp_path / "nan.json"
    doc = _good()
    nan.write_text(json.dumps(doc).replace('"confidence": 0.95', '"confidence": NaN'))
    with pytest.raises(sb.SettingsError, match=r"The 'confidence' parameter of Welch must be a float"):
        read_settings(nan)


# --------------------------------------------------------------------------- schema 2: named analyses

V1_FILE = Path(__file__).parent / "data" / "settings_v1.json"


def test_a_committed_schema_1_file_still_reads():
    """tests/freeze/data/settings_v1.json was written by the schema-1 save_settings (specbench 0.1.0)."""
    s = read_settings(V1_FILE)
    assert s.schema == 1 and json.loads(V1_FILE.read_text())["specbench_settings"] == 1
    welch = sb.Welch(segment_length=2048, overlap=0.75, window=("kaiser", 8.6))
    assert s.estimator == welch and s.correlation == sb.Autocorrelation(max_lag=0.25)
    assert s.analyses == {"psd": welch, "acf": sb.Autocorrelation(max_lag=0.25)}
    assert s.options == {} and s.fingerprint is None
    assert s.selection == Selection(channel="frame", span=(2.0, 20.0))
    assert s.data == {"kind": "load", "path": "stand_run.csv", "kwargs": {"time_column": "time"}, "steps": []}
    assert load_settings(V1_FILE) == welch


def test_named_analyses_with_options_round_trip(tmp_path):
    analyses = {"psd": sb.Multitaper(bandwidth=3.0), "acf": sb.Autocorrelation(max_lag=0.1),
                "lags": sb.CrossCorrelation(max_lag=0.2)}
    path = save_settings(analyses, tmp_path / "many.json", options={"lags": {"pair": ["a", "b"]}})
    doc = json.loads(path.read_text())
    assert list(doc["analyses"]) == ["psd", "acf", "lags"]
    assert doc["analyses"]["lags"]["options"] == {"pair": ["a", "b"]}
    assert "options" not in doc["analyses"]["psd"]
    s = read_settings(path)
    assert s.analyses == analyses and list(s.analyses) == ["psd", "acf", "lags"]
    assert s.options == {"psd": {}, "acf": {}, "lags": {"pair": ["a", "b"]}}
    assert s.estimator == analyses["psd"] and s.correlation == analyses["acf"]
    # the same through the keyword form
    again = save_settings(sb.Multitaper(bandwidth=3.0), tmp_path / "kw.json",
                          correlation=sb.Autocorrelation(max_lag=0.1),
                          analyses={"lags": sb.CrossCorrelation(max_lag=0.2)})
    assert read_settings(again).analyses == analyses


def test_fingerprint_is_recorded_and_read(tmp_path):
    sig = sb.Signal(np.random.default_rng(5).standard_normal((2, 4000)), fs=200.0, channels=["a", "b"])
    path = save_settings(sb.Welch(), tmp_path / "f.json", fingerprint=sig.channel("b").span(1.0, 11.0))
    s = read_settings(path)
    assert s.fingerprint == sb.fingerprint(sig.channel("b").span(1.0, 11.0))
    assert s.fingerprint.samples == 2000 and s.fingerprint.channels == ("b",) and s.fingerprint.span == (1.0, 11.0)


def test_named_analysis_write_errors(tmp_path):
    with pytest.raises(sb.SettingsError, match=r"the analysis name 'PSD 1' is not a short lower-case identifier"):
        save_settings({"PSD 1": sb.Welch()}, tmp_path / "s.json")
    with pytest.raises(sb.SettingsError, match=r"the analysis 'acf' is a str"):
        save_settings({"psd": sb.Welch(), "acf": "Autocorrelation"}, tmp_path / "s.json")
    with pytest.raises(sb.SettingsError, match=r"two analyses are named 'acf'"):
        save_settings(sb.Welch(), tmp_path / "s.json", correlation=sb.Autocorrelation(),
                      analyses={"acf": sb.Autocorrelation()})
    with pytest.raises(sb.SettingsError, match=r"options are given for the analysis 'noise', which is not stored"):
        save_settings(sb.Welch(), tmp_path / "s.json", options={"noise": {"terms": ["white"]}})
    with pytest.raises(sb.SettingsError, match=r"at least one analysis"):
        save_settings({}, tmp_path / "s.json")
    assert list(tmp_path.iterdir()) == []


def _good2() -> dict:
    return {
        "specbench_settings": 2,
        "specbench_version": "0.1.0",
        "created": "2024-05-06T07:08:09+00:00",
        "analyses": {"psd": sb.Welch(segment_length=2048).to_dict(), "acf": sb.Autocorrelation().to_dict()},
        "selection": None,
    }


def _with2(**changes) -> dict:
    doc = _good2()
    doc.update(changes)
    return doc


BAD2 = [
    ("old-keys", _with2(estimator=sb.Welch().to_dict()), r"unknown entry 'estimator'; schema 2 has .*'analyses'"),
    ("no-analyses", {k: v for k, v in _good2().items() if k != "analyses"}, r"it has no 'analyses' entry"),
    ("empty-analyses", _with2(analyses={}), r"'analyses' must be a non-empty object of named analyses"),
    ("bad-name", _with2(analyses={"Psd": sb.Welch().to_dict()}), r"the analysis name 'Psd' is not a short"),
    ("entry-key", _with2(analyses={"psd": {**sb.Welch().to_dict(), "colour": 1}}),
     r"'analyses.psd' has unknown entry 'colour'; an analysis has 'kind', 'schema', 'fields', 'options'"),
    ("options-type", _with2(analyses={"psd": {**sb.Welch().to_dict(), "options": [1]}}),
     r"'analyses.psd'.options must be an object"),
    ("entry-field", _with2(analyses={"psd": _fields(segment_lenght=512)}),
     r"in 'analyses.psd': Welch has no parameter 'segment_lenght'"),
    ("entry-kind", _with2(analyses={"noise": {"kind": "Lomb", "schema": 1, "fields": {}}}),
     r"in 'analyses.noise': Unknown estimator kind 'Lomb'"),
    ("fingerprint", _with2(fingerprint={"samples": 10}), r"fingerprint must be an object with exactly samples"),
    ("fingerprint-value", _with2(fingerprint={"samples": -1, "fs": 1.0, "channels": ["x"], "span": [0, 1],
                                              "content": "blake2b-128:00"}),
     r"fingerprint entries must be samples \(positive integer\)"),
]


@pytest.mark.parametrize("name, doc, pattern", BAD2, ids=[b[0] for b in BAD2])
def test_malformed_schema_2_files_are_rejected(tmp_path, name, doc, pattern):
    path = tmp_path / f"{name}.json"
    path.write_text(json.dumps(doc))
    with pytest.raises(sb.SettingsError, match=pattern) as info:
        read_settings(path)
    assert str(path) in str(info.value)


def test_the_good_schema_2_document_reads(tmp_path):
    path = tmp_path / "good2.json"
    path.write_text(json.dumps(_good2()))
    s = read_settings(path)
    assert s.schema == 2 and s.estimator == sb.Welch(segment_length=2048) and s.correlation == sb.Autocorrelation()
