"""The registry of methods: the names everything accepts, what each method is, and building one by name."""

import dataclasses

import numpy as np
import pytest

from optim.errors import ParameterError
from optim.methods import (
    METHOD_SPECS,
    METHODS,
    DistributionSearch,
    HillClimber,
    Method,
    PopulationLadder,
    RandomSearch,
    learns_model,
    make_method,
    method_spec,
)
from optim.runs.config import SEARCH_KEYS
from optim.search import SearchSettings
from optim_problems.onemax import onemax


def test_the_names_are_those_of_the_registry_in_order():
    assert METHODS == tuple(METHOD_SPECS) == ("tree", "forest", "univariate", "hillclimb", "random")
    assert all(method_spec(name).name == name for name in METHODS)


def test_model_based_methods_are_told_by_the_registry():
    assert [name for name in METHODS if learns_model(name)] == ["tree", "forest", "univariate"]
    assert learns_model("genetic") is False and learns_model(None) is False
    assert [name for name in METHODS if method_spec(name).uses_population] == ["tree", "forest", "univariate"]


def test_each_spec_is_frozen_described_and_reads_known_settings():
    fields = {f.name for f in dataclasses.fields(SearchSettings)}
    for spec in METHOD_SPECS.values():
        assert spec.description and "\n" not in spec.description
        assert set(spec.settings) <= fields and "population" in spec.settings
        with pytest.raises(dataclasses.FrozenInstanceError):
            spec.name = "other"
    assert "alpha" in method_spec("forest").settings and "alpha" not in method_spec("tree").settings
    assert set(SEARCH_KEYS) == fields


@pytest.mark.parametrize(
    "name, population, kind",
    [
        ("tree", 50, DistributionSearch),
        ("forest", "auto", PopulationLadder),
        ("univariate", 50, DistributionSearch),
        ("hillclimb", 50, HillClimber),
        ("random", 50, RandomSearch),
    ],
)
def test_make_method_builds_the_registered_class_with_its_settings(name, population, kind):
    settings = dict(select=0.25, prior=2.0, elitism=False, alpha=0.05, jobs=3)
    method = make_method(name, onemax(12), np.random.default_rng(0), population=population, **settings)
    assert isinstance(method, kind) and isinstance(method, Method)
    if kind is DistributionSearch:
        assert (method.population, method.select, method.elitism, method.name) == (50, 0.25, False, name)
    if kind is PopulationLadder:
        assert (method.select, method.prior, method.alpha, method.model_kind) == (0.25, 2.0, 0.05, "forest")
    if kind is HillClimber:
        assert method.lookahead == 3


def test_an_unknown_method_is_refused_with_the_registered_names():
    with pytest.raises(ParameterError, match=r"^The 'method' parameter must be one of tree, forest, univariate"):
        make_method("annealing", onemax(5), np.random.default_rng(0), population=10)
    with pytest.raises(ParameterError, match="'method'"):
        method_spec("annealing")
