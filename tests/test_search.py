"""The search driver and the methods: budgets, stop rules, determinism, and solving known problems."""

import itertools
import numpy as np
import pytest

import optim
from optim.methods import METHODS, truncation_select
from optim.search import Search, SearchSettings, StopRules
from optim_problems.fourpeaks import four_peaks
from optim_problems.onemax import onemax
from optim_problems.trap import trap


def _strip_timing(history):
    return [{k: v for k, v in r.items() if k not in ("seconds", "time")} for r in history]


def test_truncation_select_keeps_the_best_fraction_stably():
    fitness = np.array([3.0, 1.0, 3.0, 2.0, 0.0, 5.0])
    assert truncation_select(fitness, 0.5).tolist() == [5, 0, 2]
    assert truncation_select(fitness, 1.0).tolist() == [5, 0, 2, 3, 1, 4]
    assert truncation_select(fitness, 0.01).tolist() == [5, 0]  # never fewer than two


@pytest.mark.parametrize("method", METHODS)
def test_budget_is_a_hard_cap(method):
    # an unreachable target forces every method to spend the budget exactly
    problem = trap(n=30, k=3)
    settings = SearchSettings(method=method, population=64)
    stop = StopRules(evaluations=1001, target=10_000, collapse=False)
    result = Search(problem, settings, stop, seed=3).run()
    assert result.evaluations == 1001
    assert result.stop_reason == "budget"
    assert result.history[-1]["evaluations"] == 1001
    assert all(b["evaluations"] > a["evaluations"] for a, b in itertools.pairwise(result.history))


@pytest.mark.parametrize("method", METHODS)
def test_same_seed_same_log_different_seed_different_log(method):
    problem = trap(n=24, k=3, shuffle=True, seed=2)
    settings = SearchSettings(method=method, population=50)
    stop = StopRules(evaluations=2000, target=None)
    a = Search(problem, settings, stop, seed=11).run()
    b = Search(problem, settings, stop, seed=11).run()
    c = Search(problem, settings, stop, seed=12).run()
    assert _strip_timing(a.history) == _strip_timing(b.history)
    assert a.solution_text == b.solution_text
    assert _strip_timing(a.history) != _strip_timing(c.history)


def test_tree_solves_onemax():
    # OneMax optimum n (common practice, no source); budget stated here: 20,000
    result = optim.maximize(onemax(n=100), population=200, budget=20_000, seed=1)
    assert result.stop_reason == "target"
    assert result.best_score == 100
    assert result.evaluations_to_target <= 20_000


def test_tree_solves_shuffled_trap3():
    # trap-3 optimum: all ones, value n (Deb & Goldberg 1993); budget stated here: 40,000
    problem = trap(n=30, k=3, shuffle=True, seed=5)
    for seed in (1, 2, 3):
        result = optim.maximize(problem, population=600, budget=40_000, seed=seed)
        assert result.best_score == 30, f"seed {seed}"
        assert result.stop_reason == "target"


def test_tree_solves_four_peaks():
    # Four Peaks optimum 2n - T - 1 (Baluja & Caruana 1995); budget stated here: 60,000
    problem = four_peaks(n=30, t=3)
    result = optim.maximize(problem, population=800, budget=60_000, seed=1)
    assert result.best_score == 2 * 30 - 3 - 1


def test_hillclimb_solves_onemax():
    # a first-improvement hill climber solves OneMax in about n ln n steps (common practice, no source)
    result = optim.maximize(onemax(n=60), method="hillclimb", budget=5_000, seed=4)
    assert result.best_score == 60


def test_hillclimb_is_deceived_by_trap3():
    # every block of a trap function draws a local search to its all-zeros local optimum
    # (Deb & Goldberg 1993, "Analyzing deception in trap functions")
    problem = trap(n=30, k=3)
    result = optim.maximize(problem, method="hillclimb", budget=30_000, seed=1)
    assert result.best_score < 30
    assert result.stop_reason == "budget"


def test_hillclimb_counts_every_tried_neighbour_like_a_sequential_climber():
    calls = []

    def count_ones(x):
        calls.append(1)
        return float(x.sum())

    # the same climber on a per-candidate (not vectorised) objective: every call counted
    sequential = optim.maximize(count_ones, n=20, method="hillclimb", budget=300, target=None, seed=9)
    assert len(calls) == sequential.evaluations == 300
    # vectorised: neighbours are scored in batches but only those a sequential climber tries are counted
    vectorised = optim.maximize(
        lambda X: X.sum(axis=1), n=20, vectorized=True, method="hillclimb", budget=300, target=None, seed=9
    )
    drop = lambda h: [{k: v for k, v in r.items() if k != "objective_calls"} for r in _strip_timing(h)]
    assert drop(sequential.history) == drop(vectorised.history)
    assert vectorised.objective_calls >= vectorised.evaluations  # the look-ahead is reported, not hidden


