"""Partition-similarity scores computed from an exact contingency table.

Every score takes either two label vectors or a precomputed
:class:`~workspace.compare.contingency.ContingencyTable` (``table=``), so a
diff builds the table once. Logarithms are natural (nats) unless stated.

Conventions for degenerate cases follow scikit-learn (``sklearn.metrics``)
where it defines them; the few places where we differ are stated on the
function. Zero nodes is always a :class:`~workspace.errors.ComputeError`
(scikit-learn returns 1.0 there; an empty comparison is more likely a
mistake than a perfect match).
"""

from __future__ import annotations

import math

import numpy as np

from workspace.errors import ParameterError, UsageError
from workspace.compare.contingency import ContingencyTable, contingency_table, _require_nonempty

NORMALIZATIONS = ("arithmetic", "geometric", "max", "min")
_EPS = float(np.finfo(np.float64).eps)


def _table(labels_a, labels_b, table: ContingencyTable | None) -> ContingencyTable:
    if table is not None:
        if labels_a is not None or labels_b is not None:
            raise UsageError("give either two label arrays or table=, not both")
        _require_nonempty(table)
        return table
    if labels_a is None or labels_b is None:
        raise UsageError("two label arrays (or table=) are required")
    t = contingency_table(labels_a, labels_b)
    _require_nonempty(t)
    return t


def _check_normalization(normalization: str) -> str:
    if normalization not in NORMALIZATIONS:
        raise ParameterError(
            f"unknown normalization {normalization!r}; choose one of {', '.join(NORMALIZATIONS)}")
    return normalization


def generalized_mean(h_a: float, h_b: float, normalization: str = "arithmetic") -> float:
    """Mean of two entropies used as the NMI / AMI normaliser.

    .. math:: \\tfrac12 (H_a + H_b),\\ \\sqrt{H_a H_b},\\ \\max(H_a, H_b),\\ \\min(H_a, H_b)

    Parameters
    ----------
    h_a, h_b : float
        Entropies (nats).
    normalization : {"arithmetic", "geometric", "max", "min"}, default "arithmetic"

    Returns
    -------
    float

    Raises
    ------
    ParameterError
        For an unknown ``normalization``.

    References
    ----------
    Vinh, N. X., Epps, J. & Bailey, J. (2010). Information theoretic measures
    for clusterings comparison. JMLR 11, 2837-2854 (Table 2 lists the variants).
    """
    _check_normalization(normalization)
    if normalization == "arithmetic":
        return 0.5 * (h_a + h_b)
    if normalization == "geometric":
        return math.sqrt(h_a * h_b)
    if normalization == "max":
        return max(h_a, h_b)
    return min(h_a, h_b)


def _entropy_of_sizes(sizes: np.ndarray, n: int) -> float:
    if sizes.shape[0] <= 1:
        return 0.0
    p = sizes / n
    return float(-np.sum(p * (np.log(sizes) - math.log(n))))


def entropies(labels_a=None, labels_b=None, *, table: ContingencyTable | None = None
              ) -> tuple[float, float]:
    """Shannon entropies of both labelings, in nats.

    .. math:: H(U) = -\\sum_p \\frac{a_p}{n} \\ln \\frac{a_p}{n},\\quad
              H(V) = -\\sum_q \\frac{b_q}{n} \\ln \\frac{b_q}{n}

    Parameters
    ----------
    labels_a, labels_b : array_like of int, shape (n,), optional
        The two labelings (or give ``table``).
    table : ContingencyTable, optional
        A precomputed table (then omit the labels).

    Returns
    -------
    (float, float)
        ``(H(U), H(V))``; exactly 0.0 for a single group.

    Raises
    ------
    ComputeError
        For zero nodes.
    UsageError
        For malformed inputs.

    References
    ----------
    Shannon, C. E. (1948). A mathematical theory of communication. Bell System
    Technical Journal 27, 379-423.
    """
    t = _table(labels_a, labels_b, table)
    return _entropy_of_sizes(t.row_sizes, t.n), _entropy_of_sizes(t.col_sizes, t.n)


