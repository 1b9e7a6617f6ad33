"""Tests of optim_problems.maxsat: readers, generator, vectorised objective, RC2 reference."""

import gzip
import itertools
import sys
import warnings
from pathlib import Path

import numpy as np
import pytest

from optim_problems._instances import InstanceFormatError, exhaustive_maximum
from optim_problems.maxsat import AUTO_SOLVE_LIMIT, MaxSatProblem, max_sat, rc2_optimum
from optim_problems.maxsat_instances import (
    ClauseCountWarning,
    MaxSatFormula,
    format_formula,
    parse_formula,
    random_ksat,
    read_formula,
    write_formula,
)

DATA = Path(__file__).parent / "data" / "instances"
EXAMPLES = Path(__file__).parent.parent / "optim_problems" / "instances"


def _slow_score(formula, x):
    """Obviously-correct score of one candidate, clause by clause."""
    soft_total = int(formula.weights[~formula.hard].sum())
    score = 0.0
    for clause, weight, hard in zip(formula.clauses, formula.weights, formula.hard, strict=True):
        satisfied = any((x[abs(lit) - 1] == 1) == (lit > 0) for lit in clause)
        if hard and not satisfied:
            score -= soft_total + 1
        elif not hard and satisfied:
            score += int(weight)
    return score


def _random_weighted_formula(rng, n, m, hard_fraction=0.2, max_len=4):
    """Random clauses of mixed length (with repeats, tautologies and empty soft clauses)."""
    clauses = []
    for _ in range(m):
        length = int(rng.integers(0, max_len + 1))
        variables = rng.integers(1, n + 1, size=length)
        signs = rng.choice([-1, 1], size=length)
        clauses.append((variables * signs).tolist())
    hard = rng.random(m) < hard_fraction
    hard &= np.array([len(c) > 0 for c in clauses])
    weights = rng.integers(1, 20, size=m)
    return MaxSatFormula(n, clauses, weights, hard)


def _pigeonhole(pigeons, holes):
    """CNF saying every pigeon sits in a hole and no hole holds two pigeons."""
    var = lambda p, h: p * holes + h + 1  # noqa: E731
    clauses = [[var(p, h) for h in range(holes)] for p in range(pigeons)]
    for h in range(holes):
        for p, q in itertools.combinations(range(pigeons), 2):
            clauses.append([-var(p, h), -var(q, h)])
    return MaxSatFormula(pigeons * holes, clauses)


# ---------------------------------------------------------------- objective


def test_evaluate_matches_clause_by_clause_reference():
    rng = np.random.default_rng(11)
    formula = _random_weighted_formula(rng, n=9, m=60)
    problem = MaxSatProblem(formula)
    X = rng.integers(0, 2, size=(200, 9)).astype(np.uint8)
    expected = np.array([_slow_score(formula, x) for x in X])
    np.testing.assert_array_equal(problem.evaluate(X), expected)
    assert problem.evaluate(X).dtype == np.float64


def test_evaluate_over_several_clause_blocks():
    # 3000 clauses of 3 literals exceed one block of literal slots.
    formula = random_ksat(30, ratio=100.0, k=3, seed=5)
    problem = MaxSatProblem(formula)
    rng = np.random.default_rng(12)
    X = rng.integers(0, 2, size=(40, 30)).astype(np.uint8)
    expected = np.array([_slow_score(formula, x) for x in X])
    np.testing.assert_array_equal(problem.evaluate(X), expected)


def test_score_threshold_separates_feasible_candidates():
    rng = np.random.default_rng(13)
    formula = _random_weighted_formula(rng, n=8, m=30, hard_fraction=0.3)
    problem = MaxSatProblem(formula)
    X = rng.integers(0, 2, size=(500, 8)).astype(np.uint8)
    scores = problem.evaluate(X)
    feasible = problem.is_feasible(X)
    assert feasible.any() and (~feasible).any()
    assert np.all(scores[feasible] >= problem.feasibility_threshold)
    assert np.all(scores[~feasible] <= problem.feasibility_threshold - 1)
    assert problem.hard_penalty == formula.soft_weight_total + 1


def test_evaluate_rejects_wrong_shape():
    problem = MaxSatProblem(random_ksat(5, seed=0))
    with pytest.raises(ValueError, match=r"\(count, 5\)"):
        problem.evaluate(np.zeros((3, 4), np.uint8))


def test_variable_names_follow_dimacs_numbering():
    problem = MaxSatProblem(random_ksat(4, seed=0))
    assert problem.variable_names == ["v1", "v2", "v3", "v4"]


