"""Tests of optim.info: entropies and mutual information from samples.

Outside references: scipy.stats.entropy, direct float64 evaluation of the
definitions on tables built with numpy.histogram2d / numpy.bincount, and the
worked example of Cover & Thomas.
"""

import math
import re

import numpy as np
import pytest
from scipy.stats import entropy as scipy_entropy

import optim.info as info
from optim.info import (
    conditional_entropy,
    entropy,
    joint_entropy,
    marginal_counts,
    mutual_information,
    pair_table,
)

# Accuracy promised for the float32 pair computations, in nats.
TOL = 1e-5


def _sample(rng, N, card, share=0.5):
    """Columns that copy a shared latent value with probability ``share``, else a free one.

    Adds exact structure: column 1 copies column 0 (mod its cardinality) and
    the last column is constant, so zero cells and large dependencies occur.
    """
    card = np.asarray(card)
    latent = rng.integers(0, 256, size=(N, 1))
    free = rng.integers(0, 256, size=(N, card.size))
    X = np.where(rng.random((N, card.size)) < share, latent, free) % card
    X[:, 1] = X[:, 0] % card[1]
    X[:, -1] = 0
    return X.astype(np.uint8)


def _smoothed_table(X, i, j, card, weights, prior):
    table, _, _ = np.histogram2d(
        X[:, i], X[:, j], bins=[card[i], card[j]], range=[[0, card[i]], [0, card[j]]], weights=weights
    )
    return table + prior


def _reference_pairs(X, card, weights, prior):
    """Float64 joint entropy, H(X_i | X_j) and two forms of I(X_i; X_j), pair by pair."""
    n = X.shape[1]
    joint, cond, mi_direct, mi_entropies = (np.zeros((n, n)) for _ in range(4))
    for i in range(n):
        for j in range(n):
            if i == j:
                continue
            table = _smoothed_table(X, i, j, card, weights, prior)
            p = table / table.sum()
            p_i, p_j = p.sum(axis=1), p.sum(axis=0)
            joint[i, j] = scipy_entropy(table.ravel())
            cond[i, j] = joint[i, j] - scipy_entropy(p_j)
            nz = p > 0
            # Definition I = sum p(x, y) log(p(x, y) / (p(x) p(y))): Cover & Thomas, Elements of
            # Information Theory, 2006, Section 2.3 (section number from memory).
            mi_direct[i, j] = np.sum(p[nz] * np.log(p[nz] / np.outer(p_i, p_j)[nz]))
            mi_entropies[i, j] = scipy_entropy(p_i) + scipy_entropy(p_j) - joint[i, j]
    return joint, cond, mi_direct, mi_entropies


def _reference_entropy(X, card, weights, prior, base=None):
    return np.array(
        [
            scipy_entropy(np.bincount(X[:, i], weights=weights, minlength=card[i]) + prior, base=base)
            for i in range(X.shape[1])
        ]
    )


# -- the textbook example -------------------------------------------------------------------
def test_cover_thomas_example_2_2_1_in_bits():
    # Source: T. M. Cover and J. A. Thomas, Elements of Information Theory, 2nd ed., Wiley, 2006,
    # Example 2.2.1. Joint table p(x, y) in units of 1/32, rows y = 1..4, columns x = 1..4.
    table = np.array([[4, 2, 1, 1], [2, 4, 1, 1], [2, 2, 2, 2], [8, 0, 0, 0]])
    rows = [(x, y) for y in range(4) for x in range(4) for _ in range(table[y, x])]
    X = np.array(rows, dtype=np.uint8)  # column 0 is X, column 1 is Y
    assert X.shape == (32, 2)
    # The sample reproduces the table and its marginals exactly.
    np.testing.assert_array_equal(pair_table(X, 1, 0), table)
    np.testing.assert_array_equal(marginal_counts(X), [[16, 8, 4, 4], [8, 8, 8, 8]])
    # The stated values agree with the arithmetic on the table itself.
    assert scipy_entropy(table.sum(axis=0), base=2) == pytest.approx(7 / 4)
    assert scipy_entropy(table.sum(axis=1), base=2) == pytest.approx(2)
    assert scipy_entropy(table.ravel(), base=2) == pytest.approx(27 / 8)

    np.testing.assert_allclose(entropy(X, base=2), [7 / 4, 2], atol=1e-12)
    assert joint_entropy(X, base=2)[0, 1] == pytest.approx(27 / 8, abs=TOL)
    cond = conditional_entropy(X, base=2)
    assert cond[0, 1] == pytest.approx(11 / 8, abs=TOL)  # H(X | Y)
    assert cond[1, 0] == pytest.approx(13 / 8, abs=TOL)  # H(Y | X)
    assert mutual_information(X, base=2)[0, 1] == pytest.approx(3 / 8, abs=TOL)