def mutual_information(labels_a=None, labels_b=None, *, table: ContingencyTable | None = None
                       ) -> float:
    """Mutual information I(U; V) of two labelings, in nats.

    .. math:: I(U;V) = \\sum_{p,q} \\frac{n_{pq}}{n}
              \\ln \\frac{n\\, n_{pq}}{a_p b_q}

    Parameters
    ----------
    labels_a, labels_b : array_like of int, shape (n,), optional
    table : ContingencyTable, optional

    Returns
    -------
    float
        ``I >= 0`` (clipped at 0 against rounding); exactly 0.0 when either
        side is a single group.

    Raises
    ------
    ComputeError
        For zero nodes.

    References
    ----------
    Cover, T. M. & Thomas, J. A. (2006). Elements of Information Theory, 2nd
    ed., Wiley, eq. 2.28.
    """
    t = _table(labels_a, labels_b, table)
    return _mutual_information(t)


def _mutual_information(t: ContingencyTable) -> float:
    r, c = t.shape
    if r == 1 or c == 1:
        return 0.0
    nij = t.cell_count
    n = t.n
    p = nij / n
    log_a = np.log(t.row_sizes)[t.cell_row]
    log_b = np.log(t.col_sizes)[t.cell_col]
    mi = np.sum(p * (np.log(nij) - math.log(n)) + p * (2.0 * math.log(n) - log_a - log_b))
    return float(max(mi, 0.0))


def adjusted_rand_index(labels_a=None, labels_b=None, *, table: ContingencyTable | None = None
                        ) -> float:
    """Adjusted Rand index of Hubert & Arabie.

    .. math::
        \\mathrm{ARI} = \\frac{\\sum_{pq} \\binom{n_{pq}}{2} - S_a S_b / \\binom{n}{2}}
        {\\tfrac12 (S_a + S_b) - S_a S_b / \\binom{n}{2}},\\quad
        S_a = \\sum_p \\binom{a_p}{2},\\ S_b = \\sum_q \\binom{b_q}{2}

    Parameters
    ----------
    labels_a, labels_b : array_like of int, shape (n,), optional
        The two labelings (or give ``table``).
    table : ContingencyTable, optional
        A precomputed table (then omit the labels).

    Returns
    -------
    float
        In [-1, 1]; 1 for identical partitions up to renaming, about 0 for
        independent ones.

    Raises
    ------
    ComputeError
        For zero nodes.
    UsageError
        For malformed inputs.

    Notes
    -----
    The pair counts are exact Python integers and the quotient is formed
    once (numerator and denominator multiplied by ``2 binom(n, 2)``), so the
    result is the correctly rounded value of the exact rational. The
    denominator vanishes only when both sides are a single group or both are
    all singletons (then the partitions are identical) or n = 1; the value is
    then 1.0, as in ``sklearn.metrics.adjusted_rand_score``.

    References
    ----------
    Hubert, L. & Arabie, P. (1985). Comparing partitions. Journal of
    Classification 2, 193-218.
    """
    t = _table(labels_a, labels_b, table)
    return _adjusted_rand_index(t)


