"""Tests for the HTML report (gwpred.report) and the ``gwpred report`` command.

Outside references used here:

- A real headless browser: Debian's ``chromium`` driven through ``chromium-driver`` with
  the Python package ``selenium`` (table rows, sorting by clicks, screenshot, the
  Resource Timing API for network requests). Skipped, with the reason, when they are
  absent on a developer machine; a failure on CI (``CI`` set), where ``.ci/run``
  installs them.
- Python's ``html.parser`` reads the page without a browser (ids, links, scripts).
- RDKit (``Chem.MolFromSmiles``) parses the SMILES shown in the table.
- matplotlib's ``imread`` decodes the browser's PNG screenshot.
- QM9 heavy-atom graphs and SMILES from ``gwpred.datasets.load_demo`` (built from the QM9
  data of the PyPI package qm9pack). The predictions here are other QM9 graphs (and for
  one item a copy of the truth), so exact matches and ranks are known by construction.
"""

from __future__ import annotations

import html
import io
import json
import os
import shutil
import tempfile
from collections import Counter
from html.parser import HTMLParser
from pathlib import Path

import networkx as nx
import numpy as np
import pytest

from gwpred import BarycenterGraphPredictor
from gwpred._utils import CAUTION
from gwpred.cli import main
from gwpred.datasets import load_demo
from gwpred.io import write_graphs
from gwpred.metrics import summarize
from gwpred.report import (
    RankedCandidate,
    build_report,
    is_molecular,
    read_ranked,
    write_report,
)

CHROMIUM = "/usr/bin/chromium"
CHROMEDRIVER = "/usr/bin/chromedriver"
N = 8  # items in the small reports
EXACT = 3  # the item whose prediction is a copy of its truth


# --------------------------------------------------------------------------- data


@pytest.fixture(scope="module")
def qm9():
    X, graphs, smiles = load_demo(return_smiles=True)
    return X, graphs, smiles


@pytest.fixture(scope="module")
def pairs(qm9):
    """(predicted, truth): truth = QM9 graphs 0..N-1 with their SMILES; predictions = others."""
    _, graphs, smiles = qm9
    truth = []
    for i in range(N):
        g = graphs[i].copy()
        g.graph["smiles"] = smiles[i]
        truth.append(g)
    pred = [graphs[100 + i].copy() for i in range(N)]
    pred[EXACT] = nx.relabel_nodes(
        truth[EXACT], {v: f"n{v}" for v in truth[EXACT]}
    )  # same graph, new names
    pred[EXACT].graph.clear()
    return pred, truth


@pytest.fixture(scope="module")
def ranked(qm9, pairs):
    """Candidate lists for the even items only: the truth is second."""
    _, graphs, _ = qm9
    _, truth = pairs
    return {
        i: [
            RankedCandidate(graphs[200 + i], 17, 0.9),
            RankedCandidate(truth[i].copy(), 4, 0.7),
            RankedCandidate(graphs[300 + i], 8, 0.1),
        ]
        for i in range(0, N, 2)
    }


@pytest.fixture(scope="module")
def summary(pairs):
    pred, truth = pairs
    return summarize(pred, truth)


@pytest.fixture(scope="module")
def report_file(tmp_path_factory, pairs, ranked, summary):
    pred, truth = pairs
    path = tmp_path_factory.mktemp("report") / "report.html"
    write_report(
        path,
        pred,
        truth,
        ranked=ranked,
        summary=summary,
        drawings=4,
        top=3,
        title="test report",
    )
    return path


class Page(HTMLParser):
    """Tags, attributes and text of a page (Python's html.parser)."""

    def __init__(self, text: str) -> None:
        super().__init__()
        self.tags: list[tuple[str, dict]] = []
        self.text: list[str] = []
        self.headings: list[str] = []  # of the items table
        self.rows: list[list] = []  # data-value of each cell of each item row
        self._in_th = False
        self.feed(text)

    def handle_starttag(self, tag, attrs):
        attrs = dict(attrs)
        self.tags.append((tag, attrs))
        if tag == "th":
            self._in_th = True
            self.headings.append("")
        elif tag == "tr" and "data-index" in attrs:
            self.rows.append([])
        elif tag == "td" and self.rows:
            self.rows[-1].append(attrs.get("data-value"))

    def handle_endtag(self, tag):
        if tag == "th":
            self._in_th = False

    def handle_data(self, data):
        self.text.append(data)
        if self._in_th:
            self.headings[-1] += data.strip()

    def column(self, name: str) -> list:
        k = self.headings.index(name)
        return [row[k] for row in self.rows]

    def count(self, tag: str, **attrs) -> int:
        return sum(
            1
            for t, a in self.tags
            if t == tag and all(a.get(k) == v for k, v in attrs.items())
        )


