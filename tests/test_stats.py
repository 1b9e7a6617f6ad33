"""Tests of optim.stats: the chi-squared survival function and the G-test p-value.

scipy is the outside reference throughout (scipy.stats.chi2.sf, scipy.special.gammaincc,
scipy.stats.chi2_contingency).
"""

import math

import numpy as np
import pytest
import scipy.special
import scipy.stats

from optim.info import mutual_information
from optim.stats import chi2_sf, g_test_p_value


def _x_grid():
    """Statistics from 1e-8 to 2000, dense near the bulk of every chi-squared with df <= 60."""
    return np.unique(np.concatenate((np.logspace(-8, np.log10(2000.0), 300), np.linspace(0.25, 150.0, 600))))


def test_chi2_sf_matches_scipy_for_df_1_to_60():
    # Reference library: scipy.stats.chi2.sf. Tolerance 1e-10 relative or 1e-14 absolute.
    x = _x_grid()
    for df in range(1, 61):
        ours = chi2_sf(x, df)
        reference = scipy.stats.chi2.sf(x, df)
        close = np.abs(ours - reference) <= np.maximum(1e-10 * reference, 1e-14)
        assert np.all(close), (df, x[~close], ours[~close], reference[~close])


def test_chi2_sf_is_the_regularised_upper_gamma_function():
    # Q(df/2, x/2) = P(chi2_df > x): Abramowitz & Stegun, Handbook of Mathematical Functions,
    # 1964, 26.4.19; reference implementation scipy.special.gammaincc.
    x = _x_grid()
    df = np.arange(1, 61)[:, None]
    ours = chi2_sf(x[None, :], df)
    reference = scipy.special.gammaincc(df / 2.0, x[None, :] / 2.0)
    assert ours.shape == (60, x.shape[0])
    assert np.all(np.abs(ours - reference) <= np.maximum(1e-10 * reference, 1e-14))


def test_chi2_sf_closed_forms_for_one_and_two_degrees_of_freedom():
    # df = 1: erfc(sqrt(x/2)); df = 2: exp(-x/2). Abramowitz & Stegun, 1964, 26.4.4 and 26.4.5
    # (from memory for the equation numbers; the closed forms themselves are checked by scipy above).
    x = np.array([0.0, 1e-6, 0.5, 3.841458820694124, 10.0, 100.0])
    assert np.allclose(chi2_sf(x, 2), np.exp(-x / 2.0), rtol=1e-14, atol=0)
    assert np.allclose(chi2_sf(x, 1), [math.erfc(math.sqrt(v / 2.0)) for v in x], rtol=1e-14, atol=0)


def test_chi2_sf_known_critical_value():
    # The 5% critical value of chi2 with 1 degree of freedom is 3.841458820694124
    # (scipy.stats.chi2.isf(0.05, 1) as reference).
    critical = scipy.stats.chi2.isf(0.05, 1)
    assert chi2_sf(critical, 1) == pytest.approx(0.05, rel=1e-12)


def test_chi2_sf_at_zero_is_one():
    assert np.all(chi2_sf(np.zeros(60), np.arange(1, 61)) == 1.0)


def test_chi2_sf_negative_statistic_counts_as_zero():
    assert np.all(chi2_sf([-1.0, -1e-12], [1, 7]) == 1.0)


def test_chi2_sf_tiny_tail_keeps_relative_precision():
    # Far tail: the p-values that decide whether a strong edge is kept. Reference: scipy.
    x = np.array([500.0, 1000.0, 1400.0])
    for df in (1, 2, 3, 4, 9, 10, 59, 60):
        reference = scipy.stats.chi2.sf(x, df)
        assert np.all(reference > 0)
        assert np.allclose(chi2_sf(x, df), reference, rtol=1e-10, atol=0)


def test_chi2_sf_of_infinity_is_zero():
    # An infinite statistic has probability 0 of being exceeded (scipy.stats.chi2.sf(inf, df) = 0).
    df = np.arange(1, 11)
    result = chi2_sf(np.full(10, np.inf), df)
    assert np.array_equal(result, scipy.stats.chi2.sf(np.inf, df))


def test_chi2_sf_broadcasts_x_against_df():
    x = np.array([[0.5], [2.0], [7.5]])
    df = np.array([1, 4, 9, 16])
    result = chi2_sf(x, df)
    assert result.shape == (3, 4)
    assert np.allclose(result, scipy.stats.chi2.sf(x, df), rtol=1e-10, atol=1e-14)


