"""A corpus of malformed photometry files: every one loads as stated or is refused
with a message naming the file (and the row or column where that applies);
no traceback.  Then hypothesis mutates a good file and the same must hold.

Every case is invented for the purpose (star names of our own field).
"""

import bz2
import gzip
import io
import os
import re
import tempfile
import zipfile
from pathlib import Path

import numpy as np
import pytest
from astropy.table import Table
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from phasewise.core.errors import PhasewiseError, ReadError
from phasewise.core.io import ColumnMapping, open_photometry
from phasewise.core.io import readers as readers_module

# a reader that leaves a file open (its CR-only copy, say) fails here, not silently
pytestmark = pytest.mark.filterwarnings(
    "error::ResourceWarning", "error::pytest.PytestUnraisableExceptionWarning"
)


def _rows(n_stars=3, n=20, id_name="star_id", time="hjd", start=2460000.0, ids=None):
    lines = [f"{id_name},{time},mag,err"]
    for k in range(n_stars):
        star = ids[k] if ids else f"KRN-{k:02d}"
        for i in range(n):
            lines.append(f"{star},{start + i * 0.37:.5f},{15 + 0.1 * np.sin(i):.4f},0.01")
    return "\n".join(lines) + "\n"


def _survey_objid(n_stars, name):
    return _rows(n_stars, 10, id_name=name)


def _mixed_jd_mjd():
    text = _rows(1, 20)
    lines = text.splitlines()
    parts = lines[5].split(",")
    parts[1] = f"{float(parts[1]) - 2400000.5:.5f}"  # one MJD among JDs
    lines[5] = ",".join(parts)
    return "\n".join(lines) + "\n"


def _seconds_and_days():
    lines = ["star_id,hjd,mag,err"]
    for i in range(10):
        lines.append(f"S1,{60000 + i:.1f},15.0,0.01")
    for i in range(10):
        lines.append(f"S1,{(60000 + i) * 86400.0:.1f},15.0,0.01")
    return "\n".join(lines) + "\n"


def _fits_bytes(n=30):
    table = Table(
        {
            "star_id": ["KRN-1"] * n,
            "hjd": 2460000.0 + np.arange(n),
            "mag": np.full(n, 15.0),
        }
    )
    buffer = io.BytesIO()
    table.write(buffer, format="fits")
    return buffer.getvalue()


def _gzip_bomb(size):
    buffer = io.BytesIO()
    with gzip.GzipFile(fileobj=buffer, mode="wb") as handle:
        block = b"\0" * (1 << 20)
        for _ in range(size >> 20):
            handle.write(block)
    return buffer.getvalue()


def _zip_bomb(size):
    buffer = io.BytesIO()
    with zipfile.ZipFile(buffer, "w", compression=zipfile.ZIP_DEFLATED) as archive:
        archive.writestr("table.fits", b"\0" * size)
    return buffer.getvalue()


BILLION_LAUGHS = b"""<?xml version="1.0"?>
<!DOCTYPE lolz [<!ENTITY lol "lol"><!ENTITY lol2 "&lol;&lol;&lol;&lol;&lol;&lol;&lol;&lol;">
<!ENTITY lol3 "&lol2;&lol2;&lol2;&lol2;&lol2;&lol2;&lol2;&lol2;">]>
<VOTABLE><RESOURCE><TABLE><FIELD name="hjd" datatype="double"/><DATA><TABLEDATA>
<TR><TD>&lol3;</TD></TR></TABLEDATA></DATA></TABLE></RESOURCE></VOTABLE>
"""