# --------------------------------------------------------------------------- the page itself


def test_page_is_self_contained(report_file):
    page = Page(report_file.read_text(encoding="utf-8"))
    for tag, attrs in page.tags:
        assert tag not in ("link", "iframe", "img", "object", "embed"), tag
        if tag == "script":
            assert "src" not in attrs
        if tag == "a" and "href" in attrs:
            assert attrs["href"].startswith("#"), attrs["href"]
        for key in ("src", "xlink:href"):
            assert not attrs.get(key, "#").startswith(("http", "//")), attrs
    ids = Counter(a["id"] for _, a in page.tags if "id" in a)
    assert [k for k, c in ids.items() if c > 1] == []  # SVGs of one page share no ids
    assert (
        page.count("svg") >= 4 * 3
    )  # alignment + two RDKit depictions + candidates per drawn item


def test_page_table_and_caution(report_file, pairs, summary):
    _, truth = pairs
    text = report_file.read_text(encoding="utf-8")
    page = Page(text)
    rows = [a for t, a in page.tags if t == "tr" and "data-index" in a]
    assert [int(a["data-index"]) for a in rows] == list(range(N))
    assert CAUTION in "".join(page.text)  # node labels are element symbols
    assert page.count("section", **{"class": "item"}) == N
    assert text.count("No drawings: only the first 4 items are drawn") == N - 4
    # the GED column holds the summary's values
    assert [float(v) for v in page.column("GED")] == [
        it["ged"] for it in summary["items"]
    ]
    assert [int(v) for v in page.column("exact match")] == [
        int(i == EXACT) for i in range(N)
    ]
    assert [int(v) for v in page.column("true nodes")] == [
        g.number_of_nodes() for g in truth
    ]


def test_page_smiles_are_the_molecules(report_file, pairs):
    # RDKit parses the SMILES shown for each true graph and finds its heavy atoms
    Chem = pytest.importorskip("rdkit.Chem")
    _, truth = pairs
    text = report_file.read_text(encoding="utf-8")
    for g in truth:
        assert g.graph["smiles"] in text
        mol = Chem.MolFromSmiles(g.graph["smiles"])
        assert Counter(a.GetSymbol() for a in mol.GetAtoms()) == Counter(
            lab for _, lab in g.nodes(data="label")
        )
    # RDKit's SVG depictions are inlined (its writer marks the end of its header)
    assert text.count("<!-- END OF HEADER -->") >= 2 * 4


def test_page_ranks_are_known(report_file):
    text = report_file.read_text(encoding="utf-8")
    page = Page(text)
    assert page.column("truth at rank") == [
        "2.0" if i % 2 == 0 else "inf" for i in range(N)
    ]
    assert "truth in top 1 (4 lists)" in text and "truth in top 5 (4 lists)" in text
    assert "= truth" in text  # the second candidate of a drawn item is marked


def test_report_without_truth_and_without_molecules():
    g1 = nx.Graph([("a", "b", {"kind": "x"}), ("b", "c", {"kind": "y"})])
    nx.set_node_attributes(g1, {"a": "P1", "b": "P2", "c": "P1"}, "part")
    g2 = nx.path_graph(4)
    nx.set_node_attributes(g2, "P3", "part")
    text = build_report([g1, g2], node_label="part", edge_label="kind", title="parts")
    page = Page(text)
    assert CAUTION not in text  # not element symbols
    assert len([a for t, a in page.tags if t == "tr" and "data-index" in a]) == 2
    heads = [d.strip() for d in page.text]
    assert "GED" not in heads and "predicted nodes" in heads
    assert (
        "P1" in heads and "edge x" in heads
    )  # matplotlib text kept as text in the SVG
    assert not is_molecular([g1], "part")
    assert not is_molecular([nx.path_graph(2)], "missing")


