"""`cutbook report`: the page, one figure alone as SVG or PNG, standard output, and bad requests."""

from __future__ import annotations

import io
import os
import subprocess
import sys
from pathlib import Path

import defusedxml.ElementTree as safe_etree
import networkx as nx
import numpy as np
import pytest

from graphs import adjacency_to_csv


@pytest.fixture
def club(cli, tmp_path):
    # Zachary (1977) karate club as shipped by networkx, weighted; one computed and one attached run
    A = nx.to_scipy_sparse_array(nx.karate_club_graph(), nodelist=range(34), weight="weight")
    csv = adjacency_to_csv(A, tmp_path / "karate.csv", [f"m{i:02d}" for i in range(34)])
    assert cli("import", csv, "--project", "club", "--network", "karate", "--weight", "weight").code == 0
    run = cli("run", "club/karate", "--method", "njw", "--k", "auto", "--json").json["run"]
    # the club's split after the fission, as recorded by networkx ("club" node attribute)
    split = tmp_path / "split.csv"
    G = nx.karate_club_graph()
    split.write_text("node,community\n" + "".join(f"m{i:02d},{G.nodes[i]['club']}\n" for i in range(34)),
                     encoding="utf-8")
    att = cli("attach", split, "--to", "club/karate", "--label", "fission", "--json").json["run"]
    return {"run": run, "attached": att}


def test_one_figure_as_svg_and_png(cli, club, tmp_path):
    svg = tmp_path / "sizes.svg"
    res = cli("report", club["run"], "--figure", "sizes", "-o", svg, "--json")
    assert res.code == 0, res.err
    assert res.json["figure"] == "sizes" and res.json["format"] == "svg"
    root = safe_etree.parse(svg).getroot()  # a standalone, well-formed SVG document (defusedxml)
    assert root.tag == "{http://www.w3.org/2000/svg}svg"

    png = tmp_path / "net.png"
    assert cli("report", club["run"], "--figure", "network", "-o", png).code == 0
    data = png.read_bytes()
    assert data[:8] == b"\x89PNG\r\n\x1a\n"  # PNG signature (ISO/IEC 15948)
    import matplotlib.image as mpimg

    pixels = mpimg.imread(io.BytesIO(data), format="png")
    assert np.unique(pixels.reshape(-1, pixels.shape[-1]), axis=0).shape[0] > 2


def test_report_to_standard_output(cli, club, store_path):
    # a fresh interpreter, so standard output is a real byte stream
    env = {**os.environ, "PYTHONPATH": str(Path(__file__).resolve().parents[2])}
    proc = subprocess.run([sys.executable, "-m", "workspace.cli", "--store", str(store_path), "report",
                           str(club["attached"]), "-o", "-"], capture_output=True, env=env, timeout=120)
    assert proc.returncode == 0, proc.stderr
    assert proc.stdout.startswith(b"<!DOCTYPE html>") and proc.stdout.rstrip().endswith(b"</html>")
    assert b"standard output" in proc.stderr


def test_attached_run_report_has_no_spectrum(cli, club, tmp_path):
    res = cli("report", club["attached"], "-o", tmp_path / "a.html", "--json")
    assert res.code == 0, res.err
    assert res.json["figures"] == ["sizes", "network"]
    page = (tmp_path / "a.html").read_text(encoding="utf-8")
    assert "attached &#x27;fission&#x27;" in page or "attached 'fission'" in page
    miss = cli("report", club["attached"], "--figure", "spectrum", "-o", tmp_path / "s.svg")
    assert miss.code == 3 and "spectrum" in miss.err and not (tmp_path / "s.svg").exists()


@pytest.mark.parametrize("argv, code, words", [
    (["--figure", "sizes", "-o", "x.html"], 2, "--figure"),
    (["-o", "x.png"], 2, "--figure"),
    (["-o", "x.pdf"], 2, ".html"),
    (["--figure", "heat", "-o", "x.svg"], 2, "no figure 'heat'"),
    (["-o", "-", "--json"], 2, "--json"),
])
def test_bad_requests_are_refused(cli, club, tmp_path, argv, code, words):
    argv = [str(tmp_path / a) if a.startswith("x.") else a for a in argv]
    res = cli("report", club["run"], *argv)
    assert res.code == code and words in res.err, res.err
    assert list(tmp_path.glob("x.*")) == [] and list(tmp_path.glob(".x.*")) == []


def test_unknown_run_and_three_runs(cli, club, tmp_path):
    assert cli("report", 999, "-o", tmp_path / "r.html").code == 3
    three = cli("report", club["run"], club["run"], club["attached"], "-o", tmp_path / "r.html")
    assert three.code == 2 and "two runs" in three.err
    assert not (tmp_path / "r.html").exists()


def test_unwritable_output_names_the_file(cli, club, tmp_path):
    target = tmp_path / "no-such-folder" / "r.html"
    res = cli("report", club["run"], "-o", target)
    assert res.code != 0 and "r.html" in res.err and len(res.err.strip().splitlines()) == 1
