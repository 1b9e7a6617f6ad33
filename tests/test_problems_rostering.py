"""Tests for optim_problems.rostering (staff rostering with an exact MILP reference)."""

import itertools
import os

import numpy as np
import pytest

from optim_problems.rostering import (
    DEFAULT_WEIGHTS,
    PENALTIES,
    StaffRoster,
    solve_exact,
    staff_roster,
)
from optim_problems.rostering_instances import RosterData, random_roster, read_roster

DATA = os.path.join(os.path.dirname(__file__), "data", "instances")
BUNDLED = os.path.join(os.path.dirname(__file__), os.pardir, "optim_problems", "instances")


def _slow_penalty(roster, row):
    """Per-candidate reference: the weighted penalty with plain Python loops."""
    data, w = roster.data, roster.weights
    people, shifts = roster.people, roster.shifts
    x = [[int(row[p * shifts + s]) for s in range(shifts)] for p in range(people)]
    total = 0.0
    for s in range(shifts):
        cover = sum(x[p][s] for p in range(people))
        total += w["under"] * max(int(data.demand[s]) - cover, 0)
        total += w["over"] * max(cover - int(data.demand[s]), 0)
    for p in range(people):
        total += w["excess"] * max(sum(x[p]) - int(data.max_shifts[p]), 0)
        for s in range(shifts):
            for t in range(s + 1, min(s + data.min_rest, shifts - 1) + 1):
                total += w["rest"] * x[p][s] * x[p][t]
            total += w["unavailable"] * x[p][s] * bool(data.unavailable[p, s])
            total += w["avoid"] * x[p][s] * bool(data.avoid[p, s])
    return total


def _all_rosters(n):
    return np.array(list(itertools.product((0, 1), repeat=n)), dtype=np.uint8)


ODD_WEIGHTS = {"under": 7.0, "over": 0.5, "excess": 3.0, "rest": 2.5, "unavailable": 11.0, "avoid": 0.25}


# --------------------------------------------------------------------------- evaluation


@pytest.mark.parametrize("min_rest", [0, 1, 2, 4])
def test_evaluate_matches_slow_reference(min_rest):
    rng = np.random.default_rng(21)
    roster = StaffRoster(random_roster(5, 4, 3, seed=min_rest, min_rest=min_rest), weights=ODD_WEIGHTS)
    X = rng.integers(0, 2, size=(150, roster.n)).astype(np.uint8)
    expected = [_slow_penalty(roster, row) for row in X]
    scores = roster.evaluate(X)
    assert scores.dtype == np.float64 and scores.shape == (150,)
    np.testing.assert_allclose(scores, expected, rtol=0, atol=1e-9)


def test_bundled_shelter_evaluate_matches_slow_reference():
    rng = np.random.default_rng(22)
    roster = staff_roster(os.path.join(BUNDLED, "roster-animal-shelter.yaml"), solve=False)
    X = (rng.random((100, roster.n)) < 0.2).astype(np.uint8)
    np.testing.assert_allclose(roster.evaluate(X), [_slow_penalty(roster, row) for row in X], atol=1e-9)


def test_penalty_counts_on_a_hand_example():
    # One person, one day of three shifts, demand [1, 0, 1], at most 1 shift.
    data = RosterData(["solo"], ["d"], ["a", "b", "c"], [1, 0, 1], [1], min_rest=1, avoid=[[0, 1, 0]])
    roster = StaffRoster(data)
    counts = roster.penalties(np.array([[1, 1, 1], [0, 0, 0], [1, 0, 1]], dtype=np.uint8))
    # all three: over 1 (shift b), excess 2, rest pairs (a,b), (b,c), avoid 1
    assert [counts[k][0] for k in PENALTIES] == [0, 1, 2, 2, 0, 1]
    # nothing worked: two people missing
    assert [counts[k][1] for k in PENALTIES] == [2, 0, 0, 0, 0, 0]
    # a and c: gap 2 is allowed by min_rest = 1, one shift too many
    assert [counts[k][2] for k in PENALTIES] == [0, 0, 1, 0, 0, 0]
    wider = StaffRoster(RosterData(["solo"], ["d"], ["a", "b", "c"], [1, 0, 1], [1], min_rest=2))
    assert wider.penalties(np.array([[1, 0, 1]], dtype=np.uint8))["rest"][0] == 1
    assert roster.evaluate(np.array([[0, 0, 0]], dtype=np.uint8))[0] == 2 * DEFAULT_WEIGHTS["under"]