# name, file name, content (bytes/str) or None for special set-up, mapping,
# expected: ("loads", check) or ("error", regex, where) with where in {None, "row", "column"}
CASES = [
    # ids: accepted survey names, and names or values that look like ids
    ("objid upper", "objid.csv", _survey_objid(40, "OBJID"), None, ("stars", 40)),
    ("objid lower", "objid2.csv", _survey_objid(40, "objid"), None, ("stars", 40)),
    ("source_id", "source_ids.csv", _survey_objid(5, "source_id"), None, ("stars", 5)),
    (
        "id-like name",
        "srcnum.csv",
        _survey_objid(6, "src_num"),
        None,
        (
            "error",
            r"no star-id column was recognised, but column 'src_num' looks like one",
            "column",
        ),
    ),
    (
        "id-like values",
        "label.csv",
        _survey_objid(6, "label"),
        None,
        ("error", r"column 'label' looks like one \(6 different values", "column"),
    ),
    (
        "id-like, one star said",
        "label1.csv",
        _survey_objid(6, "label"),
        ColumnMapping(star_id="-"),
        ("stars", 1),
    ),
    # bands
    ("no band", "noband.csv", _rows(2), None, ("band", "unknown")),
    (
        "band from Vmag",
        "vmag.csv",
        "hjd,Vmag\n" + "".join(f"{2460000 + i},15.{i}\n" for i in range(9)),
        None,
        ("band", "V"),
    ),  # fmt: skip
    (
        "two band magnitudes",
        "vimag.csv",
        "hjd,Vmag,Imag\n2460000,15,14\n",
        None,
        ("error", r"several magnitude columns: 'Vmag', 'Imag'", None),
    ),
    ("default band mapped", "mapped.csv", _rows(1), ColumnMapping(default_band="I"), ("band", "I")),
    # physical ranges
    (
        "1e308 magnitude",
        "huge.csv",
        _rows(1, 10).replace("15.0000,0.01", "1e308,0.01", 1),
        None,
        ("skipped", "outside -30 to 40 mag", 1),
    ),
    (
        "inf magnitude",
        "inf.csv",
        _rows(1, 10).replace("15.0000,0.01", "inf,0.01", 1),
        None,
        ("skipped", "outside -30 to 40 mag", 1),
    ),  # fmt: skip
    (
        "huge error",
        "bigerr.csv",
        _rows(1, 10).replace("15.0000,0.01", "15.0,1e5", 1),
        None,
        ("skipped", "above 10 mag", 1),
    ),  # fmt: skip
    (
        "negative error kept for cleaning",
        "negerr.csv",
        _rows(1, 10).replace("15.0000,0.01", "15.0,-0.1", 1),
        None,
        ("stars", 1),
    ),  # fmt: skip
    # time scales and units
    (
        "JD mixed with MJD",
        "jdmjd.csv",
        _mixed_jd_mjd(),
        None,
        ("error", r"Julian dates mixed with modified", "column"),
    ),  # fmt: skip
    (
        "seconds mixed with days",
        "secs.csv",
        _seconds_and_days(),
        None,
        ("error", r"seconds mixed with days", "column"),
    ),  # fmt: skip
    (
        "reduced dates with full JDs",
        "reduced.csv",
        _mixed_jd_mjd().replace("hjd", "hjd-2400000"),
        None,
        ("error", r"times span", "column"),
    ),
    (
        "no time scale",
        "noscale.csv",
        _rows(1).replace("hjd", "time"),
        None,
        ("error", r"does not say its time scale", "column"),
    ),  # fmt: skip
    (
        "scale column disagrees",
        "scalecol.csv",
        "hjd,mag,time_scale\n2460000,15,HJD\n2460001,15,MJD\n",
        None,
        ("error", r"mixed time scales", "column"),
    ),
    # numbers and text
    (
        "decimal commas, semicolons",
        "komma.csv",
        "star_id;hjd;mag\nKRN-1;2460000,5;15,2\nKRN-1;2460001,5;15,3\n",
        None,
        ("error", r"decimal comma in|decimal comma: '2460000,5'", "row"),
    ),  # fmt: skip
    (
        "decimal commas, commas",
        "komma2.csv",
        "star_id,hjd,mag\nKRN-1,2460000,5,15,2\nKRN-1,2460001,5,15,3\n",
        None,
        ("error", r"no usable row: .*wrong number of fields", None),
    ),
    (
        "all rows not numbers",
        "words.csv",
        "star_id,hjd,mag\nKRN-1,a,b\nKRN-1,c,d\n",
        None,
        ("error", r"no usable row", None),
    ),  # fmt: skip
    (
        "header only",
        "header.csv",
        "star_id,hjd,mag\n",
        None,
        ("error", r"has a header but no data rows", None),
    ),  # fmt: skip
    ("empty", "empty.csv", "", None, ("error", r"empty file", None)),
    ("only comments", "comments.csv", "# nothing\n# here\n", None, ("error", r"empty file", None)),
    (
        "not UTF-8",
        "latin.csv",
        b"star_id,hjd,mag\nKRN-\xe9,2460000,15\n",
        None,
        ("error", r"not UTF-8", "row"),
    ),  # fmt: skip
    (
        "duplicate header",
        "dup.csv",
        "hjd,mag,mag\n1,2,3\n",
        None,
        ("error", r"names a column twice", "row"),
    ),  # fmt: skip
    (
        "wrong field count",
        "fields.csv",
        _rows(1, 10) + "KRN-00,2460010.0,15.0\n",
        None,
        ("skipped", "wrong number of fields", 1),
    ),  # fmt: skip
    (
        "empty ids",
        "noid.csv",
        _rows(1, 10) + ",2460011,15,0.01\n",
        None,
        ("skipped", "empty star id", 1),
    ),  # fmt: skip
    ("missing time", "notime.csv", "star_id,mag\nA,1\n", None, ("error", r"no time column", None)),
    (
        "missing magnitude",
        "nomag.csv",
        "star_id,hjd\nA,1\n",
        None,
        ("error", r"no magnitude column", None),
    ),  # fmt: skip
    (
        "flux without zero point",
        "flux.csv",
        "hjd,flux\n2460000,10\n",
        None,
        ("error", r"no zero point", "column"),
    ),  # fmt: skip
    (
        "non-positive fluxes",
        "fluxes.csv",
        "hjd,flux\n" + "".join(f"{2460000 + i},{(i % 4) - 1}\n" for i in range(12)),
        ColumnMapping(zero_point=25.0),
        ("skipped", "flux <= 0", 6),
    ),
    # line ends and quoting
    ("CR-only line ends", "oldmac.csv", _rows(2, 10).replace("\n", "\r"), None, ("stars", 2)),
    ("CRLF line ends", "dos.csv", _rows(2, 10).replace("\n", "\r\n"), None, ("stars", 2)),
    (
        "stray CR",
        "stray.csv",
        _rows(1, 10).replace("15.0000,0.01", "15.0\r00,0.01", 1),
        None,
        ("skipped", "not a number", 1),
    ),  # fmt: skip
    (
        "newline inside a quoted id",
        "quoted.csv",
        'star_id,hjd,mag\n"KRN\n-1",2460000,15\n"KRN-1",2460001,15\n',
        None,
        ("error", r"quoted field runs over a line break", "row"),
    ),
    (
        "quoted ids",
        "quotes.csv",
        'star_id,hjd,mag\n"KRN, 1",2460000,15\n"KRN, 1",2460001,15\n',
        None,
        ("stars", 1),
    ),  # fmt: skip
    ("BOM", "bom.csv", "\ufeff" + _rows(1, 5), None, ("stars", 1)),
    (
        "control characters in ids",
        "ansi.csv",
        _rows(1, 5, ids=["KRN\x1b[31m-1"]),
        None,
        ("stars", 1),
    ),  # fmt: skip
    (
        "NUL bytes",
        "nul.csv",
        _rows(1, 5).replace("15.", "1\x005.", 1),
        None,
        ("skipped", "not a number", 1),
    ),  # fmt: skip
    # binary formats
    (
        "garbage FITS",
        "junk.fits",
        bytes(range(256)) * 20,
        None,
        ("error", r"cannot read as fits", None),
    ),  # fmt: skip
    (
        "truncated FITS",
        "cut.fits",
        _fits_bytes()[:3000],
        None,
        ("error", r"cannot read as fits|no table", None),
    ),  # fmt: skip
    (
        "broken VOTable",
        "broken.vot",
        b"<VOTABLE><RESOURCE><TABLE>",
        None,
        ("error", r"cannot read as votable", None),
    ),  # fmt: skip
    (
        "billion laughs",
        "laughs.vot",
        BILLION_LAUGHS,
        None,
        ("error", r"cannot read as votable|no magnitude column", None),
    ),  # fmt: skip
    (
        "gzip bomb",
        "bomb.fits.gz",
        "GZIP_BOMB",
        None,
        ("error", r"inflates to more than 1 MB", None),
    ),  # fmt: skip
    (
        "zip bomb named .fits",
        "bomb.fits",
        "ZIP_BOMB",
        None,
        ("error", r"zip-compressed file inflates", None),
    ),  # fmt: skip
    (
        "bzip2 bomb named .fits",
        "bomb2.fits",
        "BZ2_BOMB",
        None,
        ("error", r"bzip2-compressed file inflates", None),
    ),  # fmt: skip
    ("FIFO", "pipe.csv", "FIFO", None, ("error", r"not a regular file", None)),
    (
        "gzip named .csv",
        "packed.csv",
        gzip.compress(_rows(1).encode()),
        None,
        ("error", r"not UTF-8", "row"),
    ),  # fmt: skip
]