# -- against scipy and the definitions --------------------------------------------------------
@pytest.mark.parametrize("k", [2, 3, 5, 16])
@pytest.mark.parametrize("weighted", [False, True])
@pytest.mark.parametrize("prior", [0.0, 0.5])
def test_against_float64_references(k, weighted, prior):
    rng = np.random.default_rng(1000 * k + 10 * weighted + int(2 * prior))
    n, N = 8, 600
    card = np.full(n, k)
    X = _sample(rng, N, card)
    w = rng.random(N) * 3.0 if weighted else None

    np.testing.assert_allclose(entropy(X, k, w, prior), _reference_entropy(X, card, w, prior), atol=1e-12)
    joint, cond, mi_direct, mi_entropies = _reference_pairs(X, card, w, prior)
    off = ~np.eye(n, dtype=bool)
    got_joint = joint_entropy(X, k, w, prior)
    np.testing.assert_allclose(got_joint[off], joint[off], atol=TOL)
    np.testing.assert_allclose(np.diag(got_joint), _reference_entropy(X, card, w, prior), atol=1e-12)
    np.testing.assert_allclose(conditional_entropy(X, k, w, prior), cond, atol=TOL)
    mi = mutual_information(X, k, prior, w)
    np.testing.assert_allclose(mi, mi_direct, atol=TOL)
    np.testing.assert_allclose(mi, mi_entropies, atol=TOL)


@pytest.mark.parametrize("prior", [0.0, 1.0])
def test_mixed_cardinalities_against_references(prior):
    rng = np.random.default_rng(7)
    card = np.array([3, 2, 16, 2, 5, 3, 7, 2, 4, 2])
    X = _sample(rng, 500, card)
    w = rng.random(500)
    _, cond, mi_direct, _ = _reference_pairs(X, card, w, prior)
    np.testing.assert_allclose(mutual_information(X, card, prior, w), mi_direct, atol=TOL)
    np.testing.assert_allclose(conditional_entropy(X, card, w, prior), cond, atol=TOL)


def test_cardinality_256_against_reference():
    rng = np.random.default_rng(11)
    card = np.array([256, 256, 2])
    X = _sample(rng, 3000, card, share=0.7)
    _, _, mi_direct, _ = _reference_pairs(X, card, None, 0.25)
    np.testing.assert_allclose(mutual_information(X, card, prior=0.25), mi_direct, atol=TOL)


def test_binary_accuracy_with_many_samples():
    # Counts far above the float32 cancellation range of naive sums; still exact here.
    rng = np.random.default_rng(3)
    X = _sample(rng, 60000, np.full(12, 2), share=0.3)
    X[:, 2] = 1 - X[:, 0]
    _, _, mi_direct, _ = _reference_pairs(X, np.full(12, 2), None, 0.0)
    np.testing.assert_allclose(mutual_information(X), mi_direct, atol=TOL)


@pytest.mark.parametrize("base", [2, 10, math.e])
def test_base(base):
    rng = np.random.default_rng(4)
    X = _sample(rng, 300, np.full(5, 3))
    card = np.full(5, 3)
    expected = _reference_entropy(X, card, None, 0.0, base=base)
    np.testing.assert_allclose(entropy(X, base=base), expected, atol=1e-12)
    in_nats = mutual_information(X)
    np.testing.assert_allclose(mutual_information(X, base=base), in_nats / math.log(base), rtol=1e-12)


