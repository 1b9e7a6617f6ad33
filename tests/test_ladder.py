"""The population ladder (population "auto"): budget, schedule, determinism, solving, exact resume.

The schedule is checked against the counter of Harik & Lobo (1999, "A
parameter-less genetic algorithm"): at the t-th step the run that advances is
the one whose index is the number of trailing zeros of t written in base m.
"""

import copy

import numpy as np
import pytest

from optim.checkpoint import load_checkpoint, save_checkpoint
from optim.config import parse_run_config, parse_yaml_text
from optim.errors import ConfigError
from optim.methods import AUTO_STEP, HillClimber, PopulationLadder, RandomSearch, make_method
from optim.methods.eda import truncation_select
from optim.problem import FunctionProblem
from optim.search import Search, SearchSettings, StopRules
from problems.onemax import onemax
from problems.trap import trap


def _constant(n=40):
    return FunctionProblem(lambda X: np.zeros(X.shape[0]), n, vectorized=True, name="flat")


def _counting_fitness(problem):
    def fitness(X):
        return problem.evaluate(X)
    return fitness


def _trailing_zeros(t, base):
    count = 0
    while t % base == 0:
        t //= base
        count += 1
    return count


@pytest.mark.parametrize("ratio", [2, 3, 4])
def test_schedule_is_the_base_m_counter_of_harik_and_lobo(ratio):
    # Flat fitness and a huge stall limit: no run is ever dropped, so only the counter decides.
    # Without elitism every generation of a run evaluates exactly its population, which names the run.
    problem = _constant()
    ladder = PopulationLadder(problem, np.random.default_rng(0), elitism=False, smallest=8, rung_ratio=ratio,
                              stall=10 ** 6)
    for t in range(1, 60):
        outcome = ladder.step(_counting_fitness(problem), 10 ** 9)
        assert outcome.evaluations == 8 * 2 ** _trailing_zeros(t, ratio)
    assert ladder.populations == [8 * 2 ** k for k in range(len(ladder.populations))]


def test_budget_is_respected_exactly_through_the_driver():
    for budget in (1, 31, 33, 1237, 5000):
        search = Search(onemax(40), SearchSettings(population="auto"), StopRules(evaluations=budget, target=None),
                        seed=3)
        result = search.run()
        assert result.evaluations == budget
        assert sum(r["evaluations"] - p["evaluations"] for p, r in zip([{"evaluations": 0}] + result.history,
                                                                       result.history)) == budget


def test_each_step_stays_within_the_budget_it_is_given_and_never_starts_a_run_that_cannot_fit():
    problem = onemax(30)
    ladder = PopulationLadder(problem, np.random.default_rng(1))
    rng = np.random.default_rng(2)
    remaining, created = 6000, 0
    while remaining > 0:
        budget = int(min(remaining, rng.integers(1, 400)))
        alive_before, started_before = len(ladder.runs), ladder.started
        outcome = ladder.step(_counting_fitness(problem), budget)
        assert 1 <= outcome.evaluations <= budget
        assert outcome.candidates.shape == (outcome.evaluations, 30)
        assert outcome.fitness.shape == (outcome.evaluations,)
        if ladder.started > started_before and alive_before:
            assert ladder.largest <= budget
            created += 1
        remaining -= outcome.evaluations
    assert created >= 2


def test_live_runs_obey_the_dropping_rules_after_every_step():
    problem = trap(n=30, k=3, shuffle=True, seed=4)
    ladder = PopulationLadder(problem, np.random.default_rng(5), smallest=16)
    dropped_before = 0
    for _ in range(300):
        ladder.step(_counting_fitness(problem), 1024)  # no run larger than 1024 is started
        pops = ladder.populations
        assert pops == sorted(pops) and len(set(pops)) == len(pops)
        means = [float(run.pool_fitness.mean()) for run in ladder.runs]
        for i in range(len(means)):  # no larger run has a higher mean than a smaller live one
            assert all(means[j] <= means[i] for j in range(i + 1, len(means)))
        for i, run in enumerate(ladder.runs):
            assert not run.converged
            assert ladder.stale[i] < ladder.stall
            kept = truncation_select(run.pool_fitness, ladder.select)
            assert ladder.survivor_means[i] >= run.pool_fitness[kept].mean() - 1e-12
        assert ladder.dropped >= dropped_before
        dropped_before = ladder.dropped
    assert ladder.dropped > 0 and ladder.started == ladder.dropped + len(ladder.runs)


def test_same_seed_same_run_other_seed_other_run():
    def run(seed):
        return Search(trap(n=30, k=3, shuffle=True, seed=1), SearchSettings(population="auto"),
                      StopRules(evaluations=4000, target=None), seed=seed).run()

    first, again, other = run(7), run(7), run(8)
    assert [r["best"] for r in first.history] == [r["best"] for r in again.history]
    assert [r["evaluations"] for r in first.history] == [r["evaluations"] for r in again.history]
    assert np.array_equal(first.best_solution, again.best_solution)
    assert [r["mean"] for r in first.history] != [r["mean"] for r in other.history]


@pytest.mark.parametrize("method", ["tree", "forest", "univariate"])
def test_solves_small_onemax_with_no_population_given(method):
    # OneMax n = 40: optimum n (all ones); every model-based method solves it easily.
    for seed in range(3):
        result = Search(onemax(40), SearchSettings(method=method, population="auto"),
                        StopRules(evaluations=60_000), seed=seed).run()
        assert result.stop_reason == "target" and result.best_score == 40


