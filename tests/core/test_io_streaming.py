"""A long CSV is read star by star: memory follows one star, not the file."""

import tracemalloc

import pytest

from phasewise.core.io import open_photometry


def _big_csv(path, n_stars=40, n_rows=2500):
    with open(path, "w") as handle:
        handle.write("star_id,hjd,mag,mag_err,band\n")
        for s in range(n_stars):
            for i in range(n_rows):
                handle.write(f"CAV-{s:03d},{2460000 + i * 0.37:.5f},{15 + s / 100:.4f},0.012,V\n")
    return path


def _peak(fn):
    tracemalloc.start()
    try:
        fn()
        return tracemalloc.get_traced_memory()[1]
    finally:
        tracemalloc.stop()


@pytest.mark.slow  # several seconds; run by the slow suite
def test_peak_memory_for_all_stars_is_that_of_one_star(tmp_path):
    path = _big_csv(tmp_path / "big.csv")
    source = open_photometry(path)
    assert len(source) == 40
    one = _peak(lambda: source.star("CAV-000"))
    total_points = 0

    def read_all():
        nonlocal total_points
        for lc in source.stars():
            total_points += lc.n_points

    every = _peak(read_all)
    assert total_points == 100_000
    # streaming: 40 stars cost about what one costs (a whole-file read would be ~40x)
    assert every < 2 * one


def test_index_is_one_run_per_star_for_a_sorted_file(tmp_path):
    source = open_photometry(_big_csv(tmp_path / "big.csv", n_stars=5, n_rows=50))
    runs = source._parts[0].table.runs
    assert {star: len(r) for star, r in runs.items()} == {f"CAV-{s:03d}": 1 for s in range(5)}