# ---------------------------------------------------------------- generator


def test_random_ksat_shape_and_distinct_variables():
    formula = random_ksat(20, ratio=4.26, k=3, seed=3)
    assert formula.n_variables == 20
    assert formula.n_clauses == round(4.26 * 20)
    for clause in formula.clauses:
        assert len(clause) == 3
        assert len({abs(lit) for lit in clause}) == 3
        assert all(1 <= abs(lit) <= 20 for lit in clause)


def test_random_ksat_is_reproducible_from_seed():
    assert random_ksat(30, seed=8).clauses == random_ksat(30, seed=8).clauses
    assert random_ksat(30, seed=8).clauses != random_ksat(30, seed=9).clauses


def test_random_ksat_signs_are_balanced():
    # 3000 literals with fair signs: the count of negations has sd ~27, so
    # |fraction - 0.5| < 0.05 (about 5.5 sd) holds with overwhelming probability.
    literals = np.concatenate([np.array(c) for c in random_ksat(250, ratio=4.0, seed=21).clauses])
    assert abs(np.mean(literals < 0) - 0.5) < 0.05


def test_random_ksat_rejects_bad_parameters():
    with pytest.raises(ValueError, match="k must be"):
        random_ksat(3, k=4)
    with pytest.raises(ValueError, match="ratio"):
        random_ksat(3, ratio=0)
    with pytest.raises(ValueError, match="n must be"):
        random_ksat(0)


# ---------------------------------------------------------------- RC2 reference


@pytest.mark.parametrize("n, seed", [(10, 0), (13, 1), (16, 2)])
def test_rc2_equals_brute_force_on_random_3sat(n, seed):
    pytest.importorskip("pysat")
    # Above the threshold ratio most formulas are unsatisfiable, so the
    # optimum is below m and the check is not trivial.
    formula = random_ksat(n, ratio=7.0, k=3, seed=seed)
    problem = MaxSatProblem(formula)
    best, assignment = rc2_optimum(formula)
    brute, _ = exhaustive_maximum(problem.evaluate, n)
    assert best == brute
    assert problem.evaluate_one(assignment) == best
    # RC2 (Ignatiev, Morgado & Marques-Silva 2019, "RC2: an efficient MaxSAT
    # solver") reports the falsified weight as .cost; for a CNF the optimum is m - cost.
    from pysat.examples.rc2 import RC2
    from pysat.formula import WCNF

    wcnf = WCNF()
    for clause in formula.clauses:
        wcnf.append(list(clause), weight=1)
    with RC2(wcnf) as solver:
        solver.compute()
        assert best == formula.n_clauses - solver.cost


@pytest.mark.parametrize("seed", [3, 4, 5])
def test_rc2_equals_brute_force_on_weighted_partial_formula(seed):
    pytest.importorskip("pysat")
    rng = np.random.default_rng(seed)
    formula = _random_weighted_formula(rng, n=12, m=70, hard_fraction=0.15, max_len=3)
    problem = MaxSatProblem(formula)
    best, assignment = rc2_optimum(formula)
    brute, _ = exhaustive_maximum(problem.evaluate, 12)
    if best is None:
        assert brute < 0
    else:
        assert best == brute
        assert problem.evaluate_one(assignment) == best
        assert problem.is_feasible(assignment[None])[0]


def test_pigeonhole_formula_optimum_is_one_clause_short():
    pytest.importorskip("pysat")
    # Pigeonhole principle: 4 pigeons cannot sit in 3 holes one per hole
    # (unsatisfiable; Haken 1985, "The intractability of resolution"), while
    # dropping one "pigeon p sits somewhere" clause leaves a satisfiable
    # formula, so the MAX-SAT optimum is m - 1 (common practice, no source).
    formula = _pigeonhole(4, 3)
    problem = MaxSatProblem(formula)
    best, assignment = rc2_optimum(formula)
    brute, _ = exhaustive_maximum(problem.evaluate, formula.n_variables)
    assert best == brute == formula.n_clauses - 1
    assert problem.evaluate_one(assignment) == best


def test_rc2_reports_unsatisfiable_hard_clauses(tmp_path):
    pytest.importorskip("pysat")
    formula = MaxSatFormula(2, [[1], [-1], [2]], weights=[0, 0, 3], hard=[True, True, False])
    assert rc2_optimum(formula) == (None, None)
    write_formula(formula, tmp_path / "clash.wcnf")
    problem = max_sat(tmp_path / "clash.wcnf")
    assert problem.optimum is None
    assert "cannot all hold" in problem.optimum_source


