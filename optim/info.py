"""Entropies and pairwise mutual information estimated from a sample.

Every function takes a sample matrix ``X`` of shape ``(N, n)``: ``N`` rows
(samples), ``n`` columns (variables), integer values ``0 … k_i - 1``.

Conventions shared by all functions
-----------------------------------
cardinality
    ``None`` infers ``k_i = max(X[:, i]) + 1`` (at least 2); an int applies to
    every variable; a sequence gives one value per variable. Each ``k_i`` must
    be between 2 and 256.
weights
    Optional non-negative sample weights of shape ``(N,)``; every count
    becomes a weighted sum.
prior
    A Dirichlet pseudo-count ``a >= 0``. For one variable it is added to each
    of its ``k_i`` cells. For a pair it is added to each of the ``k_i * k_j``
    cells of the joint table, and the marginals used for a pair are the
    marginals *of that smoothed table*: ``count_i(x) + a * k_j`` out of
    ``W + a * k_i * k_j`` (``W`` the total weight). So the mutual information
    reported is exactly the mutual information of the smoothed joint table,
    hence never negative.
base
    ``None`` gives natural logarithms (nats); any base > 1 is accepted
    (``base=2`` gives bits).

Pairwise quantities come from one matrix product: for binary data
``C11 = B.T @ B`` gives every pair's count of (1, 1), and the other three
cells follow from the column sums; for other cardinalities the product of the
one-hot encoding gives every pair's joint table as a block. The tables are
computed in float32, exactly for unweighted data (counts below 2**24), and
the entropies are accurate to about 1e-6 nats.
"""

from __future__ import annotations

import math
import numbers

import numpy as np

from optim.samples import MAX_CARDINALITY, checked_samples, checked_weights, inferred_cardinality, shown

__all__ = [
    "marginal_counts",
    "entropy",
    "joint_entropy",
    "conditional_entropy",
    "mutual_information",
    "pair_table",
]

# float32 holds every integer count below this exactly.
_EXACT_COUNTS = 1 << 24
# Stand-in for an empty cell inside the logarithm: c * log(max(c, tiny)) is 0 at c = 0.
_TINY = np.float32(1e-30)
# Largest number of float32 cells of the one-hot product held at once (64 MB).
_BLOCK_CELLS = 1 << 24
# Pairs per block of the binary path's cell arithmetic (its working set stays in cache).
_CHUNK_CELLS = 1 << 15
# Smallest scaled prior for which unweighted binary cells cannot round to zero or below.
_SAFE_PRIOR = 2.0**-20


# -- input checks ---------------------------------------------------------------------------
def _check_cardinality(cardinality, X: np.ndarray, caller: str) -> np.ndarray:
    n = X.shape[1]
    if cardinality is None:
        return inferred_cardinality(X)
    if isinstance(cardinality, numbers.Integral) and not isinstance(cardinality, (bool, np.bool_)):
        card = np.full(n, int(cardinality), dtype=np.int64)
    else:
        arr = np.asarray(cardinality)
        if arr.shape != (n,) or not np.issubdtype(arr.dtype, np.integer):
            raise ValueError(
                f"The 'cardinality' parameter of {caller} must be None, an integer or a sequence of "
                f"{n} integers (one per column of 'X'). Got {shown(cardinality)} instead."
            )
        card = arr.astype(np.int64)
    if card.min() < 2 or card.max() > MAX_CARDINALITY:
        bad = card[(card < 2) | (card > MAX_CARDINALITY)][0]
        raise ValueError(
            f"The 'cardinality' parameter of {caller} must give values between 2 and "
            f"{MAX_CARDINALITY}. Got {bad} instead."
        )
    checked_samples(X, caller, card)  # every value within its column's cardinality
    return card


def _check_prior(prior, caller: str) -> float:
    if (
        isinstance(prior, (bool, np.bool_))
        or not isinstance(prior, numbers.Real)
        or not math.isfinite(prior)
        or prior < 0
    ):
        raise ValueError(
            f"The 'prior' parameter of {caller} must be a non-negative number. Got {shown(prior)} instead."
        )
    return float(prior)


