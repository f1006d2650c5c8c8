"""Readers: both shapes, every format, and a clear answer for bad input."""

import numpy as np
import pytest
from astropy.io import fits
from astropy.table import Table

from phasewise.core.errors import PhasewiseError, ReadError
from phasewise.core.io import ColumnMapping, open_photometry, write_stars
from phasewise.core.lightcurve import LightCurve, StarMeta


def _file(tmp_path, name, text):
    path = tmp_path / name
    path.write_text(text)
    return path


def _long_csv(n_stars=3, n=12, sep=",", interleave=False):
    rows = [sep.join(["star_id", "hjd", "mag", "mag_err", "band"])]
    entries = []
    for s in range(n_stars):
        for i in range(n):
            band = "V" if i % 2 == 0 else "I"
            entries.append((i, s, f"CAV-{s:02d}", 2460000.0 + i + s / 10, 15.0 + s + i / 100, band))
    if interleave:
        entries.sort(key=lambda e: (e[0], e[1]))
    for _, _, sid, t, m, b in entries:
        rows.append(sep.join([sid, repr(t), repr(m), "0.02", b]))
    return "\n".join(rows) + "\n"


def test_long_csv_groups_stars_and_bands(tmp_path):
    source = open_photometry(_file(tmp_path, "field.csv", _long_csv()))
    assert source.star_ids() == ("CAV-00", "CAV-01", "CAV-02")
    lc = source.star("CAV-01")
    assert lc.n_points == 12 and lc.time_scale == "HJD"
    assert set(lc.bands) == {"V", "I"}
    assert lc.time[0] == 2460000.1 and lc.mag[3] == 16.03
    assert lc.meta.columns["time"] == "hjd"
    report = source.report
    assert report.rows_read == 36 and report.rows_skipped == 0


def test_tsv_and_semicolon_csv(tmp_path):
    tsv = open_photometry(_file(tmp_path, "field.tsv", _long_csv(sep="\t")))
    semi = open_photometry(_file(tmp_path, "semi.csv", _long_csv(sep=";")))
    for source in (tsv, semi):
        assert len(source) == 3
        assert source.star("CAV-02").n_points == 12


def test_interleaved_ids_are_indexed_by_runs_and_read_star_by_star(tmp_path):
    sorted_src = open_photometry(_file(tmp_path, "a.csv", _long_csv()))
    mixed_src = open_photometry(_file(tmp_path, "b.csv", _long_csv(interleave=True)))
    # a file sorted by star has one byte run per star; interleaved ids give many
    assert [len(r) for r in sorted_src._parts[0].table.runs.values()] == [1, 1, 1]
    assert [len(r) for r in mixed_src._parts[0].table.runs.values()] == [12, 12, 12]
    for sid in sorted_src.star_ids():
        a, b = sorted_src.star(sid), mixed_src.star(sid)
        assert np.array_equal(np.sort(a.time), np.sort(b.time))


def test_folder_of_one_star_files_takes_id_from_file_name(tmp_path):
    folder = tmp_path / "stars"
    folder.mkdir()
    for k in range(3):
        text = "hjd,mag,err\n" + "".join(f"{2460000 + i},{14 + k},0.01\n" for i in range(11))
        (folder / f"CAV-V{k}.csv").write_text(text)
    (folder / "readme.md").write_text("not photometry")
    source = open_photometry(folder)
    assert source.shape == "folder"
    assert source.star_ids() == ("CAV-V0", "CAV-V1", "CAV-V2")
    assert source.star("CAV-V2").mag[0] == 16.0


def test_folder_with_an_id_column_joins_files_of_one_star(tmp_path):
    folder = tmp_path / "stars"
    folder.mkdir()
    for band in ("I", "V"):
        text = "name,jd,mag,filter\n" + "".join(
            f"CAV-7,{2460000 + i},14,{band}\n" for i in range(6)
        )
        (folder / f"cav7_{band}.csv").write_text(text)
    source = open_photometry(folder)
    lc = source.star("CAV-7")
    assert source.star_ids() == ("CAV-7",)
    assert lc.n_points == 12 and set(lc.bands) == {"V", "I"}
    assert any("joined" in note for note in source.report.notes)


