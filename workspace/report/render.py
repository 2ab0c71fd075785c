"""Figures to bytes: SVG (text kept as text, no fonts embedded or fetched) and PNG (Agg).

matplotlib picks the SVG or Agg canvas for the format asked; no GUI backend is
ever loaded. Output is reproducible: a fixed ``svg.hashsalt`` for element ids
and no date in the metadata.
"""

from __future__ import annotations

import io
import re

FIGURE_FORMATS = ("svg", "png")

_RC = {
    "svg.fonttype": "none",          # text stays <text>; the reader's own sans-serif draws it
    "svg.hashsalt": "cutbook-report",
    "font.family": "sans-serif",
    "font.size": 10,
}
_XML_PROLOGUE = re.compile(r"\A\s*<\?xml[^>]*\?>\s*(<!DOCTYPE[^>]*>\s*)?", re.S)
_METADATA = re.compile(r"<metadata>.*?</metadata>\s*", re.S)
_ID = re.compile(r'\bid="([^"]+)"')


def figure_bytes(fig, format: str, *, dpi: int = 150) -> bytes:
    """The figure as a standalone SVG document (UTF-8) or a PNG image.

    Parameters
    ----------
    fig : matplotlib.figure.Figure
    format : {"svg", "png"}
    dpi : int, default 150
        PNG resolution.

    Returns
    -------
    bytes

    References
    ----------
    W3C, "Scalable Vector Graphics (SVG) 1.1" (2011); ISO/IEC 15948, PNG (2004).
    """
    import matplotlib

    if format not in FIGURE_FORMATS:
        raise ValueError(f"figure format must be svg or png, not {format!r}")
    buf = io.BytesIO()
    with matplotlib.rc_context(_RC):
        if format == "svg":
            fig.savefig(buf, format="svg", metadata={"Date": None, "Creator": None})
        else:
            fig.savefig(buf, format="png", dpi=dpi, metadata={"Software": None})
    data = buf.getvalue()
    if format == "svg":
        data = _METADATA.sub("", data.decode("utf-8")).encode("utf-8")
    return data


def inline_svg(fig, prefix: str) -> str:
    """The figure as an ``<svg>`` element to place inside an HTML page.

    The XML declaration, the DOCTYPE (which names a remote DTD) and the
    metadata block are dropped; every element id and the references to it
    (``url(#…)``, ``href="#…"``) get ``prefix`` so that several figures in one
    page never share an id.

    Parameters
    ----------
    fig : matplotlib.figure.Figure
    prefix : str
        Letters, digits and ``-`` only.

    Returns
    -------
    str

    References
    ----------
    WHATWG, "HTML Living Standard", section 4.8.16 (SVG in HTML).
    """
    text = figure_bytes(fig, "svg").decode("utf-8")
    text = _XML_PROLOGUE.sub("", text)
    ids = sorted(set(_ID.findall(text)), key=len, reverse=True)
    for old in ids:
        new = f"{prefix}-{old}"
        text = (text.replace(f'id="{old}"', f'id="{new}"')
                .replace(f"url(#{old})", f"url(#{new})")
                .replace(f'href="#{old}"', f'href="#{new}"'))
    return text.strip()
