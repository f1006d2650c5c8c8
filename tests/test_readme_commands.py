"""Every command the README shows runs as written from the repository root.

The README's command blocks are read, and each `phasewise …` line is run in
order (as `python -m phasewise`, which is what `.venv/bin/phasewise` calls)
in a scratch folder that sees the repository's `demo_data/`, so the files the
commands write stay out of the tree.  Window commands get `--screenshot` so
they run without a display.
"""

from __future__ import annotations

import os
import re
import shlex
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]


def readme_commands() -> list[list[str]]:
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    commands = []
    for block in re.findall(r"```bash\n(.*?)```", text, flags=re.S):
        for line in block.splitlines():
            line = line.split("  #")[0].strip()
            if line.startswith("phasewise ") and "[" not in line:
                commands.append(shlex.split(line)[1:])
    return commands


def test_the_readme_shows_phasewise_commands():
    commands = readme_commands()
    assert len(commands) >= 10
    assert {c[0] for c in commands} >= {"read", "inspect", "ledger", "analyse", "export", "open"}


@pytest.mark.slow
def test_every_readme_command_runs(tmp_path):
    (tmp_path / "demo_data").symlink_to(ROOT / "demo_data")
    env = {
        **os.environ,
        "HOME": str(tmp_path),
        "XDG_CONFIG_HOME": str(tmp_path / ".config"),
        "XDG_DATA_HOME": str(tmp_path / ".local" / "share"),
        "QT_QPA_PLATFORM": "offscreen",
    }
    for n, args in enumerate(readme_commands()):
        # the shell's part: expand globs as the user's shell would
        args = [
            x for a in args for x in (sorted(str(p) for p in tmp_path.glob(a)) if "*" in a else [a])
        ]
        args = [
            str(Path(a).relative_to(tmp_path)) if a.startswith(str(tmp_path)) else a for a in args
        ]
        if args[0] in ("open", "demo") and "--screenshot" not in args:
            args = [*args, "--screenshot", f"shot{n}.png"]
        proc = subprocess.run(
            [sys.executable, "-m", "phasewise", *args],
            cwd=tmp_path,
            capture_output=True,
            text=True,
            env=env,
            timeout=900,
        )
        assert proc.returncode == 0, f"phasewise {' '.join(args)}:\n{proc.stderr[-2000:]}"
        assert "Traceback" not in proc.stderr
