import numpy as np
import pytest

from phasewise.core.errors import PhasewiseError
from phasewise.core.lightcurve import LightCurve, StarMeta


def make(n=20, **kw):
    t = np.linspace(0, 10, n)
    return LightCurve("S1", t, 15 + 0.1 * np.sin(t), np.full(n, 0.01), **kw)


def test_arrays_are_read_only_and_mask_never_deletes():
    lc = make()
    with pytest.raises(ValueError):
        lc.mag[0] = 0
    excluded = lc.exclude([0, 1, 2])
    assert excluded.n_points == lc.n_points == 20
    assert excluded.n_good == 17
    assert excluded.restore([1]).n_good == 18
    assert lc.n_good == 20  # the original is unchanged


def test_bands_most_points_first_and_per_band_arrays():
    band = np.array(["I"] * 12 + ["V"] * 8)
    lc = make(band=band)
    assert lc.bands == ("I", "V")
    t, m, e = lc.arrays("V")
    assert t.size == 8


def test_missing_errors_mean_equal_weights():
    t = np.arange(15.0)
    lc = LightCurve("S2", t, np.ones(15))
    assert not lc.has_errors
    assert np.all(lc.mag_err == 1)
    assert not lc.with_excluded(np.zeros(15, bool)).has_errors


def test_non_finite_and_nonpositive_errors_are_not_good():
    lc = make()
    mag = lc.mag.copy()
    mag[3] = np.nan
    err = lc.mag_err.copy()
    err[4] = 0
    bad = LightCurve("S3", lc.time, mag, err)
    assert bad.n_good == 18


def test_too_few_points_is_a_mark_not_an_error():
    assert make(n=5).too_few_points
    assert not make(n=10).too_few_points


def test_bad_construction_names_the_field():
    with pytest.raises(PhasewiseError, match="field 'mag'"):
        LightCurve("S", np.arange(3.0), np.arange(4.0))
    with pytest.raises(PhasewiseError, match="time scale"):
        make(time_scale="GPS")
    with pytest.raises(PhasewiseError, match=r"stars\.csv: field 'star_id'"):
        LightCurve(" ", [1.0], [1.0], meta=StarMeta(source_file="stars.csv"))


def test_band_labels_that_strip_to_one_name_are_one_band():
    # " V" and "V" are the same filter; the derived band views are computed once
    lc = LightCurve(
        "s", np.arange(6.0), np.ones(6), np.full(6, 0.01), band=[" V", "V", "I", "V ", "I", "B"]
    )
    assert lc.bands == ("V", "I", "B")
    assert lc.band_mask("V").tolist() == [True, True, False, True, False, False]
    assert not lc.band_mask("R").any()
    excluded = lc.with_excluded(np.array([True, True, True, True, False, False]))
    assert excluded.bands == ("B", "I")  # one point each: ties go by name
    assert not excluded.good.flags.writeable


@pytest.mark.parametrize(
    "labels",
    [
        ["V"] * 6,
        ["I", "V", " V", "I ", "V", "I"],
        ["V", 7, "V", 7.0, "I", "V"],  # not every label a string: the general path
        [np.str_("V"), "V", "I", "I", "V", "V"],
        [f"b{k}" for k in range(6)],  # six distinct labels
    ],
)
def test_band_labels_are_read_as_the_plain_string_conversion_does(labels):
    # reference: np.unique of the labels converted to str, stripped (the plain rule)
    band = np.array(labels, dtype=object)
    lc = LightCurve("s", np.arange(6.0), np.zeros(6), band=band)
    names = [str(x).strip() for x in band.astype(str)]
    assert list(lc.band) == names
    assert set(lc.bands) == set(names)
    for name in set(names):
        assert np.array_equal(lc.band_mask(name), np.array(names) == name)


def test_many_band_labels_are_read_the_plain_way():
    band = np.array([f"b{k % 11}" for k in range(40)], dtype=object)
    lc = LightCurve("s", np.arange(40.0), np.zeros(40), band=band)
    assert list(lc.band) == list(band)
    assert len(lc.bands) == 11