def test_mapping_chooses_columns(tmp_path):
    text = "name,obs,V,eV,filter\n" + "".join(f"X1,{100 + i},15.{i},0.03,V\n" for i in range(10))
    mapping = ColumnMapping.parse("time=obs,mag=V,err=eV,band=filter,id=name,time_scale=MJD")
    lc = open_photometry(_file(tmp_path, "x.csv", text), mapping).star("X1")
    assert lc.time_scale == "MJD" and lc.mag[2] == 15.2 and lc.mag_err[0] == 0.03


def test_reduced_dates_get_their_offset_back(tmp_path):
    text = "id,HJD-2450000,mag\n" + "".join(f"S,{9000.25 + i},12\n" for i in range(10))
    lc = open_photometry(_file(tmp_path, "r.csv", text)).star("S")
    assert lc.time[0] == 2459000.25 and lc.time_scale == "HJD"


def test_flux_becomes_magnitude_by_the_pogson_relation(tmp_path):
    # Pogson relation: m = zp - 2.5 log10(f); sigma_m = (2.5 / ln 10) sigma_f / f = 1.0857 sigma_f / f
    text = "jd,flux,flux_err\n2460000.0,1000.0,10.0\n2460001.0,100.0,5.0\n"
    lc = open_photometry(_file(tmp_path, "f.csv", text), ColumnMapping(zero_point=25.0)).star("f")
    assert lc.mag == pytest.approx([25.0 - 7.5, 25.0 - 5.0], abs=1e-12)
    assert lc.mag_err == pytest.approx([1.0857 * 0.01, 1.0857 * 0.05], rel=1e-4)


def test_non_positive_flux_is_reported_and_skipped(tmp_path):
    text = "jd,flux,flux_err\n2460000.0,1000.0,10.0\n2460001.0,-3.0,1.0\n2460002.0,0,1.0\n"
    source = open_photometry(_file(tmp_path, "f.csv", text), ColumnMapping(zero_point=20.0))
    lc = source.star("f")
    assert lc.n_points == 1 and lc.mag[0] == pytest.approx(20.0 - 2.5 * 3)
    assert lc.mag_err[0] > 0
    report = source.report
    assert report.skip_counts == {"column 'flux': flux <= 0": 2}
    assert [s["row"] for s in report.skipped] == [3, 4]


# --------------------------------------------------------------- bad input
def test_missing_file(tmp_path):
    with pytest.raises(ReadError, match=r"nowhere.csv: cannot open"):
        open_photometry(tmp_path / "nowhere.csv")


def test_empty_file(tmp_path):
    with pytest.raises(ReadError, match=r"empty.csv: empty file"):
        open_photometry(_file(tmp_path, "empty.csv", ""))
    with pytest.raises(ReadError, match=r"empty.fits: empty file"):
        open_photometry(_file(tmp_path, "empty.fits", ""))


def test_header_without_rows(tmp_path):
    with pytest.raises(ReadError, match=r"h.csv: has a header but no data rows"):
        open_photometry(_file(tmp_path, "h.csv", "jd,mag\n"))


def test_unreadable_binary_file(tmp_path):
    path = tmp_path / "junk.fits"
    path.write_bytes(b"\x00\xff" * 500)
    with pytest.raises(ReadError, match=r"junk.fits: cannot read as fits"):
        open_photometry(path)
    path = tmp_path / "junk.csv"
    path.write_bytes(b"jd,mag\n\xff\xfe,1\n")
    with pytest.raises(ReadError, match=r"junk.csv: row 2: not UTF-8 text"):
        list(open_photometry(path).stars())  # found when the star's rows are read


def test_unknown_format(tmp_path):
    with pytest.raises(ReadError, match=r"x.xlsx: unknown format; file names accepted end in .csv"):
        open_photometry(_file(tmp_path, "x.xlsx", "jd,mag\n1,2\n"))
    with pytest.raises(ReadError, match=r"unknown format 'parquet'"):
        open_photometry(_file(tmp_path, "x.csv", "jd,mag\n1,2\n"), format="parquet")


def test_missing_columns_are_listed(tmp_path):
    with pytest.raises(
        ReadError, match=r"m.csv: no magnitude column; columns found: 'jd', 'v_mean'"
    ):
        open_photometry(_file(tmp_path, "m.csv", "jd,v_mean\n1,2\n"))