# -- identities and properties ----------------------------------------------------------------
@pytest.mark.parametrize("k", [2, 4])
def test_copy_of_a_variable_carries_all_its_information(k):
    # I(X; f(X)) = H(X) for a bijection f; I(X; X) = H(X) is stated in Cover & Thomas, Elements of
    # Information Theory, 2006, Section 2.4 (section number from memory).
    rng = np.random.default_rng(5)
    x = rng.integers(0, k, 2000)
    X = np.column_stack([x, (x + 1) % k, rng.integers(0, k, 2000)]).astype(np.uint8)
    h = entropy(X)
    mi = mutual_information(X)
    assert mi[0, 1] == pytest.approx(h[0], abs=TOL)
    assert conditional_entropy(X)[0, 1] == pytest.approx(0.0, abs=TOL)
    assert joint_entropy(X)[0, 1] == pytest.approx(h[0], abs=TOL)


@pytest.mark.parametrize("k", [2, 3])
def test_chain_rule_and_bounds(k):
    # Chain rule H(X, Y) = H(Y) + H(X | Y) and 0 <= I(X; Y) <= min(H(X), H(Y)): Cover & Thomas,
    # Elements of Information Theory, 2006, Theorem 2.2.1 and Chapter 2.6 (numbers from memory).
    rng = np.random.default_rng(6)
    X = _sample(rng, 800, np.full(9, k))
    h = entropy(X)
    joint = joint_entropy(X)
    cond = conditional_entropy(X)
    mi = mutual_information(X)
    off = ~np.eye(9, dtype=bool)
    np.testing.assert_allclose(joint[off], (h[None, :] + cond)[off], atol=TOL)
    assert mi.min() >= 0.0
    assert np.all(mi <= np.minimum(h[:, None], h[None, :]) + TOL)


@pytest.mark.parametrize("k", [2, 3])
@pytest.mark.parametrize("prior", [0.0, 2.0])
def test_matrix_shape_symmetry_and_sign(k, prior):
    rng = np.random.default_rng(8)
    X = rng.integers(0, k, (400, 30)).astype(np.uint8)  # independent columns: MI near 0
    mi = mutual_information(X, prior=prior, weights=rng.random(400))
    assert mi.shape == (30, 30) and mi.dtype == np.float64
    np.testing.assert_array_equal(mi, mi.T)
    np.testing.assert_array_equal(np.diag(mi), 0.0)
    assert mi.min() >= 0.0


def test_binary_fast_path_equals_general_path():
    # Declaring one unobserved extra value for the last variable routes the call
    # through the one-hot path; without prior the empty value changes nothing.
    rng = np.random.default_rng(9)
    X = _sample(rng, 700, np.full(12, 2))
    w = rng.random(700)
    card = np.full(12, 2)
    card[-1] = 3
    for weights in (None, w):
        fast = mutual_information(X, 2, 0.0, weights)
        general = mutual_information(X, card, 0.0, weights)
        np.testing.assert_allclose(fast, general, atol=2e-6)
        np.testing.assert_allclose(joint_entropy(X, 2, weights), joint_entropy(X, card, weights), atol=2e-6)
        fast = mutual_information(X, 2, 0.5, weights)
        general = mutual_information(X, card, 0.5, weights)
        np.testing.assert_allclose(fast[:-1, :-1], general[:-1, :-1], atol=2e-6)


@pytest.mark.parametrize("card", [[2] * 7, [3] * 7, [2, 5, 3, 2, 16, 2, 4]])
@pytest.mark.parametrize("prior", [0.0, 0.5])
def test_integer_weights_equal_repeated_rows(card, prior):
    rng = np.random.default_rng(10)
    card = np.array(card)
    X = _sample(rng, 300, card)
    repeats = rng.integers(0, 4, 300)  # includes weight 0 (row dropped)
    repeated = np.repeat(X, repeats, axis=0)
    w = repeats.astype(float)
    for function in (joint_entropy, conditional_entropy):
        expected = function(repeated, card, None, prior)
        np.testing.assert_allclose(function(X, card, w, prior), expected, atol=2e-6)
    np.testing.assert_allclose(
        mutual_information(X, card, prior, w), mutual_information(repeated, card, prior), atol=2e-6
    )
    np.testing.assert_allclose(entropy(X, card, w, prior), entropy(repeated, card, None, prior), atol=1e-12)
    np.testing.assert_allclose(marginal_counts(X, card, w), marginal_counts(repeated, card), atol=1e-9)


