"""The README's shell examples run as written against a live server (both stores): every curl answers 2xx, the
commands succeed, and each answer the README shows in a comment under a command is in the output.

The only change is the address: the server listens on a free port instead of 8000. ``.venv/bin/calcsvc`` and
``.venv/bin/python`` are this interpreter, in a scratch folder that holds the examples, as a fresh clone after
``make serve`` would; the command line reaches the server's database through ``DATABASE_URL``.
"""

from __future__ import annotations

import itertools
import os
import re
import subprocess
import sys
from pathlib import Path

import pytest
from flask import Flask

from calcsvc.data.seed import SEED_AUTHOR
from calcsvc.service.designs import seed_demo_design

pytest_plugins = ("live_server",)

REPO = Path(__file__).resolve().parents[2]
README = (REPO / "README.md").read_text()
BLOCKS = re.findall(r"```sh\n(.*?)```", README, flags=re.DOTALL)
# Blocks that build or run the service itself (make, docker) need more than a live server.
RUNNABLE = [block for block in BLOCKS if not re.search(r"^\s*(make|docker) ", block, flags=re.MULTILINE)]
# Every curl fails the block on an HTTP error answer; -S keeps curl's own error message.
PRELUDE = 'set -euo pipefail\ncurl() { command curl --fail-with-body -sS "$@"; }\n'


def expected_answers(block: str) -> list[str]:
    """The answers the README shows as comments right under a command, such as ``# 300.0``."""
    lines = block.splitlines()
    return [
        line.strip()[2:]
        for before, line in itertools.pairwise(lines)
        if line.startswith("# ") and before.startswith("curl ")
    ]


@pytest.fixture
def served(seeded: Flask) -> Flask:
    """The database as ``make serve`` leaves it: the seed parts and the demo channel saved as a design."""
    seed_demo_design(seeded.extensions["calcsvc.db"], SEED_AUTHOR)
    return seeded


@pytest.fixture
def clone(tmp_path: Path) -> Path:
    """A scratch folder laid out as a checkout after ``make serve``: examples/ and .venv/bin."""
    (tmp_path / "examples").symlink_to(REPO / "examples")
    bin_dir = tmp_path / ".venv" / "bin"
    bin_dir.mkdir(parents=True)
    (bin_dir / "python").symlink_to(sys.executable)
    calcsvc = bin_dir / "calcsvc"
    entry = "import sys; from calcsvc.cli import main; sys.exit(main())"  # as the installed console script
    calcsvc.write_text(f'#!/bin/sh\nexec "{sys.executable}" -c "{entry}" "$@"\n')
    calcsvc.chmod(0o755)
    return tmp_path


def test_the_readme_has_the_examples_this_test_runs() -> None:
    assert len(RUNNABLE) >= 6
    assert any("/send-back" in block for block in RUNNABLE) and any("select/channel" in b for b in RUNNABLE)
    assert any(answers[0] == "300.0" and answers[1].startswith("fails: led_current_rating: 0,2578") for answers in
               map(expected_answers, RUNNABLE) if len(answers) == 2)  # fmt: skip


@pytest.mark.parametrize("number", range(len(RUNNABLE)))
def test_readme_shell_block_runs_as_written(
    number: int, live_url: str, served: Flask, database_url: str, clone: Path
) -> None:
    block = RUNNABLE[number]
    environment = {
        **os.environ,
        "DATABASE_URL": database_url,
        "CALCSVC_URL": live_url,
        "PYTHONPATH": str(REPO),
    }
    environment.pop("CALCSVC_TOKEN", None)
    script = PRELUDE + block.replace("http://127.0.0.1:8000", live_url)
    done = subprocess.run(
        ["bash", "-c", script], cwd=clone, env=environment, capture_output=True, text=True, timeout=300
    )
    assert done.returncode == 0, f"block {number} failed:\n{block}\nstdout:\n{done.stdout}\nstderr:\n{done.stderr}"
    for answer in expected_answers(block):
        assert answer in done.stdout, f"{answer!r} not in the output of block {number}"
