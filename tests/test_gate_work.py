"""Where the gate's work runs: forked children, their fallback in this process, and the
byte-identical report whichever path is taken.

The repository and its expected findings come from ``tests/test_gate.py`` (a dangling
``derives_from`` new on head, REQ-2's coverage gap resolved; written out by hand from
how the repository is built). ``FORK_MIN = 0`` makes every modified model take the
forked path that only large models take in real use.
"""

from __future__ import annotations

import json
import os
import threading
import time
import weakref

import pytest

import tracecheck.gate
from tests.test_gate import NEW, RESOLVED, repo, run, subjects  # noqa: F401  (repo is a fixture)
from tracecheck import background

needs_fork = pytest.mark.skipif(not background.forkable(), reason="needs fork and two cores")

FORMATS = ("json", "sarif", "junit", "github", "markdown", "text")


def reports(formats=FORMATS) -> dict[str, str]:
    return {fmt: run("gate", "--format", fmt, "model/thread.json").stdout for fmt in formats}


@needs_fork
def test_forked_sides_and_diff_give_byte_identical_reports(repo, monkeypatch):  # noqa: F811
    in_process = reports()
    doc = json.loads(in_process["json"])
    assert subjects(doc["findings"]) == NEW and subjects(doc["resolved"]) == RESOLVED
    monkeypatch.setattr(tracecheck.gate, "FORK_MIN", 0)
    assert reports() == in_process


@needs_fork
def test_a_failing_child_is_redone_here_from_the_bytes(repo, monkeypatch):  # noqa: F811
    """Every child dies at once; the parent reads the sides again and computes the same."""
    import tracecheck.commands.gate as command

    expected = reports(("json", "sarif"))
    parent = os.getpid()
    reads = []
    read = command._read
    monkeypatch.setattr(command, "_read", lambda *a: reads.append(a[1]) or read(*a))
    diff, side_work = tracecheck.gate._diff, tracecheck.gate._side_work

    def dying(function):
        def wrapper(*args, **kwargs):
            if os.getpid() != parent:
                os._exit(3)  # a child killed midway (out of memory, a signal)
            return function(*args, **kwargs)
        return wrapper

    monkeypatch.setattr(tracecheck.gate, "FORK_MIN", 0)
    monkeypatch.setattr(tracecheck.gate, "_diff", dying(diff))
    monkeypatch.setattr(tracecheck.gate, "_side_work", dying(side_work))
    assert reports(("json", "sarif")) == expected
    # per report: head read here (base only in the dead child), then both sides again
    assert len(reads) == 2 * 3


def test_without_fork_everything_runs_here(repo, monkeypatch):  # noqa: F811
    expected = reports(("json", "text"))
    monkeypatch.setattr(tracecheck.gate, "FORK_MIN", 0)
    monkeypatch.setattr(background, "forkable", lambda fork=True: False)
    forked = []
    monkeypatch.setattr(os, "fork", lambda: forked.append(1) or pytest.fail("forked"))
    assert reports(("json", "text")) == expected and forked == []


def test_unchanged_file_is_checked_once(repo, monkeypatch):  # noqa: F811
    from tests.conftest import git

    git(repo, "checkout", "-q", "main")
    calls = []
    side_work = tracecheck.gate._side_work
    monkeypatch.setattr(tracecheck.gate, "_side_work", lambda *a: calls.append(a[3]) or side_work(*a))
    diffs = []
    monkeypatch.setattr(tracecheck.gate, "_diff", lambda *a: diffs.append(1))
    doc = json.loads(run("gate", "--format", "json", "model/thread.json").stdout)
    assert doc["gate"]["files"][0]["status"] == "unchanged"
    assert calls == ["model"] and diffs == []  # one side's rules, no diff


@needs_fork
def test_a_fallback_replaces_the_function_in_the_parent():
    class Work:
        def __call__(self):
            return threading.Lock()  # cannot be pickled: the child reports failure

    work = Work()
    alive = weakref.ref(work)
    pending = background.start(work, fallback=lambda: "computed here")
    del work
    assert alive() is None  # the parent kept only the fallback
    assert pending.result() == "computed here"


@needs_fork
def test_cancel_stops_and_reaps_the_child():
    pending = background.start(lambda: time.sleep(30))
    pid = pending._pid
    started = time.monotonic()
    pending.cancel()
    assert time.monotonic() - started < 10
    with pytest.raises(ChildProcessError):
        os.waitpid(pid, os.WNOHANG)  # already reaped: no zombie left behind
    pending.cancel()  # a second cancel does nothing


@needs_fork
def test_children_that_sent_their_result_are_reaped():
    pids = [background.start(os.getpid) for _ in range(3)]
    assert len({p.result() for p in pids}) == 3
    deadline = time.monotonic() + 20
    while background._EXITING and time.monotonic() < deadline:
        time.sleep(0.05)
        background._reap()
    assert background._EXITING == []  # no zombie left once they have exited


def test_start_blob_reads_what_git_show_prints(repo):  # noqa: F811
    """Reference: ``git show REV:PATH`` prints a blob's bytes (git documentation)."""
    from tests.conftest import git
    from tracecheck import gitsource
    from tracecheck.errors import GitError

    for rev in ("main", "feature"):
        expected = git(repo, "show", f"{rev}:model/thread.json").encode("utf-8")
        assert gitsource.start_blob(rev, "model/thread.json", repo)() == expected
        assert gitsource.read_blob(rev, "model/thread.json", repo) == expected
    assert gitsource.start_blob("main", "model/absent.json", repo) is None
    with pytest.raises(GitError, match="is a folder"):
        gitsource.start_blob("main", "model", repo)


@pytest.mark.parametrize("fork_min", [0, 10**9])
def test_unreadable_sides_exit_2_naming_the_file(repo, monkeypatch, fork_min):  # noqa: F811
    from tests.conftest import git

    monkeypatch.setattr(tracecheck.gate, "FORK_MIN", fork_min)
    model = repo / "model" / "thread.json"
    good = model.read_text("utf-8")
    model.write_text("{not json", encoding="utf-8")  # head (the working tree) unreadable
    result = run("gate", "model/thread.json")
    assert result.exit_code == 2 and "model/thread.json" in result.stderr
    assert "Traceback" not in result.stderr
    git(repo, "commit", "-qam", "broken export")  # now base is unreadable, head fine
    model.write_text(good, encoding="utf-8")
    result = run("gate", "--base", "HEAD", "--exact-base", "model/thread.json")
    assert result.exit_code == 2 and "model/thread.json" in result.stderr
    assert "Traceback" not in result.stderr


def test_start_blob_reads_in_this_process_when_no_temporary_file_can_be_made(repo, monkeypatch):  # noqa: F811
    import tempfile

    from tests.conftest import git
    from tracecheck import gitsource

    def refuse():
        raise OSError(28, "No space left on device")

    monkeypatch.setattr(tempfile, "TemporaryFile", refuse)
    expected = git(repo, "show", "main:model/thread.json").encode("utf-8")
    assert gitsource.start_blob("main", "model/thread.json", repo)() == expected


@needs_fork
def test_when_fork_fails_the_work_is_done_here(repo, monkeypatch):  # noqa: F811
    expected = reports(("json",))
    monkeypatch.setattr(tracecheck.gate, "FORK_MIN", 0)

    def no_fork():
        raise OSError(11, "Resource temporarily unavailable")

    monkeypatch.setattr(os, "fork", no_fork)
    assert reports(("json",)) == expected
    assert background.start(os.getpid, fallback=lambda: "here").result() == "here"
    assert background.start(os.getpid).result() == os.getpid()