def test_evaluate_rejects_bad_candidates():
    roster = StaffRoster(random_roster(2, 1, 3, seed=0))
    with pytest.raises(ValueError, match="shape"):
        roster.evaluate(np.zeros((1, 5), dtype=np.uint8))
    with pytest.raises(ValueError, match="0/1"):
        roster.evaluate(np.full((1, 6), 2, dtype=np.uint8))


def test_weights_are_validated():
    data = random_roster(2, 1, 3, seed=0)
    with pytest.raises(ValueError, match="w_rest"):
        StaffRoster(data, weights={"rest": -1.0})
    with pytest.raises(ValueError, match="unknown penalty"):
        StaffRoster(data, weights={"lateness": 1.0})


# --------------------------------------------------------------------------- exact reference


@pytest.mark.parametrize("seed,min_rest", [(0, 1), (1, 2), (2, 0), (3, 3)])
def test_milp_equals_brute_force_on_tiny_instances(seed, min_rest):
    data = random_roster(people=2, days=2, shifts_per_day=3, seed=seed, min_rest=min_rest)
    for weights in (None, ODD_WEIGHTS):
        roster = StaffRoster(data, weights=weights)
        value, x = solve_exact(roster)
        every = _all_rosters(roster.n)
        brute = roster.evaluate(every).min()
        assert value == pytest.approx(brute, abs=1e-9)
        assert _slow_penalty(roster, x) == pytest.approx(value, abs=1e-9)


def test_milp_objective_equals_evaluate_at_its_solution():
    # scipy.optimize.milp is the outside reference; its own objective value must
    # be the vectorised penalty of the roster it returns (solve_exact also
    # checks this internally; here it is recomputed by the slow reference).
    for seed in range(3):
        roster = StaffRoster(random_roster(6, 7, 3, seed=seed), weights=ODD_WEIGHTS if seed else None)
        value, x = solve_exact(roster)
        assert roster.evaluate(x[None, :])[0] == pytest.approx(value, abs=1e-9)
        assert _slow_penalty(roster, x) == pytest.approx(value, abs=1e-9)
        rng = np.random.default_rng(seed)
        others = rng.integers(0, 2, size=(500, roster.n)).astype(np.uint8)
        assert roster.evaluate(others).min() >= value - 1e-9


def test_tiny_fixture_optimum_by_brute_force():
    roster = staff_roster(os.path.join(DATA, "roster-tiny.yaml"))
    assert roster.n == 12
    every = _all_rosters(roster.n)
    assert roster.optimum == pytest.approx(roster.evaluate(every).min(), abs=1e-9)
    assert roster.optimum_source


# --------------------------------------------------------------------------- factory


def test_factory_is_seeded_and_solves_by_default():
    first = staff_roster(seed=3)
    again = staff_roster(seed=3)
    other = staff_roster(seed=4)
    assert first.n == 6 * 21 and first.goal == "minimize"
    np.testing.assert_array_equal(first.data.demand, again.data.demand)
    np.testing.assert_array_equal(first.data.unavailable, again.data.unavailable)
    assert not np.array_equal(first.data.unavailable, other.data.unavailable)
    assert first.optimum == pytest.approx(solve_exact(first)[0], abs=1e-9)
    assert first.variable_names[0] == "p0.day1-early"
    assert staff_roster(seed=3, solve=False).optimum is None
    with pytest.raises(ValueError, match="solve must be"):
        staff_roster(seed=3, solve="maybe")


