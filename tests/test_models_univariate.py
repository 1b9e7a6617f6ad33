"""Tests of the independent-marginals model (optim.models.univariate.Univariate).

Outside references: the Dirichlet-smoothed frequency formula, exact probabilities by
enumeration of all strings, scipy's entropy, and binomial tolerances for sampling.
"""

import numpy as np
import pytest
import scipy.stats

from optim.models import Univariate


def all_strings(cardinality):
    """Every vector of the given per-variable cardinalities, shape (prod(k), n), uint8."""
    grids = np.indices(tuple(int(k) for k in cardinality)).reshape(len(cardinality), -1)
    return grids.T.astype(np.uint8)


def random_sample(cardinality, count, rng):
    """Rows with independent columns of random, uneven value frequencies (demo data)."""
    columns = [rng.choice(k, size=count, p=rng.dirichlet(np.ones(k))) for k in cardinality]
    return np.stack(columns, axis=1).astype(np.uint8)


# -- 10. fitted probabilities ---------------------------------------------------------------
@pytest.mark.parametrize("prior", [0.0, 0.5, 1.0, 4.0])
def test_probabilities_are_smoothed_frequencies(prior):
    # Posterior mean under a symmetric Dirichlet(prior) on each variable's values:
    # (count + prior) / (N + prior * k) (common practice, no source).
    card = [2, 3, 4, 2, 3]
    X = random_sample(card, 97, np.random.default_rng(1))
    model = Univariate(cardinality=card, prior=prior).fit(X)
    for i, k in enumerate(card):
        counts = np.array([(X[:, i] == v).sum() for v in range(k)], dtype=float)
        assert np.allclose(model.probabilities[i, :k], (counts + prior) / (97 + prior * k), atol=1e-15)
        assert np.all(model.probabilities[i, k:] == 0)


def test_weighted_probabilities_are_smoothed_weighted_frequencies():
    card = [3, 2, 3]
    rng = np.random.default_rng(2)
    X = random_sample(card, 50, rng)
    weights = rng.uniform(0.0, 3.0, size=50)
    model = Univariate(cardinality=card, prior=0.25).fit(X, weights=weights)
    for i, k in enumerate(card):
        sums = np.array([weights[X[:, i] == v].sum() for v in range(k)])
        assert np.allclose(model.probabilities[i, :k], (sums + 0.25) / (weights.sum() + 0.25 * k), atol=1e-14)


def test_integer_weights_equal_repeated_rows():
    card = [2, 3, 2, 4]
    rng = np.random.default_rng(3)
    X = random_sample(card, 40, rng)
    weights = rng.integers(0, 4, size=40)
    weighted = Univariate(cardinality=card, prior=1.0).fit(X, weights=weights)
    repeated = Univariate(cardinality=card, prior=1.0).fit(np.repeat(X, weights, axis=0))
    assert np.allclose(weighted.probabilities, repeated.probabilities, atol=1e-15)


def test_cardinality_is_inferred_from_the_first_fit():
    model = Univariate(prior=0).fit(np.array([[0, 2, 0], [1, 0, 0]]))
    assert model.cardinality.tolist() == [2, 3, 2]
    assert np.allclose(model.probabilities, [[0.5, 0.5, 0], [0.5, 0, 0.5], [1, 0, 0]])


def test_scalar_cardinality_applies_to_every_variable():
    model = Univariate(cardinality=4, prior=1).fit(np.array([[0, 1], [1, 1]]))
    assert model.cardinality.tolist() == [4, 4]
    assert np.allclose(model.probabilities[1], [1 / 6, 3 / 6, 1 / 6, 1 / 6])


# -- 3. sampling and normalisation ----------------------------------------------------------
@pytest.mark.parametrize("cardinality", [[2] * 8, [3, 2, 4, 3, 2]])
def test_probabilities_sum_to_one_and_factorise(cardinality):
    X = random_sample(cardinality, 30, np.random.default_rng(4))
    model = Univariate(cardinality=cardinality, prior=0.5).fit(X)
    strings = all_strings(cardinality)
    probs = np.exp(model.log_prob(strings))
    assert probs.sum() == pytest.approx(1.0, abs=1e-12)
    expected = np.prod([model.probabilities[i, strings[:, i]] for i in range(len(cardinality))], axis=0)
    assert np.allclose(probs, expected, rtol=1e-12, atol=0)


@pytest.mark.parametrize("cardinality", [[2] * 6, [3, 2, 4, 3]])
def test_sample_frequencies_match_probabilities(cardinality):
    # Binomial tolerance of 5 standard errors on every value frequency (common practice, no source);
    # pairs must look independent: each pair frequency matches the product of marginals.
    X = random_sample(cardinality, 40, np.random.default_rng(5))
    model = Univariate(cardinality=cardinality, prior=0.5).fit(X)
    count = 200000
    draws = model.sample(count, np.random.default_rng(6))
    assert draws.dtype == np.uint8 and draws.shape == (count, len(cardinality))
    for i, k in enumerate(cardinality):
        freq = np.bincount(draws[:, i], minlength=k) / count
        p = model.probabilities[i, :k]
        assert freq.shape == (k,)
        assert np.all(np.abs(freq - p) <= 5 * np.sqrt(p * (1 - p) / count))
    for i in range(len(cardinality) - 1):
        k_j = cardinality[i + 1]
        freq = np.bincount(draws[:, i].astype(int) * k_j + draws[:, i + 1], minlength=cardinality[i] * k_j) / count
        p = np.outer(model.probabilities[i, : cardinality[i]], model.probabilities[i + 1, :k_j]).ravel()
        assert np.all(np.abs(freq - p) <= 5 * np.sqrt(p * (1 - p) / count))