def _check_base(base, caller: str) -> float:
    if base is None:
        return 1.0
    if isinstance(base, (bool, np.bool_)) or not isinstance(base, numbers.Real) or not math.isfinite(base) or base <= 1:
        raise ValueError(
            f"The 'base' parameter of {caller} must be None (natural logarithm) or a number greater "
            f"than 1. Got {shown(base)} instead."
        )
    return math.log(base)


def _check_common(X, cardinality, weights, prior, caller):
    X = checked_samples(X, caller)
    card = _check_cardinality(cardinality, X, caller)
    a = _check_prior(prior, caller)
    w = checked_weights(weights, X.shape[0], caller, need_mass=a == 0)
    return X, card, w, a


# -- small numeric helpers ------------------------------------------------------------------
def _xlogx(p: np.ndarray) -> np.ndarray:
    """``p * log(p)`` elementwise in float64, with ``0 log 0 = 0``."""
    logs = np.zeros_like(p)
    np.log(p, out=logs, where=p > 0)
    return p * logs


def _even_exponent(mass: float) -> int:
    """An even ``e`` with ``mass <= 2**e < 4 * mass``; scaling by ``2**-e`` is exact."""
    exponent = math.frexp(mass)[1]
    exponent += exponent & 1
    return max(min(exponent, 1000), -1000)


def _xlogx_f32(cells: np.ndarray) -> np.ndarray:
    """``c * log(c)`` elementwise in a new float32 array, with ``0 log 0 = 0``."""
    logs = np.maximum(cells, _TINY)
    np.log(logs, out=logs)
    logs *= cells
    return logs


def _marginals_in_pairs(counts: np.ndarray, card: np.ndarray, mass: float, prior: float) -> np.ndarray:
    """Entropy of X_i's marginal in the smoothed table of each pair (i, j), in nats.

    ``counts`` are the concatenated per-value counts of all variables. The
    marginal of X_i in pair (i, j) is ``counts_i + prior * k_j`` out of
    ``mass + prior * k_i * k_j``; it depends on j only through k_j, so one
    column is computed per distinct partner cardinality. Returns shape
    ``(n, 1)`` when j does not matter, else ``(n, n)``.
    """
    partners = np.unique(card) if prior > 0 else card[:1]
    starts = np.concatenate(([0], np.cumsum(card)[:-1]))
    table = np.empty((card.shape[0], partners.shape[0]))
    for column, k_partner in enumerate(partners):
        totals = mass + prior * card * k_partner
        p = (counts + prior * k_partner) / np.repeat(totals, card)
        table[:, column] = -np.add.reduceat(_xlogx(p), starts)
    if partners.shape[0] == 1:
        return table
    return table[:, np.searchsorted(partners, card)]


# -- pair statistics ------------------------------------------------------------------------
def _binary_pairs(X: np.ndarray, weights, prior: float, information: bool = False):
    """``(table, marg, product)`` of binary data: pair entropies, in-pair marginal entropies, B.T @ B.

    One product ``C11 = B.T @ B`` gives every pair's (1, 1) cell; with the
    column sums ``s`` and total ``W`` the other cells are ``s_i - C11``,
    ``s_j - C11`` and ``W - s_i - s_j + C11``. Counts are scaled by a power of
    two to total at most 1 (exact), so for unweighted data every cell is an
    exact float32 value. ``table`` (float32, (n, n)) holds the joint
    entropies, or with ``information`` I(X_i; X_j) = H(X_i) + H(X_j) -
    H(X_i, X_j) clipped at 0 (its diagonal is then meaningless: callers clear
    it). Unweighted, ``product`` holds the plain counts C11.
    """
    N, n = X.shape
    data_mass = float(N) if weights is None else float(weights.sum())
    scale = 2.0 ** -_even_exponent(data_mass + 4.0 * prior)
    B = X.astype(np.float32)
    if weights is None:
        after_product = scale
    else:
        B *= np.sqrt(weights * scale).astype(np.float32)[:, None]
        after_product = 1.0
    product = B.T @ B
    del B
    ones = np.diagonal(product).astype(np.float64) * after_product
    mass, a = data_mass * scale, prior * scale
    counts = np.column_stack((mass - ones, ones)).ravel()
    marg = _marginals_in_pairs(counts, np.full(n, 2, dtype=np.int64), mass, a)
    # Unweighted cells with a prior are at least a (up to a few float32 steps of 1): never <= 0.
    positive = weights is None and N < _EXACT_COUNTS and a >= _SAFE_PRIOR
    # "+ 0" turns a -0.0 entropy (constant column) into +0.0, so no -0.0 reaches the information.
    offsets = marg[:, 0].astype(np.float32) + np.float32(0.0) if information else None
    table = np.empty_like(product)
    _binary_cell_entropies(table, product, after_product, ones, mass, a, positive, offsets)
    return table, marg, product


