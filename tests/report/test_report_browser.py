"""The report opened in a real headless browser (Debian's chromium): no console errors, a non-blank page.

Skipped only where no browser is installed, and never in CI (env CI set: a missing browser fails;
`.ci/run` installs chromium with apt-get when it is missing).
"""

from __future__ import annotations

import os
import re
import shutil
import subprocess

import networkx as nx
import numpy as np
import pytest

from graphs import adjacency_to_csv

pytestmark = pytest.mark.slow

CONSOLE = re.compile(r":CONSOLE|Uncaught|Failed to load resource|ERR_[A-Z_]+")


def _browser() -> str:
    for name in ("chromium", "chromium-browser"):
        path = shutil.which(name)
        if path:
            return path
    if os.environ.get("CI"):
        pytest.fail("no chromium in CI: .ci/run installs it with apt-get (apt-get install -y chromium)")
    pytest.skip("no headless browser installed here (apt-get install -y chromium)")


def _chromium(browser: str, tmp_path, url: str, *extra: str) -> subprocess.CompletedProcess:
    profile = tmp_path / "profile"
    profile.mkdir(exist_ok=True)
    argv = [browser, "--headless", "--no-sandbox", "--disable-gpu", "--disable-background-networking",
            "--disable-component-update", "--disable-sync", "--no-first-run", "--disable-extensions",
            f"--user-data-dir={profile}", "--enable-logging=stderr", "--v=0", *extra, url]
    return subprocess.run(argv, capture_output=True, text=True, timeout=120, cwd=tmp_path)


def _console_lines(stderr: str) -> list[str]:
    return [line for line in stderr.splitlines() if CONSOLE.search(line)]


def test_report_loads_in_headless_chromium(cli, tmp_path):
    browser = _browser()
    # control: the console check sees a script error (so it can fail on the report)
    bad = tmp_path / "bad.html"
    bad.write_text('<!DOCTYPE html><html><body><p>x</p><script>throw new Error("control");</script>'
                   "</body></html>", encoding="utf-8")
    control = _chromium(browser, tmp_path, bad.as_uri(), "--dump-dom")
    assert any("control" in line for line in _console_lines(control.stderr)), control.stderr[-2000:]

    # Zachary's karate club (networkx.karate_club_graph) and a run of it
    A = nx.to_scipy_sparse_array(nx.karate_club_graph(), nodelist=range(34), weight="weight")
    csv = adjacency_to_csv(A, tmp_path / "karate.csv", [f"m{i:02d}" for i in range(34)])
    assert cli("import", csv, "--project", "club", "--network", "karate", "--weight", "weight").code == 0
    run = cli("run", "club/karate", "--method", "njw", "--k", "auto", "--json").json["run"]
    page = tmp_path / "report.html"
    res = cli("report", run, "-o", page, "--json")
    assert res.code == 0, res.err
    n_figures = len(res.json["figures"])

    dom = _chromium(browser, tmp_path, page.as_uri(), "--dump-dom")
    assert dom.returncode == 0, dom.stderr[-2000:]
    assert _console_lines(dom.stderr) == []
    # the browser parsed the whole page: the title, every figure and the closing body are in its DOM
    assert "<h1>Run " in dom.stdout and dom.stdout.count("<svg") == n_figures
    assert "</body>" in dom.stdout

    shot = tmp_path / "shot.png"
    snap = _chromium(browser, tmp_path, page.as_uri(), f"--screenshot={shot}", "--window-size=1000,2600",
                     "--hide-scrollbars")
    assert snap.returncode == 0 and shot.is_file(), snap.stderr[-2000:]
    assert _console_lines(snap.stderr) == []
    import matplotlib.image as mpimg

    pixels = mpimg.imread(shot)  # PNG decoded by matplotlib (Pillow)
    rgb = np.round(pixels[..., :3] * 255).astype(np.int64).reshape(-1, 3)
    colours = np.unique(rgb[:, 0] << 16 | rgb[:, 1] << 8 | rgb[:, 2])
    assert colours.size > 1, "blank screenshot"
    # the size bars are drawn: the first community colour (workspace.palette, Okabe-Ito orange
    # #e69f00) covers a visible area of the screenshot
    orange = np.all(np.abs(rgb - np.array([0xe6, 0x9f, 0x00])) <= 3, axis=1)
    assert orange.sum() > 500
