"""The vetted catalogue: every format read back with astropy, provenance, atomic writes."""

import io
import json
import math
import warnings

import astropy.units as u
import numpy as np
import pytest
from astropy.io import fits
from astropy.io.votable import parse
from astropy.io.votable.ucd import check_ucd
from astropy.table import Table

from phasewise.core import export as export_module
from phasewise.core.errors import PhasewiseError
from phasewise.core.export import COLUMNS, catalogue_table, write_catalogue
from phasewise.core.ledger import Ledger
from phasewise.core.lightcurve import LightCurve, StarMeta

RESULT = {
    "status": "ok",
    "period": 0.5512,
    "period_err": 2e-6,
    "epoch_max": 2460012.3456,
    "time_scale": "HJD",
    "mean_mag_by_band": {"V": 15.21, "I": 14.62},
    "amplitude_by_band": {"V": 0.93, "I": 0.55},
    "fourier": {
        "order": 5,
        "form": "sine",
        "amplitudes": [0.31, 0.15, 0.1],
        "amplitudes_err": [0.004, 0.004, 0.004],
        "R21": 0.48,
        "R21_err": 0.015,
        "R31": 0.32,
        "R31_err": 0.014,
        "phi21": 2.41,
        "phi21_err": 0.03,
        "phi31": 5.0,
        "phi31_err": 0.05,
    },
    "fap": 1e-15,
    "secondary_periods": [{"period": 0.4111, "kind": "independent"}],
    "period_ratio": 0.7459,
    "physics": [
        {
            "quantity": "feh",
            "value": -1.280,
            "err": 0.14,
            "relation": "JK96",
            "citation": "Jurcsik & Kovacs 1996",
            "flags": [],
        },
        {
            "quantity": "M_V",
            "value": 0.59,
            "err": 0.12,
            "relation": "Chaboyer 1999",
            "citation": "Chaboyer 1999",
            "flags": ["outside_calibration"],
        },
        {"quantity": "mu", "value": 14.09, "err": 0.15, "relation": "definition"},
        {"quantity": "distance", "value": 6.577, "err": 0.45, "unit": "kpc"},
    ],
    "flags": ["blend"],
    "suggestions": [{"class": "RRab", "score": 0.91, "reasons": ["R21"], "period": 0.5512}],
}


@pytest.fixture
def led(tmp_path):
    with Ledger.create(tmp_path / "cat.ledger.sqlite") as ledger:
        stars = [
            LightCurve(
                f"TX-{i}", np.arange(30.0), np.ones(30), meta=StarMeta(ra=200.0 + i, dec=-12.5)
            )
            for i in range(4)
        ]
        ledger.add_stars(stars)
        ledger.set_analysis_settings({"periodogram": {"method": "gls"}}, "hash1")
        ledger.store_results([(s.star_id, "hash1", RESULT) for s in stars])
        ledger.set_verdict("TX-0", "confirmed", note="clean, textbook")
        ledger.set_verdict("TX-1", "relabelled", class_code="RRd", period=0.4111)
        ledger.set_verdict("TX-2", "rejected")
        yield ledger


def _read(path, fmt):
    if fmt == "votable":
        return parse(str(path), verify="exception").get_first_table().to_table()
    if fmt == "csv":
        return Table.read(path, format="ascii.csv", comment="#")
    return Table.read(path, format={"ecsv": "ascii.ecsv", "fits": "fits"}[fmt])


def _text(column, i):
    value = column[i]
    if np.ma.is_masked(value):
        return ""
    return value.decode() if isinstance(value, bytes) else str(value)


