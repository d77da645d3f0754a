"""Shared helpers of the Python package's tests: the repository root and the CLI binary whose
``--json`` output the package must reproduce."""

import json
import os
import pathlib
import subprocess

import pytest

ROOT = pathlib.Path(__file__).resolve().parents[2]


def _binary() -> pathlib.Path:
    given = os.environ.get("ERGOPATH_BIN")
    if given:
        return pathlib.Path(given)
    built = [ROOT / "target" / p / "ergopath" for p in ("release", "debug")]
    found = [b for b in built if b.exists()]
    if not found:
        pytest.skip("no ergopath binary: run `cargo build --release` first (or set ERGOPATH_BIN)")
    return max(found, key=lambda b: b.stat().st_mtime)


@pytest.fixture(scope="session")
def cli():
    """Runs the CLI from the repository root and returns its parsed ``--json`` output."""
    binary = _binary()

    def run(*args):
        done = subprocess.run(
            [str(binary), *map(str, args)], cwd=ROOT, capture_output=True, text=True, timeout=600
        )
        assert done.returncode == 0, done.stderr
        return json.loads(done.stdout)

    return run


@pytest.fixture
def at_root(monkeypatch):
    """Work from the repository root, so that model paths read as the CLI's do."""
    monkeypatch.chdir(ROOT)
    return ROOT
