"""'Did you mean …' hints for names and node ids that are not in the store.

Three kinds of near miss are offered, in this order: the same text in another
letter case, ids that begin with what was typed (case-insensitively), and — for
short lists of names only — close spellings by :func:`difflib.get_close_matches`
(Ratcliff/Obershelp similarity, Python standard library). Node id arrays can
hold millions of entries, so they get the first two kinds only, computed with
vectorised numpy string functions.
"""

from __future__ import annotations

import difflib
from typing import Iterable, Sequence

import numpy as np

MAX_SUGGESTIONS = 5
_FUZZY_LIMIT = 5000  # difflib compares against every candidate: only for short lists


def _ordered_unique(items: Iterable[str], limit: int) -> list[str]:
    seen: list[str] = []
    for x in items:
        if x not in seen:
            seen.append(x)
            if len(seen) >= limit:
                break
    return seen


def close_names(word: str, candidates: Sequence[str], *, limit: int = MAX_SUGGESTIONS) -> list[str]:
    """Up to ``limit`` candidates that ``word`` may have meant (case variants, prefixes, close spellings)."""
    low = word.casefold()
    cands = list(candidates)
    same_case = [c for c in cands if c.casefold() == low and c != word]
    prefix = [c for c in cands if c.casefold().startswith(low) and c != word] if low else []
    fuzzy: list[str] = []
    if len(cands) <= _FUZZY_LIMIT and low:
        folded = {c.casefold(): c for c in cands}
        fuzzy = [folded[m] for m in difflib.get_close_matches(low, list(folded), n=limit, cutoff=0.75)]
    return [c for c in _ordered_unique(same_case + sorted(prefix) + fuzzy, limit) if c != word]


def close_node_ids(node: str, node_ids: np.ndarray, *, limit: int = MAX_SUGGESTIONS) -> list[str]:
    """Node ids equal to ``node`` ignoring case, then ids starting with it (ignoring case); sorted ids in."""
    if node_ids.shape[0] == 0 or not node:
        return []
    lowered = np.strings.lower(node_ids) if node_ids.dtype.kind == "U" else np.char.lower(node_ids.astype(str))
    low = node.lower()
    same = node_ids[lowered == low]
    starts = node_ids[np.strings.startswith(lowered, low)] if node_ids.dtype.kind == "U" else node_ids[:0]
    return [str(x) for x in _ordered_unique([*same.tolist(), *starts[:limit * 4].tolist()], limit) if x != node]


def hint(suggestions: Sequence[str]) -> str:
    """``"; did you mean A, B or C?"`` (empty when there is nothing to suggest)."""
    if not suggestions:
        return ""
    shown = list(suggestions)
    text = shown[0] if len(shown) == 1 else ", ".join(shown[:-1]) + " or " + shown[-1]
    return f"; did you mean {text}?"