def test_time_column_without_a_scale(tmp_path):
    with pytest.raises(
        ReadError, match=r"t.csv: column 'time': the time column 'time' does not say its time scale"
    ):
        open_photometry(_file(tmp_path, "t.csv", "time,mag\n1,2\n"))
    lc = open_photometry(
        _file(tmp_path, "t.csv", "time,mag\n1,2\n"), ColumnMapping(time_scale="JD")
    ).star("t")
    assert lc.time_scale == "JD"


def test_non_numeric_cells_skip_rows_with_line_numbers(tmp_path):
    text = "id,jd,mag,err\n" + "".join(f"S,{2460000 + i},15,0.01\n" for i in range(10))
    text += "S,2460100,abc,0.01\nS,,15,0.01\nS,2460102,15\nS,oops,n/a,0.01\n"
    source = open_photometry(_file(tmp_path, "bad.csv", text))
    lc = source.star("S")
    assert lc.n_points == 10
    report = source.report
    assert report.rows_skipped == 4 and report.complete
    reasons = {s["row"]: s["reason"] for s in report.skipped}
    assert reasons[12] == "column 'mag': not a number: 'abc'"
    assert reasons[13] == "column 'jd': empty cell"
    assert reasons[14] == "expected 4 fields, found 3"
    assert reasons[15] == "column 'jd': not a number: 'oops'"  # one entry per row
    assert report.skip_counts == {
        "column 'mag': not a number": 1,
        "column 'jd': empty cell": 1,
        "column 'jd': not a number": 1,
        "wrong number of fields": 1,
    }


def test_reading_a_star_twice_does_not_count_twice(tmp_path):
    text = "id,jd,mag\nS,1,x\nS,2,3\n"
    source = open_photometry(_file(tmp_path, "twice.csv", text), ColumnMapping(time_scale="JD"))
    source.star("S")
    source.star("S")
    assert source.report.rows_skipped == 1


def test_nan_and_non_positive_errors_are_kept_for_cleaning(tmp_path):
    text = "id,jd,mag,err\nS,1,nan,0.1\nS,2,inf,0.1\nS,3,15,0\nS,4,15,-1\nS,5,15,0.1\n"
    source = open_photometry(_file(tmp_path, "n.csv", text))
    lc = source.star("S")
    assert lc.n_points == 4 and lc.n_good == 1  # the mask decides for these
    # an infinite magnitude is outside any physical range: skipped and counted
    assert source.report.skip_counts == {"column 'mag': outside -30 to 40 mag": 1}


def test_empty_star_id_rows_are_skipped(tmp_path):
    text = "id,jd,mag\nA,1,2\n,2,3\nA,3,4\n"
    source = open_photometry(_file(tmp_path, "e.csv", text))
    assert source.star("A").n_points == 2
    assert source.report.skipped[0] == {
        "file": str(tmp_path / "e.csv"),
        "row": 3,
        "reason": "empty star id",
    }


def test_star_with_few_points_is_kept_and_marked(tmp_path):
    text = "id,jd,mag\n" + "".join(f"A,{i},15\n" for i in range(20)) + "B,1,15\nB,2,15\n"
    source = open_photometry(_file(tmp_path, "few.csv", text))
    stars = {lc.star_id: lc for lc in source.stars()}
    assert set(stars) == {"A", "B"}
    assert stars["B"].too_few_points and not stars["A"].too_few_points


def test_duplicate_times_are_read_as_given(tmp_path):
    text = "id,jd,mag\nA,1,15\nA,1,15.2\nA,2,15\n"
    assert open_photometry(_file(tmp_path, "d.csv", text)).star("A").n_points == 3


def test_time_scale_column_with_several_values(tmp_path):
    text = "id,time,mag,time_scale\nA,1,15,HJD\nA,2,15,BJD_TDB\n"
    source = open_photometry(_file(tmp_path, "mix.csv", text))
    with pytest.raises(
        ReadError,
        match=r"mix.csv: column 'time_scale': mixed time scales: the column holds BJD_TDB, HJD",
    ):
        source.star("A")


