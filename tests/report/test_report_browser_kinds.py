"""Sweep and chain reports in a real headless browser (Debian's chromium): no console errors, every figure parsed.

Same rules as test_report_browser.py: skipped only where no browser is installed, never in CI.
"""

from __future__ import annotations

import importlib.util
from pathlib import Path

import networkx as nx
import numpy as np
import pytest

pytestmark = pytest.mark.slow


def _browser_helpers():
    # the browser helpers of the run-report browser test, shared rather than copied
    spec = importlib.util.spec_from_file_location("report_browser_helpers",
                                                  Path(__file__).with_name("test_report_browser.py"))
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def test_sweep_and_chain_reports_load_in_headless_chromium(cli, tmp_path):
    helpers = _browser_helpers()
    browser = helpers._browser()
    G = nx.karate_club_graph()  # Zachary's karate club (networkx), three versions with edges dropped
    for i, skip in enumerate((None, 6, 5)):
        rows = [f"m{u:02d},m{v:02d}" for j, (u, v) in enumerate(G.edges) if not (skip and j % skip == 0)]
        path = tmp_path / f"v{i}.csv"
        path.write_text("source,target\n" + "\n".join(rows) + "\n", encoding="utf-8")
        assert cli("import", path, "--project", "club", "--network", "k").code == 0
    assert cli("params", "save", "club/three", "--method", "njw", "--k", "3").code == 0
    for v in (1, 2, 3):
        assert cli("run", f"club/k@{v}", "--params", "club/three").code == 0
    sweep = cli("sweep", "club/k@3", "--method", "njw", "--k", "2..5", "--seeds", "3", "--json").json["sweep"]
    pages = {"chain": (["--params", "club/three"], "<h1>Chain of 3 runs"),
             "sweep": (["--sweep", sweep], f"<h1>Sweep {sweep}")}
    for name, (argv, heading) in pages.items():
        page = tmp_path / f"{name}.html"
        res = cli("report", *argv, "-o", page, "--json")
        assert res.code == 0, res.err
        dom = helpers._chromium(browser, tmp_path, page.as_uri(), "--dump-dom")
        assert dom.returncode == 0, dom.stderr[-2000:]
        assert helpers._console_lines(dom.stderr) == []
        assert heading in dom.stdout and dom.stdout.count("<svg") == len(res.json["figures"])
        shot = tmp_path / f"{name}.png"
        snap = helpers._chromium(browser, tmp_path, page.as_uri(), f"--screenshot={shot}",
                                 "--window-size=1000,1600", "--hide-scrollbars")
        assert snap.returncode == 0 and shot.is_file(), snap.stderr[-2000:]
        import matplotlib.image as mpimg

        rgb = np.round(mpimg.imread(shot)[..., :3] * 255).astype(np.int64).reshape(-1, 3)
        assert np.unique(rgb[:, 0] << 16 | rgb[:, 1] << 8 | rgb[:, 2]).size > 1, "blank screenshot"
        # a community colour of the palette (workspace.palette, Okabe-Ito sky blue #56b4e9) is drawn
        blue = np.all(np.abs(rgb - np.array([0x56, 0xb4, 0xe9])) <= 3, axis=1)
        assert blue.sum() > 200
