"""The workspace's own widgets: the virtual table and the block-character charts."""

from __future__ import annotations

import asyncio

import networkx as nx
import pytest
from scipy.linalg import eigh


def test_tui_largest_gap_counts_components():
    """A graph of 3 disjoint cliques has Laplacian eigenvalue 0 with multiplicity 3
    (Chung 1997, Spectral Graph Theory, lemma 1.7), so the largest gap follows the third value."""
    from workspace.tui.widgets.charts import largest_gap

    G = nx.disjoint_union_all([nx.complete_graph(5), nx.complete_graph(6), nx.complete_graph(7)])
    L = nx.laplacian_matrix(G).toarray().astype(float)  # networkx.laplacian_matrix
    values = eigh(L, eigvals_only=True)[:8]  # scipy.linalg.eigh, ascending
    k, gap = largest_gap(values)
    assert k == 3
    # K_5 has Laplacian eigenvalues 0 and 5 (x4): the first non-zero eigenvalue of the union is 5
    assert gap == pytest.approx(5.0, abs=1e-9)
    assert largest_gap([1.0]) is None


def test_tui_size_bins_are_powers_of_two():
    from workspace.tui.widgets.charts import size_bins

    # worked by hand: 1 -> [1]; 2, 3 -> [2-3]; 5 -> [4-7]; 8, 9 -> [8-15]
    assert size_bins([1, 2, 3, 5, 8, 9]) == [("1", 1), ("2–3", 2), ("4–7", 1), ("8–15", 2)]


def test_tui_heat_table_accepts_dense_and_cell_forms():
    from workspace.tui.widgets.charts import dense_counts

    dense = {"rows": [0, 1], "cols": [0, 1, 2], "counts": [[3, 0, 1], [0, 2, 0]]}
    cells = {"rows": [0, 1], "cols": [0, 1, 2], "cell_row": [0, 0, 1], "cell_col": [0, 2, 1],
             "cell_count": [3, 1, 2]}
    assert dense_counts(dense) == dense_counts(cells) == [[3, 0, 1], [0, 2, 0]]


def test_tui_paged_table_reads_only_visible_pages():
    """10 000 rows: painting and jumping to the end fetch a handful of pages, never all of them."""
    from textual.app import App

    from workspace.tui.widgets.paged_table import Column, ListSource, PagedTable

    class CountingSource(ListSource):
        def __init__(self, rows):
            super().__init__(rows)
            self.calls = []

        def fetch(self, offset, limit):
            self.calls.append((offset, limit))
            return super().fetch(offset, limit)

    source = CountingSource([{"i": i, "name": f"row {i}"} for i in range(10_000)])

    class Host(App):
        def compose(self):
            yield PagedTable([Column("i", "i", 6, "right"), Column("name", "name")], source, page_size=100)

    async def go():
        app = Host()
        async with app.run_test(size=(60, 20)) as pilot:
            table = app.query_one(PagedTable)
            table.focus()
            await pilot.pause()
            assert table.row_count == 10_000
            assert table.visible_rows()[0]["i"] == 0
            await pilot.press("end")
            await pilot.pause()
            assert table.current_row["i"] == 9_999
            assert table.visible_rows()[-1]["i"] == 9_999
            await pilot.press("up", "pageup")
            await pilot.pause()
            assert table.cursor == 9_998 - (table.scrollable_content_region.height - 1)
            assert len(source.calls) <= 4, source.calls
            await pilot.press("home")
            assert table.cursor == 0

    asyncio.run(go())


def test_size_histogram_names_a_tracked_run_s_communities_by_their_shown_label():
    """A run made by an update carries ``shown`` on each community (its label matched to the previous
    version's run); the size bars name and colour it by that label (common practice: one numbering)."""
    from workspace.tui.widgets.charts import SizeHistogram

    h = SizeHistogram()
    h.refresh = lambda *a, **k: None  # not mounted
    h.show([{"community": 0, "shown": 5, "size": 3}, {"community": 1, "size": 7}])
    assert h.sizes == [("c1", 7), ("c5", 3)]