def test_time_scale_column_disagreeing_with_the_time_column_name(tmp_path):
    text = "id,hjd,mag,time_scale\nA,1,15,BJD_TDB\n"
    with pytest.raises(
        ReadError,
        match=r"mixed time scales: column 'hjd' reads as HJD but column 'time_scale' says BJD_TDB",
    ):
        open_photometry(_file(tmp_path, "mix2.csv", text)).star("A")


def test_folder_with_files_in_different_scales(tmp_path):
    folder = tmp_path / "f"
    folder.mkdir()
    (folder / "a.csv").write_text("hjd,mag\n1,2\n")
    (folder / "b.csv").write_text("bjd,mag\n1,2\n")
    with pytest.raises(
        ReadError,
        match=r"f: mixed time scales: the files are in HJD \(e.g. a.csv\), BJD_TDB \(e.g. b.csv\)",
    ):
        open_photometry(folder)


def test_stars_in_different_scales_from_a_scale_column(tmp_path):
    text = "id,time,mag,time_scale\nA,1,15,HJD\nA,2,15,HJD\nB,1,15,BJD_TDB\n"
    source = open_photometry(_file(tmp_path, "s.csv", text))
    assert source.star("A").time_scale == "HJD"
    with pytest.raises(
        ReadError, match=r"mixed time scales: star 'B' is in BJD_TDB, earlier stars in HJD"
    ):
        source.star("B")


def _fits_with_two_tables(path):
    phot = Table({"star": ["A"] * 10, "bjd": np.arange(10.0) + 2460000, "mag": np.full(10, 15.0)})
    other = Table({"star": ["B"] * 10, "bjd": np.arange(10.0) + 2460000, "mag": np.full(10, 16.0)})
    hdus = fits.HDUList([fits.PrimaryHDU(), fits.table_to_hdu(phot), fits.table_to_hdu(other)])
    hdus[1].name, hdus[2].name = "PHOT", "EXTRA"
    hdus.writeto(path)


def test_fits_with_several_tables_says_which_was_read(tmp_path):
    path = tmp_path / "two.fits"
    _fits_with_two_tables(path)
    source = open_photometry(path)
    assert source.star_ids() == ("A",)
    assert source.report.table == (
        "FITS file has 2 tables: HDU 1 'PHOT', HDU 2 'EXTRA'; read HDU 1 'PHOT' "
        "(choose another with table=NAME or NUMBER)"
    )
    assert open_photometry(path, table="extra").star_ids() == ("B",)
    assert open_photometry(path, table=2).star_ids() == ("B",)
    with pytest.raises(
        ReadError,
        match=r"two.fits: no table 'SPECTRA'; the FITS file has: HDU 1 'PHOT', HDU 2 'EXTRA'",
    ):
        open_photometry(path, table="SPECTRA")
    with pytest.raises(ReadError, match=r"no table HDU 5; the FITS file has: HDU 1 'PHOT'"):
        open_photometry(path, table=5)


def test_fits_without_a_table(tmp_path):
    path = tmp_path / "image.fits"
    fits.PrimaryHDU(np.zeros((4, 4))).writeto(path)
    with pytest.raises(ReadError, match=r"image.fits: the FITS file holds no table"):
        open_photometry(path)


def test_votable_non_numeric_and_masked_cells(tmp_path):
    table = Table(
        {
            "id": ["A"] * 11,
            "mjd": np.arange(11.0),
            "mag": np.ma.masked_array(np.full(11, 15.0), mask=[0] * 10 + [1]),
        }
    )
    table.write(tmp_path / "m.vot", format="votable")
    source = open_photometry(tmp_path / "m.vot")
    assert source.star("A").n_points == 10
    assert source.report.skipped[0]["reason"] == "column 'mag': empty cell"
    assert source.report.skipped[0]["row"] == 11


def test_preview_gives_the_first_rows(tmp_path):
    source = open_photometry(_file(tmp_path, "p.csv", _long_csv()))
    rows = source.preview(2)
    assert len(rows) == 2 and rows[0]["star_id"] == "CAV-00" and rows[1]["band"] == "I"


