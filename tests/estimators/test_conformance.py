"""Conformance suite run over every estimator class (in the spirit of scikit-learn's
``parametrize_with_checks``): defaults build, every field is constrained, invalid values
generated from the constraints raise, repr and dict round-trip, objects are immutable."""

import dataclasses
import json

import numpy as np
import pytest

import specbench as sb
from specbench.estimators import estimator_classes
from specbench.estimators._params import Optional

CLASSES = sorted(estimator_classes().items())
IDS = [k for k, _ in CLASSES]
NAMESPACE = {name: getattr(sb, name) for name in sb.__all__}


def invalid_cases():
    for kind, cls in CLASSES:
        for name, spec in cls.params().items():
            for bad in spec.constraint.invalid_values():
                yield pytest.param(cls, name, bad, id=f"{kind}-{name}-{bad!r}")


@pytest.mark.parametrize("kind, cls", CLASSES, ids=IDS)
def test_defaults_build_and_every_field_is_constrained(kind, cls):
    est = cls()
    fields = {f.name for f in dataclasses.fields(cls)}
    assert fields == set(cls.params()), "every dataclass field must be declared with param()"
    for spec in cls.params().values():
        assert spec.label and spec.help, spec.name
        assert spec.constraint.check(spec.default) == spec.default
        assert spec.constraint.invalid_values(), f"{kind}.{spec.name} generates no invalid values"
    assert repr(est) == f"{cls.__name__}()"
    assert kind in repr(sb.estimator_from_dict(est.to_dict()))


@pytest.mark.parametrize("cls, name, bad", list(invalid_cases()))
def test_invalid_values_raise_settings_error(cls, name, bad):
    with pytest.raises(sb.SettingsError, match=rf"The '{name}' parameter of {cls.__name__} must be .* Got "):
        cls(**{name: bad})


def _non_default_values(cls):
    """One valid non-default value per field, derived from its constraint."""
    out = {}
    for name, spec in cls.params().items():
        c = spec.constraint
        inner = c.inner if isinstance(c, Optional) else c
        if hasattr(inner, "values"):
            choices = [v for v in inner.values if v != spec.default]
            out[name] = choices[0]
        elif type(inner).__name__ == "Boolean":
            out[name] = not spec.default
        elif type(inner).__name__ == "Window":
            out[name] = ("kaiser", 5.5)
        else:  # Interval
            base = inner.low if inner.low is not None else 1
            v = inner.kind(base + (3 if inner.kind is int else 0.3))
            if inner.high is not None and v >= inner.high:
                v = inner.kind((base + inner.high) / 2)
            out[name] = v
    return out


@pytest.mark.parametrize("kind, cls", CLASSES, ids=IDS)
def test_repr_dict_and_json_round_trip(kind, cls):
    values = _non_default_values(cls)
    for name, v in values.items():
        try:
            est = cls(**{name: v})
        except sb.SettingsError:  # a cross-field rule; covered by the dedicated tests
            continue
        assert eval(repr(est), NAMESPACE) == est
        assert eval("sb." + repr(est), {"sb": sb}) == est
        d = json.loads(json.dumps(est.to_dict()))
        assert sb.estimator_from_dict(d) == est
        assert hash(sb.estimator_from_dict(d)) == hash(est)
        assert repr(est) == f"{cls.__name__}({name}={getattr(est, name)!r})"


@pytest.mark.parametrize("kind, cls", CLASSES, ids=IDS)
def test_immutable_and_replace(kind, cls):
    est = cls()
    name, value = next(iter(_non_default_values(cls).items()))
    with pytest.raises(dataclasses.FrozenInstanceError):
        setattr(est, name, value)
    new = est.replace(**{name: value})
    assert getattr(new, name) == value and est == cls() and new != est
    with pytest.raises(sb.SettingsError, match=r"has no parameter 'no_such_field'\. Its parameters are"):
        est.replace(no_such_field=1)
    with pytest.raises(TypeError):
        cls(1)  # keyword-only


@pytest.mark.parametrize("kind, cls", CLASSES, ids=IDS)
def test_every_estimator_runs_on_arrays_and_signal_like(kind, cls):
    x = np.random.default_rng(1).standard_normal((2, 4096))
    est = cls(**({"max_lag": 0.01} if kind in ("Autocorrelation", "CrossCorrelation") else {}))
    out = est(x, fs=1000.0)
    sig = type("Sig", (), dict(data=x, fs=1000.0, channels=("a", "b"), unit="V"))()
    out2 = est(sig)
    assert np.array_equal(out.value, out2.value)
    assert out2.channels == ("a", "b")
    assert np.all(out.lower <= out.upper)
    if isinstance(out, sb.Spectrum):  # correlation bands may be centred on zero instead
        assert np.all(out.lower <= out.value) and np.all(out.value <= out.upper)


def test_from_dict_rejects_bad_descriptions():
    with pytest.raises(sb.SettingsError, match="Unknown estimator kind 'Burg'"):
        sb.estimator_from_dict({"kind": "Burg", "fields": {}})
    with pytest.raises(sb.SettingsError, match=r"Welch has no parameter 'nperseg'"):
        sb.estimator_from_dict({"kind": "Welch", "fields": {"nperseg": 4}})
    with pytest.raises(sb.SettingsError, match="schema 99; this specbench reads schema 1 to 1"):
        sb.estimator_from_dict({"kind": "Welch", "schema": 99, "fields": {}})
    with pytest.raises(sb.SettingsError, match="must be a mapping with 'kind' and 'fields'"):
        sb.estimator_from_dict(["Welch"])
    with pytest.raises(sb.SettingsError, match=r"'overlap' parameter of Welch must be a float in the range \[0, 1\)"):
        sb.estimator_from_dict({"kind": "Welch", "fields": {"overlap": "half"}})


def test_cross_field_rules():
    with pytest.raises(sb.SettingsError, match=r"'nfft' parameter of Welch must be None or an integer >= segment"):
        sb.Welch(segment_length=1024, nfft=512)
    with pytest.raises(sb.SettingsError, match=r"'tapers' parameter of Multitaper .* \[1, 5\] \(2NW\)"):
        sb.Multitaper(bandwidth=2.5, tapers=6)
    with pytest.raises(sb.SettingsError, match=r"'nfft' parameter of Correlogram must be None or an integer > max_lag"):
        sb.Correlogram(max_lag=100, nfft=64)
    assert sb.Multitaper(bandwidth=2.5).n_tapers == 4