def _write(folder: Path, name: str, content) -> Path:
    path = folder / name
    if content == "FIFO":
        os.mkfifo(path)
    elif content == "GZIP_BOMB":
        path.write_bytes(_gzip_bomb(3 << 20))
    elif content == "ZIP_BOMB":
        path.write_bytes(_zip_bomb(3 << 20))
    elif content == "BZ2_BOMB":
        path.write_bytes(bz2.compress(b"\0" * (3 << 20)))
    elif isinstance(content, bytes):
        path.write_bytes(content)
    else:
        path.write_bytes(content.encode("utf-8"))
    return path


def test_the_corpus_is_large_enough():
    assert len(CASES) >= 40


@pytest.mark.parametrize(
    ("name", "filename", "content", "mapping", "expected"), CASES, ids=[c[0] for c in CASES]
)
def test_malformed_file(tmp_path, monkeypatch, name, filename, content, mapping, expected):
    monkeypatch.setattr(readers_module, "MAX_INFLATED_BYTES", 1 << 20)
    path = _write(tmp_path, filename, content)
    kind = expected[0]
    if kind == "error":
        _, pattern, where = expected
        with pytest.raises(PhasewiseError) as info:
            source = open_photometry(path, mapping)
            list(source.stars())
        message = str(info.value)
        assert isinstance(info.value, ReadError)
        assert message.startswith(str(path)), message  # names the file first
        assert re.search(pattern, message), message
        if where == "row":
            assert re.search(r": row \d+", message), message
        elif where == "column":
            assert "column '" in message, message
        return
    source = open_photometry(path, mapping)
    curves = list(source.stars())
    report = source.report
    if kind == "stars":
        assert len(curves) == expected[1]
        assert all(lc.n_points > 0 for lc in curves)
    elif kind == "band":
        assert {b for lc in curves for b in lc.bands} == {expected[1]}
    elif kind == "skipped":
        _, reason, count = expected
        counted = {k: v for k, v in report.skip_counts.items() if reason in k}
        assert sum(counted.values()) == count, report.skip_counts
        assert all(str(path) == s["file"] and s["row"] >= 1 for s in report.skipped)