# ------------------------------------------------------------- round trips
def _curves(scale="BJD_TDB"):
    rng = np.random.default_rng(7)
    curves = []
    for k in range(4):
        n = 15 + k
        excluded = np.zeros(n, dtype=bool)
        excluded[k] = True
        curves.append(
            LightCurve(
                f"CAV-{k}",
                2460000 + np.sort(rng.uniform(0, 300, n)),
                rng.normal(15, 0.3, n),
                rng.uniform(0.01, 0.05, n),
                band=np.where(rng.random(n) < 0.5, "V", "I"),
                time_scale=scale,
                excluded=excluded,
                meta=StarMeta(ra=150.1 + k, dec=-30.2),
            )
        )
    return curves


@pytest.mark.parametrize("name", ["s.csv", "s.tsv", "s.txt", "s.ecsv", "s.fits", "s.vot"])
def test_write_then_read_gives_the_same_stars(tmp_path, name):
    curves = _curves()
    write_stars(curves, tmp_path / name)
    source = open_photometry(tmp_path / name)
    assert source.star_ids() == tuple(lc.star_id for lc in curves)
    for lc, back in zip(curves, source.stars(), strict=True):
        assert back.time_scale == "BJD_TDB"
        assert np.array_equal(back.time, lc.time)  # float64 survives exactly
        assert np.array_equal(back.mag, lc.mag)
        assert np.array_equal(back.mag_err, lc.mag_err)
        assert list(back.band) == list(lc.band)
        assert np.array_equal(back.excluded, lc.excluded)
        assert (back.meta.ra, back.meta.dec) == (lc.meta.ra, lc.meta.dec)
    assert not list(tmp_path.glob(".*.part"))  # written to a temporary name, then renamed


def test_write_refuses_mixed_scales_and_nothing(tmp_path):
    mixed = _curves("HJD")[:1] + _curves("JD")[1:2]
    with pytest.raises(PhasewiseError, match=r"mixed time scales \(HJD, JD\)"):
        write_stars(mixed, tmp_path / "x.ecsv")
    with pytest.raises(PhasewiseError, match=r"nothing to write"):
        write_stars([], tmp_path / "x.ecsv")


def test_votable_with_several_tables_says_which_was_read(tmp_path):
    from astropy.io.votable.tree import Resource, TableElement, VOTableFile

    votable = VOTableFile()
    resource = Resource()
    votable.resources.append(resource)
    for name, star in (("phot", "A"), ("other", "B")):
        table = Table({"star": [star] * 10, "mjd": np.arange(10.0), "mag": np.full(10, 15.0)})
        element = TableElement.from_table(votable, table)
        element.name = name
        resource.tables.append(element)
    path = tmp_path / "two.vot"
    votable.to_xml(str(path))
    source = open_photometry(path)
    assert source.star_ids() == ("A",)
    assert "VOTable file has 2 tables: table 0 'phot', table 1 'other'; read table 0 'phot'" in (
        source.report.table
    )
    assert open_photometry(path, table="other").star_ids() == ("B",)
    assert open_photometry(path, table=1).star_ids() == ("B",)


def test_header_meta_disagreeing_with_the_time_column(tmp_path):
    table = Table({"id": ["A"] * 3, "hjd": [1.0, 2.0, 3.0], "mag": [1.0, 2.0, 3.0]})
    table.meta["time_scale"] = "BJD_TDB"
    table.write(tmp_path / "m.ecsv")
    with pytest.raises(
        ReadError,
        match=r"m.ecsv: mixed time scales: column 'hjd' reads as HJD but the table header says time_scale BJD_TDB",
    ):
        open_photometry(tmp_path / "m.ecsv")
    assert (
        open_photometry(tmp_path / "m.ecsv", ColumnMapping(time_scale="HJD")).star("A").time_scale
        == "HJD"
    )


def test_time_scale_from_the_table_header(tmp_path):
    table = Table({"id": ["A"] * 3, "time": [1.0, 2.0, 3.0], "mag": [1.0, 2.0, 3.0]})
    table.meta["time_scale"] = "MJD"
    table.write(tmp_path / "h.ecsv")
    assert open_photometry(tmp_path / "h.ecsv").star("A").time_scale == "MJD"