def _binary_cell_entropies(table, product, after_product, ones, mass, a, positive, offsets) -> None:
    """Fill ``table`` with the joint entropies ``log(T) - S / T`` (T the total, S the sum of
    c log c over the four cells), or with ``offsets_i + offsets_j - log(T) + S / T`` clipped at
    0 when the marginal entropies ``offsets`` are given (the mutual information).

    ``product * after_product`` is C11. Only the upper triangle is computed, a
    few rows at a time so the work stays in cache, and mirrored below the
    diagonal. Every cell is built symmetrically in (i, j) (the sum is taken as
    (c00 + c11) + (c01 + c10), whose off cells swap for (j, i)), so the blocks
    on the diagonal come out exactly symmetric too.
    """
    n = product.shape[0]
    # With both = C11 + a: neither = half_rest_i + half_rest_j + both, only_i = ones_smoothed_i - both.
    half_rest = (0.5 * mass - ones).astype(np.float32)
    ones_smoothed = (ones + 2.0 * a).astype(np.float32)
    total = mass + 4.0 * a
    sign = 1.0 if offsets is None else -1.0
    post, shift = np.float32(after_product), np.float32(a)
    factor, constant = np.float32(-sign / total), np.float32(sign * math.log(total))
    size = 4 * max(_CHUNK_CELLS, n)
    cell_buffer, log_buffer = np.empty(size, dtype=np.float32), np.empty(size, dtype=np.float32)
    top = 0
    while top < n:
        width = n - top
        bottom = min(top + max(_CHUNK_CELLS // width, 1), n)
        rows, height = slice(top, bottom), bottom - top
        c = cell_buffer[: 4 * height * width].reshape(4, height, width)
        lg = log_buffer[: 4 * height * width].reshape(4, height, width)
        both = np.multiply(product[rows, top:], post, out=c[3])
        both += shift
        np.add(half_rest[rows, None], half_rest[None, top:], out=c[0])
        c[0] += both
        np.subtract(ones_smoothed[None, top:], both, out=c[1])
        np.subtract(ones_smoothed[rows, None], both, out=c[2])
        if not positive:  # c log c at c = _TINY is ~1e-28, as good as 0 (and cells rounded below 0)
            np.maximum(c, _TINY, out=c)
        np.log(c, out=lg)
        lg *= c
        block = np.add(lg[0], lg[3], out=lg[0])  # built in the (cached) buffer, written out once
        lg[1] += lg[2]
        block += lg[1]
        block *= factor
        block += constant
        if offsets is not None:
            np.add(offsets[rows, None], offsets[None, top:], out=lg[1])
            block += lg[1]
            np.maximum(block, np.float32(0.0), out=block)
        table[rows, top:] = block
        table[bottom:, rows] = block[:, height:].T
        top = bottom


def _variable_blocks(card: np.ndarray, total_columns: int):
    """Consecutive variable ranges whose rows of the one-hot product fit in ``_BLOCK_CELLS``."""
    ends = np.cumsum(card)
    rows_allowed = max(_BLOCK_CELLS // total_columns, 1)
    first = 0
    while first < card.shape[0]:
        start = ends[first] - card[first]
        stop = int(np.searchsorted(ends, start + rows_allowed, side="right"))
        stop = max(stop, first + 1)
        yield first, stop
        first = stop


def _block_sums(logs: np.ndarray, row_k: int, groups, starts) -> np.ndarray:
    """Sum ``logs`` over each (row variable, column variable) block of the one-hot product.

    ``logs`` holds the product rows of consecutive variables that all have
    cardinality ``row_k``; ``groups`` lists the column variables as runs
    ``(first, stop, k)`` of equal cardinality. Returns shape (row variables, n).
    """
    count = logs.shape[0] // row_k
    # Summed in float64: a table may have up to 256 * 256 cells.
    by_row = logs.reshape(count, row_k, logs.shape[1]).sum(axis=1, dtype=np.float64)
    sums = np.empty((count, starts.shape[0]), dtype=np.float64)
    for first, stop, k in groups:
        lo = int(starts[first])
        part = by_row[:, lo : lo + (stop - first) * k]
        target = sums[:, first:stop]
        np.copyto(target, part[:, 0::k])
        for value in range(1, k):
            target += part[:, value::k]
    return sums


def _general_pairs(X: np.ndarray, card: np.ndarray, weights, prior: float):
    """Joint entropies (float32, (n, n)) and in-pair marginal entropies, any cardinality.

    The one-hot encoding ``E`` (one column per variable value) gives every
    pair's joint table as a block of ``E.T @ E``. Variables are sorted by
    cardinality so that the blocks of each pair of cardinality values form a
    regular grid that reshaping sums up; the loops run over distinct
    cardinalities (and, for very wide encodings, over row blocks that bound
    memory), never over pairs.
    """
    N, n = X.shape
    perm = np.argsort(card, kind="stable")
    permuted = not np.array_equal(perm, np.arange(n))
    if permuted:
        X, card = X[:, perm], card[perm]
    starts = np.concatenate(([0], np.cumsum(card)[:-1]))
    width = int(card.sum())
    kmax = int(card[-1])
    data_mass = float(N) if weights is None else float(weights.sum())
    scale = 2.0 ** -_even_exponent(data_mass + prior * kmax * kmax)
    if weights is None:
        row_values = np.float32(math.sqrt(scale))
    else:
        row_values = np.sqrt(weights * scale).astype(np.float32)[:, None]
    onehot = np.zeros((N, width), dtype=np.float32)
    onehot[np.arange(N)[:, None], X + starts] = row_values
    mass, a = data_mass * scale, prior * scale
    values, firsts = np.unique(card, return_index=True)
    groups = [(int(f), int(s), int(k)) for f, s, k in zip(firsts, np.append(firsts[1:], n), values, strict=True)]
    counts = np.empty(width, dtype=np.float64)
    sums = np.empty((n, n), dtype=np.float64)
    blocks = list(_variable_blocks(card, width))
    for first, stop in blocks:
        lo, hi = int(starts[first]), int(starts[stop - 1] + card[stop - 1])
        block = onehot.T @ onehot if len(blocks) == 1 else onehot[:, lo:hi].T @ onehot
        counts[lo:hi] = block[np.arange(hi - lo), np.arange(lo, hi)]
        if a > 0:
            block += np.float32(a)
        logs = _xlogx_f32(block)
        del block
        for g_first, g_stop, k in groups:
            r0, r1 = max(g_first, first), min(g_stop, stop)
            if r0 < r1:
                part = logs[starts[r0] - lo : starts[r0] - lo + (r1 - r0) * k]
                sums[r0:r1] = _block_sums(part, k, groups, starts)
    totals = mass + a * card[:, None].astype(np.float64) * card[None, :]
    joint = (np.log(totals) - sums / totals).astype(np.float32)
    joint = 0.5 * (joint + joint.T)
    marg = _marginals_in_pairs(counts, card, mass, a)
    if permuted:
        inverse = np.argsort(perm)
        joint = joint[np.ix_(inverse, inverse)]
        marg = marg[inverse] if marg.shape[1] == 1 else marg[np.ix_(inverse, inverse)]
    return joint, marg


def _pair_statistics(X, card, weights, prior):
    """``(joint, marg)``: joint[i, j] = H(X_i, X_j) of the smoothed pair table (float32, nats);
    marg broadcasts to (n, n) with marg[i, j] = H of X_i's marginal in that table."""
    if np.all(card == 2):
        return _binary_pairs(X, weights, prior)[:2]
    return _general_pairs(X, card, weights, prior)


def _information_matrix(X, card, weights, prior) -> np.ndarray:
    """:func:`mutual_information` in nats as float32, for inputs already checked.

    Exactly symmetric, zero on the diagonal, and every entry >= +0.0 (never -0.0).
    """
    return _information_and_pair_ones(X, card, weights, prior)[0]


def _information_and_pair_ones(X, card, weights, prior):
    """``(information, pair_ones)``: :func:`_information_matrix`, and for unweighted binary data
    with fewer than 2**24 rows the product ``X.T @ X`` it came from as float32, whose entries
    are the exact numbers of rows with X_i = X_j = 1 (else ``None``)."""
    pair_ones = None
    if np.all(card == 2):
        information, _, product = _binary_pairs(X, weights, prior, information=True)
        if weights is None and X.shape[0] < _EXACT_COUNTS:
            pair_ones = product
    else:
        joint, marg = _general_pairs(X, card, weights, prior)
        # "+ 0" turns -0.0 into +0.0; then no difference below is -0.0.
        marg = marg.astype(np.float32) + np.float32(0.0)
        information = np.add(marg, marg.T)
        information -= joint
        np.maximum(information, 0.0, out=information)
    np.fill_diagonal(information, 0.0)
    return information, pair_ones


def _padded_counts(X, card, weights) -> np.ndarray:
    N, n = X.shape
    kmax = int(card.max())
    codes = X + (np.arange(n, dtype=np.int64) * kmax)[None, :]
    spread = None if weights is None else np.broadcast_to(weights[:, None], (N, n)).ravel()
    return np.bincount(codes.ravel(), weights=spread, minlength=n * kmax).astype(np.float64).reshape(n, kmax)


def _marginal_entropy(X, card, weights, prior) -> np.ndarray:
    counts = _padded_counts(X, card, weights)
    valid = np.arange(counts.shape[1])[None, :] < card[:, None]
    smoothed = np.where(valid, counts + prior, 0.0)
    p = smoothed / smoothed.sum(axis=1, keepdims=True)
    return -_xlogx(p).sum(axis=1)


# -- public functions -----------------------------------------------------------------------
def marginal_counts(X, cardinality=None, weights=None) -> np.ndarray:
    """Per-variable value counts of a sample.

    Parameters
    ----------
    X : array of int, shape (N, n)
        The sample.
    cardinality : None, int or sequence of int
        Number of values of each variable (see the module notes).
    weights : array of float, shape (N,), optional
        Sample weights; counts become weighted sums.

    Returns
    -------
    ndarray of float64, shape (n, kmax)
        ``counts[i, x]`` is the (weighted) number of rows with ``X[:, i] == x``;
        ``kmax`` is the largest cardinality and cells ``x >= k_i`` are 0.
    """
    caller = "marginal_counts"
    X = checked_samples(X, caller)
    card = _check_cardinality(cardinality, X, caller)
    w = checked_weights(weights, X.shape[0], caller, need_mass=False)
    return _padded_counts(X, card, w)


def entropy(X, cardinality=None, weights=None, prior=0.0, base=None) -> np.ndarray:
    """Marginal entropy H(X_i) of each column, shape (n,).

    ``prior`` is added to each of the ``k_i`` cells of the marginal table.
    Parameters are described in the module notes.
    """
    caller = "entropy"
    X, card, w, a = _check_common(X, cardinality, weights, prior, caller)
    log_base = _check_base(base, caller)
    return _marginal_entropy(X, card, w, a) / log_base


def joint_entropy(X, cardinality=None, weights=None, prior=0.0, base=None) -> np.ndarray:
    """Joint entropy H(X_i, X_j) of every pair of columns, shape (n, n).

    Off the diagonal, ``prior`` is added to each of the ``k_i * k_j`` cells of
    the pair table; the diagonal holds H(X_i) as returned by :func:`entropy`
    (``prior`` added to each of the ``k_i`` marginal cells).
    """
    caller = "joint_entropy"
    X, card, w, a = _check_common(X, cardinality, weights, prior, caller)
    log_base = _check_base(base, caller)
    joint = _pair_statistics(X, card, w, a)[0].astype(np.float64)
    np.fill_diagonal(joint, _marginal_entropy(X, card, w, a))
    return joint / log_base


def conditional_entropy(X, cardinality=None, weights=None, prior=0.0, base=None) -> np.ndarray:
    """Conditional entropy of every ordered pair, shape (n, n): entry [i, j] is H(X_i | X_j).

    Computed as H(X_i, X_j) - H(X_j) on the smoothed pair table (H(X_j) being
    the entropy of that table's marginal), clipped at 0; the diagonal is 0.
    """
    caller = "conditional_entropy"
    X, card, w, a = _check_common(X, cardinality, weights, prior, caller)
    log_base = _check_base(base, caller)
    joint, marg = _pair_statistics(X, card, w, a)
    result = joint.astype(np.float64) - marg.T
    np.maximum(result, 0.0, out=result)
    np.fill_diagonal(result, 0.0)
    return result / log_base


def mutual_information(X, cardinality=None, prior=0.0, weights=None, base=None) -> np.ndarray:
    """Mutual information I(X_i; X_j) of every pair of columns, shape (n, n).

    I(X_i; X_j) = H(X_i) + H(X_j) - H(X_i, X_j) of the smoothed pair table
    (module notes), so the matrix is symmetric, non-negative (rounding below
    0 is clipped) and has a zero diagonal. Binary data take a fast path with
    a single product ``B.T @ B``; other cardinalities use one product of the
    one-hot encoding. The result is accurate to about 1e-6 nats.

    References
    ----------
    C. E. Shannon, "A mathematical theory of communication", 1948 (the measure);
    C. K. Chow and C. N. Liu, 1968 (its use as the weight of a dependency tree).
    """
    caller = "mutual_information"
    X, card, w, a = _check_common(X, cardinality, weights, prior, caller)
    log_base = _check_base(base, caller)
    result = _information_matrix(X, card, w, a).astype(np.float64)
    if log_base != 1.0:
        result /= log_base
    return result


def pair_table(X, i, j, cardinality=None, weights=None, prior=0.0) -> np.ndarray:
    """Joint (weighted) counts of columns ``i`` and ``j`` plus ``prior`` in every cell.

    Returns
    -------
    ndarray of float64, shape (k_i, k_j)
        ``table[x, y]`` = (weighted) number of rows with ``X[:, i] == x`` and
        ``X[:, j] == y``, plus ``prior``.
    """
    caller = "pair_table"
    X, card, w, a = _check_common(X, cardinality, weights, prior, caller)
    n = X.shape[1]
    for name, index in (("i", i), ("j", j)):
        if isinstance(index, (bool, np.bool_)) or not isinstance(index, numbers.Integral) or not 0 <= index < n:
            raise ValueError(
                f"The '{name}' parameter of {caller} must be a column index in 0..{n - 1}. Got {shown(index)} instead."
            )
    k_i, k_j = int(card[i]), int(card[j])
    codes = X[:, i].astype(np.int64) * k_j + X[:, j]
    table = np.bincount(codes, weights=w, minlength=k_i * k_j).astype(np.float64)
    return table.reshape(k_i, k_j) + a
