"""The HTML audit report in a real headless browser (Debian's chromium).

Skips when chromium is absent outside CI; fails in CI, where ``.ci/run`` installs it.
The page's own script marks the document when it has run, counts script errors and
says whether the first summary row lies in the first screen.
"""

from __future__ import annotations

import os
import re
import shutil
import struct
import subprocess
import zlib
from pathlib import Path

import pytest

from tracecheck.commands.common import Streams
from tracecheck.commands.coverage import coverage_report
from tracecheck.demo.stages import stage_bytes
from tracecheck.report import RenderOptions, render

WIDTH, HEIGHT = 1280, 800


def browser() -> str:
    for name in ("chromium", "chromium-browser"):
        found = shutil.which(name)
        if found:
            return found
    if os.environ.get("CI"):
        pytest.fail("chromium is not installed; .ci/run installs Debian's chromium for this test")
    pytest.skip("chromium is not installed (install it, e.g. apt-get install chromium)")


def chromium(page: Path, tmp_path: Path, *extra: str, fragment: str = "") -> subprocess.CompletedProcess:
    command = [browser(), "--headless", "--no-sandbox", "--disable-gpu", f"--window-size={WIDTH},{HEIGHT}",
               f"--user-data-dir={tmp_path / 'profile'}", "--enable-logging=stderr", "--v=0",
               "--hide-scrollbars", *extra, page.as_uri() + fragment]
    return subprocess.run(command, capture_output=True, text=True, timeout=180, check=False)


def report_page(tmp_path: Path) -> Path:
    model = tmp_path / "thread.json"
    model.write_bytes(stage_bytes("qualification"))
    streams = Streams(None, None)
    report = coverage_report(str(model), group_by=("integrity", "level"), streams=streams)
    page = tmp_path / "coverage.html"
    page.write_text(render("coverage", "html", report, RenderOptions()), encoding="utf-8")
    return page


def root_attributes(dom: str) -> dict[str, str]:
    match = re.search(r"<html([^>]*)>", dom)
    assert match, "the browser returned no document"
    return dict(re.findall(r'([\w-]+)="([^"]*)"', match.group(1)))


def png_size_and_colours(path: Path) -> tuple[int, int, int]:
    # PNG (ISO/IEC 15948): IHDR first, width and height big-endian; pixel data in IDAT.
    data = path.read_bytes()
    assert data[:8] == b"\x89PNG\r\n\x1a\n"
    width, height = struct.unpack(">II", data[16:24])
    chunks, offset = [], 8
    while offset < len(data):
        length, kind = struct.unpack(">I4s", data[offset:offset + 8])
        if kind == b"IDAT":
            chunks.append(data[offset + 8:offset + 8 + length])
        offset += 12 + length
    pixels = zlib.decompress(b"".join(chunks))
    return width, height, len(set(pixels[::7]))


def test_report_renders_without_script_errors_and_summary_in_first_screen(tmp_path):
    page = report_page(tmp_path)
    done = chromium(page, tmp_path, "--dump-dom")
    assert done.returncode == 0, done.stderr[-2000:]
    attributes = root_attributes(done.stdout)
    assert attributes.get("data-ready") == "1", "the page script did not finish"
    assert attributes.get("data-script-errors") == "0"
    assert attributes.get("data-summary-visible") == "1", "the summary is not in the first screen"
    assert "Uncaught" not in done.stderr

    shot = tmp_path / "screen.png"
    taken = chromium(page, tmp_path, f"--screenshot={shot}")
    assert taken.returncode == 0 and shot.is_file(), taken.stderr[-2000:]
    width, height, colours = png_size_and_colours(shot)
    assert (width, height) == (WIDTH, HEIGHT)
    assert colours > 8, "the screenshot is blank"


def test_sorting_and_filtering_work_in_the_browser(tmp_path):
    page = report_page(tmp_path)
    done = chromium(page, tmp_path, "--dump-dom", fragment="#selftest")
    attributes = root_attributes(done.stdout)
    assert attributes.get("data-script-errors") == "0"
    shown, order = re.fullmatch(r"shown=(\d+);order=(.*)", attributes["data-selftest"]).groups()
    assert shown == "1"  # filtering by the first requirement's id leaves its row alone
    values = [float(v.rstrip("%")) for v in order.split(",")]
    assert values == sorted(values)  # first click sorts ascending


def test_the_check_catches_a_script_error(tmp_path):
    # A control: the same page with a broken script must be reported, or the checks
    # above could never fail.
    page = report_page(tmp_path)
    page.write_text(page.read_text().replace("</body>", "<script>noSuchFunction()</script></body>"))
    done = chromium(page, tmp_path, "--dump-dom")
    assert root_attributes(done.stdout).get("data-script-errors") == "1"
    assert "Uncaught" in done.stderr


def test_the_report_prints(tmp_path):
    # The print stylesheet: chromium's own print path must produce a multi-page PDF
    # (PDF 1.x, ISO 32000: a file starts with %PDF and has one /Type /Page per page).
    page = report_page(tmp_path)
    pdf = tmp_path / "report.pdf"
    done = chromium(page, tmp_path, f"--print-to-pdf={pdf}", "--no-pdf-header-footer")
    assert done.returncode == 0 and pdf.is_file(), done.stderr[-2000:]
    data = pdf.read_bytes()
    assert data.startswith(b"%PDF-")
    assert len(re.findall(rb"/Type\s*/Page[^s]", data)) > 1
