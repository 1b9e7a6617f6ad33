"""The registry of search methods: what each one is, which settings it reads and how it is built.

Configs, sweeps, the command line and the reports ask this registry about a method instead of
listing method names themselves; registering a method is one :class:`MethodSpec` in
:data:`METHOD_SPECS`.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable, Dict, Tuple, Union

from optim.errors import ParameterError
from optim.methods.base import Method
from optim.methods.eda import DistributionSearch
from optim.methods.hillclimb import HillClimber
from optim.methods.ladder import PopulationLadder
from optim.methods.random_search import RandomSearch
from optim.parameters import one_of, whole_number

__all__ = [
    "MethodSpec",
    "METHOD_SPECS",
    "METHODS",
    "AUTO",
    "AUTO_STEP",
    "method_spec",
    "learns_model",
    "checked_population",
    "make_method",
]

#: The ``population`` value that asks for no fixed population: the model-based methods run a
#: :class:`PopulationLadder`; the hill climber and random search log every :data:`AUTO_STEP` evaluations.
AUTO = "auto"
AUTO_STEP = 100

_POPULATION_RULE = "a whole number >= 2, or 'auto' (no fixed population: runs of doubling size share the budget)"


@dataclass(frozen=True)
class MethodSpec:
    """One search method as the driver, the configs and the reports see it.

    Attributes
    ----------
    name : str
        The name configs, sweeps and the command line use.
    description : str
        One line saying what the method does.
    build : callable
        ``build(problem, rng, **settings)`` returns the :class:`~optim.methods.base.Method`; ``settings``
        are values of the :class:`~optim.search.SearchSettings` fields named in :attr:`settings`.
    settings : tuple of str
        The fields of :class:`~optim.search.SearchSettings` the method reads.
    learns_model : bool
        Whether the method fits a probability model to its selected candidates (so a run has a model,
        its entropy and its dependencies to show).
    uses_population : bool
        Whether ``population`` sizes a pool the method selects from; otherwise it only sets how many
        evaluations one logged step holds.
    """

    name: str
    description: str
    build: Callable[..., Method]
    settings: Tuple[str, ...]
    learns_model: bool
    uses_population: bool


def checked_population(population: Union[int, str]) -> Union[int, str]:
    """``population`` when it is :data:`AUTO` or a whole number >= 2 (returned as an ``int``).

    Parameters
    ----------
    population : int or str
        The value of the ``population`` setting.

    Returns
    -------
    int or str
        The checked value.
    """
    if isinstance(population, str) and population == AUTO:
        return AUTO
    try:
        return whole_number("population", population, least=2)
    except ParameterError:
        raise ParameterError("population", _POPULATION_RULE, population) from None


def _model_search_builder(model: str) -> Callable[..., Method]:
    """The builder of the estimation-of-distribution method with the model ``model``."""

    def build(problem, rng, population, **options) -> Method:
        if population == AUTO:
            return PopulationLadder(problem, rng, model=model, **options)
        return DistributionSearch(problem, rng, model=model, population=population, **options)

    return build


def _build_hill_climber(problem, rng, population, jobs=1) -> Method:
    return HillClimber(problem, rng, population=AUTO_STEP if population == AUTO else population, lookahead=jobs)


def _build_random_search(problem, rng, population) -> Method:
    return RandomSearch(problem, rng, population=AUTO_STEP if population == AUTO else population)


_MODEL_SETTINGS = ("population", "select", "prior", "elitism")

#: Every registered method, by name, in the order the names are listed to users.
METHOD_SPECS: Dict[str, MethodSpec] = {
    spec.name: spec
    for spec in (
        MethodSpec(
            "tree",
            "estimation of distribution with a dependency tree (Chow-Liu) fitted to the selected candidates",
            _model_search_builder("tree"),
            _MODEL_SETTINGS,
            learns_model=True,
            uses_population=True,
        ),
        MethodSpec(
            "forest",
            "estimation of distribution with a dependency forest: tree edges kept only where a test finds them",
            _model_search_builder("forest"),
            _MODEL_SETTINGS + ("alpha",),
            learns_model=True,
            uses_population=True,
        ),
        MethodSpec(
            "univariate",
            "estimation of distribution with independent variables (no dependencies)",
            _model_search_builder("univariate"),
            _MODEL_SETTINGS,
            learns_model=True,
            uses_population=True,
        ),
        MethodSpec(
            "hillclimb",
            "random-restart first-improvement hill climbing over single-variable changes",
            _build_hill_climber,
            ("population", "jobs"),
            learns_model=False,
            uses_population=False,
        ),
        MethodSpec(
            "random",
            "uniform random candidates, the baseline every method must beat",
            _build_random_search,
            ("population",),
            learns_model=False,
            uses_population=False,
        ),
    )
}

#: The method names configs, sweeps and the command line accept.
METHODS: Tuple[str, ...] = tuple(METHOD_SPECS)


def method_spec(name: str) -> MethodSpec:
    """The registered method ``name``; any other name raises :class:`~optim.errors.ParameterError`.

    Parameters
    ----------
    name : str
        A method name.

    Returns
    -------
    MethodSpec
        Its entry in :data:`METHOD_SPECS`.
    """
    return METHOD_SPECS[one_of("method", name, METHODS)]


def learns_model(name: str) -> bool:
    """Whether the method ``name`` fits a probability model (``False`` for a name not registered).

    Parameters
    ----------
    name : str
        A method name, e.g. as recorded in a run folder.

    Returns
    -------
    bool
        ``True`` for the model-based methods.
    """
    spec = METHOD_SPECS.get(name) if isinstance(name, str) else None
    return spec is not None and spec.learns_model


def make_method(name: str, problem, rng, population: Union[int, str], **settings) -> Method:
    """Build the method ``name`` from the settings it reads.

    Parameters
    ----------
    name : str
        A registered method name (see :data:`METHODS`).
    problem : Problem
        The objective.
    rng : numpy.random.Generator
        The method's random stream.
    population : int or str
        Candidates per generation, or ``"auto"``: a :class:`PopulationLadder` for the model-based
        methods, a step of :data:`AUTO_STEP` evaluations for the others.
    **settings
        Values of other :class:`~optim.search.SearchSettings` fields; those the method does not read
        are ignored, those it reads and not given take the method's defaults.

    Returns
    -------
    Method
        The method, ready for its first step.
    """
    spec = method_spec(name)
    options = {key: value for key, value in settings.items() if key in spec.settings}
    return spec.build(problem, rng, checked_population(population), **options)