@pytest.mark.parametrize("card", [[2] * 6, [2, 3, 4, 2, 3, 5]])
@pytest.mark.parametrize("factor", [1e-200, 1e200])
def test_rescaling_weights_and_prior_together_changes_nothing(card, factor):
    rng = np.random.default_rng(12)
    card = np.array(card)
    X = _sample(rng, 400, card)
    w = rng.random(400)
    expected = mutual_information(X, card, 0.5, w)
    np.testing.assert_allclose(mutual_information(X, card, 0.5 * factor, w * factor), expected, atol=2e-6)


def test_block_and_chunk_boundaries(monkeypatch):
    rng = np.random.default_rng(13)
    binary = _sample(rng, 300, np.full(23, 2))
    mixed_card = np.array([3, 2, 4, 2, 2, 5, 3, 2, 3, 2, 2])
    mixed = _sample(rng, 300, mixed_card)
    w = rng.random(300)
    expected_binary = mutual_information(binary, prior=0.5, weights=w)
    expected_mixed = mutual_information(mixed, mixed_card, 0.5, w)
    monkeypatch.setattr(info, "_CHUNK_CELLS", 50)  # two rows of pairs at a time, ragged last block
    monkeypatch.setattr(info, "_BLOCK_CELLS", 100)  # several product blocks for the one-hot path
    np.testing.assert_array_equal(mutual_information(binary, prior=0.5, weights=w), expected_binary)
    np.testing.assert_allclose(mutual_information(mixed, mixed_card, 0.5, w), expected_mixed, atol=2e-6)


def _binary_reference(X, weights, prior):
    """Float64 joint entropies and mutual information of every pair of binary columns.

    The four cells of every pair table are counted directly with float64
    products of indicator columns (no float32, no cell derived from the column
    sums), and the entropies of the smoothed tables come from scipy.stats.entropy.
    """
    w = np.ones(X.shape[0]) if weights is None else weights
    one = X.astype(np.float64)
    zero = 1.0 - one
    cells = np.stack([(w[:, None] * a).T @ b for a in (zero, one) for b in (zero, one)]) + prior
    joint = scipy_entropy(cells, axis=0)
    h_row = scipy_entropy(np.stack([cells[0] + cells[1], cells[2] + cells[3]]), axis=0)
    information = h_row + h_row.T - joint
    np.fill_diagonal(information, 0.0)
    return joint, information


def _binary_sample(rng, N, n):
    """Columns of very different densities, plus a copy, a complement and a constant column."""
    X = (rng.random((N, n)) < rng.uniform(0.002, 0.5, n)).astype(np.uint8)
    X[:, 1] = X[:, 0]
    X[:, 2] = 1 - X[:, 3]
    X[:, -1] = 0
    return X


@pytest.mark.parametrize(
    "N, prior, weighted",
    [
        (300, 1.0, False),  # cells all at least the prior: logarithms taken without clamping
        (300, 0.0, False),  # empty cells
        (300, 1e-9, False),  # a prior too small to keep cells away from 0 in float32
        (300, 0.5, True),
        (70000, 1.0, False),  # counts far above the float32 cancellation range of naive sums
    ],
)
def test_binary_path_against_a_float64_reference(N, prior, weighted):
    rng = np.random.default_rng(N + int(10 * prior) + weighted)
    X = _binary_sample(rng, N, 40)
    w = rng.random(N) * 3.0 if weighted else None
    joint, information = _binary_reference(X, w, prior)
    got = mutual_information(X, 2, prior, w)
    got_joint = joint_entropy(X, 2, w, prior)
    off = ~np.eye(40, dtype=bool)
    # Unweighted counts are exact in float32, so only the logarithms round: within 1e-6 nats.
    # Weighted counts are float32 sums themselves; a cell that should be nearly empty (the
    # complement pair) then moves c log c by about 1.5e-6 nats.
    tolerance = 3e-6 if weighted else 1e-6
    np.testing.assert_allclose(got, information, atol=tolerance, rtol=0)
    np.testing.assert_allclose(got_joint[off], joint[off], atol=tolerance, rtol=0)
    np.testing.assert_array_equal(got, got.T)
    np.testing.assert_array_equal(got_joint, got_joint.T)
    np.testing.assert_array_equal(np.diag(got), 0.0)
    assert got.min() >= 0.0


