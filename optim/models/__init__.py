"""Probability models over discrete vectors, all with one interface (see :class:`Model`)."""

from optim.models.base import Model
from optim.models.forest import DependencyForest
from optim.models.tree import DependencyTree
from optim.models.univariate import Univariate

__all__ = ["Model", "Univariate", "DependencyTree", "DependencyForest", "MODELS", "make_model"]

#: Model classes by the name a run config uses for them.
MODELS = {"univariate": Univariate, "tree": DependencyTree, "forest": DependencyForest}


def make_model(kind: str, cardinality, prior: float = 1.0, **options) -> Model:
    """Build a model by name; an unknown name raises ``ValueError`` listing the valid ones."""
    try:
        cls = MODELS[kind]
    except KeyError:
        raise ValueError(f"Unknown model {kind!r}; choose one of {sorted(MODELS)}.") from None
    return cls(cardinality=cardinality, prior=prior, **options)
