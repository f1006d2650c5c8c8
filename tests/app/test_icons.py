"""Where the window finds its icons: the source tree first, then a wheel's data folder."""

from __future__ import annotations

from pathlib import Path

from app.desk.icons import ICON_DIR, icon_dir

ROOT = Path(__file__).resolve().parents[2]


def test_the_source_tree_icons_are_found_and_complete():
    assert ICON_DIR == ROOT / "icons"
    assert len(list(ICON_DIR.glob("*.svg"))) >= 10


def test_an_installed_data_folder_is_used_when_the_source_one_is_absent(tmp_path):
    absent, installed = tmp_path / "src" / "icons", tmp_path / "share" / "phasewise" / "icons"
    installed.mkdir(parents=True)
    (installed / "confirm.svg").write_text((ROOT / "icons" / "confirm.svg").read_text())
    assert icon_dir((absent, installed)) == installed
    # neither holds icons: the first is named (icons then come out empty, never an error)
    assert icon_dir((absent, tmp_path / "nothing")) == absent
