"""Tests of the benchmark problems: OneMax, trap, Four Peaks, HIFF, Ising ring.

Each vectorised objective is compared with a slow per-candidate reference
written here straight from the published definition, and its exposed optimum
with a brute-force maximum over all 2^n strings.
"""

import numpy as np
import pytest

from optim_problems.fourpeaks import FourPeaks, four_peaks
from optim_problems.hiff import Hiff, hiff
from optim_problems.ising import IsingRing, ising_ring
from optim_problems.onemax import OneMax, onemax
from optim_problems.trap import ConcatenatedTrap, trap


def all_strings(n):
    """Every bit string of length n, shape (2**n, n), uint8."""
    codes = np.arange(2**n, dtype=np.int64)[:, None]
    return ((codes >> np.arange(n)) & 1).astype(np.uint8)


def maximisers(problem):
    """The brute-force maximum of a problem and the set of strings reaching it."""
    X = all_strings(problem.n)
    scores = problem.evaluate(X)
    best = scores.max()
    return best, {tuple(int(v) for v in x) for x in X[scores == best]}


def random_population(seed, count, n):
    return np.random.default_rng(seed).integers(0, 2, size=(count, n), dtype=np.uint8)


# ---------------------------------------------------------------- references


def reference_onemax(x):
    return sum(int(v) for v in x)


def reference_trap_block(bits):
    # Deb & Goldberg 1993, "Analyzing deception in trap functions".
    k = len(bits)
    u = sum(int(v) for v in bits)
    return k if u == k else k - 1 - u


def reference_trap(x, blocks):
    return sum(reference_trap_block([x[i] for i in block]) for block in blocks)


def reference_four_peaks(x, t):
    # Baluja & Caruana 1995, "Removing the genetics from the standard genetic algorithm".
    n = len(x)
    head = 0
    while head < n and x[head] == 1:
        head += 1
    tail = 0
    while tail < n and x[n - 1 - tail] == 0:
        tail += 1
    reward = n if head > t and tail > t else 0
    return max(head, tail) + reward


def reference_hiff(bits):
    # Watson, Hornby & Pollack 1998, "Modeling building-block interdependency".
    if len(bits) == 1:
        return 1
    half = len(bits) // 2
    bonus = len(bits) if len(set(bits)) == 1 else 0
    return reference_hiff(bits[:half]) + reference_hiff(bits[half:]) + bonus


def reference_ising_ring(x):
    n = len(x)
    return sum(1 for i in range(n) if x[i] == x[(i + 1) % n])


def assert_matches_reference(problem, X, reference):
    expected = np.array([reference(list(x)) for x in X], dtype=np.float64)
    scores = problem.evaluate(X)
    assert scores.dtype == np.float64
    assert scores.shape == (X.shape[0],)
    np.testing.assert_array_equal(scores, expected)


# ---------------------------------------------------------------- OneMax


@pytest.mark.parametrize("n", [1, 7, 100])
def test_onemax_matches_reference(n):
    assert_matches_reference(onemax(n), random_population(11 + n, 300, n), reference_onemax)


def test_onemax_brute_force_optimum():
    problem = onemax(12)
    best, argmax = maximisers(problem)
    assert best == problem.optimum == 12
    assert argmax == {(1,) * 12}
    assert isinstance(problem, OneMax) and problem.goal == "maximize"


# ---------------------------------------------------------------- trap


