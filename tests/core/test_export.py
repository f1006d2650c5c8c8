"""The vetted catalogue's files: every format read back with the default readers,
provenance, safe texts, atomic writes.

The ledger holds seeded stars analysed by the real pipeline (``catalogue_fixtures``),
not hand-made result dicts: a hand-made fixture once hid an empty [Fe/H] column.
"""

import csv
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
from phasewise.core.export import (
    COLUMNS,
    catalogue_table,
    escape_controls,
    neutralise_formula,
    sidecar_path,
    write_catalogue,
)
from phasewise.core.ledger import Ledger
from phasewise.core.lightcurve import LightCurve

from .catalogue_fixtures import build

ALL = ("unreviewed", "confirmed", "relabelled", "rejected", "deferred")
FORMATS = [("ecsv", ".ecsv"), ("fits", ".fits"), ("votable", ".vot"), ("csv", ".csv")]


@pytest.fixture(scope="module")
def field(tmp_path_factory):
    ledger, roles, _ = build(tmp_path_factory.mktemp("export") / "e.ledger.sqlite")
    ledger.set_verdict(roles["rrab"], "confirmed", note="clean, textbook")
    ledger.set_verdict(roles["rrd"], "rejected", note='=HYPERLINK("http://x")')
    yield ledger, roles
    ledger.close()


def _text(column, i):
    value = column[i]
    if np.ma.is_masked(value):
        return ""
    return value.decode() if isinstance(value, bytes) else str(value)


def _same_value(got, want, name):
    if isinstance(want, str):
        assert (
            got.decode() if isinstance(got, bytes) else ("" if np.ma.is_masked(got) else str(got))
        ) == want, name
    elif isinstance(want, float | np.floating) and math.isnan(want):
        # a reader may give a missing number back as masked or as NaN
        assert np.ma.is_masked(got) or math.isnan(float(got)), name
    else:
        assert float(got) == pytest.approx(float(want), rel=1e-12), name


@pytest.mark.parametrize(("fmt", "suffix"), FORMATS)
def test_every_format_reads_back_with_the_default_reader(field, tmp_path, fmt, suffix):
    ledger, _ = field
    path = tmp_path / f"vetted{suffix}"
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # no unit or UCD the writer complains about
        n = write_catalogue(ledger, path, statuses=ALL)
    expected = catalogue_table(ledger, ALL)
    assert n == len(expected) == ledger.n_stars
    back = Table.read(path)  # astropy's default reader for each format
    assert back.colnames == expected.colnames
    for name in expected.colnames:
        for i in range(len(expected)):
            want = expected[name][i]
            if fmt == "csv" and isinstance(want, str):
                want = neutralise_formula(want)
            if fmt == "fits" and isinstance(want, str):
                want = export_module._ascii(want)  # FITS texts are ASCII
            _same_value(back[name][i], want, name)
    if fmt != "csv":
        for name in ("ra", "period", "epoch", "mean_mag_V", "phi31", "distance"):
            assert back[name].unit == expected[name].unit, name


def test_csv_starts_with_its_header_and_reads_with_the_csv_module(field, tmp_path):
    ledger, roles = field
    path = tmp_path / "vetted.csv"
    write_catalogue(ledger, path, statuses=ALL)
    with open(path, newline="", encoding="utf-8") as handle:
        rows = list(csv.reader(handle))
    assert rows[0][: len(("star_id", "ra"))] == ["star_id", "ra"]
    assert set(COLUMNS) <= set(rows[0])
    assert len(rows) == 1 + ledger.n_stars and all(len(r) == len(rows[0]) for r in rows)
    by_id = {r[0]: dict(zip(rows[0], r, strict=True)) for r in rows[1:]}
    # the formula in the note is shown as text by spreadsheets
    assert by_id[roles["rrd"]]["note"] == '\'=HYPERLINK("http://x")'
    about = json.loads(sidecar_path(path).read_text(encoding="utf-8"))
    assert about["catalogue"] == "vetted.csv"
    assert about["ledger_checksum"] == f"sha256:{ledger.checksum()}"
    period = next(c for c in about["columns"] if c["name"] == "period")
    assert (period["unit"], period["ucd"]) == ("d", "time.period")


def test_formula_cells_and_control_characters():
    # the spreadsheet-formula starts named by the project (=, +, @, - before a non-digit)
    for text in ("=1+2", "+cmd", "@SUM(A1)", "-x", "\tx"):
        assert neutralise_formula(text) == "'" + text
    for text in ("-1.5", "RRab", "", "a=b"):
        assert neutralise_formula(text) == text
    assert escape_controls("A\x07B\x1b[31m\x85") == "A\\x07B\\x1b[31m\\x85"


