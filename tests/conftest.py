"""Shared fixtures. Strict by default: tests run in their own temporary folder with a
temporary HOME, and a write anywhere else in the project tree fails the run."""

from __future__ import annotations

import json
import os
import subprocess
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
SHARED_DATA = ROOT.parent / "shared" / "data"


@pytest.fixture(autouse=True)
def isolated(tmp_path, monkeypatch):
    """Run in tmp_path with a private HOME and a pinned git identity."""
    home = tmp_path / "_home"
    home.mkdir()
    monkeypatch.setenv("HOME", str(home))
    monkeypatch.setenv("XDG_CACHE_HOME", str(home / ".cache"))
    monkeypatch.setenv("XDG_CONFIG_HOME", str(home / ".config"))
    monkeypatch.setenv("GIT_CONFIG_NOSYSTEM", "1")
    for key, value in {
        "GIT_AUTHOR_NAME": "Test Author",
        "GIT_AUTHOR_EMAIL": "author@tracecheck.invalid",
        "GIT_COMMITTER_NAME": "Test Author",
        "GIT_COMMITTER_EMAIL": "author@tracecheck.invalid",
        "GIT_AUTHOR_DATE": "2026-01-01T00:00:00+00:00",
        "GIT_COMMITTER_DATE": "2026-01-01T00:00:00+00:00",
    }.items():
        monkeypatch.setenv(key, value)
    monkeypatch.delenv("NO_COLOR", raising=False)
    monkeypatch.delenv("TRACECHECK_DEBUG", raising=False)
    monkeypatch.chdir(tmp_path)
    before = _tree_state()
    yield tmp_path
    after = _tree_state()
    assert after == before, f"a test wrote into the project tree: {sorted(after ^ before)[:5]}"


def _tree_state() -> frozenset[str]:
    # Untracked files at the top of the checkout and among the fixtures: where a test
    # that forgot its temporary folder would write (a relative -o, a demo folder).
    out = subprocess.run(
        ["git", "ls-files", "--others", "--exclude-standard", "--", ":(top,glob)*", "fixtures"],
        cwd=ROOT, capture_output=True, text=True, check=False,
    ).stdout
    return frozenset(out.split())


def thread(elements, links, **meta) -> dict:
    document = {"format": "tracecheck-thread/1", "elements": elements, "links": links}
    if meta:
        document["model"] = meta
    return document


def write_thread(path: Path, elements, links) -> Path:
    path.write_text(json.dumps(thread(elements, links), indent=2), encoding="utf-8")
    return path


def git(cwd: Path, *args: str) -> str:
    return subprocess.run(["git", *args], cwd=cwd, check=True, capture_output=True, text=True).stdout


def shared_file(name: str) -> Path:
    """A reference file from ../shared/data: skip outside CI when absent, fail in CI."""
    path = SHARED_DATA / name
    if not path.is_file():
        if os.environ.get("CI"):
            pytest.fail(f"reference file {path} is missing in CI")
        pytest.skip(f"reference file {path} not present beside the checkout")
    return path
