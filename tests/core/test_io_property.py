"""Random bytes and random small tables: the readers load them or raise PhasewiseError."""

import tempfile
import warnings
from pathlib import Path

import numpy as np
from astropy.table import Table
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from phasewise.core.errors import PhasewiseError
from phasewise.core.io import open_photometry

ENDINGS = [".csv", ".tsv", ".txt", ".ecsv", ".fits", ".vot"]
NAMES = ["id", "star", "jd", "hjd", "bjd", "time", "mag", "err", "band", "flux", "x", "ra"]
EXTRAS = ["id", "err", "band", "ra", "dec", "x", "bjd", "time_scale", "excluded"]

# Mostly tables a reader can load (a time scale and a magnitude), sometimes anything.
_names = st.one_of(
    st.lists(st.sampled_from(EXTRAS), max_size=3, unique=True).map(lambda x: ["hjd", "mag", *x]),
    st.lists(st.sampled_from(NAMES), min_size=1, max_size=5, unique=True),
)


def _load_everything(path, **kwargs):
    try:
        source = open_photometry(path, **kwargs)
        for lc in source.stars():
            assert lc.n_points >= 0
        source.report.to_dict()
        source.preview(3)
    except PhasewiseError:
        pass  # the only error a reader may raise


@settings(max_examples=120, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(data=st.binary(max_size=600), ending=st.sampled_from(ENDINGS))
def test_random_bytes(data, ending):
    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder) / f"random{ending}"
        path.write_bytes(data)
        _load_everything(path)


_cell = st.one_of(
    st.floats(allow_nan=True, allow_infinity=True),
    st.integers(-10, 10),
    st.text(alphabet='abcV,I;\t" -.0123456789e', max_size=6),
)


@settings(max_examples=80, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(
    names=_names,
    rows=st.lists(st.lists(_cell, min_size=5, max_size=5), max_size=12),
    ending=st.sampled_from([".csv", ".tsv", ".txt"]),
)
def test_random_text_tables(names, rows, ending):
    sep = {".csv": ",", ".tsv": "\t", ".txt": " "}[ending]
    lines = [sep.join(names)] + [sep.join(str(c) for c in row[: len(names)]) for row in rows]
    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder) / f"t{ending}"
        path.write_text("\n".join(lines) + "\n")
        _load_everything(path)


_column = st.one_of(
    st.lists(st.floats(allow_nan=True, allow_infinity=True, width=64), min_size=4, max_size=4),
    st.lists(st.sampled_from(["A", "B", "", "V", "1.5", "x"]), min_size=4, max_size=4),
    st.lists(st.integers(-5, 5), min_size=4, max_size=4),
)


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(
    names=_names,
    columns=st.lists(_column, min_size=5, max_size=5),
    ending=st.sampled_from([".ecsv", ".fits", ".vot"]),
)
def test_random_astropy_tables(names, columns, ending):
    table = Table({name: np.array(values) for name, values in zip(names, columns, strict=False)})
    fmt = {".ecsv": "ascii.ecsv", ".fits": "fits", ".vot": "votable"}[ending]
    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder) / f"t{ending}"
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            table.write(path, format=fmt)
        _load_everything(path)
