"""Errors name the field they are about (``.field``) and the estimator (``.owner``).

The widget marks the failing control from these attributes, not from the message text.
"""

import pickle

import numpy as np
import pytest

import specbench as sb


@pytest.mark.parametrize("make, field, owner", [
    (lambda: sb.Welch(overlap=1.5), "overlap", "Welch"),
    (lambda: sb.Welch(segment_length=2), "segment_length", "Welch"),
    (lambda: sb.Autocorrelation(max_lag=-1.0), "max_lag", "Autocorrelation"),
    (lambda: sb.Welch(window="no-such-window"), "window", "Welch"),
])
def test_settings_errors_name_field_and_owner(make, field, owner):
    with pytest.raises(sb.SettingsError) as info:
        make()
    assert (info.value.field, info.value.owner) == (field, owner)
    assert f"'{field}'" in str(info.value)


@pytest.mark.parametrize("est, field, owner", [
    (sb.Welch(segment_length=4096), "segment_length", "Welch"),
    (sb.Periodogram(nfft=16), "nfft", "Periodogram"),
    (sb.Multitaper(segment_length=256, bandwidth=200), "bandwidth", "Multitaper"),
    (sb.Autocorrelation(max_lag=5000.0), "max_lag", "Autocorrelation"),
])
def test_data_dependent_errors_name_field_and_owner(est, field, owner):
    x = np.random.default_rng(0).standard_normal(1000)
    with pytest.raises(sb.InputError) as info:
        est(x, fs=1.0)
    assert (info.value.field, info.value.owner) == (field, owner)


def test_errors_without_a_field_and_pickling():
    e = sb.InputError("plain")
    assert e.field is None and e.owner is None
    with pytest.raises(sb.SettingsError) as info:
        sb.Welch(overlap=2.0)
    back = pickle.loads(pickle.dumps(info.value))
    assert (back.field, back.owner, str(back)) == ("overlap", "Welch", str(info.value))