def test_zero_prior_never_draws_an_unseen_value():
    X = np.array([[0, 2, 1], [0, 1, 1], [0, 2, 1]])
    model = Univariate(cardinality=[2, 3, 3], prior=0).fit(X)
    draws = model.sample(5000, np.random.default_rng(7))
    assert np.all(draws[:, 0] == 0)
    assert set(np.unique(draws[:, 1]).tolist()) == {1, 2}
    assert np.all(draws[:, 2] == 1)
    assert np.isneginf(model.log_prob([[1, 2, 1]])[0])


# -- 4. entropy -----------------------------------------------------------------------------
@pytest.mark.parametrize(
    "cardinality, prior", [([2] * 8, 0.0), ([2] * 7, 2.0), ([3, 2, 4, 3, 2], 0.0), ([3, 2, 4, 3, 2], 1.0)]
)
def test_entropy_equals_brute_force(cardinality, prior):
    # H = -Σ p log p over all strings (C. E. Shannon, "A mathematical theory of communication", 1948).
    X = random_sample(cardinality, 25, np.random.default_rng(8))
    model = Univariate(cardinality=cardinality, prior=prior).fit(X)
    probs = np.exp(model.log_prob(all_strings(cardinality)))
    assert model.entropy() == pytest.approx(float(scipy.stats.entropy(probs)), abs=1e-10)
    # The entropy of a product is the sum of the marginal entropies (Shannon, 1948).
    assert np.allclose(
        model.marginal_entropies(),
        [scipy.stats.entropy(model.probabilities[i, :k]) for i, k in enumerate(cardinality)],
        atol=1e-12,
    )


# -- 6. persistence -------------------------------------------------------------------------
@pytest.mark.parametrize("cardinality", [[2] * 6, [3, 2, 4, 3]])
def test_state_round_trip(cardinality):
    X = random_sample(cardinality, 30, np.random.default_rng(9))
    model = Univariate(cardinality=cardinality, prior=0.3).fit(X)
    state = model.get_state()
    assert state["kind"] == "univariate"
    restored = Univariate().set_state(state)
    strings = all_strings(cardinality)
    assert np.array_equal(restored.log_prob(strings), model.log_prob(strings))
    assert np.array_equal(restored.sample(500, np.random.default_rng(10)), model.sample(500, np.random.default_rng(10)))
    assert restored.entropy() == model.entropy()
    model.fit(np.zeros_like(X))
    assert np.array_equal(restored.log_prob(strings), Univariate().set_state(state).log_prob(strings))


# -- 9. input validation --------------------------------------------------------------------
def test_bad_input_raises_clear_errors():
    model = Univariate(cardinality=[2, 3])
    with pytest.raises(ValueError, match="2-D"):
        model.fit(np.array([0, 1]))
    with pytest.raises(ValueError, match="2 columns"):
        model.fit(np.zeros((3, 4)))
    with pytest.raises(ValueError, match=r"values 0\.\.2 in column 1 .* Got 3 instead"):
        model.fit(np.array([[0, 3]]))
    with pytest.raises(ValueError, match="non-negative"):
        model.fit(np.array([[-1, 0]]))
    with pytest.raises(ValueError, match=r"one entry per sample \(2\)"):
        model.fit(np.array([[0, 1], [1, 2]]), weights=[1.0])
    with pytest.raises(ValueError, match="'weights'.*non-negative"):
        model.fit(np.array([[0, 1], [1, 2]]), weights=[1.0, -2.0])
    with pytest.raises(ValueError, match="'weights'.*positive sum when 'prior' is 0"):
        Univariate(cardinality=[2, 3], prior=0.0).fit(np.array([[0, 1], [1, 2]]), weights=[0.0, 0.0])
    uniform = Univariate(cardinality=[2, 3], prior=1.0).fit(np.array([[0, 1], [1, 2]]), weights=[0.0, 0.0])
    np.testing.assert_allclose(uniform.entropy(), np.log(2) + np.log(3))  # a prior alone defines the model
    with pytest.raises(ValueError, match="'prior'"):
        Univariate(prior=-0.5)


def test_values_beyond_uint8_are_rejected_not_wrapped():
    # 256 does not fit in uint8; fitting must refuse it instead of counting it as value 0.
    with pytest.raises(ValueError):
        Univariate(cardinality=[2, 2]).fit(np.array([[0, 256], [1, 1]]))


def test_unfitted_model_raises():
    model = Univariate()
    for use in (
        lambda: model.sample(2, np.random.default_rng(0)),
        lambda: model.log_prob(np.zeros((1, 2))),
        model.entropy,
        model.marginal_entropies,
        model.get_state,
    ):
        with pytest.raises(RuntimeError, match="must be fitted"):
            use()