@pytest.mark.parametrize(
    ("fmt", "suffix"), [("ecsv", ".ecsv"), ("fits", ".fits"), ("votable", ".vot"), ("csv", ".csv")]
)
def test_every_format_reads_back(led, tmp_path, fmt, suffix):
    path = tmp_path / f"vetted{suffix}"
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # no unit or UCD the writer complains about
        assert write_catalogue(led, path) == 2
    expected = catalogue_table(led)
    back = _read(path, fmt)
    assert len(back) == 2
    assert back.colnames == expected.colnames
    assert [_text(back["star_id"], i) for i in range(2)] == ["TX-0", "TX-1"]
    for name in expected.colnames:
        for i in range(2):
            want = expected[name][i]
            if isinstance(want, str):
                assert _text(back[name], i) == want, name
            elif math.isnan(want):
                got = back[name][i]
                # a reader may give a missing number back as masked or as NaN
                assert np.ma.is_masked(got) or math.isnan(float(got)), name
            else:
                assert float(back[name][i]) == pytest.approx(float(want), rel=1e-12), name
    if fmt != "csv":
        for name in ("ra", "period", "epoch_max", "mean_mag_V", "phi31", "distance"):
            assert back[name].unit == expected[name].unit, name
    else:
        header = path.read_text().splitlines()
        assert "# column period: unit=d; ucd=time.period; period" in header


def test_row_values_follow_the_verdict(led):
    table = catalogue_table(led)
    first, second = table[0], table[1]
    assert (first["class"], first["status"], first["note"]) == (
        "RRab",
        "confirmed",
        "clean, textbook",
    )
    assert first["period"] == 0.5512 and first["period_err"] == 2e-6
    # the verdict's class and period override the suggestion
    assert (second["class"], second["status"], second["period"]) == ("RRd", "relabelled", 0.4111)
    assert math.isnan(second["period_err"])
    assert "period_from_verdict" in second["flags"].split(";")
    assert (first["A1"], first["R21"], first["phi31_err"], first["fourier_order"]) == (
        0.31,
        0.48,
        0.05,
        5,
    )
    assert first["distance"] == pytest.approx(6577.0)  # kpc converted to pc
    assert table["distance"].unit == u.pc
    assert (first["abs_mag_band"], first["abs_mag"]) == ("V", 0.59)
    assert first["flags"].split(";") == ["blend", "outside_calibration"]
    assert first["feh_relation"] == "JK96 (Jurcsik & Kovacs 1996)"
    assert first["time_scale"] == "HJD"
    assert first["verdict_time"] == led.verdict("TX-0").decided_at
    assert set(COLUMNS) <= set(table.colnames)
    assert list(catalogue_table(led, statuses=("rejected",))["star_id"]) == ["TX-2"]


def test_ucds_are_valid_ivoa_words(led):
    # astropy's UCD1+ checker against the IVOA controlled vocabulary
    table = catalogue_table(led)
    for name in table.colnames:
        assert check_ucd(table[name].meta["ucd"], check_controlled_vocabulary=True), name


def test_votable_passes_validator_and_carries_provenance(led, tmp_path):
    from astropy.io.votable import validate

    path = tmp_path / "vetted.xml"
    write_catalogue(led, path, format="votable")
    report = io.StringIO()
    assert validate(str(path), output=report) is True, report.getvalue()
    assert "no violations" in report.getvalue()
    votable = parse(str(path), verify="exception")
    infos = {i.name: i.value for i in votable.resources[0].infos}
    assert infos["ledger_checksum"] == f"sha256:{led.checksum()}"
    assert json.loads(infos["analysis_settings"]) == {"periodogram": {"method": "gls"}}
    assert infos["program"].startswith("phasewise ")
    fields = {f.name: f for f in votable.get_first_table().fields}
    assert fields["star_id"].ucd == "meta.id;meta.main"
    assert fields["mean_mag_V"].ucd == "phot.mag;em.opt.V"
    relations = [i.value for i in votable.resources[0].infos if i.name == "relation"]
    assert "JK96 (Jurcsik & Kovacs 1996)" in relations


def test_provenance_in_fits_ecsv_and_csv(led, tmp_path):
    checksum = f"sha256:{led.checksum()}"
    write_catalogue(led, tmp_path / "v.fits")
    header = fits.getheader(tmp_path / "v.fits", 1)
    assert header["LEDGSUM"] == checksum and header["SETHASH"] == "hash1"
    assert json.loads(header["SETTINGS"]) == {"periodogram": {"method": "gls"}}
    assert any("Jurcsik" in str(h) for h in header["HISTORY"])
    assert header["TUCD1"] == "meta.id;meta.main"
    write_catalogue(led, tmp_path / "v.ecsv")
    meta = Table.read(tmp_path / "v.ecsv").meta
    assert meta["ledger_checksum"] == checksum and meta["settings_hash"] == "hash1"
    assert meta["analysis_settings"] == {"periodogram": {"method": "gls"}}
    write_catalogue(led, tmp_path / "v.csv")
    text = (tmp_path / "v.csv").read_text()
    assert f'# ledger_checksum: "{checksum}"' in text