@pytest.mark.parametrize("card", [2, 3])
def test_information_matrix_is_mutual_information_in_float32(card):
    # The unchecked float32 entry point used by the dependency tree fit.
    rng = np.random.default_rng(16)
    X = _sample(rng, 400, np.full(9, card))
    w = rng.random(400)
    for weights, prior in ((None, 1.0), (None, 0.0), (w, 0.5)):
        fast = info._information_matrix(X, np.full(9, card), weights, prior)
        assert fast.dtype == np.float32
        np.testing.assert_array_equal(fast.astype(np.float64), mutual_information(X, card, prior, weights))


def test_binary_blocks_do_not_change_the_result(monkeypatch):
    # Rows of the upper triangle are processed in blocks whose height grows as the rows get
    # shorter; any block size must give the same numbers, bit for bit.
    rng = np.random.default_rng(17)
    X = _binary_sample(rng, 500, 37)
    expected = [mutual_information(X, 2, prior) for prior in (0.0, 1.0)] + [joint_entropy(X, 2, None, 1.0)]
    for chunk in (1, 37, 100, 700):
        monkeypatch.setattr(info, "_CHUNK_CELLS", chunk)
        got = [mutual_information(X, 2, prior) for prior in (0.0, 1.0)] + [joint_entropy(X, 2, None, 1.0)]
        for value, reference in zip(got, expected, strict=True):
            np.testing.assert_array_equal(value, reference)


# -- edge cases -------------------------------------------------------------------------------
def test_single_variable():
    X = np.array([[0], [1], [1], [2]], dtype=np.uint8)
    np.testing.assert_array_equal(mutual_information(X), [[0.0]])
    np.testing.assert_array_equal(conditional_entropy(X), [[0.0]])
    h = scipy_entropy([1, 2, 1])
    np.testing.assert_allclose(joint_entropy(X), [[h]], atol=1e-12)
    np.testing.assert_allclose(entropy(X), [h], atol=1e-12)


@pytest.mark.parametrize("k", [2, 3])
def test_constant_column_has_no_information(k):
    rng = np.random.default_rng(14)
    X = rng.integers(0, k, (500, 4)).astype(np.uint8)
    X[:, 2] = k - 1
    mi = mutual_information(X)
    np.testing.assert_allclose(mi[2], 0.0, atol=1e-6)
    np.testing.assert_allclose(mi[:, 2], 0.0, atol=1e-6)
    assert entropy(X)[2] == 0.0


def test_cardinality_inference_and_input_types():
    X = np.array([[0, 0, 3], [1, 0, 1], [1, 0, 0]], dtype=np.uint8)
    counts = marginal_counts(X)
    # Inferred cardinalities 2, 2 (constant column, at least 2) and 4; cells beyond k_i are 0.
    np.testing.assert_array_equal(counts, [[1, 2, 0, 0], [3, 0, 0, 0], [1, 1, 0, 1]])
    np.testing.assert_array_equal(mutual_information(X.astype(np.int64)), mutual_information(X))
    as_bool = X[:, :2].astype(bool)
    np.testing.assert_array_equal(mutual_information(as_bool), mutual_information(X[:, :2]))
    assert pair_table(X, 0, 2).shape == (2, 4)


def test_marginal_counts_and_pair_table_against_numpy():
    rng = np.random.default_rng(15)
    card = np.array([2, 5, 3])
    X = _sample(rng, 200, card)
    w = rng.random(200)
    counts = marginal_counts(X, card, w)
    assert counts.shape == (3, 5)
    for i in range(3):
        np.testing.assert_allclose(counts[i, : card[i]], np.bincount(X[:, i], weights=w, minlength=card[i]))
        np.testing.assert_array_equal(counts[i, card[i] :], 0.0)
    np.testing.assert_allclose(pair_table(X, 1, 2, card, w, 0.3), _smoothed_table(X, 1, 2, card, w, 0.3))
    np.testing.assert_allclose(pair_table(X, 0, 1, card), _smoothed_table(X, 0, 1, card, None, 0.0))


