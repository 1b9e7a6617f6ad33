"""Evaluation: scores for a population, with a cache, recorded failures and parallel backends.

:mod:`optim.evaluation.scoring` scores candidates one call at a time (pure);
:mod:`optim.evaluation.evaluator` holds the :class:`Evaluator` (cache, counts,
failures); :mod:`optim.evaluation.backends` chooses where per-candidate
evaluations run: :mod:`~optim.evaluation.local` threads or processes, or
:mod:`~optim.evaluation.dask_backend` on a cluster, both shipping the
objective with :mod:`~optim.evaluation.shipping` and scheduling with
:mod:`~optim.evaluation.tasks`.
"""

from optim.evaluation.dask_backend import ClusterUnavailable
from optim.evaluation.evaluator import Evaluator
from optim.evaluation.scoring import EvaluationFailure, Failure, candidate_text, score_candidates
from optim.evaluation.shipping import WorkerError

__all__ = [
    "Evaluator",
    "EvaluationFailure",
    "Failure",
    "candidate_text",
    "score_candidates",
    "WorkerError",
    "ClusterUnavailable",
]