@pytest.mark.parametrize("n, k", [(6, 2), (60, 3), (12, 4), (20, 5)])
def test_trap_matches_reference(n, k):
    problem = trap(n, k)
    np.testing.assert_array_equal(problem.blocks, np.arange(n).reshape(n // k, k))
    X = random_population(100 + n + k, 300, n)
    # Add strings with whole blocks of ones so that the top of each trap is hit.
    X[:50] = 1
    X[50:100, : n // 2] = 1
    assert_matches_reference(problem, X, lambda x: reference_trap(x, problem.blocks))


@pytest.mark.parametrize("seed", [0, 1, 7])
def test_shuffled_trap_matches_reference(seed):
    problem = trap(30, 3, shuffle=True, seed=seed)
    blocks = problem.blocks
    assert blocks.shape == (10, 3)
    assert sorted(blocks.ravel().tolist()) == list(range(30))
    X = random_population(seed, 300, 30)
    X[:60, blocks[:5].ravel()] = 1
    assert_matches_reference(problem, X, lambda x: reference_trap(x, blocks))
    # Reading the string in block order gives the plain trap's score.
    plain = trap(30, 3)
    np.testing.assert_array_equal(problem.evaluate(X), plain.evaluate(X[:, blocks.ravel()]))


def test_shuffled_trap_is_seeded_and_scattered():
    first = trap(60, 3, shuffle=True, seed=5)
    again = trap(60, 3, shuffle=True, seed=5)
    other = trap(60, 3, shuffle=True, seed=6)
    np.testing.assert_array_equal(first.blocks, again.blocks)
    assert not np.array_equal(first.blocks, other.blocks)
    # The chance that a random permutation of 60 leaves all 20 blocks contiguous is negligible.
    contiguous = np.all(np.diff(np.sort(first.blocks, axis=1), axis=1) == 1, axis=1)
    assert contiguous.sum() < 10
    assert first.name == "trap-3-shuffled" and trap(60, 3).name == "trap-3"


@pytest.mark.parametrize("k", [3, 4])
def test_trap_brute_force_optimum(k):
    # Deb & Goldberg 1993: the concatenated trap is maximised only by all ones, at n.
    problem = trap(12, k)
    best, argmax = maximisers(problem)
    assert best == problem.optimum == 12
    assert argmax == {(1,) * 12}


def test_shuffled_trap_brute_force_optimum():
    problem = trap(12, 3, shuffle=True, seed=3)
    best, argmax = maximisers(problem)
    assert best == problem.optimum == 12
    assert argmax == {(1,) * 12}


@pytest.mark.parametrize("k", [2, 3, 4, 5, 6])
def test_trap_block_is_deceptive(k):
    # Deception (common practice, no source): all zeros is the second best block,
    # and the score rises as ones are removed, except at the top (all ones).
    problem = trap(k, k)
    X = all_strings(k)
    scores = problem.evaluate(X)
    ones = X.sum(axis=1)
    by_ones = [set(scores[ones == u].tolist()) for u in range(k + 1)]
    assert all(len(values) == 1 for values in by_ones)
    values = [values.pop() for values in by_ones]
    assert values[k] == k
    assert values[0] == k - 1 == sorted(scores.tolist())[-2]
    assert all(values[u] > values[u + 1] for u in range(k - 1))


# ---------------------------------------------------------------- Four Peaks


def structured_four_peaks_population(seed, count, n):
    """Strings with random-length runs of leading ones and trailing zeros."""
    rng = np.random.default_rng(seed)
    X = rng.integers(0, 2, size=(count, n), dtype=np.uint8)
    for row in range(count):
        head = rng.integers(0, n + 1)
        tail = rng.integers(0, n - head + 1)
        X[row, :head] = 1
        X[row, n - tail :] = 0
    return X


@pytest.mark.parametrize("n, t", [(8, 0), (8, 3), (9, 3), (60, 6), (101, 20)])
def test_four_peaks_matches_reference(n, t):
    problem = four_peaks(n, t)
    X = structured_four_peaks_population(n * 10 + t, 400, n)
    X[0] = 1
    X[1] = 0
    assert_matches_reference(problem, X, lambda x: reference_four_peaks(x, t))


@pytest.mark.parametrize("n", [8, 9, 10])
def test_four_peaks_brute_force_optimum(n):
    # Baluja & Caruana 1995: the optimum is 2n - t - 1, reached by t+1 leading ones
    # followed by zeros and by t+1 trailing zeros preceded by ones.
    for t in range(0, (n - 2) // 2 + 1):
        problem = four_peaks(n, t)
        best, argmax = maximisers(problem)
        assert best == problem.optimum == 2 * n - t - 1
        expected = {
            (1,) * (t + 1) + (0,) * (n - t - 1),
            (1,) * (n - t - 1) + (0,) * (t + 1),
        }
        assert argmax == expected


@pytest.mark.parametrize("n, t", [(9, 4), (10, 5)])
def test_four_peaks_rejected_threshold_has_no_reward(n, t):
    # Just past the accepted range, brute force with the reference shows the reward is
    # out of reach, so 2n - t - 1 would be wrong: the factory must refuse such t.
    best = max(reference_four_peaks(list(x), t) for x in all_strings(n))
    assert best == n != 2 * n - t - 1
    with pytest.raises(ValueError, match="t must satisfy"):
        four_peaks(n, t)


# ---------------------------------------------------------------- HIFF


def structured_hiff_population(seed, count, n):
    """Strings made of uniform blocks of random sizes, so high levels score."""
    rng = np.random.default_rng(seed)
    rows = []
    for _ in range(count):
        size = 2 ** int(rng.integers(0, n.bit_length()))
        rows.append(np.repeat(rng.integers(0, 2, size=n // size), size))
    X = np.array(rows, dtype=np.uint8)
    flips = rng.random(X.shape) < 0.05
    return np.where(flips, 1 - X, X).astype(np.uint8)


@pytest.mark.parametrize("n", [2, 4, 8, 32, 64])
def test_hiff_matches_reference(n):
    problem = hiff(n)
    X = np.vstack([random_population(n, 100, n), structured_hiff_population(n + 1, 200, n)])
    assert_matches_reference(problem, X, reference_hiff)


def test_hiff_worked_values():
    # Worked by hand from the definition (Watson, Hornby & Pollack 1998):
    # 0011 -> 4 bits + two uniform pairs (2 + 2) = 8; 0000 -> 4 + 2 + 2 + 4 = 12; 0101 -> 4.
    problem = hiff(4)
    X = np.array([[0, 0, 1, 1], [0, 0, 0, 0], [0, 1, 0, 1]], dtype=np.uint8)
    np.testing.assert_array_equal(problem.evaluate(X), [8.0, 12.0, 4.0])


@pytest.mark.parametrize("n", [8, 16])
def test_hiff_brute_force_optimum(n):
    # Watson, Hornby & Pollack 1998: optimum n (log2 n + 1) at all zeros and all ones.
    problem = hiff(n)
    best, argmax = maximisers(problem)
    assert best == problem.optimum == n * (np.log2(n) + 1)
    assert argmax == {(0,) * n, (1,) * n}
    X = all_strings(n)
    np.testing.assert_array_equal(problem.evaluate(X), problem.evaluate(1 - X))
    assert isinstance(problem, Hiff) and problem.levels == int(np.log2(n))


# ---------------------------------------------------------------- Ising ring


@pytest.mark.parametrize("n", [3, 10, 100])
def test_ising_ring_matches_reference(n):
    assert_matches_reference(ising_ring(n), random_population(n + 2, 300, n), reference_ising_ring)


def test_ising_ring_brute_force_optimum():
    problem = ising_ring(12)
    best, argmax = maximisers(problem)
    assert best == problem.optimum == 12
    assert argmax == {(0,) * 12, (1,) * 12}
    # On a cycle the number of unequal neighbouring pairs is even (common practice,
    # no source), so every score has the parity of n.
    assert np.all(problem.evaluate(all_strings(12)) % 2 == 0)
    assert np.all(ising_ring(11).evaluate(all_strings(11)) % 2 == 1)


# ---------------------------------------------------------------- shared behaviour

DEFAULT_OPTIMA = [
    (onemax, lambda n: np.ones(n)),
    (trap, lambda n: np.ones(n)),
    (four_peaks, lambda n: np.r_[np.ones(7), np.zeros(n - 7)]),
    (hiff, lambda n: np.zeros(n)),
    (ising_ring, lambda n: np.zeros(n)),
]


@pytest.mark.parametrize("factory, optimal", DEFAULT_OPTIMA)
def test_defaults_and_interface(factory, optimal):
    problem = factory()
    assert problem.goal == "maximize"
    assert problem.binary
    assert problem.optimum_source
    assert problem.evaluate_one(optimal(problem.n)) == problem.optimum
    empty = problem.evaluate(np.zeros((0, problem.n), dtype=np.uint8))
    assert empty.shape == (0,) and empty.dtype == np.float64
    X = random_population(3, 50, problem.n)
    assert np.all(problem.evaluate(X) <= problem.optimum)
    with pytest.raises(ValueError, match=r"shape \(count, %d\)" % problem.n):
        problem.evaluate(np.zeros((2, problem.n + 1), dtype=np.uint8))
    with pytest.raises(ValueError, match="shape"):
        problem.evaluate(np.zeros(problem.n, dtype=np.uint8))


def test_names():
    assert onemax().name == "onemax"
    assert trap(12, 4).name == "trap-4"
    assert four_peaks(20, 2).name == "four-peaks-t2"
    assert hiff().name == "hiff"
    assert ising_ring().name == "ising-ring"
    assert isinstance(trap(), ConcatenatedTrap)
    assert isinstance(four_peaks(), FourPeaks)
    assert isinstance(ising_ring(), IsingRing)


@pytest.mark.parametrize(
    "build, message",
    [
        (lambda: onemax(0), r"^n must be an integer >= 1; got 0$"),
        (lambda: onemax(2.5), r"^n must be an integer >= 1; got 2.5$"),
        (lambda: onemax(True), r"^n must be an integer >= 1; got True$"),
        (lambda: trap(10, 3), r"^n must be a positive multiple of k=3; got n=10$"),
        (lambda: trap(12, 1), r"^k must be an integer >= 2; got 1$"),
        (lambda: trap(0, 3), r"^n must be an integer >= 1; got 0$"),
        (lambda: trap(12, 3, shuffle="yes"), r"^shuffle must be true or false; got 'yes'$"),
        (lambda: trap(12, 3, seed=-1), r"^seed must be an integer >= 0; got -1$"),
        (lambda: four_peaks(1, 0), r"^n must be an integer >= 2; got 1$"),
        (lambda: four_peaks(20, -1), r"^t must be an integer >= 0; got -1$"),
        (lambda: four_peaks(20, 10), r"^t must satisfy .*got t=10 with n=20$"),
        (lambda: hiff(12), r"^n must be a power of two >= 2; got 12$"),
        (lambda: hiff(1), r"^n must be a power of two >= 2; got 1$"),
        (lambda: hiff("64"), r"^n must be a power of two >= 2; got '64'$"),
        (lambda: ising_ring(2), r"^n must be an integer >= 3; got 2$"),
    ],
)
def test_parameter_errors(build, message):
    with pytest.raises(ValueError, match=message):
        build()


def test_numpy_integer_parameters_are_accepted():
    problem = trap(np.int64(12), np.int32(4), shuffle=np.bool_(True), seed=np.int64(2))
    assert problem.n == 12 and problem.k == 4 and problem.shuffled
    assert hiff(np.int64(8)).optimum == 32
