"""Analysis settings from a TOML file (core.settings_file)."""

from __future__ import annotations

import pytest

from phasewise.core.analysis import AnalysisSettings
from phasewise.core.batch import load_settings
from phasewise.core.errors import PhasewiseError
from phasewise.core.settings_file import settings_from_dict


def write(tmp_path, text):
    path = tmp_path / "settings.toml"
    path.write_text(text, encoding="utf-8")
    return path


def test_file_sets_nested_values_and_keeps_defaults(tmp_path):
    path = write(
        tmp_path,
        'fap_threshold = 0.01\n\n[periodogram]\nmethod = "mhgls"\noversampling = 8\n',
    )
    settings = load_settings(path)
    assert settings.fap_threshold == 0.01
    assert settings.periodogram.method == "mhgls" and settings.periodogram.oversampling == 8
    default = AnalysisSettings()
    assert settings.periodogram.nterms == default.periodogram.nterms
    assert settings.fourier == default.fourier
    assert settings.hash != default.hash


def test_empty_file_is_the_defaults(tmp_path):
    assert load_settings(write(tmp_path, "")).hash == AnalysisSettings().hash


def test_to_dict_comes_back_the_same():
    settings = AnalysisSettings(fap_threshold=0.02, outlier_sigma=None)
    again = settings_from_dict(settings.to_dict())
    assert again == settings and again.hash == settings.hash


def test_unknown_keys_are_named(tmp_path):
    with pytest.raises(PhasewiseError, match=r"settings.toml: field 'fap_treshold': unknown"):
        load_settings(write(tmp_path, "fap_treshold = 0.01\n"))
    with pytest.raises(PhasewiseError, match=r"field 'periodogram.methd': unknown setting"):
        load_settings(write(tmp_path, '[periodogram]\nmethd = "gls"\n'))


def test_refused_values_name_the_key(tmp_path):
    with pytest.raises(PhasewiseError, match=r"settings.toml: field 'periodogram.method'"):
        load_settings(write(tmp_path, '[periodogram]\nmethod = "fastest"\n'))
    with pytest.raises(PhasewiseError, match=r"field 'fap_threshold'"):
        load_settings(write(tmp_path, "fap_threshold = 7\n"))
    with pytest.raises(PhasewiseError, match=r"field 'periodogram': expected a table"):
        load_settings(write(tmp_path, "periodogram = 3\n"))


def test_bad_files(tmp_path):
    with pytest.raises(PhasewiseError, match="not a valid TOML file"):
        load_settings(write(tmp_path, "fap_threshold = = 1\n"))
    with pytest.raises(PhasewiseError, match="missing.toml: cannot read"):
        load_settings(tmp_path / "missing.toml")
