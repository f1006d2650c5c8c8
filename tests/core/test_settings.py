from dataclasses import dataclass

import pytest

from phasewise.core.errors import PhasewiseError, SettingsError
from phasewise.core.settings import settings_hash
from phasewise.core.validation import require_choice, require_int, require_positive, require_range


@dataclass(frozen=True)
class Inner:
    a: float = 1.0


@dataclass(frozen=True)
class Outer:
    inner: Inner = Inner()
    name: str = "gls"


def test_hash_is_stable_and_changes_with_values():
    assert settings_hash(Outer()) == settings_hash(Outer())
    assert settings_hash(Outer()) != settings_hash(Outer(inner=Inner(a=2.0)))
    assert len(settings_hash(Outer())) == 16


def test_validators_name_the_field():
    with pytest.raises(SettingsError, match="field 'method': got 'x'; expected one of 'gls'"):
        require_choice("method", "x", ["gls"])
    with pytest.raises(SettingsError, match="oversampling"):
        require_positive("oversampling", -1)
    with pytest.raises(SettingsError, match=r"\[1, 6\]"):
        require_range("nterms", 9, 1, 6)
    with pytest.raises(SettingsError, match="whole number"):
        require_int("n", 2.5)
    assert require_int("n", 3, 1, 5) == 3
    assert issubclass(SettingsError, PhasewiseError)


def test_error_message_order():
    err = PhasewiseError("not a number: 'abc'", file="a.csv", row=12, column="mag")
    assert str(err) == "a.csv: row 12, column 'mag': not a number: 'abc'"