def test_molecules_without_rdkit_or_without_bond_orders(pairs, monkeypatch):
    from gwpred import report

    pred, truth = pairs
    text = build_report(pred[:2], truth[:2], edge_label=None, drawings=1)
    assert CAUTION in text and "bond orders are unknown" in text
    assert (
        "END OF HEADER" not in text and "valid molecule" not in text
    )  # no RDKit output
    monkeypatch.setattr(report, "has_extra", lambda name: False)
    text = build_report(pred[:2], truth[:2], drawings=1)
    assert (
        CAUTION in text
        and "install RDKit (pip install 'gwpred[chem]')" in html.unescape(text)
    )
    assert (
        "END OF HEADER" not in text and Page(text).count("svg") >= 2
    )  # matplotlib drawings


def test_report_with_barycenters(qm9):
    X, graphs, _ = qm9
    train = list(range(0, 3000, 50))
    model = BarycenterGraphPredictor(top_k=3, alpha=0.5, random_state=0).fit(
        X[train], [graphs[i] for i in train]
    )
    test = [25, 625]
    pred = model.predict(X[test])
    soft = model.predict_barycenters(X[test])
    text = build_report(
        pred,
        [graphs[i] for i in test],
        barycenters=soft,
        training_graphs=[graphs[i] for i in train],
        label_names=list(model.labels_.node_labels_),
    )
    assert text.count("Soft barycenter before decoding") == 2
    assert text.count("The training graphs this prediction leaned on") == 2
    for s in soft:  # the captions name the training graphs with the largest weights
        j = int(s.neighbors[np.argmax(s.weights)])
        assert f"training #{j}" in text


# --------------------------------------------------------------------------- errors


def test_build_report_errors(pairs, summary):
    pred, truth = pairs
    g = pred[0]
    with pytest.raises(
        ValueError, match="there are 2 predicted graphs but 1 true graphs"
    ):
        build_report([g, g], [g])
    with pytest.raises(ValueError, match="there are no predicted graphs"):
        build_report([], [])
    with pytest.raises(TypeError, match="predicted must be a list of networkx.Graph"):
        build_report(g)
    with pytest.raises(TypeError, match=r"true\[1\] must be a networkx.Graph"):
        build_report([g, g], [g, "C"])
    with pytest.raises(ValueError, match="limit must be an int >= 1, got 0"):
        build_report([g], limit=0)
    with pytest.raises(ValueError, match="drawings must be an int >= 0, got -1"):
        build_report([g], drawings=-1)
    with pytest.raises(ValueError, match="top must be an int >= 0"):
        build_report([g], top=-2)
    with pytest.raises(
        ValueError, match="ranked has a list for row 5, but there are 2 predictions"
    ):
        build_report([g, g], ranked={5: [g]})
    with pytest.raises(ValueError, match="ranked holds 1 lists for 2 predictions"):
        build_report([g, g], ranked=[[g]])
    with pytest.raises(TypeError, match="ranked must be a dict row -> list"):
        build_report([g], ranked="cands.jsonl")
    with pytest.raises(
        TypeError, match=r"ranked\[0\]\[0\] must be a networkx.Graph or RankedCandidate"
    ):
        build_report([g], ranked={0: ["C"]})
    with pytest.raises(
        ValueError,
        match="summary must be gwpred.metrics.summarize's result for these 2 items",
    ):
        build_report(pred[:2], truth[:2], summary=summary)
    with pytest.raises(ValueError, match="barycenters has 2 entries for 1 predictions"):
        build_report([g], barycenters=[None, None])
    with pytest.raises(TypeError, match=r"barycenters\[0\] must be a SoftGraph"):
        build_report([g], barycenters=[np.eye(2)])


def test_barycenter_pointing_outside_the_training_graphs(qm9):
    X, graphs, _ = qm9
    model = BarycenterGraphPredictor(top_k=2, random_state=0).fit(X[:20], graphs[:20])
    soft = model.predict_barycenters(X[30:31])
    with pytest.raises(
        ValueError, match="points to training graph .* but training_graphs has 1"
    ):
        build_report([graphs[30]], barycenters=soft, training_graphs=graphs[:1])


