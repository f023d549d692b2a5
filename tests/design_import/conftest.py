"""Where the real exporters' IPC-2581 files live: read in place, never copied here.

The files sit in the team's shared data directory (`shared/data/ipc2581/` beside the
checkout, or wherever `IPC2581_DATA_DIR` points). In CI a missing directory fails the
run; on a laptop without it the real-file tests are skipped with the reason.
"""

from __future__ import annotations

import os
from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parents[2]


def shared_dir() -> Path | None:
    env = os.environ.get("IPC2581_DATA_DIR")
    if env:
        return Path(env)
    for parent in [REPO, *REPO.parents]:
        candidate = parent / "shared" / "data" / "ipc2581"
        if candidate.is_dir():
            return candidate
    # a clone made elsewhere (CI may clone into a temporary directory): the workplace's
    # shared data directory on these machines
    fixed = Path("/work/shared/data/ipc2581")
    return fixed if fixed.is_dir() else None


@pytest.fixture(scope="session")
def shared_files() -> Path:
    where = shared_dir()
    if where is None or not (where / "tc9-6layer-rev-c.xml").is_file():
        message = "shared IPC-2581 files not found (set IPC2581_DATA_DIR)"
        if os.environ.get("CI", "").lower() == "true":
            pytest.fail(message)
        pytest.skip(message)
    return where