def test_minimize_is_handled_in_one_place():
    result = optim.minimize(
        lambda X: X.sum(axis=1), n=30, vectorized=True, population=100, budget=3000, target=0, seed=2
    )
    assert result.best_score == 0
    assert result.best_solution.sum() == 0
    assert result.stop_reason == "target"


def test_patience_and_collapse_stop_rules():
    flat = optim.maximize(
        lambda X: np.zeros(X.shape[0]),
        n=10,
        vectorized=True,
        population=40,
        budget=10_000,
        patience=3,
        collapse=False,
        seed=1,
    )
    assert flat.stop_reason == "patience"
    assert flat.generations == 4  # the first generation improves on nothing, then three stale ones
    collapsing = optim.maximize(
        lambda X: X.sum(axis=1), n=8, vectorized=True, population=30, prior=0.0, budget=100_000, target=None, seed=1
    )
    assert collapsing.stop_reason == "collapsed"


def test_evaluations_to_target_is_the_index_of_the_first_hit():
    problem = onemax(n=20)
    result = optim.maximize(problem, population=100, budget=10_000, seed=3)
    # replaying the run with the target disabled shows the same best-so-far trajectory up to the hit
    replay = Search(problem, SearchSettings(population=100), StopRules(evaluations=10_000, target=None), seed=3)
    while replay.evaluations < result.evaluations:
        replay.step()
    assert replay.best_fitness == 20
    assert result.evaluations_to_target <= result.evaluations


def test_failures_are_scored_worst_and_counted():
    def fragile(x):
        if x[0] == 1 and x[1] == 1:
            raise RuntimeError("simulated crash")
        if x[0] == 0 and x[1] == 1:
            return float("nan")
        return float(x.sum())

    result = optim.maximize(
        fragile, n=6, population=20, budget=200, target=None, collapse=False, max_failures=None, seed=1
    )
    assert result.failures > 0
    assert not (result.best_solution[0] == 1 and result.best_solution[1] == 1)
    assert result.evaluations == 200


def test_cache_serves_repeats_and_is_reported():
    calls = []

    def score(x):
        calls.append(1)
        return float(x.sum())

    result = optim.maximize(score, n=4, population=30, budget=300, target=None, cache=True, seed=1)
    assert result.cache_hits > 0
    assert len(calls) + result.cache_hits == result.evaluations
    assert len(calls) <= 16  # only 16 distinct candidates exist


def test_a_broken_objective_stops_the_run_with_a_clear_reason():
    def broken(x):
        raise OSError("the simulator binary is missing")

    result = optim.maximize(broken, n=5, population=10, budget=1000, seed=1)
    assert result.stop_reason == "failures"
    assert result.evaluations < 1000 and result.failures == result.evaluations
    counted = optim.maximize(broken, n=5, population=10, budget=1000, max_failures=3, seed=1)
    assert counted.stop_reason == "failures" and counted.failures == 10  # stops after the first generation (10 > 3)


# -- one way to drive a search: open_search owns the evaluator's lifetime ----------------------------------------
def _count_ones(x):
    return float(x.sum())


def test_open_search_closes_the_workers_it_started_however_the_block_ends():
    from optim.problem import FunctionProblem
    from optim.search import open_search

    problem = FunctionProblem(_count_ones, 6)
    settings = SearchSettings(method="random", population=8, jobs=2)
    with open_search(problem, settings, StopRules(evaluations=16), seed=3) as search:
        search.step()
        backend = search.evaluator._backend
        assert backend is not None  # two jobs: the candidates were scored by worker processes
    assert search.evaluator._backend is None
    with pytest.raises(KeyError):
        with open_search(problem, settings, StopRules(evaluations=16), seed=3) as search:
            search.step()
            assert search.evaluator._backend is not None
            raise KeyError("the caller's own error")
    assert search.evaluator._backend is None


def test_run_search_gives_the_same_run_as_stepping_by_hand():
    from optim.search import run_search

    problem = onemax(n=20)
    settings, stop = SearchSettings(population=40), StopRules(evaluations=600)
    result = run_search(problem, settings, stop, seed=4)
    by_hand = Search(problem, settings, stop, seed=4)
    while not by_hand.finished:
        by_hand.step()
    timeless = [{k: v for k, v in r.items() if k not in ("seconds", "time")} for r in result.history]
    assert timeless == [{k: v for k, v in r.items() if k not in ("seconds", "time")} for r in by_hand.history]
    assert np.array_equal(result.best_solution, by_hand.best_solution)