def _pairs_sum(x: np.ndarray) -> int:
    # sum of C(x, 2); each term <= n^2/2 and the sum <= n^2/2 < 2^63 for n < 4e9.
    return int(np.sum(x * (x - 1) // 2, dtype=np.int64))


def _adjusted_rand_index(t: ContingencyTable) -> float:
    n = t.n
    index = _pairs_sum(t.cell_count)
    s_a = _pairs_sum(t.row_sizes)
    s_b = _pairs_sum(t.col_sizes)
    total = n * (n - 1) // 2
    numerator = 2 * (index * total - s_a * s_b)
    denominator = (s_a + s_b) * total - 2 * s_a * s_b
    if denominator == 0:
        return 1.0
    return numerator / denominator


def normalized_mutual_info(labels_a=None, labels_b=None, *, normalization: str = "arithmetic",
                           table: ContingencyTable | None = None) -> float:
    """Normalised mutual information with a named normaliser.

    .. math:: \\mathrm{NMI} = \\frac{I(U;V)}{\\operatorname{mean}(H(U), H(V))}

    where the mean is arithmetic, geometric, max or min (see
    :func:`generalized_mean`).

    Parameters
    ----------
    labels_a, labels_b : array_like of int, shape (n,), optional
    normalization : {"arithmetic", "geometric", "max", "min"}, default "arithmetic"
    table : ContingencyTable, optional

    Returns
    -------
    float
        In [0, 1].

    Raises
    ------
    ComputeError
        For zero nodes.
    ParameterError
        For an unknown normalization.

    Notes
    -----
    Degenerate cases follow ``sklearn.metrics.normalized_mutual_info_score``:
    both sides a single group gives 1.0 (0/0 read as perfect agreement);
    otherwise I = 0 gives 0.0 whatever the normaliser (this covers one side
    being a single group). Identical partitions up to renaming give exactly
    1.0.

    References
    ----------
    Strehl, A. & Ghosh, J. (2002). Cluster ensembles. JMLR 3, 583-617;
    Vinh, N. X., Epps, J. & Bailey, J. (2010). JMLR 11, 2837-2854.
    """
    _check_normalization(normalization)
    t = _table(labels_a, labels_b, table)
    return _normalized_mutual_info(t, normalization)


def _normalized_mutual_info(t: ContingencyTable, normalization: str,
                            mi: float | None = None, h: tuple[float, float] | None = None) -> float:
    r, c = t.shape
    if r == c == 1:
        return 1.0
    if t.is_one_to_one():
        return 1.0
    mi = _mutual_information(t) if mi is None else mi
    if mi == 0.0:
        return 0.0
    h_a, h_b = (_entropy_of_sizes(t.row_sizes, t.n), _entropy_of_sizes(t.col_sizes, t.n)) \
        if h is None else h
    return float(mi / generalized_mean(h_a, h_b, normalization))


def expected_mutual_information(labels_a=None, labels_b=None, *,
                                table: ContingencyTable | None = None,
                                tail_mass: float = 1e-40) -> float:
    """Expected mutual information under the permutation (hypergeometric) model.

    .. math::
        E[I] = \\sum_{p,q} \\sum_{k=\\max(1, a_p+b_q-n)}^{\\min(a_p, b_q)}
        \\frac{k}{n} \\ln\\frac{n k}{a_p b_q}\\,
        \\frac{a_p!\\, b_q!\\, (n-a_p)!\\, (n-b_q)!}
             {n!\\, k!\\, (a_p-k)!\\, (b_q-k)!\\, (n-a_p-b_q+k)!}

    Parameters
    ----------
    labels_a, labels_b : array_like of int, shape (n,), optional
    table : ContingencyTable, optional
    tail_mass : float, default 1e-40
        Probability mass of each hypergeometric that may be left out of the
        inner sum (see Notes); 0 sums the full support.

    Returns
    -------
    float
        E[I] in nats; 0.0 when either side is a single group.

    Raises
    ------
    ComputeError
        For zero nodes.
    ParameterError
        For ``tail_mass`` outside [0, 1).

    Notes
    -----
    The summand depends on (a_p, b_q) only, so the double sum runs over the
    *distinct* row and column sizes weighted by their multiplicities (many
    small communities cost little). For each size pair the hypergeometric
    pmf p(k) is built in log space from the exact ratio
    ``p(k+1)/p(k) = (a_p-k)(b_q-k) / ((k+1)(n-a_p-b_q+k+1))`` (integers below
    2^53, taken through ``log1p`` of their exact difference), cumulated per
    pair and normalised to sum to 1 over the summed range. This avoids the
    cancellation of ``gammaln(n+1) - ...`` (about 1e7 at n = 10^6), which
    costs the factorial form ~1e-9 relative accuracy per term; we measured
    ~1e-14 relative error against exact rational sums where scikit-learn's
    implementation shows ~1e-11. All (pair, k) terms are evaluated as
    vectorised (pairs x k) blocks.

    The inner sum is restricted to ``|k - a_p b_q / n| <= d`` with Bernstein's
    ``d = L/3 + sqrt(L^2/9 + 2 L s^2)``, ``L = ln(2 / tail_mass)``,
    ``s^2 = a_p b_q (n - max(a_p, b_q)) / n^2``. Bernstein's inequality holds
    for the hypergeometric because its moment generating function is
    dominated by the binomial one (Hoeffding 1963, Theorem 4). The upper end
    is lowered further by the factorial-moment bound
    ``P(K >= j) <= C(a,j) C(b,j) / C(n,j) <= lambda^j / j!`` with
    ``lambda = a_p b_q / n`` (Markov's inequality on ``C(K, j)``), which is
    much tighter for the small means of fine partitions (hundreds of
    communities). Either way the left-out probability is at most
    ``tail_mass``; each summand's factor ``(k/n) ln(nk/(a_p b_q))`` is at most
    ``ln n`` in magnitude, so the absolute error is below
    ``2 r c tail_mass ln n`` (about 1e-30 at the default for 10^7 nodes and
    10^4 x 10^4 communities), far below float64 resolution.
    ``tail_mass=0`` sums the full support.

    Pairs with a small mean (``lambda <= 16``, window from k = 0) take a
    faster form: the pmf relative to p(0) as a running product of the exact
    ratios and ``sum_k p(k) k (ln k + ln(n/(a_p b_q)))`` as two
    matrix-vector products; its absolute error is about 1e-16 ln n per unit
    of ``E[K]/n`` (about 1e-15 in total), so AMI is unchanged to ~1e-15.

    References
    ----------
    Vinh, N. X., Epps, J. & Bailey, J. (2010). Information theoretic measures
    for clusterings comparison. JMLR 11, 2837-2854, eq. (24a).
    Hoeffding, W. (1963). Probability inequalities for sums of bounded
    random variables. JASA 58, 13-30 (Theorem 4, sampling without replacement).
    Boucheron, S., Lugosi, G. & Massart, P. (2013). Concentration
    Inequalities. Oxford University Press, Sec. 2.8 (Bernstein's inequality).
    """
    if not (0.0 <= tail_mass < 1.0):
        raise ParameterError(f"tail_mass must be in [0, 1), got {tail_mass}")
    t = _table(labels_a, labels_b, table)
    return _expected_mutual_information(t, tail_mass)


def _log_factorials(m: int) -> np.ndarray:
    """``ln k!`` for k = 0..m (a cumulative sum of logs; used for window bounds only)."""
    out = np.zeros(m + 1, dtype=np.float64)
    if m >= 1:
        np.cumsum(np.log(np.arange(1, m + 1, dtype=np.float64)), out=out[1:])
    return out


def _poisson_type_upper(S: np.ndarray, T: np.ndarray, N: int, hi: np.ndarray,
                        log_tail: float) -> np.ndarray:
    """Upper window ends ``min(hi, h)`` with P(K > h) <= exp(log_tail), lambda = S T / N.

    ``P(K >= j) <= E[C(K, j)] = C(S, j) C(T, j) / C(N, j) <= lambda^j / j!`` for the
    hypergeometric K (its j-th factorial moment, and ``(S-i)(T-i)/(N-i) <= S T / N``).
    ``lambda^j / j! <= exp(log_tail)`` reads ``ln lambda <= theta_j = (ln j! + log_tail) / j``,
    and theta_j increases with j, so the first such j is a sorted search; h = j - 1.
    """
    lam = S.astype(np.float64) * T / float(N)
    top = int(hi.max()) + 2
    j = np.arange(1, top + 1, dtype=np.float64)
    theta = (_log_factorials(top)[1:] + log_tail) / j
    with np.errstate(divide="ignore"):
        first = np.searchsorted(theta, np.log(lam), side="left") + 1  # smallest j, 1-based
    return np.minimum(hi, first - 1)


def _expected_mutual_information(t: ContingencyTable, tail_mass: float = 1e-40,
                                 block: int = 1 << 20) -> float:
    r, c = t.shape
    if r == 1 or c == 1:
        return 0.0
    N = t.n
    sa, ma = np.unique(t.row_sizes, return_counts=True)
    sb, mb = np.unique(t.col_sizes, return_counts=True)
    S = np.repeat(sa, sb.shape[0]).astype(np.int64)
    T = np.tile(sb, sa.shape[0]).astype(np.int64)
    W = np.repeat(ma, sb.shape[0]).astype(np.float64) * np.tile(mb, sa.shape[0])
    # Support of the hypergeometric count k of a pair (S, T).
    lo = np.maximum(0, S + T - N)
    hi = np.minimum(S, T)
    Sf = S.astype(np.float64)
    Tf = T.astype(np.float64)
    if tail_mass > 0.0:
        L = math.log(2.0 / tail_mass)
        var = Sf * Tf * (N - np.maximum(Sf, Tf)) / (float(N) * N)
        d = L / 3.0 + np.sqrt(L * L / 9.0 + 2.0 * L * var)
        mean = Sf * Tf / N
        lo = np.maximum(lo, np.floor(mean - d).astype(np.int64))
        hi = np.minimum(hi, np.ceil(mean + d).astype(np.int64))
        hi = np.maximum(lo, _poisson_type_upper(S, T, N, hi, -L))
    length = hi - lo + 1
    per_pair = np.zeros(S.shape[0], dtype=np.float64)
    # Small-mean pairs (the many pairs of fine partitions) take the fast form
    # sum_k p(k) (k/N)(ln k + ln(N/(S T))) with p a running product of pmf ratios;
    # the others the log-space form, which keeps full relative accuracy near k = mean.
    fast = (Sf * Tf / N <= _FAST_MEAN) & (lo == 0)
    idx = np.flatnonzero(fast)
    if idx.shape[0]:
        per_pair[idx] = _emi_small_mean(Sf[idx], Tf[idx], length[idx], N)
    idx = np.flatnonzero(~fast)
    if idx.shape[0]:
        per_pair[idx] = _emi_log(Sf[idx], Tf[idx], lo[idx], length[idx], N, block)
    return float(np.dot(W, per_pair))


# Pairs with mean S T / N up to this use the product form (see _emi_small_mean).
_FAST_MEAN = 16.0


def _emi_small_mean(Sf: np.ndarray, Tf: np.ndarray, length: np.ndarray, N: int,
                    block: int = 1 << 16) -> np.ndarray:
    """Per-pair E-terms for windows starting at k = 0 and small means.

    p(k) relative to p(0) is the running product of
    ``(S-k)(T-k) / ((k+1)(N-S-T+k+1))`` (no overflow: the mean is small);
    the term is ``sum_k p(k) k (ln k + ln(N/(S T))) / (N sum_k p(k))``; both
    sums are matrix-vector products with the fixed vectors k ln k and k.
    Absolute error about 1e-16 ln N per unit of E[K]/N.
    """
    out = np.empty(Sf.shape[0], dtype=np.float64)
    order = np.argsort(length, kind="stable")
    Nf = float(N)
    log_n_st = math.log(N) - np.log(Sf) - np.log(Tf)
    top = int(length.max())
    kv_all = np.arange(top, dtype=np.float64)
    kp1_all = kv_all + 1.0
    klk_all = kv_all * np.log(np.maximum(kv_all, 1.0))
    i = 0
    n = order.shape[0]
    while i < n:
        width = int(length[order[min(n - 1, i + max(1, block // int(length[order[i]])) - 1)]])
        m = max(1, block // width)
        rows = order[i:i + m]
        kv = kv_all[:width, None]
        # ratio(k) = (S-k)(T-k) / ((k+1)(N+1-S-T+k)); k down the rows, pairs across (the
        # running product then multiplies whole contiguous rows)
        s_ = Sf[rows]
        t_ = Tf[rows]
        ratio = (s_ - kv) * (t_ - kv)
        den = ((Nf + 1.0) - s_ - t_) + kv
        den *= kp1_all[:width, None]
        ratio /= den
        # end each window: a zero ratio after its last row keeps the rest at 0
        ln = length[rows]
        short = np.flatnonzero(ln < width)
        ratio[ln[short] - 1, short] = 0.0
        # p(0) = 1, p(k) = ratio(0) ... ratio(k-1): shift by one row
        p = np.cumprod(ratio, axis=0, out=ratio)
        a0 = 1.0 + p[:-1].sum(axis=0)
        a1 = klk_all[1:width] @ p[:-1]
        a2 = kv_all[1:width] @ p[:-1]
        out[rows] = (a1 + log_n_st[rows] * a2) / (Nf * a0)
        i += rows.shape[0]
    return out


def _emi_log(Sf: np.ndarray, Tf: np.ndarray, lo: np.ndarray, length: np.ndarray, N: int,
             block: int) -> np.ndarray:
    """Per-pair E-terms in log space, for any window (see expected_mutual_information)."""
    out = np.empty(Sf.shape[0], dtype=np.float64)
    # Pairs sorted by window length and taken in blocks of about `block`
    # cells of a (pairs x max length) grid: row-wise numpy operations without
    # gathers, and little padding because neighbouring lengths are close.
    order = np.argsort(length, kind="stable")
    sorted_len = length[order]
    Nf = float(N)
    i = 0
    n_pairs = order.shape[0]
    with np.errstate(divide="ignore", invalid="ignore"):
        while i < n_pairs:
            # Largest m with m * sorted_len[i + m - 1] <= block (at least 1).
            window = sorted_len[i:i + max(1, block // int(sorted_len[i]))]
            fits = window * np.arange(1, window.shape[0] + 1) <= block
            m = max(1, int(np.count_nonzero(fits)))
            j = i + m
            width = int(sorted_len[j - 1])
            rows = order[i:j]
            col = np.arange(width, dtype=np.float64)
            k = lo[rows, None].astype(np.float64) + col[None, :]
            valid = col[None, :] < length[rows, None]
            out[rows] = _emi_block_log(k, valid, Sf[rows, None], Tf[rows, None], Nf)
            i = j
    return out


def _emi_block_log(k, valid, s_, t_, Nf) -> np.ndarray:
    """Per-pair terms of a block in log space (wide windows where a plain product of
    pmf ratios would overflow)."""
    num = (s_ - k) * (t_ - k)
    den = (k + 1.0) * (Nf - s_ - t_ + k + 1.0)
    # log p(k+1) - log p(k) as log1p of the exact integer difference over the
    # denominator (all values below 2**53), accurate near ratio 1.
    step = np.log1p((num - den) / den)
    logp = np.zeros_like(k)
    if k.shape[1] > 1:
        np.cumsum(step[:, :-1], axis=1, out=logp[:, 1:])
    logp[~valid] = -np.inf
    logp -= logp.max(axis=1, keepdims=True)
    e = np.exp(logp)
    st = s_ * t_
    factor = (k / Nf) * np.log1p((Nf * k - st) / st)
    factor[(k <= 0) | ~valid] = 0.0
    return (factor * e).sum(axis=1) / e.sum(axis=1)


def adjusted_mutual_info(labels_a=None, labels_b=None, *, normalization: str = "arithmetic",
                         table: ContingencyTable | None = None, tail_mass: float = 1e-40) -> float:
    """Adjusted mutual information of Vinh, Epps & Bailey.

    .. math:: \\mathrm{AMI} = \\frac{I(U;V) - E[I]}{\\operatorname{mean}(H(U), H(V)) - E[I]}

    with E[I] from :func:`expected_mutual_information` and the mean chosen by
    ``normalization`` (arithmetic gives the AMI_sum of the paper, max gives
    AMI_max, geometric AMI_sqrt).

    Parameters
    ----------
    labels_a, labels_b : array_like of int, shape (n,), optional
    normalization : {"arithmetic", "geometric", "max", "min"}, default "arithmetic"
    table : ContingencyTable, optional
    tail_mass : float, default 1e-40
        Passed to :func:`expected_mutual_information`.

    Returns
    -------
    float
        1 for identical partitions, about 0 for independent ones, may be
        negative.

    Raises
    ------
    ComputeError
        For zero nodes.
    ParameterError
        For an unknown normalization.

    Notes
    -----
    Degenerate cases follow ``sklearn.metrics.adjusted_mutual_info_score``:
    both sides a single group gives 1.0; exactly one side a single group gives
    0.0; numerator and denominator are kept at least machine epsilon away
    from zero with their sign. Two additions where scikit-learn leaves the
    result to rounding noise: identical partitions up to renaming give
    exactly 1.0, and one side made only of singletons (the other not) gives
    exactly 0.0 -- then E[I] = H(other) = I(U;V) identically (each singleton
    row contributes sum_q (b_q/n)(1/n) ln(n/b_q)), a 0/0 that scikit-learn
    returns as noise (an arbitrary number for ``normalization="min"``).

    References
    ----------
    Vinh, N. X., Epps, J. & Bailey, J. (2010). Information theoretic measures
    for clusterings comparison: variants, properties, normalization and
    correction for chance. JMLR 11, 2837-2854.
    """
    _check_normalization(normalization)
    t = _table(labels_a, labels_b, table)
    return _adjusted_mutual_info(t, normalization, tail_mass)


def _adjusted_mutual_info(t: ContingencyTable, normalization: str, tail_mass: float = 1e-40,
                          mi: float | None = None, h: tuple[float, float] | None = None,
                          emi: float | None = None) -> float:
    r, c = t.shape
    if r == c == 1:
        return 1.0
    if r == 1 or c == 1:
        return 0.0
    if t.is_one_to_one():
        return 1.0
    if r == t.n or c == t.n:
        return 0.0
    mi = _mutual_information(t) if mi is None else mi
    emi = _expected_mutual_information(t, tail_mass) if emi is None else emi
    h_a, h_b = (_entropy_of_sizes(t.row_sizes, t.n), _entropy_of_sizes(t.col_sizes, t.n)) \
        if h is None else h
    denominator = generalized_mean(h_a, h_b, normalization) - emi
    denominator = min(denominator, -_EPS) if denominator < 0 else max(denominator, _EPS)
    numerator = mi - emi
    numerator = min(numerator, -_EPS) if numerator < 0 else max(numerator, _EPS)
    return float(numerator / denominator)


def variation_of_information(labels_a=None, labels_b=None, *,
                             table: ContingencyTable | None = None) -> tuple[float, float]:
    """Variation of information of Meilă, in nats and in bits.

    .. math::
        \\mathrm{VI}(U,V) = H(U\\mid V) + H(V\\mid U)
        = -\\sum_{p,q} \\frac{n_{pq}}{n}\\left(\\ln\\frac{n_{pq}}{a_p}
          + \\ln\\frac{n_{pq}}{b_q}\\right) = H(U) + H(V) - 2 I(U;V)

    Parameters
    ----------
    labels_a, labels_b : array_like of int, shape (n,), optional
    table : ContingencyTable, optional

    Returns
    -------
    (float, float)
        ``(vi_nats, vi_bits)``, ``vi_bits = vi_nats / ln 2``; 0 exactly for
        identical partitions, at most ``ln n`` nats.

    Raises
    ------
    ComputeError
        For zero nodes.

    Notes
    -----
    Computed from the conditional-entropy form (a sum of non-negative terms),
    which avoids the cancellation of the ``H + H - 2I`` form; clipped at 0.
    VI is a metric on partitions, symmetric, and not normalised.

    References
    ----------
    Meilă, M. (2007). Comparing clusterings -- an information based distance.
    Journal of Multivariate Analysis 98, 873-895.
    """
    t = _table(labels_a, labels_b, table)
    return _variation_of_information(t)


def _variation_of_information(t: ContingencyTable) -> tuple[float, float]:
    if t.is_one_to_one():
        return 0.0, 0.0
    nij = t.cell_count
    log_nij = np.log(nij)
    terms = (nij / t.n) * ((np.log(t.row_sizes)[t.cell_row] - log_nij)
                           + (np.log(t.col_sizes)[t.cell_col] - log_nij))
    vi = float(max(np.sum(terms), 0.0))
    return vi, vi / math.log(2.0)
