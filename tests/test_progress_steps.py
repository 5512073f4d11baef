"""The late progress bar of check, diff and gate: shown only after about a second."""

from __future__ import annotations

from contextlib import contextmanager

from tracecheck.report import progress as module


class _Clock:
    def __init__(self) -> None:
        self.now = 100.0

    def __call__(self) -> float:
        return self.now


def _recording(monkeypatch):
    opened, updates, clock = [], [], _Clock()

    @contextmanager
    def fake(description, *, enabled):
        opened.append(description)
        yield lambda fraction, label: updates.append((fraction, label))

    monkeypatch.setattr(module, "progress", fake)
    monkeypatch.setattr(module.time, "monotonic", clock)
    return opened, updates, clock


def test_quick_work_shows_no_bar(monkeypatch):
    opened, updates, clock = _recording(monkeypatch)
    with module.late_progress("check", enabled=True) as step:
        step(0.0, "reading")
        clock.now += module.AFTER_SECONDS / 2
        step(0.6, "rules")
    assert opened == [] and updates == []


def test_long_work_opens_the_bar_once_at_the_next_step(monkeypatch):
    opened, updates, clock = _recording(monkeypatch)
    with module.late_progress("diff", enabled=True) as step:
        step(0.0, "reading new")
        clock.now += module.AFTER_SECONDS + 0.5
        step(0.3, "reading old")
        step(0.6, "comparing")
    assert opened == ["diff"]
    assert updates == [(0.3, "reading old"), (0.6, "comparing")]


def test_disabled_never_opens(monkeypatch):
    opened, _, clock = _recording(monkeypatch)
    with module.late_progress("gate", enabled=False) as step:
        clock.now += 10
        step(0.5, "comparing")
    assert opened == []


def test_no_bar_in_ci_when_quiet_or_piped(monkeypatch):
    monkeypatch.setattr(module.sys.stderr, "isatty", lambda: True, raising=False)
    monkeypatch.setenv("CI", "true")
    assert not module.progress_enabled(quiet=False)
    monkeypatch.delenv("CI")
    assert module.progress_enabled(quiet=False)
    assert not module.progress_enabled(quiet=True)
    monkeypatch.setattr(module.sys.stderr, "isatty", lambda: False, raising=False)
    assert not module.progress_enabled(quiet=False)