def test_interrupted_export_leaves_no_partial_file(led, tmp_path, monkeypatch):
    target = tmp_path / "vetted.ecsv"
    target.write_text("the previous catalogue\n")

    def half_then_die(table, path):
        path.write_text("# %ECSV 1.0\n# half a header")
        raise KeyboardInterrupt

    monkeypatch.setitem(export_module._WRITERS, "ecsv", half_then_die)
    with pytest.raises(KeyboardInterrupt):
        write_catalogue(led, target)
    assert target.read_text() == "the previous catalogue\n"
    assert sorted(p.name for p in tmp_path.iterdir() if "vetted" in p.name) == ["vetted.ecsv"]


def test_format_errors(led, tmp_path):
    with pytest.raises(PhasewiseError, match=r"out\.txt: field 'format': cannot tell the format"):
        write_catalogue(led, tmp_path / "out.txt")
    with pytest.raises(PhasewiseError, match="unknown format 'xls'"):
        write_catalogue(led, tmp_path / "out.csv", format="xls")
    with pytest.raises(PhasewiseError, match="unknown verdict status 'good'"):
        write_catalogue(led, tmp_path / "out.csv", statuses=("good",))


def test_empty_catalogue_still_writes(led, tmp_path):
    assert write_catalogue(led, tmp_path / "none.fits", statuses=("deferred",)) == 0
    assert len(Table.read(tmp_path / "none.fits")) == 0


def test_votable_time_system_for_the_epoch(led, tmp_path):
    path = tmp_path / "vetted.vot"
    write_catalogue(led, path)
    votable = parse(str(path), verify="exception")
    (system,) = list(votable.iter_timesys())
    # HJD is heliocentric; its clock is not recorded (IVOA VOTable 1.4, TIMESYS)
    assert (system.refposition, system.timescale) == ("HELIOCENTER", "UNKNOWN")
    assert system.timeorigin in ("JD-origin", 0.0, 0)  # the JD origin, as written or parsed
    field = {f.name: f for f in votable.get_first_table().fields}["epoch_max"]
    assert field.ref == system.ID


def test_star_without_analysis_exports_blanks(tmp_path):
    with Ledger.create(tmp_path / "bare.ledger.sqlite") as ledger:
        ledger.add_stars([LightCurve("BARE-1", np.arange(12.0), np.ones(12))])
        ledger.set_verdict("BARE-1", "relabelled", class_code="EA", period=2.5)
        path = tmp_path / "bare.ecsv"
        assert write_catalogue(ledger, path) == 1
    row = Table.read(path)[0]
    assert (row["class"], row["period"], row["fourier_order"]) == ("EA", 2.5, -1)
    assert np.ma.is_masked(row["fap"]) or math.isnan(row["fap"])
    assert row["time_scale"] == "JD"  # from the star's photometry


def test_fits_writes_texts_as_ascii_and_the_other_formats_keep_them(led, tmp_path):
    # FITS tables and headers hold ASCII only (FITS Standard 4.0, sections 4.1 and 7.3:
    # characters 32-126; from memory). Notes and flags written by people and by the
    # relations' range checks ("2.5–5.5 rad") are transliterated there, kept elsewhere.
    note = "Blazhko–like, see Ångström’s remark ±0.01"
    led.set_verdict("TX-0", "confirmed", note=note)
    write_catalogue(led, tmp_path / "n.fits")
    write_catalogue(led, tmp_path / "n.ecsv")
    fits_table, ecsv_table = _read(tmp_path / "n.fits", "fits"), _read(tmp_path / "n.ecsv", "ecsv")
    row = [_text(fits_table["star_id"], i) for i in range(len(fits_table))].index("TX-0")
    assert _text(fits_table["note"], row) == "Blazhko-like, see Angstrom's remark +/-0.01"
    row = [_text(ecsv_table["star_id"], i) for i in range(len(ecsv_table))].index("TX-0")
    assert _text(ecsv_table["note"], row) == note
