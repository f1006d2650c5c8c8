"""Column detection by name, ColumnMapping parsing and time scales from names."""

import pytest

from phasewise.core.errors import PhasewiseError, ReadError
from phasewise.core.io import ColumnMapping, resolve_columns, time_scale_of_name


def test_detects_common_names_case_insensitively():
    res = resolve_columns(
        ["Star", "HJD", "Magnitude", "e_mag", "Filter", "RAJ2000", "DEJ2000"], None
    )
    assert res.roles == {
        "star_id": "Star",
        "time": "HJD",
        "mag": "Magnitude",
        "err": "e_mag",
        "band": "Filter",
        "ra": "RAJ2000",
        "dec": "DEJ2000",
    }
    assert res.time_scale == "HJD"


@pytest.mark.parametrize(
    ("name", "scale", "offset"),
    [
        ("jd", "JD", 0.0),
        ("MJD", "MJD", 0.0),
        ("hjd", "HJD", 0.0),
        ("BJD", "BJD_TDB", 0.0),
        ("bjd_tdb", "BJD_TDB", 0.0),
        ("HJD-2450000", "HJD", 2450000.0),
        ("jd - 2400000", "JD", 2400000.0),
        ("time", None, 0.0),
    ],
)
def test_time_scale_from_column_name(name, scale, offset):
    assert time_scale_of_name(name) == (scale, offset)


def test_mapping_overrides_detection():
    mapping = ColumnMapping.parse("time=obs_time,mag=V,err=eV,band=filter,id=name,time_scale=hjd")
    res = resolve_columns(["name", "obs_time", "V", "eV", "filter", "mag"], mapping)
    assert res.roles["time"] == "obs_time"
    assert res.roles["mag"] == "V"  # not the column called "mag"
    assert res.roles["err"] == "eV"
    assert res.roles["star_id"] == "name"
    assert res.time_scale == "HJD"


def test_parse_accepts_values_for_scale_and_zero_point():
    mapping = ColumnMapping.parse("flux=f, zp=25.5 ,scale=BJD")
    assert mapping.flux == "f"
    assert mapping.zero_point == 25.5
    assert mapping.time_scale == "BJD_TDB"


def test_parse_names_an_unknown_role():
    with pytest.raises(PhasewiseError, match=r"unknown role 'colour'.*known roles: id, star_id"):
        ColumnMapping.parse("time=hjd,colour=V")


def test_parse_rejects_a_part_without_value():
    with pytest.raises(PhasewiseError, match=r"expected role=column, got 'mag'"):
        ColumnMapping.parse("time=hjd,mag")


def test_mapping_rejects_an_unknown_time_scale():
    with pytest.raises(PhasewiseError, match=r"unknown time scale 'TAI'"):
        ColumnMapping(time_scale="TAI")


def test_mapped_column_missing_from_file():
    with pytest.raises(
        ReadError, match=r"stars.csv: column 'Vmag'.*not in the file; columns found: 'hjd', 'mag'"
    ):
        resolve_columns(["hjd", "mag"], ColumnMapping(mag="Vmag"), file="stars.csv")


def test_missing_time_lists_columns_found_and_names_accepted():
    with pytest.raises(
        ReadError,
        match=r"f.csv: no time column; columns found: 'a', 'mag'; names accepted: time, t, date, jd",
    ):
        resolve_columns(["a", "mag"], None, file="f.csv")


def test_missing_mag_lists_columns_found_and_names_accepted():
    with pytest.raises(
        ReadError,
        match=r"no magnitude column; columns found: 'hjd', 'x'; names accepted: mag, magnitude",
    ):
        resolve_columns(["hjd", "x"], None, file="f.csv")


def test_two_time_columns_of_different_scales_are_refused():
    with pytest.raises(
        ReadError, match=r"mixed time scales: several time columns 'hjd' \(HJD\), 'bjd' \(BJD_TDB\)"
    ):
        resolve_columns(["hjd", "bjd", "mag"], None, file="f.csv")
    res = resolve_columns(["hjd", "bjd", "mag"], ColumnMapping(time="bjd"))
    assert res.roles["time"] == "bjd" and res.time_scale == "BJD_TDB"


def test_flux_needs_a_zero_point():
    with pytest.raises(
        ReadError, match=r"column 'flux': flux column 'flux' found but no zero point"
    ):
        resolve_columns(["jd", "flux", "flux_err"], None)
    res = resolve_columns(["jd", "flux", "flux_err"], ColumnMapping(zero_point=25.0))
    assert res.uses_flux and res.roles["flux_err"] == "flux_err"


def test_band_from_a_magnitude_column_named_by_band():
    assert resolve_columns(["hjd", "I", "err"], ColumnMapping(mag="I")).default_band == "I"
    assert resolve_columns(["hjd", "Ks"], ColumnMapping(mag="Ks")).default_band == "Ks"
    assert resolve_columns(["hjd", "Imag", "err"], None).default_band == "I"
    # no band from a column or the mapping: "unknown", never a silent "V"
    res = resolve_columns(["hjd", "mag"], None)
    assert res.default_band == "unknown"
    assert any("no band column" in n and "'unknown'" in n for n in res.notes)
    assert resolve_columns(["hjd", "mag"], ColumnMapping(default_band="R")).default_band == "R"
