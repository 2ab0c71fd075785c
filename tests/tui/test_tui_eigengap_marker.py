"""The spectrum chart marks only the eigengap the run itself suggested (none when it has none)."""

from __future__ import annotations

import numpy as np


def test_tui_spectrum_marks_no_gap_without_a_suggestion():
    # a leading-eigenvector run records modularity eigenvalues of nested groups: no eigengap
    # (Newman 2006 stops by the modularity gain, not by a gap), so no "=> k" marker is drawn
    from workspace.tui.widgets.charts import SpectrumPlot

    plot = SpectrumPlot()
    values = [0.0, 0.9, 1.0, 1.05, 1.3]
    plot.show(values, suggested=4, gap_k=None)
    text = plot.render().plain
    assert "⇒" not in text and "the run found k = 4" in text
    # with the run's suggestion k = 4 (gaps 0.9, 0.1, 0.05, 0.25 worked by hand; the trivial
    # first gap excluded, von Luxburg 2007, Sec. 8.3) that gap is the one marked
    plot.show(values, suggested=4, gap_k=4)
    text = plot.render().plain
    assert "eigengap λ4→λ5 = 0.25" in text and "⇒  k = 4" in text
    assert np.argmax(np.diff(values)) == 0     # the largest raw gap is the trivial one, not marked