def test_trailing_delimiter_and_repeated_header_names(tmp_path):
    lc = open_photometry(_file(tmp_path, "t.csv", "jd,mag,\n1,15,\n2,16,\n")).star("t")
    assert list(lc.mag) == [15.0, 16.0]
    with pytest.raises(ReadError, match=r"r.csv: row 1: the header names a column twice"):
        open_photometry(_file(tmp_path, "r.csv", "jd,mag,MAG\n1,2,3\n"))


def test_whitespace_text_with_quoted_ids(tmp_path):
    text = 'star hjd mag\n"CAV 1" 2460000.5 15.1\n"CAV 1"   2460001.5 15.2\nB 2460000.5 14\n'
    source = open_photometry(_file(tmp_path, "w.txt", text))
    assert source.star_ids() == ("CAV 1", "B")
    assert list(source.star("CAV 1").mag) == [15.1, 15.2]


def test_ecsv_with_a_bad_cell_is_read_row_by_row(tmp_path):
    table = Table(
        {"star_id": ["A"] * 11, "hjd": np.arange(11.0) + 2460000, "mag": np.full(11, 15.0)}
    )
    table.write(tmp_path / "b.ecsv")
    lines = (tmp_path / "b.ecsv").read_text().splitlines()
    data_start = next(i for i, line in enumerate(lines) if not line.startswith("#")) + 1
    lines[data_start + 4] = lines[data_start + 4].replace("15.0", "oops")
    (tmp_path / "b.ecsv").write_text("\n".join(lines) + "\n")
    source = open_photometry(tmp_path / "b.ecsv")
    assert source.star("A").n_points == 10
    assert source.report.skipped[0]["row"] == data_start + 5  # a line number of the file
    assert source.report.skipped[0]["reason"] == "column 'mag': not a number: 'oops'"
    assert "astropy could not read the ECSV file" in source.report.table


def test_write_stars_ignores_a_planted_symlink_and_cleans_up(tmp_path):
    # a symlink at the old predictable temporary name must not be followed
    victim = tmp_path / "victim.txt"
    victim.write_text("keep me")
    (tmp_path / ".out.csv.part").symlink_to(victim)
    lc = LightCurve("KRN-1", np.arange(5.0) + 2460000, np.full(5, 15.0), time_scale="HJD")
    write_stars([lc], tmp_path / "out.csv")
    assert victim.read_text() == "keep me"
    assert open_photometry(tmp_path / "out.csv").star("KRN-1").n_points == 5
    assert [p.name for p in tmp_path.glob(".out.csv.*.part")] == []


def test_write_stars_removes_its_temporary_file_on_failure(tmp_path, monkeypatch):
    from astropy.table import Table

    def broken(self, *args, **kwargs):
        raise OSError(28, "No space left on device")

    monkeypatch.setattr(Table, "write", broken)
    lc = LightCurve("KRN-1", np.arange(5.0) + 2460000, np.full(5, 15.0), time_scale="HJD")
    with pytest.raises(PhasewiseError, match="out.ecsv: cannot write: No space left"):
        write_stars([lc], tmp_path / "out.ecsv")
    assert list(tmp_path.iterdir()) == []


def test_abandoned_temporary_files_are_removed_by_the_next_write(tmp_path):
    import os
    import time

    from phasewise.core.io.writers import remove_abandoned_temps

    old = tmp_path / ".vetted.ecsv.k3j2h1.partial"  # what a killed export leaves
    old.write_bytes(b"x" * 1000)
    fresh = tmp_path / ".vetted.ecsv.a1b2c3.partial"  # an export still running
    fresh.write_bytes(b"y")
    hour_ago = time.time() - 3600
    os.utime(old, (hour_ago, hour_ago))
    assert remove_abandoned_temps(tmp_path / "vetted.ecsv", ".partial") == 1
    assert not old.exists() and fresh.exists()


def test_raw_preview_shows_columns_no_role_was_found_for(tmp_path):
    # the mapping dialog's view of a file whose columns are not recognised
    from phasewise.core.io import raw_preview

    path = tmp_path / "odd.csv"
    path.write_text("when,howbright,spread\n2460000.1,15.2,0.02\n2460000.2,15.3,0.03\n")
    columns, rows = raw_preview(path, n=1)
    assert columns == ["when", "howbright", "spread"]
    assert rows == [{"when": "2460000.1", "howbright": "15.2", "spread": "0.02"}]