def test_factory_weights_and_overrides():
    roster = staff_roster(
        os.path.join(DATA, "roster-tiny.yaml"), min_rest=0, max_shifts=6, w_under=1, w_pref=3, solve=False
    )
    assert roster.data.min_rest == 0 and roster.data.max_shifts.tolist() == [6, 6]
    assert roster.weights["under"] == 1.0 and roster.weights["avoid"] == 3.0
    with pytest.raises(ValueError, match="w_over"):
        staff_roster(people=2, days=1, w_over=-2)


def test_bundled_shelter_instance():
    roster = staff_roster(os.path.join(BUNDLED, "roster-animal-shelter.yaml"))
    assert roster.people == 7 and roster.shifts == 21
    assert roster.variable_names[0] == "Mira.mon-morning"
    value, x = solve_exact(roster)
    assert roster.optimum == roster.evaluate(x[None, :])[0] == pytest.approx(value, abs=1e-9)


# --------------------------------------------------------------------------- files


def test_reader_expands_days_shifts_and_slots():
    data = read_roster(os.path.join(DATA, "roster-tiny.yaml"))
    assert data.person_names == ["Ada", "Bo"]
    assert data.slot_names == ["sat-early", "sat-late", "sat-night", "sun-early", "sun-late", "sun-night"]
    assert data.demand.tolist() == [1, 2, 1, 1, 1, 1]
    assert data.max_shifts.tolist() == [2, 3] and data.min_rest == 2
    assert data.unavailable.astype(int).tolist() == [[0, 0, 0, 0, 0, 1], [1, 1, 1, 0, 0, 0]]
    assert data.avoid.astype(int).tolist() == [[0] * 6, [0, 0, 1, 0, 0, 1]]


def test_reader_accepts_a_day_count(tmp_path):
    path = tmp_path / "count.yaml"
    path.write_text(
        "days: 3\nshifts: [day]\nmax_shifts: 2\ndemand: {day: 1}\npeople:\n  - name: Al\n", encoding="utf-8"
    )
    data = read_roster(str(path))
    assert data.slot_names == ["day1-day", "day2-day", "day3-day"] and data.min_rest == 1


GOOD = (
    "days: [mon, tue]\n"  # line 1
    "shifts: [early, late]\n"  # line 2
    "max_shifts: 2\n"  # line 3
    "demand:\n"  # line 4
    "  early: 1\n"  # line 5
    "  late: [1, 2]\n"  # line 6
    "people:\n"  # line 7
    "  - name: Ada\n"  # line 8
    "    unavailable: [mon-late]\n"  # line 9
)

