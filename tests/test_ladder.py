"""The population ladder (population "auto"): ending rules, schedule, budget, determinism, solving, exact resume.

The ending rules are checked on objectives whose outcome is known in advance
(flat fitness, new candidates always worse, always better), so the schedule of
populations and evaluations can be written down exactly.
"""

import itertools
import copy

import numpy as np
import pytest

from optim.runs.checkpoint import load_checkpoint, save_checkpoint
from optim.runs.config import parse_run_config, parse_yaml_text
from optim.errors import ConfigError
from optim.methods import METHODS, AUTO_STEP, HillClimber, PopulationLadder, RandomSearch, learns_model, make_method
from optim.methods.eda import truncation_select
from optim.problem import FunctionProblem
from optim.search import Search, SearchSettings, StopRules
from optim_problems.onemax import onemax
from optim_problems.trap import trap


def _constant(n=40):
    return FunctionProblem(lambda X: np.zeros(X.shape[0]), n, vectorized=True, name="flat")


def _counting_fitness(problem):
    def fitness(X):
        return problem.evaluate(X)

    return fitness


def _flat_rung_evaluations(population, generations):
    """Evaluations of a run with elitism and select 0.5: a full first generation, then half a pool each."""
    return population + generations * (population // 2)


def test_a_flat_objective_stalls_every_run_after_the_stall_limit_and_the_population_doubles():
    # Flat fitness: the survivors' mean never rises after the first generation, so every run ends as
    # "stalled" after exactly 1 + stall generations (the slow rule is switched off with rate 0).
    problem = _constant()
    ladder = PopulationLadder(problem, np.random.default_rng(0), smallest=8, stall=3, rate=0.0)
    evaluations = [ladder.step(_counting_fitness(problem), 10**9).evaluations for _ in range(4 * 4)]
    assert ladder.populations == [8, 16, 32, 64]
    expected = []
    for population in (8, 16, 32, 64):
        expected += [population] + [population // 2] * 3
    assert evaluations == expected
    assert [r["ending"] for r in ladder.rungs] == ["stalled"] * 3 + ["live"]
    assert [r["evaluations"] for r in ladder.rungs[:3]] == [_flat_rung_evaluations(p, 3) for p in (8, 16, 32)]


def _drifting(problem, direction):
    """An objective whose every new candidate scores ``direction`` times higher than all before it."""
    calls = {"count": 0}

    def fitness(X):
        start = calls["count"]
        calls["count"] += X.shape[0]
        return direction * np.arange(start, start + X.shape[0], dtype=np.float64)

    return fitness


def test_a_run_whose_new_candidates_never_survive_ends_as_slow_after_the_window():
    # Every new candidate is worse than every earlier one: none survives the next selection (rate 0).
    # With the stall rule out of reach the run ends as "slow" once the window of rates is full:
    # generation 1 (uniform, no rate), generations 2 and 3 (two rates), then the next run starts.
    problem = onemax(12)
    ladder = PopulationLadder(problem, np.random.default_rng(1), smallest=8, stall=10**6, window=2, rate=0.3)
    fitness = _drifting(problem, -1.0)
    for _ in range(3):
        ladder.step(fitness, 10**9)
    assert ladder.rates == [0.0, 0.0] and ladder.ending() == "slow"
    ladder.step(fitness, 10**9)
    assert ladder.populations == [8, 16]
    assert ladder.rungs[0] == {"population": 8, "evaluations": _flat_rung_evaluations(8, 2), "ending": "slow"}


def test_a_run_whose_new_candidates_always_win_goes_on():
    # Every new candidate beats all before it: all of them survive (rate 1) and the survivors' mean
    # rises every generation, so the first run never ends.
    problem = onemax(12)
    ladder = PopulationLadder(problem, np.random.default_rng(2), smallest=8)
    fitness = _drifting(problem, 1.0)
    for _ in range(40):
        ladder.step(fitness, 10**9)
    assert ladder.populations == [8]
    assert ladder.rates == [1.0] * ladder.window and ladder.ending() is None


def test_the_replacement_rate_is_the_share_of_new_candidates_the_next_selection_keeps():
    problem = trap(n=30, k=3, shuffle=True, seed=4)
    ladder = PopulationLadder(problem, np.random.default_rng(5), smallest=64, stall=10**6, rate=0.0)
    ladder.step(_counting_fitness(problem), 10**9)
    for _ in range(12):
        outcome = ladder.step(_counting_fitness(problem), 10**9)
        run = ladder.run
        carried = run.pool.shape[0] - outcome.evaluations
        assert np.array_equal(run.pool[carried:], outcome.candidates)
        kept = truncation_select(run.pool_fitness, run.select)
        assert ladder.rates[-1] == pytest.approx(np.count_nonzero(kept >= carried) / outcome.evaluations)
        assert 0.0 <= ladder.rates[-1] <= 1.0 and len(ladder.rates) <= ladder.window


def test_without_elitism_no_rate_is_measured():
    problem = onemax(20)
    ladder = PopulationLadder(problem, np.random.default_rng(3), smallest=16, elitism=False)
    for _ in range(10):
        ladder.step(_counting_fitness(problem), 10**9)
    assert ladder.rates == []


def test_every_ended_run_met_an_ending_rule_and_the_runs_account_for_every_evaluation():
    problem = trap(n=30, k=3, shuffle=True, seed=6)
    ladder = PopulationLadder(problem, np.random.default_rng(7), smallest=16)
    total = 0
    while ladder.population is None or ladder.population < 512:  # a solved run converges: the next doubles
        before = ladder.populations
        reason = ladder.ending()
        total += ladder.step(_counting_fitness(problem), 10**9).evaluations
        if before and ladder.populations != before:
            assert reason in ("converged", "stalled", "slow")
            assert ladder.rungs[-2]["ending"] == reason
        else:
            assert reason is None or not before
    pops = ladder.populations
    assert pops == [16 * 2**k for k in range(len(pops))] and len(pops) >= 3
    assert all(r["ending"] in ("converged", "stalled", "slow") for r in ladder.rungs[:-1])
    assert ladder.rungs[-1]["ending"] == "live"
    assert sum(r["evaluations"] for r in ladder.rungs) == total


def test_budget_is_respected_exactly_through_the_driver():
    for budget in (1, 31, 33, 1237, 5000):
        search = Search(
            onemax(40), SearchSettings(population="auto"), StopRules(evaluations=budget, target=None), seed=3
        )
        result = search.run()
        assert result.evaluations == budget
        assert (
            sum(
                r["evaluations"] - p["evaluations"]
                for p, r in itertools.pairwise([{"evaluations": 0}] + result.history)
            )
            == budget
        )


def test_each_step_stays_within_the_budget_it_is_given_and_never_starts_a_run_that_cannot_fit():
    problem = _constant(30)
    ladder = PopulationLadder(problem, np.random.default_rng(1), smallest=8, stall=2)
    rng = np.random.default_rng(2)
    remaining, created, held_back = 20000, 0, 0
    while remaining > 0:
        budget = int(min(remaining, rng.integers(1, 400)))
        started_before, population_before = len(ladder.rungs), ladder.population
        due = ladder.ending() is not None
        outcome = ladder.step(_counting_fitness(problem), budget)
        assert 1 <= outcome.evaluations <= budget
        assert outcome.candidates.shape == (outcome.evaluations, 30)
        assert outcome.fitness.shape == (outcome.evaluations,)
        if len(ladder.rungs) > started_before and started_before:
            assert ladder.population <= budget
            created += 1
        elif due:
            assert 2 * population_before > budget
            held_back += 1
        remaining -= outcome.evaluations
    assert created >= 2 and held_back >= 1


def test_same_seed_same_run_other_seed_other_run():
    def run(seed):
        return Search(
            trap(n=30, k=3, shuffle=True, seed=1),
            SearchSettings(population="auto"),
            StopRules(evaluations=4000, target=None),
            seed=seed,
        ).run()

    first, again, other = run(7), run(7), run(8)
    assert [r["best"] for r in first.history] == [r["best"] for r in again.history]
    assert [r["evaluations"] for r in first.history] == [r["evaluations"] for r in again.history]
    assert np.array_equal(first.best_solution, again.best_solution)
    assert [r["mean"] for r in first.history] != [r["mean"] for r in other.history]


@pytest.mark.parametrize("method", [name for name in METHODS if learns_model(name)])
def test_solves_small_onemax_with_no_population_given(method):
    # OneMax n = 40: optimum n (all ones); every model-based method solves it easily.
    for seed in range(3):
        result = Search(
            onemax(40), SearchSettings(method=method, population="auto"), StopRules(evaluations=60_000), seed=seed
        ).run()
        assert result.stop_reason == "target" and result.best_score == 40


def test_tree_solves_a_small_shuffled_trap_with_no_population_given():
    # Trap-3, n = 30: optimum n, all ones (Deb & Goldberg, 1993, "Analyzing deception in trap functions").
    for seed in range(3):
        problem = trap(n=30, k=3, shuffle=True, seed=seed)
        result = Search(
            problem, SearchSettings(method="tree", population="auto"), StopRules(evaluations=100_000), seed=seed
        ).run()
        assert result.stop_reason == "target" and result.best_score == 30


def _steps(ladder, problem, count, budget=10**9):
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
    for a, b in zip(expected, got, strict=True):
        assert np.array_equal(a.candidates, b.candidates)
        assert np.array_equal(a.fitness, b.fitness)
    assert restored.populations == ladder.populations and len(ladder.populations) >= 2
    assert restored.rungs == ladder.rungs and restored.rates == ladder.rates
    assert (restored.stale, restored.survivor_mean) == (ladder.stale, ladder.survivor_mean)


def test_state_is_a_copy():
    problem = onemax(20)
    ladder = PopulationLadder(problem, np.random.default_rng(0), smallest=8)
    _steps(ladder, problem, 10)
    rates, pool = list(ladder.rates), ladder.run.pool.copy()
    state = ladder.get_state()
    state["rates"][:] = 99
    state["run"]["pool"][:] = 1 - state["run"]["pool"]
    assert ladder.rates == rates
    assert np.array_equal(ladder.run.pool, pool)


def test_checkpoint_file_round_trip_of_a_search_with_auto_population(tmp_path):
    # Through optim.runs.checkpoint's .npz format and Search.get_state/set_state, as `optim resume` does.
    def fresh():
        return Search(onemax(50), SearchSettings(population="auto"), StopRules(evaluations=6000, target=None), seed=5)

    search = fresh()
    for _ in range(25):
        search.step()
    save_checkpoint(tmp_path / "c.npz", search.get_state(), {"version": "test"})
    expected = [search.step() for _ in range(30)]
    resumed = fresh()
    state, _ = load_checkpoint(tmp_path / "c.npz")
    resumed.set_state(state)
    got = [resumed.step() for _ in range(30)]
    for a, b in zip(expected, got, strict=True):
        assert {k: v for k, v in a.items() if k not in ("seconds", "time")} == {
            k: v for k, v in b.items() if k not in ("seconds", "time")
        }


def test_model_and_entropy_come_from_the_current_run():
    problem = onemax(30)
    ladder = PopulationLadder(problem, np.random.default_rng(3), smallest=8)
    assert ladder.model() is None and ladder.population is None
    assert ladder.model_entropy == pytest.approx(30 * np.log(2))
    _steps(ladder, problem, 30)
    model = ladder.model()
    assert model is ladder.run.model() and model.n == 30
    assert ladder.population == ladder.populations[-1]
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


@pytest.mark.parametrize(
    "bad",
    [{"smallest": 3}, {"stall": 0}, {"smallest": 8.5}, {"window": 0}, {"rate": 1.0}, {"rate": -0.1}, {"stall": True}],
)
def test_bad_ladder_parameters_are_rejected(bad):
    with pytest.raises(ValueError, match="PopulationLadder"):
        PopulationLadder(onemax(5), np.random.default_rng(0), **bad)


def test_auto_is_the_default_population():
    assert SearchSettings().population == "auto"
    config = parse_run_config(parse_yaml_text("problem:\n  use: onemax\n", "run.yaml"))
    assert config.search.population == "auto"


def test_run_configs_accept_auto_and_explain_the_choice():
    config = parse_run_config(
        parse_yaml_text("problem:\n  use: onemax\nsearch:\n  population: auto\nstop:\n  evaluations: 10\n", "run.yaml")
    )
    assert config.search.population == "auto"
    with pytest.raises(
        ConfigError,
        match=r"run.yaml:4: 'search.population': The 'population' parameter must be a whole number >= 2, "
        r"or 'auto'",
    ):
        parse_run_config(parse_yaml_text("problem:\n  use: onemax\nsearch:\n  population: lots\n", "run.yaml"))


def test_the_log_names_the_population_of_every_generation():
    result = Search(
        trap(n=30, k=3, shuffle=True, seed=3),
        SearchSettings(population="auto"),
        StopRules(evaluations=20_000, target=None),
        seed=3,
    ).run()
    populations = [record["population"] for record in result.history]
    assert populations[0] == 32 and populations == sorted(populations) and len(set(populations)) >= 3
    assert all(p in {32 * 2**k for k in range(12)} for p in populations)
    fixed = Search(onemax(20), SearchSettings(population=50), StopRules(evaluations=500), seed=1).run()
    assert {record["population"] for record in fixed.history} == {50}