def test_rc2_handles_empty_soft_clause_and_unused_variables():
    pytest.importorskip("pysat")
    formula = MaxSatFormula(5, [[], [1, 2], [-1], [-2]], weights=[4, 1, 1, 1])
    problem = MaxSatProblem(formula)
    best, assignment = rc2_optimum(formula)
    brute, _ = exhaustive_maximum(problem.evaluate, 5)
    assert best == brute
    assert problem.evaluate_one(assignment) == best


# ---------------------------------------------------------------- factory


def test_factory_generates_and_solves_default_instance():
    pytest.importorskip("pysat")
    problem = max_sat()
    assert problem.n == 50 and problem.formula.n_clauses == 213
    assert problem.optimum is not None and problem.optimum <= 213
    assert "RC2" in problem.optimum_source
    assert problem.describe()["clauses"] == 213


def test_factory_solve_options(tmp_path):
    assert max_sat(n=20, solve=False).optimum is None
    given = max_sat(n=20, optimum=85.0)
    assert given.optimum == 85.0 and given.optimum_source == "given by the user"
    with pytest.raises(ValueError, match="solve must be"):
        max_sat(n=20, solve="sometimes")
    # "auto" leaves instances beyond the size limit unsolved.
    big = max_sat(n=AUTO_SOLVE_LIMIT[0] + 1, ratio=2.0)
    assert big.optimum is None


def test_factory_without_python_sat(monkeypatch):
    # A missing optional dependency: "auto" skips, True explains how to install.
    monkeypatch.setitem(sys.modules, "pysat.examples.rc2", None)
    assert max_sat(n=20).optimum is None
    with pytest.raises(ImportError, match="pip install python-sat"):
        max_sat(n=20, solve=True)


def test_factory_reads_example_files():
    pytest.importorskip("pysat")
    demo = max_sat(EXAMPLES / "maxsat-greenhouse-valves.wcnf")
    assert demo.n == 6 and demo.formula.hard.sum() == 3
    brute, _ = exhaustive_maximum(demo.evaluate, 6)
    assert demo.optimum == brute
    generated = max_sat(EXAMPLES / "maxsat-random-3sat-n40-seed7.cnf")
    assert generated.formula.clauses == random_ksat(40, ratio=4.26, k=3, seed=7).clauses


# ---------------------------------------------------------------- readers


def test_read_cnf_with_comments_spanning_clauses_and_percent_end():
    formula = read_formula(DATA / "maxsat_spanning.cnf")
    assert formula.n_variables == 5
    assert formula.clauses == [(1, -2, 3), (-1, 2), (4, -5), (-3, 5, -4)]
    assert formula.weights.tolist() == [1, 1, 1, 1] and not formula.hard.any()


def test_read_classic_wcnf_with_top():
    formula = read_formula(DATA / "maxsat_classic_top.wcnf")
    assert formula.clauses == [(1, 2), (-1, -2), (1,), (2, -3), (3, 4), (-4,)]
    assert formula.hard.tolist() == [True, True, False, False, False, True]
    assert formula.weights[~formula.hard].tolist() == [3, 5, 7]


def test_read_classic_wcnf_without_top_is_all_soft():
    formula = read_formula(DATA / "maxsat_classic_no_top.wcnf")
    assert formula.clauses == [(1, 2), (-1,), (-2, 3)]
    assert formula.weights.tolist() == [2, 4, 1] and not formula.hard.any()


def test_read_headerless_wcnf():
    formula = read_formula(DATA / "maxsat_headerless.wcnf")
    assert formula.n_variables == 3
    assert formula.clauses == [(1, 2, 3), (-1, -2), (-3,), (1,), (2, 3)]
    assert formula.hard.tolist() == [True, True, False, False, False]
    assert formula.weights[~formula.hard].tolist() == [4, 2, 9]


def test_read_gzip_compressed_cnf():
    formula = read_formula(DATA / "maxsat_small.cnf.gz")
    assert formula.clauses == [(1, 2), (-1,), (-2, 3)]


def test_format_and_parse_round_trip(tmp_path):
    rng = np.random.default_rng(14)
    weighted = _random_weighted_formula(rng, n=7, m=25)
    plain = random_ksat(7, seed=2)
    for formula in (weighted, plain):
        path = tmp_path / "round.wcnf"
        write_formula(formula, path)
        again = read_formula(path)
        # Header-less files know only the variables that occur.
        assert again.clauses == formula.clauses
        assert again.hard.tolist() == formula.hard.tolist()
        assert again.weights[~again.hard].tolist() == formula.weights[~formula.hard].tolist()
    assert format_formula(plain).startswith("p cnf 7 30\n")


