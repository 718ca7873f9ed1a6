"""Data fingerprints: what differs is named; the hash streams in blocks and matches a one-shot hash."""

from __future__ import annotations

import hashlib
import warnings

import numpy as np
import pytest

import specbench as sb
from specbench.freeze import _fingerprint


def _sig(n=5000, fs=250.0, seed=3, channels=("a", "b")):
    return sb.Signal(np.random.default_rng(seed).standard_normal((len(channels), n)), fs=fs, channels=list(channels))


def test_the_block_hash_is_the_one_shot_hash_of_the_same_bytes(monkeypatch):
    """Streaming in blocks must not change the digest (BLAKE2b, RFC 7693, is a streaming hash)."""
    sig = _sig(n=10_001)
    monkeypatch.setattr(_fingerprint, "BLOCK_SAMPLES", 97)
    small_blocks = sb.fingerprint(sig).content
    monkeypatch.setattr(_fingerprint, "BLOCK_SAMPLES", 1 << 20)
    assert sb.fingerprint(sig).content == small_blocks
    h = hashlib.blake2b(digest_size=16)
    h.update(f"f8|{sig.data.shape}|".encode())
    for row in sig.data:  # channel after channel, each channel's samples in order
        h.update(row.tobytes())
    assert small_blocks == "blake2b-128:" + h.hexdigest()


def test_memory_map_float32_and_views(tmp_path):
    data = np.random.default_rng(1).standard_normal((1, 30_000)).astype(np.float32)
    np.save(tmp_path / "r.npy", data)
    mapped = sb.load(tmp_path / "r.npy", fs=100.0)
    inmem = sb.Signal(data, fs=100.0)
    assert sb.fingerprint(mapped).content == sb.fingerprint(inmem).content
    # the same values as float64 are other samples (the estimator sees another dtype)
    assert sb.fingerprint(sb.Signal(data.astype(np.float64), fs=100.0)).content != sb.fingerprint(inmem).content
    # big-endian bytes of the same values hash the same (hashed as little-endian)
    assert sb.fingerprint(sb.Signal(data.astype(">f4"), fs=100.0)).content == sb.fingerprint(inmem).content


def test_differences_name_length_rate_channel_span_content():
    sig = _sig()
    made = sb.fingerprint(sig.channel("a").span(2.0, 12.0))
    assert sb.fingerprint(sig.channel("a").span(2.0, 12.0)).differences(made) == []
    assert sb.fingerprint(sig.channel("b").span(2.0, 12.0)).differences(made) == [
        "channel 'b', made on 'a'", "content (the samples differ)"]
    assert sb.fingerprint(sig.with_fs(500.0).channel("a").span(1.0, 6.0)).differences(made) == [
        "rate 500 Hz, made on 250 Hz", "span 1 to 6 s, made on 2 to 12 s"]
    d = sb.fingerprint(sig.channel("a").span(2.0, 10.0)).differences(made)
    assert d == ["length 2,000 samples, made on 2,500", "span 2 to 10 s, made on 2 to 12 s",
                 "content (the samples differ)"]
    changed = sig.data.copy()
    changed[0, 1000] += 1e-12
    other = sb.Signal(changed, fs=250.0, channels=["a", "b"])
    assert sb.fingerprint(other.channel("a").span(2.0, 12.0)).differences(made) == ["content (the samples differ)"]


def test_check_data_warns_names_and_can_be_turned_off():
    sig = _sig()
    made = sb.fingerprint(sig)
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        assert sb.check_data(sig, made) == []
    with pytest.warns(sb.SpecbenchWarning, match=r"The data differ from the data this cell was frozen on: "
                      r"length 4,000 samples, made on 5,000; span 0 to 16 s, made on 0 to 20 s; content "
                      r"\(the samples differ\)\. .* pass check=False to sb.check_data"):
        sb.check_data(sig.span(0.0, 16.0), made)
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        assert sb.check_data(sig.span(0.0, 16.0), made, check=False) == []
    with pytest.raises(sb.SettingsError, match="made_on must be an sb.Fingerprint"):
        sb.check_data(sig, {"samples": 1})
    with pytest.raises(sb.SettingsError, match="sb.fingerprint takes a specbench Signal"):
        sb.fingerprint(np.zeros(10))


def test_round_trip_through_dict_and_repr():
    fp = sb.fingerprint(_sig())
    assert sb.Fingerprint.from_dict(fp.to_dict()) == fp
    assert eval(repr(fp), {"Fingerprint": sb.Fingerprint}) == fp