def test_chi2_sf_is_decreasing_in_x_and_increasing_in_df():
    # Up to rounding: near 1 the sum of recurrence terms may wobble by an ulp.
    x = np.linspace(0.0, 80.0, 401)
    for df in (1, 2, 5, 30):
        assert np.all(np.diff(chi2_sf(x, df)) <= 1e-15)
    assert np.all(np.diff(chi2_sf(12.0, np.arange(1, 61))) > 0)


def test_chi2_sf_rejects_degrees_of_freedom_below_one():
    with pytest.raises(ValueError, match="degrees of freedom"):
        chi2_sf(1.0, 0)
    with pytest.raises(ValueError, match="degrees of freedom"):
        chi2_sf([1.0, 2.0], [3, -1])


def test_g_test_p_value_matches_scipy_log_likelihood_test():
    # The G-test of independence: G = 2 N I with I the empirical mutual information in nats
    # (R. R. Sokal and F. J. Rohlf, "Biometry", 1981). Reference: scipy.stats.chi2_contingency
    # with lambda_="log-likelihood" and no continuity correction.
    rng = np.random.default_rng(11)
    for shape in ((2, 2), (2, 3), (3, 3), (4, 2), (5, 4)):
        table = rng.integers(3, 40, size=shape).astype(np.float64)
        total = table.sum()
        joint = table / total
        product = joint.sum(axis=1, keepdims=True) * joint.sum(axis=0, keepdims=True)
        information = float(np.sum(joint * np.log(joint / product)))
        df = (shape[0] - 1) * (shape[1] - 1)
        statistic, p_value, dof, _ = scipy.stats.chi2_contingency(table, correction=False, lambda_="log-likelihood")
        assert dof == df
        assert 2.0 * total * information == pytest.approx(statistic, rel=1e-12)
        assert g_test_p_value(information, total, df) == pytest.approx(p_value, rel=1e-10, abs=1e-14)


@pytest.mark.parametrize("table", [[[3, 0], [1, 9]], [[12, 7, 30], [25, 14, 0]], [[20, 21], [19, 20]]])
def test_g_test_p_value_on_tables_with_empty_or_balanced_cells(table):
    # Reference: scipy.stats.chi2_contingency with lambda_="log-likelihood" and no continuity
    # correction; empty cells add nothing to the mutual information.
    table = np.array(table, dtype=np.float64)
    joint = table / table.sum()
    product = joint.sum(axis=1, keepdims=True) * joint.sum(axis=0, keepdims=True)
    with np.errstate(divide="ignore", invalid="ignore"):
        information = float(np.where(joint > 0, joint * np.log(joint / product), 0.0).sum())
    df = (table.shape[0] - 1) * (table.shape[1] - 1)
    _, p_value, dof, _ = scipy.stats.chi2_contingency(table, correction=False, lambda_="log-likelihood")
    assert dof == df
    assert g_test_p_value(information, table.sum(), df) == pytest.approx(p_value, rel=1e-7, abs=1e-300)
    if df == 1:  # the mutual information optim.info estimates from the rows gives the same p-value
        rows, cols = np.indices(table.shape)
        X = np.repeat(np.stack([rows.ravel(), cols.ravel()], axis=1), table.astype(int).ravel(), axis=0)
        estimated = mutual_information(X.astype(np.uint8), cardinality=2, prior=0.0)[0, 1]
        assert float(g_test_p_value(estimated, table.sum(), 1)) == pytest.approx(p_value, abs=5e-3)


def test_g_test_p_value_takes_one_sample_size_per_test_and_clips_negative_information():
    # Reference: scipy.stats.chi2.sf of G = 2 N I per test, with I = 0 where it is below zero.
    information = np.array([0.02, -1e-12, 0.003, 0.1])
    sizes = np.array([16, 64, 512, 1024])
    df = np.array([1, 1, 2, 4])
    result = g_test_p_value(information, sizes, df)
    assert result[1] == 1.0
    expected = scipy.stats.chi2.sf(2.0 * sizes * np.maximum(information, 0.0), df)
    assert np.allclose(result, expected, rtol=1e-10, atol=1e-14)


def test_g_test_p_value_vectorises_over_edges():
    information = np.array([0.0, 0.001, 0.01, 0.1])
    result = g_test_p_value(information, 500.0, np.array([1, 2, 4, 1]))
    assert result.shape == (4,)
    assert result[0] == 1.0
    assert np.allclose(result, scipy.stats.chi2.sf(1000.0 * information, [1, 2, 4, 1]), rtol=1e-10, atol=1e-14)