# ---------------------------------------------------------------- malformed files


def _error_for(tmp_path, text, name="bad.cnf", **options):
    path = tmp_path / name
    path.write_text(text)
    with pytest.raises(InstanceFormatError) as info:
        read_formula(path, **options)
    error = info.value
    assert isinstance(error, ValueError)
    assert str(path) in str(error)
    return error


@pytest.mark.parametrize(
    "header",
    [
        "p cnf 3",
        "p sat 3 2",
        "p cnf three 2",
        "p cnf 3 2 9",
        "p wcnf 3 2 5 7",
        "p cnf -3 2",
        "pcnf 3 2",
    ],
)
def test_reader_rejects_bad_header(tmp_path, header):
    error = _error_for(tmp_path, f"c fine\n{header}\n1 2 0\n-1 0\n")
    assert error.line == 2
    assert "expected" in error.reason
    assert "line 2" in str(error)


def test_reader_rejects_second_header(tmp_path):
    error = _error_for(tmp_path, "p cnf 2 1\n1 0\np cnf 2 1\n")
    assert error.line == 3 and "single 'p' header" in error.reason


def test_reader_rejects_literal_out_of_range(tmp_path):
    error = _error_for(tmp_path, "p cnf 3 2\n1 -2 0\n2 -4 0\n")
    assert error.line == 3
    assert "literal -4 is out of range" in error.reason and "1..3" in error.reason


def test_reader_rejects_non_integer_literal(tmp_path):
    error = _error_for(tmp_path, "p cnf 3 1\n1 x2 0\n")
    assert error.line == 2 and "expected an integer literal" in error.reason


def test_reader_rejects_missing_final_zero(tmp_path):
    error = _error_for(tmp_path, "p cnf 3 2\n1 2 0\n-1\n3\n")
    assert error.line == 3 and "expected a final 0" in error.reason


def test_reader_rejects_clause_cut_off_by_percent_line(tmp_path):
    error = _error_for(tmp_path, "p cnf 3 2\n1 2 0\n-1 3\n%\n0\n")
    assert error.line == 3 and "final 0" in error.reason


def test_reader_rejects_clause_count_mismatch_or_warns(tmp_path):
    error = _error_for(tmp_path, "c x\np cnf 3 3\n1 2 0\n-1 0\n")
    assert error.line == 2
    assert "declares 3 clauses but the file holds 2" in error.reason
    path = tmp_path / "bad.cnf"
    with pytest.warns(ClauseCountWarning, match="line 2"):
        formula = read_formula(path, strict_count=False)
    assert formula.n_clauses == 2


def test_reader_rejects_non_positive_weight(tmp_path):
    error = _error_for(tmp_path, "p wcnf 2 2 10\n10 1 2 0\n0 -1 0\n", name="bad.wcnf")
    assert error.line == 3 and "positive integer clause weight" in error.reason
    error = _error_for(tmp_path, "h 1 2 0\n-3 1 0\n", name="bad.wcnf")
    assert error.line == 2 and "positive integer clause weight" in error.reason


def test_reader_rejects_headerless_clause_without_zero(tmp_path):
    error = _error_for(tmp_path, "c new format\nh 1 2 0\n3 -1 2\n", name="bad.wcnf")
    assert error.line == 3 and "end with 0 on the same line" in error.reason
    error = _error_for(tmp_path, "h 1 0 2 0\n", name="bad.wcnf")
    assert error.line == 1 and "one clause per line" in error.reason


def test_reader_rejects_empty_file(tmp_path):
    error = _error_for(tmp_path, "c only a comment\n\n")
    assert error.line is None and "none" in error.reason


def test_reader_rejects_non_utf8_file(tmp_path):
    path = tmp_path / "binary.cnf"
    path.write_bytes(b"p cnf 1 1\n\xff\xfe 0\n")
    with pytest.raises(InstanceFormatError, match="UTF-8"):
        read_formula(path)


def test_reader_error_names_compressed_file(tmp_path):
    path = tmp_path / "bad.cnf.gz"
    with gzip.open(path, "wt") as handle:
        handle.write("p cnf 2 1\n1 3 0\n")
    with pytest.raises(InstanceFormatError, match=r"bad\.cnf\.gz, line 2"):
        read_formula(path)


def test_parse_formula_from_text():
    formula = parse_formula("p cnf 2 2\n1 -2 0\n2 0\n")
    assert formula.clauses == [(1, -2), (2,)]
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        parse_formula("p cnf 2 1\n1 0\n")