def test_write_report_errors(tmp_path, pairs):
    pred, truth = pairs
    with pytest.raises(ValueError, match=r"name it with \.html"):
        write_report(tmp_path / "r.txt", pred[:1], truth[:1])
    with pytest.raises(FileNotFoundError, match="does not exist; create it first"):
        write_report(tmp_path / "no" / "r.html", pred[:1], truth[:1])
    out = write_report(tmp_path / "r.html", pred[:1], truth[:1])
    assert out.read_text(encoding="utf-8").startswith("<!DOCTYPE html>")
    assert [p.name for p in tmp_path.iterdir()] == ["r.html"]  # no temporary file left


def write_lines(path: Path, lines: list) -> Path:
    path.write_text(
        "\n".join(x if isinstance(x, str) else json.dumps(x) for x in lines) + "\n",
        encoding="utf-8",
    )
    return path


def node_link(g: nx.Graph) -> dict:
    return nx.node_link_data(g, edges="edges")  # networkx's node-link format


def test_read_ranked(tmp_path, pairs):
    pred, _ = pairs
    path = write_lines(
        tmp_path / "r.jsonl",
        [
            {
                "row": 1,
                "ranked": [
                    {"candidate": 3, "score": 0.5, "graph": node_link(pred[0])},
                    {"graph": node_link(pred[1])},
                ],
            },
            "",
            {"row": 0, "ranked": []},
        ],
    )
    got = read_ranked(path)
    assert sorted(got) == [0, 1] and got[0] == []
    first, second = got[1]
    assert (first.candidate, first.score, second.candidate, second.score) == (
        3,
        0.5,
        None,
        None,
    )
    assert nx.utils.graphs_equal(first.graph, pred[0])


@pytest.mark.parametrize(
    "line, message",
    [
        ("{not json", "malformed JSON"),
        ({"ranked": []}, 'expected an object {"row": i, "ranked"'),
        ({"row": -1, "ranked": []}, "row must be an int >= 0"),
        ({"row": "0", "ranked": []}, "row must be an int >= 0"),
        ({"row": 0, "ranked": {}}, "ranked must be a list of candidates"),
        ({"row": 0, "ranked": [{"score": 1}]}, 'expected an object with a "graph"'),
        (
            {
                "row": 0,
                "ranked": [{"score": "high", "graph": {"nodes": [], "edges": []}}],
            },
            "score must be a number",
        ),
        (
            {
                "row": 0,
                "ranked": [{"candidate": 1.5, "graph": {"nodes": [], "edges": []}}],
            },
            "candidate must be an int",
        ),
        (
            {"row": 0, "ranked": [{"graph": {"edges": []}}]},
            "node-link record has no 'nodes' list",
        ),
    ],
)
def test_read_ranked_errors(tmp_path, line, message):
    with pytest.raises(
        ValueError, match=message.replace("(", r"\(").replace("{", r"\{")
    ):
        read_ranked(write_lines(tmp_path / "bad.jsonl", [line]))


def test_reads_what_gwpred_rank_writes(tmp_path, qm9):
    # the file format of gwpred.io.write_ranked (the ``gwpred rank`` command)
    gio = pytest.importorskip("gwpred.io")
    _, graphs, _ = qm9
    path = tmp_path / "ranked.jsonl"
    gio.write_ranked(path, [[(1, 0.5), (0, 0.25)], [(2, 0.75)]], graphs[:3])
    got = read_ranked(path)
    assert [(c.candidate, c.score) for c in got[0]] == [(1, 0.5), (0, 0.25)]
    assert nx.utils.graphs_equal(got[1][0].graph, graphs[2])


def test_read_ranked_duplicate_and_missing(tmp_path):
    with pytest.raises(ValueError, match="row 0 appears twice"):
        read_ranked(
            write_lines(
                tmp_path / "d.jsonl",
                [{"row": 0, "ranked": []}, {"row": 0, "ranked": []}],
            )
        )
    with pytest.raises(FileNotFoundError, match="does not exist"):
        read_ranked(tmp_path / "none.jsonl")


# --------------------------------------------------------------------------- command line


def run(capsys, *argv):
    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err