def test_control_characters_in_ids_give_well_formed_xml(tmp_path):
    odd = "ODD\x01\x0b-\x1b[2J"
    with Ledger.create(tmp_path / "odd.ledger.sqlite") as ledger:
        ledger.add_stars([LightCurve(odd, np.arange(12.0), np.ones(12))])
        ledger.set_verdict(odd, "relabelled", class_code="EA", period=2.5)
        path = tmp_path / "odd.vot"
        write_catalogue(ledger, path)
        csv_path = tmp_path / "odd.csv"
        write_catalogue(ledger, csv_path)
    import xml.etree.ElementTree as ET

    ET.parse(path)  # raises on XML that is not well-formed
    table = Table.read(path)
    assert _text(table["star_id"], 0) == escape_controls(odd)
    assert len(csv_path.read_text(encoding="utf-8").splitlines()) == 2


def test_ucds_are_valid_ivoa_words(field):
    ledger, _ = field
    table = catalogue_table(ledger, ALL)
    for name in table.colnames:
        # astropy's UCD1+ checker against the IVOA controlled vocabulary
        assert check_ucd(table[name].meta["ucd"], check_controlled_vocabulary=True), name


def test_votable_passes_validator_and_carries_provenance(field, tmp_path):
    from astropy.io.votable import validate

    ledger, _ = field
    path = tmp_path / "vetted.xml"
    write_catalogue(ledger, path, format="votable", statuses=ALL)
    report = io.StringIO()
    assert validate(str(path), output=report) is True, report.getvalue()
    votable = parse(str(path), verify="exception")
    infos = {i.name: i.value for i in votable.resources[0].infos}
    assert infos["ledger_checksum"] == f"sha256:{ledger.checksum()}"
    assert json.loads(infos["analysis_settings"]) == ledger.analysis_settings()[0]
    assert infos["program"].startswith("phasewise ")
    fields = {f.name: f for f in votable.get_first_table().fields}
    assert fields["star_id"].ucd == "meta.id;meta.main"
    assert fields["mean_mag_V"].ucd == "phot.mag;stat.mean;em.opt.V"
    relations = [i.value for i in votable.resources[0].infos if i.name == "relation"]
    assert any("Jurcsik & Kovács 1996" in r for r in relations)
    (system,) = list(votable.iter_timesys())
    # HJD is heliocentric; its clock is not recorded (IVOA VOTable 1.4, TIMESYS)
    assert (system.refposition, system.timescale) == ("HELIOCENTER", "UNKNOWN")
    assert fields["epoch"].ref == system.ID


def test_provenance_in_fits_and_ecsv_headers(field, tmp_path):
    ledger, _ = field
    checksum = f"sha256:{ledger.checksum()}"
    write_catalogue(ledger, tmp_path / "v.fits", statuses=ALL)
    header = fits.getheader(tmp_path / "v.fits", 1)
    assert header["LEDGSUM"] == checksum and header["SETHASH"] == ledger.settings_hash
    assert any("Jurcsik" in str(h) for h in header["HISTORY"])
    assert header["TUCD1"] == "meta.id;meta.main"
    write_catalogue(ledger, tmp_path / "v.ecsv", statuses=ALL)
    meta = Table.read(tmp_path / "v.ecsv").meta
    assert meta["ledger_checksum"] == checksum
    assert meta["analysis_settings"] == ledger.analysis_settings()[0]


def test_metallicity_columns_are_filled_for_rr_lyrae(field):
    ledger, roles = field
    table = catalogue_table(ledger, ALL)
    rows = {str(r["star_id"]): r for r in table}
    rrab, rrc = rows[roles["rrab"]], rows[roles["rrc"]]
    assert np.isfinite(rrab["feh_jk"]) and np.isfinite(rrab["feh_zw"])
    assert np.isfinite(rrc["feh_zw"]) and math.isnan(rrc["feh_jk"])
    assert -3.0 < rrab["feh_zw"] < 0.5 and rrab["feh_zw_err"] > 0
    assert table["distance"].unit == u.pc and rrab["distance"] > 100.0
    assert rrab["abs_mag_band"] == "V" and np.isfinite(rrab["ebv"])


def test_interrupted_export_leaves_no_partial_file(field, tmp_path, monkeypatch):
    ledger, _ = field
    target = tmp_path / "vetted.ecsv"
    target.write_text("the previous catalogue\n")

    def half_then_die(spool, columns, meta, path):
        path.write_text("# %ECSV 1.0\n# half a header")
        raise KeyboardInterrupt

    monkeypatch.setitem(export_module._WRITERS, "ecsv", half_then_die)
    with pytest.raises(KeyboardInterrupt):
        write_catalogue(ledger, target)
    assert target.read_text() == "the previous catalogue\n"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["vetted.ecsv"]


def _without_date(path):
    return [line for line in path.read_text().splitlines() if "date" not in line]


