"""Progress bars: readable lines when stderr is a log file, not a terminal."""

import io

import motes.progress as progress


def test_progress_lines_in_a_log_are_whole_lines(monkeypatch):
    log = io.StringIO()  # not a terminal
    monkeypatch.setattr(progress.sys, "stderr", log)
    monkeypatch.setattr(progress, "LOG_INTERVAL", 0.0)
    outer = progress.progress_bar(total=3, desc="outer")
    inner = progress.progress_bar(total=2, desc="inner", leave=False)
    inner.update(2)
    inner.close()
    outer.update(3)
    outer.close()
    text = log.getvalue()
    assert "\r" not in text and "\x1b" not in text
    lines = text.splitlines()
    assert lines and all(line.strip() for line in lines)
    assert any(line.startswith("outer: 100%") and "3/3" in line for line in lines)
    assert any(line.startswith("inner: 100%") for line in lines)


def test_log_interval_applies_off_a_terminal(monkeypatch):
    monkeypatch.setattr(progress.sys, "stderr", io.StringIO())
    bar = progress.progress_bar(total=10, desc="x", mininterval=0.1)
    assert bar.mininterval >= progress.LOG_INTERVAL
    bar.close()