@pytest.fixture(scope="module")
def files(tmp_path_factory, pairs, ranked):
    pred, truth = pairs
    d = tmp_path_factory.mktemp("cli")
    write_graphs(d / "pred.jsonl", pred)
    write_graphs(d / "truth.jsonl", truth)
    lines = [
        {
            "row": i,
            "ranked": [
                {
                    "candidate": c.candidate,
                    "score": c.score,
                    "graph": node_link(c.graph),
                }
                for c in cands
            ],
        }
        for i, cands in ranked.items()
    ]
    write_lines(d / "ranked.jsonl", lines)
    return d


def test_cli_report(capsys, files):
    out_file = files / "page.html"
    code, out, err = run(
        capsys,
        "report",
        files / "pred.jsonl",
        "--truth",
        files / "truth.jsonl",
        "--ranked",
        files / "ranked.jsonl",
        "--out",
        out_file,
        "--drawings",
        "2",
        "--top",
        "2",
        "--title",
        "CLI page",
        "-q",
    )
    assert code == 0, err
    assert f"report on {N} items written to {out_file}" in out
    assert err.strip().splitlines()[-1] == CAUTION  # on stderr: stdout stays clean
    text = out_file.read_text(encoding="utf-8")
    assert (
        "<title>CLI page</title>" in text
        and "ranked candidate lists for 4 items" in text
    )
    # the entry point other code relies on: predictions and --out only
    code, out, err = run(
        capsys,
        "report",
        files / "pred.jsonl",
        "--out",
        files / "bare.html",
        "--limit",
        "3",
        "-q",
    )
    assert code == 0, err
    assert "report on 3 items" in out and (files / "bare.html").exists()


def test_cli_report_help(capsys):
    with pytest.raises(SystemExit) as exc:
        main(["report", "--help"])
    assert exc.value.code == 0
    out = capsys.readouterr().out
    for opt in (
        "predictions",
        "--truth",
        "--out",
        "--ranked",
        "--title",
        "--time-limit",
        "--limit",
        "--drawings",
        "--top",
        "--node-label",
        "--quiet",
    ):
        assert opt in out, opt


@pytest.mark.parametrize(
    "extra, message",
    [
        (["--out", "page.txt"], "--out must name an HTML file ending in .html"),
        (
            ["--out", "pred.jsonl"],
            "--out must name an HTML file",
        ),  # never overwrites an input
        (["--out", "p.html", "--limit", "0"], "--limit must be at least 1; got 0"),
        (
            ["--out", "p.html", "--drawings", "-1"],
            "--drawings must be at least 0; got -1",
        ),
        (["--out", "p.html", "--truth", "short.jsonl"], "holds 8 graphs but"),
        (["--out", "p.html", "--ranked", "far.jsonl"], "ranked has a list for row 40"),
        (["--out", "missing/p.html"], "does not exist; create it first"),
    ],
)
def test_cli_report_errors(capsys, files, extra, message, pairs, monkeypatch):
    monkeypatch.chdir(files)
    write_graphs(files / "short.jsonl", pairs[1][:2])
    write_lines(files / "far.jsonl", [{"row": 40, "ranked": []}])
    code, _, err = run(capsys, "report", "pred.jsonl", *extra, "-q")
    assert code == 2
    assert message in err


# --------------------------------------------------------------------------- in a browser


@pytest.fixture(scope="module")
def browser():
    missing = [p for p in (CHROMIUM, CHROMEDRIVER) if not os.path.exists(p)]
    try:
        from selenium import webdriver
        from selenium.webdriver.chrome.service import Service
    except ImportError:
        missing.append("the Python package selenium (pip install -e '.[test]')")
    if missing:
        reason = (
            f"headless browser tests need {', '.join(missing)}: install the Debian packages chromium and "
            "chromium-driver (.ci/run does)"
        )
        if os.environ.get("CI"):
            pytest.fail(reason)
        pytest.skip(reason)
    profile = tempfile.mkdtemp(prefix="gwpred-chromium-")
    options = webdriver.ChromeOptions()
    options.binary_location = CHROMIUM
    for flag in (
        "--headless",
        "--no-sandbox",
        "--disable-gpu",
        "--disable-quic",
        "--no-first-run",
        "--disable-background-networking",
        "--disable-component-update",
        "--disable-sync",
        f"--user-data-dir={profile}",
        "--window-size=1280,1600",
        "--hide-scrollbars",
    ):
        options.add_argument(flag)
    driver = webdriver.Chrome(service=Service(CHROMEDRIVER), options=options)
    driver.set_page_load_timeout(60)
    try:
        yield driver
    finally:
        driver.quit()
        shutil.rmtree(profile, ignore_errors=True)


