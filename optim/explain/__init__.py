"""``optim explain``: what a run learned, read from its run folder alone (the objective is never called again).

:func:`explain_run` reads a run folder (:func:`load_run`) and returns an
:class:`Explanation`: the settings the best candidates agree on, the pairs of
settings that act together and the pairs the model linked. :func:`write_reports`
writes it as ``explain.md`` and ``explain.json``, :func:`short_lines` as the
printed summary, :func:`write_pictures` draws it, and :func:`run_summary` gives
the closing lines of ``optim run``. The statistics themselves, on plain arrays,
are in :mod:`optim.explain.effects`.
"""

from optim.explain.findings import FEW_CANDIDATES, Explanation, PairFinding, VariableFinding, explain_run, pair_sentence
from optim.explain.links import LinkFinding
from optim.explain.loading import RunData, load_run
from optim.explain.pictures import write_pictures
from optim.explain.report import render_markdown, short_lines, to_document, write_reports
from optim.explain.summary import run_summary

__all__ = [
    "FEW_CANDIDATES",
    "Explanation",
    "LinkFinding",
    "PairFinding",
    "RunData",
    "VariableFinding",
    "explain_run",
    "load_run",
    "pair_sentence",
    "render_markdown",
    "run_summary",
    "short_lines",
    "to_document",
    "write_pictures",
    "write_reports",
]