ERRORS = [
    ("syntax", GOOD.replace("[1, 2]", "[1, 2"), r"not valid YAML"),
    ("top-level", "- mon\n", r"line 1: expected a YAML mapping"),
    ("missing-key", GOOD.replace("max_shifts: 2\n", ""), r"line 1: missing key 'max_shifts'"),
    ("unknown-key", GOOD + "budget: 3\n", r"line 10: unknown key 'budget' at the top level"),
    ("duplicate-key", GOOD + "max_shifts: 4\n", r"line 10: duplicate key 'max_shifts'"),
    ("bad-days", GOOD.replace("days: [mon, tue]", "days: mon"), r"line 1: 'days' must be a positive count"),
    ("duplicate-day", GOOD.replace("[mon, tue]", "[mon, mon]"), r"line 1: duplicate name 'mon' in 'days'"),
    ("empty-shifts", GOOD.replace("[early, late]", "[]"), r"line 2: 'shifts' must be a non-empty list"),
    ("day-shift-clash", GOOD.replace("[early, late]", "[early, mon]"), r"line 2: 'mon' names both a day"),
    (
        "bad-max",
        GOOD.replace("max_shifts: 2", "max_shifts: -1"),
        r"line 3: 'max_shifts' must be a non-negative",
    ),
    ("bad-min-rest", GOOD + "min_rest: 1.5\n", r"line 10: 'min_rest' must be a non-negative integer"),
    (
        "demand-not-map",
        GOOD.replace("demand:\n  early: 1\n  late: [1, 2]\n", "demand: 3\n"),
        r"line 4: 'demand' must map",
    ),
    (
        "demand-missing-shift",
        GOOD.replace("  early: 1\n", ""),
        r"line 5: 'demand' has no entry for shift 'early'",
    ),
    (
        "demand-unknown-shift",
        GOOD.replace("  early: 1\n", "  early: 1\n  noon: 2\n"),
        r"line 6: unknown key 'noon' in 'demand'",
    ),
    ("demand-length", GOOD.replace("[1, 2]", "[1, 2, 3]"), r"line 6: demand of 'late' must list 2 numbers"),
    (
        "demand-value",
        GOOD.replace("early: 1", "early: many"),
        r"line 5: demand of 'early' must be a non-negative",
    ),
    ("people-empty", GOOD.split("people:")[0] + "people: []\n", r"line 7: 'people' must be a non-empty list"),
    ("person-not-map", GOOD + "  - Bo\n", r"line 10: person 2 must be a mapping"),
    ("person-no-name", GOOD + "  - max_shifts: 1\n", r"line 10: person 2 needs a non-empty 'name'"),
    ("person-duplicate", GOOD + "  - name: Ada\n", r"line 10: duplicate person name 'Ada'"),
    ("person-unknown-key", GOOD + "    pay: 12\n", r"line 10: unknown key 'pay' for a person"),
    (
        "person-bad-max",
        GOOD + "    max_shifts: lots\n",
        r"line 10: max_shifts of 'Ada' must be a non-negative",
    ),
    (
        "unknown-slot",
        GOOD.replace("[mon-late]", "[wed-late]"),
        r"line 9: unknown shift 'wed-late' in 'unavailable'",
    ),
    (
        "unknown-slot-block-list",
        GOOD + "    avoid:\n      - mon\n      - fri-early\n",
        r"line 12: unknown shift 'fri-early' in 'avoid'",
    ),
    (
        "demand-block-list-value",
        GOOD.replace("  late: [1, 2]\n", "  late:\n    - 1\n    - -3\n"),
        r"line 8: demand of 'late' must be a non-negative",
    ),
    ("slots-not-list", GOOD.replace("[mon-late]", "mon-late"), r"line 9: 'unavailable' must be a list"),
]


@pytest.mark.parametrize("label,text,message", ERRORS, ids=[e[0] for e in ERRORS])
def test_reader_rejects_malformed_files(tmp_path, label, text, message):
    path = tmp_path / f"{label}.yaml"
    path.write_text(text, encoding="utf-8")
    with pytest.raises(ValueError, match=message) as caught:
        read_roster(str(path))
    assert str(path) in str(caught.value)


def test_reader_accepts_the_good_template(tmp_path):
    path = tmp_path / "good.yaml"
    path.write_text(GOOD, encoding="utf-8")
    data = read_roster(str(path))
    assert data.demand.tolist() == [1, 1, 1, 2] and data.unavailable.tolist() == [[False, True, False, False]]


def test_reader_rejects_other_formats(tmp_path):
    path = tmp_path / "roster.csv"
    path.write_text("name\nAda\n", encoding="utf-8")
    with pytest.raises(ValueError, match=r"roster\.csv: unknown roster format '\.csv'"):
        read_roster(str(path))


def test_compressed_roster_is_read(tmp_path):
    import bz2

    target = tmp_path / "good.yaml.bz2"
    with bz2.open(target, "wt", encoding="utf-8") as packed:
        packed.write(GOOD)
    assert read_roster(str(target)).person_names == ["Ada"]