def column(driver, name: str) -> list[float]:
    return driver.execute_script(
        """
        var heads = Array.from(document.querySelectorAll('#items thead th'));
        var col = heads.findIndex(function (h) { return h.textContent.trim() === arguments[0]; }, null);
        col = heads.map(function (h) { return h.textContent.trim(); }).indexOf(arguments[0]);
        return Array.from(document.querySelectorAll('#items tbody tr')).map(function (r) {
            return parseFloat(r.cells[col].getAttribute('data-value')); });
        """,
        name,
    )


def click_heading(driver, name: str) -> None:
    from selenium.webdriver.common.by import By

    driver.find_element(
        By.XPATH, f"//table[@id='items']//th/button[normalize-space()='{name}']"
    ).click()


def screenshot_is_drawn(png: bytes) -> tuple[int, float]:
    import matplotlib.image

    img = matplotlib.image.imread(io.BytesIO(png))[..., :3]
    colours = len(np.unique((img * 255).astype(np.uint8).reshape(-1, 3), axis=0))
    non_white = float((img.min(-1) < 0.95).mean())
    return colours, non_white


def test_report_in_browser(browser, report_file, summary):
    from selenium.webdriver.common.by import By

    browser.get(report_file.as_uri())
    rows = browser.find_elements(By.CSS_SELECTOR, "#items tbody tr")
    assert len(rows) == N
    # nothing was fetched: the Resource Timing API lists no requests besides the page
    assert (
        browser.execute_script("return performance.getEntriesByType('resource').length")
        == 0
    )
    # every inline drawing has a size on the page
    sizes = browser.execute_script(
        "return Array.from(document.querySelectorAll('svg')).map(function (s) {"
        " var r = s.getBoundingClientRect(); return r.width * r.height; });"
    )
    assert len(sizes) >= 12 and min(sizes) > 100

    geds = [it["ged"] for it in summary["items"]]
    assert column(browser, "GED") == geds  # file order first
    click_heading(browser, "GED")
    assert column(browser, "GED") == sorted(geds)
    click_heading(browser, "GED")
    assert column(browser, "GED") == sorted(geds, reverse=True)
    click_heading(browser, "true nodes")
    sizes = column(browser, "true nodes")
    assert sizes == sorted(sizes) and len(sizes) == N
    click_heading(browser, "exact match")
    click_heading(browser, "exact match")  # descending: the exact match first
    assert column(browser, "#")[0] == EXACT
    assert column(browser, "exact match") == [1.0] + [0.0] * (N - 1)

    # a row's number jumps to its panel
    browser.find_element(By.CSS_SELECTOR, f"#items a[href='#item-{EXACT}']").click()
    assert browser.execute_script("return location.hash") == f"#item-{EXACT}"

    browser.execute_script("window.scrollTo(0, 0)")
    colours, non_white = screenshot_is_drawn(browser.get_screenshot_as_png())
    assert colours > 50 and non_white > 0.05


def test_demo_report_in_browser(browser, capsys, tmp_path):
    out_dir = tmp_path / "demo"
    code, out, err = run(
        capsys,
        "demo",
        "--test-size",
        "6",
        "--show",
        "2",
        "--top-k",
        "3",
        "--out",
        out_dir,
        "-q",
    )
    assert code == 0, err
    report = out_dir / "report.html"
    assert f"report: {report}" in out
    text = report.read_text(encoding="utf-8")
    assert text.count("Soft barycenter before decoding") == 6 and CAUTION in text
    browser.get(report.as_uri())
    from selenium.webdriver.common.by import By

    assert len(browser.find_elements(By.CSS_SELECTOR, "#items tbody tr")) == 6
    png = browser.get_screenshot_as_png()
    (tmp_path / "demo-report.png").write_bytes(png)
    colours, non_white = screenshot_is_drawn(png)
    assert colours > 50 and non_white > 0.05