def test_tree_solves_a_small_shuffled_trap_with_no_population_given():
    # Trap-3, n = 30: optimum n, all ones (Deb & Goldberg, 1993, "Analyzing deception in trap functions").
    for seed in range(3):
        problem = trap(n=30, k=3, shuffle=True, seed=seed)
        result = Search(problem, SearchSettings(method="tree", population="auto"),
                        StopRules(evaluations=100_000), seed=seed).run()
        assert result.stop_reason == "target" and result.best_score == 30


def _steps(ladder, problem, count, budget=10 ** 9):
    return [ladder.step(_counting_fitness(problem), budget) for _ in range(count)]


def test_state_round_trip_gives_an_identical_continuation():
    problem = trap(n=24, k=3, shuffle=True, seed=2)
    rng = np.random.default_rng(11)
    ladder = PopulationLadder(problem, rng, smallest=8)
    _steps(ladder, problem, 40)
    state = copy.deepcopy(ladder.get_state())
    rng_state = copy.deepcopy(rng.bit_generator.state)
    expected = _steps(ladder, problem, 60)

    restored_rng = np.random.default_rng(999)
    restored_rng.bit_generator.state = rng_state
    restored = PopulationLadder(problem, restored_rng)  # other defaults: the state must carry its own
    restored.set_state(state)
    got = _steps(restored, problem, 60)
    for a, b in zip(expected, got):
        assert np.array_equal(a.candidates, b.candidates)
        assert np.array_equal(a.fitness, b.fitness)
    assert restored.populations == ladder.populations
    assert restored.get_state()["digits"].tolist() == ladder.get_state()["digits"].tolist()


def test_state_is_a_copy():
    problem = onemax(20)
    ladder = PopulationLadder(problem, np.random.default_rng(0), smallest=8)
    _steps(ladder, problem, 10)
    digits, pool = list(ladder.digits), ladder.runs[0].pool.copy()
    state = ladder.get_state()
    state["digits"][:] = 99
    state["runs"][0]["pool"][:] = 1 - state["runs"][0]["pool"]
    assert ladder.digits == digits
    assert np.array_equal(ladder.runs[0].pool, pool)


def test_checkpoint_file_round_trip_of_a_search_with_auto_population(tmp_path):
    # Through optim.checkpoint's .npz format and Search.get_state/set_state, as `optim resume` does.
    def fresh():
        return Search(onemax(50), SearchSettings(population="auto"), StopRules(evaluations=6000, target=None),
                      seed=5)

    search = fresh()
    for _ in range(25):
        search.step()
    save_checkpoint(tmp_path / "c.npz", search.get_state(), {"version": "test"})
    expected = [search.step() for _ in range(30)]
    resumed = fresh()
    state, _ = load_checkpoint(tmp_path / "c.npz")
    resumed.set_state(state)
    got = [resumed.step() for _ in range(30)]
    for a, b in zip(expected, got):
        assert {k: v for k, v in a.items() if k not in ("seconds", "time")} == \
               {k: v for k, v in b.items() if k not in ("seconds", "time")}


def test_model_and_entropy_come_from_the_best_live_run():
    problem = onemax(30)
    ladder = PopulationLadder(problem, np.random.default_rng(3), smallest=8)
    assert ladder.model() is None
    assert ladder.model_entropy == pytest.approx(30 * np.log(2))
    _steps(ladder, problem, 30)
    means = [float(run.pool_fitness.mean()) for run in ladder.runs]
    best = max(range(len(means)), key=lambda i: (means[i], i))
    model = ladder.model()
    assert model is ladder.runs[best].model() and model.n == 30
    assert ladder.model_entropy == pytest.approx(model.entropy())
    assert not ladder.converged


def test_auto_for_the_hill_climber_and_random_search_is_a_fixed_step():
    problem = onemax(10)
    climber = make_method("hillclimb", problem, np.random.default_rng(0), population="auto")
    uniform = make_method("random", problem, np.random.default_rng(0), population="auto")
    assert isinstance(climber, HillClimber) and climber.population == AUTO_STEP
    assert isinstance(uniform, RandomSearch) and uniform.population == AUTO_STEP
    assert isinstance(make_method("tree", problem, np.random.default_rng(0), population="auto"), PopulationLadder)
    with pytest.raises(ValueError, match="'auto'"):
        make_method("tree", problem, np.random.default_rng(0), population="big")


@pytest.mark.parametrize("bad", [{"smallest": 3}, {"rung_ratio": 1}, {"stall": 0}, {"smallest": 8.5}])
def test_bad_ladder_parameters_are_rejected(bad):
    with pytest.raises(ValueError, match="PopulationLadder"):
        PopulationLadder(onemax(5), np.random.default_rng(0), **bad)


def test_run_configs_accept_auto_and_explain_the_choice():
    config = parse_run_config(parse_yaml_text("problem:\n  use: onemax\nsearch:\n  population: auto\n"
                                              "stop:\n  evaluations: 10\n", "run.yaml"))
    assert config.search.population == "auto"
    with pytest.raises(ConfigError, match=r"run.yaml:4: 'search.population': expected a whole number >= 2, "
                                          r"or 'auto'"):
        parse_run_config(parse_yaml_text("problem:\n  use: onemax\nsearch:\n  population: lots\n", "run.yaml"))