@pytest.mark.parametrize(("fmt", "suffix"), [("ecsv", ".ecsv"), ("csv", ".csv")])
def test_rows_built_in_several_processes_equal_one_process(
    field, tmp_path, monkeypatch, fmt, suffix
):
    # a survey-size export builds its rows in several processes (one slice of the
    # stars each, read back in order): the file must be the one a single process writes
    ledger, _ = field
    one = tmp_path / f"one{suffix}"
    write_catalogue(ledger, one, statuses=ALL)
    monkeypatch.setattr(export_module, "_STARS_PER_PROCESS", 1)
    monkeypatch.setattr(export_module, "_processes", lambda n: min(3, n))
    several = tmp_path / f"several{suffix}"
    assert write_catalogue(ledger, several, statuses=ALL) == ledger.n_stars
    assert _without_date(several) == _without_date(one)
    # the parts' spool files are gone
    assert sorted(p.name for p in tmp_path.iterdir() if not p.name.endswith(".json")) == [
        f"one{suffix}",
        f"several{suffix}",
    ]


def test_a_ledger_written_during_the_export_is_read_again(field, tmp_path, monkeypatch):
    ledger, _ = field
    sums = iter(["before", "changed", "after", "after"])
    monkeypatch.setattr(type(ledger), "checksum", lambda self: next(sums))
    assert write_catalogue(ledger, tmp_path / "v.ecsv", statuses=ALL) == ledger.n_stars
    # the provenance names the state the rows were read from
    assert Table.read(tmp_path / "v.ecsv").meta["ledger_checksum"] == "sha256:after"
    # a ledger that never stops changing is refused, and no file is left
    monkeypatch.setattr(type(ledger), "checksum", lambda self: str(next(counter)))
    counter = iter(range(100))
    with pytest.raises(PhasewiseError, match="kept changing"):
        write_catalogue(ledger, tmp_path / "w.ecsv", statuses=ALL)
    assert not (tmp_path / "w.ecsv").exists()


def test_format_errors(field, tmp_path):
    ledger, _ = field
    with pytest.raises(PhasewiseError, match=r"out\.txt: field 'format': cannot tell the format"):
        write_catalogue(ledger, tmp_path / "out.txt")
    with pytest.raises(PhasewiseError, match="unknown format 'xls'"):
        write_catalogue(ledger, tmp_path / "out.csv", format="xls")
    with pytest.raises(PhasewiseError, match="unknown verdict status 'good'"):
        write_catalogue(ledger, tmp_path / "out.csv", statuses=("good",))
    (tmp_path / "folder.csv").mkdir()
    with pytest.raises(PhasewiseError, match="is a folder"):
        write_catalogue(ledger, tmp_path / "folder.csv")


@pytest.mark.parametrize(("fmt", "suffix"), FORMATS)
def test_empty_catalogue_still_writes(field, tmp_path, fmt, suffix):
    ledger, _ = field
    assert write_catalogue(ledger, tmp_path / f"none{suffix}", statuses=("deferred",)) == 0
    assert len(Table.read(tmp_path / f"none{suffix}")) == 0


def test_star_without_analysis_exports_blanks(tmp_path):
    with Ledger.create(tmp_path / "bare.ledger.sqlite") as ledger:
        ledger.add_stars([LightCurve("BARE-1", np.arange(12.0), np.ones(12))])
        ledger.set_verdict("BARE-1", "relabelled", class_code="EA", period=2.5)
        path = tmp_path / "bare.ecsv"
        assert write_catalogue(ledger, path) == 1
    row = Table.read(path)[0]
    # no analysis, so no final numbers: the class is the person's, no number is guessed
    assert (row["class"], row["fourier_order"]) == ("EA", -1)
    assert math.isnan(row["period"]) and math.isnan(row["fap"])
    assert "not stored" in row["flags"]
    assert row["time_scale"] == "JD"  # from the star's photometry


def test_fits_writes_texts_as_ascii_and_the_other_formats_keep_them(field, tmp_path):
    # FITS tables and headers hold ASCII only (FITS Standard 4.0, sections 4.1 and 7.3:
    # characters 32-126; from memory). Notes and flags written by people and by the
    # relations' range checks ("2.5–5.5 rad") are transliterated there, kept elsewhere.
    ledger, roles = field
    note = "Blazhko–like, see Ångström’s remark ±0.01"
    ledger.set_verdict(roles["rrc"], "confirmed", note=note)
    write_catalogue(ledger, tmp_path / "n.fits")
    write_catalogue(ledger, tmp_path / "n.ecsv")
    fits_table, ecsv_table = Table.read(tmp_path / "n.fits"), Table.read(tmp_path / "n.ecsv")
    ids = [_text(fits_table["star_id"], i) for i in range(len(fits_table))]
    row = ids.index(roles["rrc"])
    assert _text(fits_table["note"], row) == "Blazhko-like, see Angstrom's remark +/-0.01"
    ids = [_text(ecsv_table["star_id"], i) for i in range(len(ecsv_table))]
    assert _text(ecsv_table["note"], ids.index(roles["rrc"])) == note
