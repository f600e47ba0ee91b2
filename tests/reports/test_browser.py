"""report.html in a real browser: headless Chromium loads it with no console errors."""

import subprocess

import pytest

from helpers import chromium, run

pytestmark = pytest.mark.browser


def test_report_loads_in_chromium_without_console_errors(tmp_path):
    browser = chromium()
    out = tmp_path / "demo"
    assert run("demo", "--out", out, "--simulator", "amaranth", "--vectors", "200").returncode == 0
    shot = tmp_path / "report.png"
    # Chromium (Debian's package), headless, no network: console messages go to stderr.
    result = subprocess.run([browser, "--headless", "--no-sandbox", "--disable-gpu",
                             "--disable-background-networking", "--enable-logging=stderr",
                             "--v=0", "--window-size=1000,2000", f"--screenshot={shot}",
                             (out / "report.html").as_uri()],
                            capture_output=True, text=True, timeout=120)
    assert result.returncode == 0, result.stderr[-2000:]
    console = [line for line in result.stderr.splitlines() if "CONSOLE" in line]
    assert console == []
    assert shot.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n" and shot.stat().st_size > 10_000


def test_the_console_check_sees_a_script_error(tmp_path):
    # The check above must be able to fail: a page with a script error shows a CONSOLE line.
    browser = chromium()
    page = tmp_path / "broken.html"
    page.write_text("<!DOCTYPE html><html><body><script>undefinedFunction()</script></body></html>")
    result = subprocess.run([browser, "--headless", "--no-sandbox", "--disable-gpu",
                             "--disable-background-networking", "--enable-logging=stderr",
                             "--v=0", f"--screenshot={tmp_path / 'x.png'}", page.as_uri()],
                            capture_output=True, text=True, timeout=120)
    assert any("CONSOLE" in line and "undefinedFunction" in line
               for line in result.stderr.splitlines())