def test_zero_weights_with_prior_give_uniform_tables():
    X = np.array([[0, 1], [1, 1], [1, 0]], dtype=np.uint8)
    w = np.zeros(3)
    np.testing.assert_allclose(entropy(X, weights=w, prior=1.0), [math.log(2)] * 2, atol=1e-12)
    np.testing.assert_allclose(mutual_information(X, weights=w, prior=1.0), 0.0, atol=1e-6)


# -- input validation -------------------------------------------------------------------------
def test_prior_message_matches_the_documented_form():
    X = np.zeros((3, 2), dtype=np.uint8)
    expected = "The 'prior' parameter of mutual_information must be a non-negative number. Got -1 instead."
    with pytest.raises(ValueError, match=re.escape(expected)):
        mutual_information(X, prior=-1)


GOOD = np.array([[0, 1], [1, 2], [1, 0]], dtype=np.uint8)


def test_whole_valued_floats_are_samples_like_integers():
    np.testing.assert_array_equal(entropy(GOOD.astype(float)), entropy(GOOD))


@pytest.mark.parametrize(
    "call, words",
    [
        (lambda: mutual_information(np.zeros(4, dtype=np.uint8)), ["'X'", "2-D", "(4,)"]),
        (lambda: mutual_information(np.zeros((0, 3), dtype=np.uint8)), ["'X'", "at least one sample"]),
        (lambda: entropy(np.zeros((3, 0), dtype=np.uint8)), ["'X'", "at least one variable"]),
        (lambda: joint_entropy(GOOD + 0.5), ["'X'", "whole numbers", "float64"]),
        (lambda: entropy(np.array([[0], [-2]])), ["'X'", "-2", "row 1", "column 0"]),
        (lambda: mutual_information(GOOD, cardinality=2), ["'X'", "column 1", "Got 2"]),
        (lambda: mutual_information(GOOD, cardinality=1), ["'cardinality'", "between 2 and 256", "Got 1"]),
        (lambda: mutual_information(GOOD, cardinality=300), ["'cardinality'", "Got 300"]),
        (lambda: mutual_information(GOOD, cardinality=[3, 3, 3]), ["'cardinality'", "2 integers"]),
        (lambda: mutual_information(GOOD, cardinality=2.5), ["'cardinality'", "2.5"]),
        (lambda: entropy(np.array([[300], [1]])), ["'X'", "below 256", "300"]),
        (lambda: mutual_information(GOOD, weights=np.ones(2)), ["'weights'", "(3,)", "(2,)"]),
        (lambda: mutual_information(GOOD, weights=[1, -1, 1]), ["'weights'", "non-negative", "-1"]),
        (lambda: entropy(GOOD, weights=[1, np.nan, 1]), ["'weights'", "finite", "nan"]),
        (lambda: conditional_entropy(GOOD, weights=["a", "b", "c"]), ["'weights'", "non-negative numbers"]),
        (lambda: mutual_information(GOOD, weights=np.zeros(3)), ["'weights'", "positive sum", "'prior'"]),
        (lambda: joint_entropy(GOOD, prior=float("nan")), ["'prior'", "non-negative number", "nan"]),
        (lambda: entropy(GOOD, prior="1"), ["'prior'", "'1'"]),
        (lambda: mutual_information(GOOD, base=1), ["'base'", "greater than 1", "Got 1"]),
        (lambda: entropy(GOOD, base=-2), ["'base'", "-2"]),
        (lambda: pair_table(GOOD, 0, 2), ["'j'", "0..1", "Got 2"]),
        (lambda: pair_table(GOOD, -1, 0), ["'i'", "Got -1"]),
        (lambda: marginal_counts(GOOD, weights=np.ones((3, 1))), ["'weights'", "(3, 1)"]),
    ],
)
def test_invalid_input_is_reported(call, words):
    with pytest.raises(ValueError) as caught:
        call()
    message = str(caught.value)
    for word in words:
        assert word in message, (word, message)
