"""The public API documents every parameter: each callable of ``optim.__all__`` has a numpydoc Parameters section."""

import inspect
import re

import pytest

import optim

_HEADER = re.compile(r"^(\S[^\n]*)\n-{3,}$", re.MULTILINE)


def documented_names(doc: str, section: str = "Parameters") -> set:
    """The names a numpydoc section lists (``a, b : type`` lists two; ``**options`` lists ``options``)."""
    headers = list(_HEADER.finditer(doc))
    for index, header in enumerate(headers):
        if header.group(1).strip() == section:
            end = headers[index + 1].start() if index + 1 < len(headers) else len(doc)
            body = doc[header.end() : end]
            entries = [line for line in body.splitlines() if line.strip() and not line[0].isspace()]
            return {name.strip().lstrip("*") for entry in entries for name in entry.split(" : ")[0].split(",")}
    return set()


def public_callables():
    return [name for name in optim.__all__ if callable(getattr(optim, name))]


def test_the_section_parser_reads_grouped_and_starred_names_and_can_find_a_gap():
    doc = "Summary.\n\nParameters\n----------\na, b : int\n    Two.\n**options\n    More.\n\nReturns\n-------\nint\n"
    assert documented_names(doc) == {"a", "b", "options"}
    assert documented_names(doc, "Returns") == {"int"}
    assert documented_names("Summary only.") == set()


def test_every_callable_of_the_public_api_is_listed():
    assert {"optimize", "maximize", "minimize", "Search", "SearchSettings", "StopRules", "SearchResult"} <= set(
        public_callables()
    )


@pytest.mark.parametrize("name", public_callables())
def test_every_parameter_is_documented(name):
    obj = getattr(optim, name)
    doc = inspect.getdoc(obj)
    assert doc, f"{name} has no docstring"
    parameters = [p for p in inspect.signature(obj).parameters if not p.startswith("_")]  # private dataclass fields
    missing = [p for p in parameters if p not in documented_names(doc)]
    assert not missing, f"{name}: the Parameters section does not name {missing}"


@pytest.mark.parametrize("name", ["optimize", "maximize", "minimize"])
def test_the_entry_points_document_what_they_return(name):
    assert documented_names(inspect.getdoc(getattr(optim, name)), "Returns") == {"SearchResult"}