def test_unknown_band_gets_no_v_band_relation(tmp_path):
    # a V-calibrated relation must not be applied to data of unknown band
    from phasewise.core.analysis import analyse
    from phasewise.core.synthetic import make_survey

    survey = make_survey(n_stars=4, seed=5)
    pairs = zip(survey.lightcurves, survey.stars, strict=True)
    lc = next(lc for lc, s in pairs if s.truth.class_code == "RRab")
    v = lc.band_mask("V")
    lines = ["hjd,mag,err"] + [
        f"{t:.6f},{m:.4f},{e:.4f}"
        for t, m, e in zip(lc.time[v], lc.mag[v], lc.mag_err[v], strict=True)
    ]
    path = tmp_path / "rrab.csv"
    path.write_text("\n".join(lines) + "\n")
    read = open_photometry(path).star("rrab")
    assert read.bands == ("unknown",)
    physics = analyse(read).to_dict()["physics"]
    assert physics and all(p["value"] is None for p in physics)
    assert all(any("band not observed" in f for f in p["flags"]) for p in physics)


# ----------------------------------------------------------------- fuzzing
GOOD = _rows(2, 8).encode()
_inserts = st.sampled_from(
    [b"\r", b"\n", b'"', b",", b";", b"\t", b"\x00", b"\x1b[2J", b"\xff", b"1e308", b"-", b"#",
     b",,", b"nan", b"2400000", b" ", b"\xe2\x80\xae", b"=", b"0,5"]
)  # fmt: skip


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(
    edits=st.lists(st.tuples(st.integers(0, len(GOOD)), _inserts, st.booleans()), max_size=6),
    ending=st.sampled_from([".csv", ".tsv", ".txt", ".ecsv"]),
)
def test_mutated_files_load_or_say_where(edits, ending):
    data = bytearray(GOOD)
    for position, text, replace in edits:
        position = min(position, len(data))
        data[position : position + (len(text) if replace else 0)] = text
    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder) / f"mutated{ending}"
        path.write_bytes(bytes(data))
        try:
            source = open_photometry(path)
            for lc in source.stars():
                assert np.all(np.isfinite(lc.time) | ~lc.good)
            source.report.to_dict()
        except PhasewiseError as exc:
            assert str(exc).startswith(str(path)), str(exc)
