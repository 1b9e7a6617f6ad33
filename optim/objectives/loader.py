"""Turn a problem reference and its parameters into a :class:`~optim.problem.Problem`.

A reference names a Python object: ``path/to/file.py:callable`` (a file,
relative paths resolved against a base folder) or ``package.module:callable``
(an importable module). :func:`build_problem` then decides how to use the
object (see its docstring) and checks the parameters against its signature,
so that every mistake is reported as one :class:`ProblemError` line.
"""

from __future__ import annotations

import difflib
import importlib
import importlib.util
import inspect
import itertools
import re
import sys
import traceback
from pathlib import Path
from typing import Any, Callable, Mapping, NamedTuple, Optional

from optim.errors import OptimError
from optim.problem import FunctionProblem, Problem
from optim.text import first_line

__all__ = [
    "ProblemError",
    "FactoryParameter",
    "REQUIRED",
    "OBJECTIVE_PARAMETERS",
    "load_object",
    "build_problem",
    "factory_parameters",
]

#: Default of a parameter that has none (it must be given).
REQUIRED = inspect.Parameter.empty

#: The parameters accepted with a plain objective function, as given to
#: :class:`~optim.problem.FunctionProblem`.
OBJECTIVE_PARAMETERS = ("n", "cardinality", "goal", "vectorized", "optimum", "variable_names")

_module_counter = itertools.count()


class ProblemError(OptimError, ValueError):
    """A problem cannot be found, loaded or built; the message says why."""


class FactoryParameter(NamedTuple):
    """One parameter of a problem factory."""

    name: str
    #: The default value, or :data:`REQUIRED` when there is none.
    default: Any
    #: The text of the numpydoc "Parameters" entry ("" when undocumented).
    description: str


def _describe_exception(exc: BaseException, filename: Optional[str] = None) -> str:
    """``Type: first line`` of ``exc``, with where it arose.

    The line is the last one run in ``filename``; with ``filename=None`` it is
    the innermost line of Python source (not of the import machinery).
    """
    if isinstance(exc, SyntaxError):
        where = f" in {exc.filename}" if exc.filename and exc.filename != filename else ""
        return f"SyntaxError{where} at line {exc.lineno}: {exc.msg}"
    where = ""
    for frame, lineno in traceback.walk_tb(exc.__traceback__):
        frame_file = frame.f_code.co_filename
        if filename is not None and frame_file == filename:
            where = f" (line {lineno})"
        elif filename is None and not frame_file.startswith("<"):
            where = f" ({frame_file}, line {lineno})"
    return f"{type(exc).__name__}: {first_line(exc, with_type=False)}{where}"


def _public_callables(namespace: Mapping[str, Any], module_name: Optional[str]) -> list[str]:
    """Names of the public callables and Problem instances defined in a module."""
    usable = {
        name: value
        for name, value in namespace.items()
        if not name.startswith("_") and (callable(value) or isinstance(value, Problem))
    }
    own = [
        name
        for name, value in usable.items()
        if isinstance(value, Problem) or getattr(value, "__module__", None) == module_name
    ]
    return sorted(own or usable)


def _load_file(path: Path, attribute: str, use: str) -> Any:
    if path.suffix != ".py":
        raise ProblemError(f"objective file must be a .py file; got {path} (from {use!r})")
    if not path.is_file():
        raise ProblemError(f"objective file not found: {path} (from {use!r})")
    stem = re.sub(r"\W", "_", path.stem)
    module_name = f"_optim_user_objective_{next(_module_counter)}_{stem}"
    spec = importlib.util.spec_from_file_location(module_name, str(path))
    if spec is None or spec.loader is None:
        raise ProblemError(f"cannot load objective file {path}")
    module = importlib.util.module_from_spec(spec)
    folder = str(path.parent)
    sys.modules[module_name] = module
    sys.path.insert(0, folder)
    try:
        spec.loader.exec_module(module)
    except (Exception, SystemExit) as exc:
        sys.modules.pop(module_name, None)
        raise ProblemError(f"cannot import objective file {path}: {_describe_exception(exc, str(path))}") from exc
    finally:
        if folder in sys.path:
            sys.path.remove(folder)
    if not hasattr(module, attribute):
        names = _public_callables(vars(module), module_name)
        listing = ", ".join(names) if names else "none"
        raise ProblemError(f"no callable {attribute!r} in {path}; callables there: {listing}")
    return getattr(module, attribute)


def _load_module(module_name: str, attribute: str) -> Any:
    try:
        module = importlib.import_module(module_name)
    except ModuleNotFoundError as exc:
        missing = exc.name or ""
        if module_name == missing or module_name.startswith(missing + "."):
            raise ProblemError(f"cannot import module {module_name!r}: no module named {missing!r}") from exc
        raise ProblemError(f"cannot import module {module_name!r}: {_describe_exception(exc)}") from exc
    except Exception as exc:
        raise ProblemError(f"cannot import module {module_name!r}: {_describe_exception(exc)}") from exc
    if not hasattr(module, attribute):
        names = _public_callables(vars(module), module.__name__)
        listing = ", ".join(names) if names else "none"
        raise ProblemError(f"no callable {attribute!r} in module {module_name!r}; callables there: {listing}")
    return getattr(module, attribute)


def load_object(use: str, base_dir=None) -> Any:
    """Load the object named by ``path/to/file.py:name`` or ``package.module:name``.

    Parameters
    ----------
    use : str
        The reference. The part before the last ``:`` is a file when it ends
        in ``.py`` or contains a path separator, otherwise a module name.
    base_dir : str, pathlib.Path or None
        Folder that relative file paths are resolved against (the folder of
        the configuration file); the current directory when ``None``.

    Returns
    -------
    object
        The named attribute. A file is executed anew, under a unique module
        name, each time it is loaded; its folder is on ``sys.path`` only while
        it runs (so it may import modules beside it). Modules are imported
        through the usual ``sys.path``.
    """
    if not isinstance(use, str) or ":" not in use:
        raise ProblemError(f"expected 'path/to/file.py:callable' or 'package.module:callable'; got {use!r}")
    target, attribute = (part.strip() for part in use.rsplit(":", 1))
    if not target or not attribute.isidentifier():
        raise ProblemError(
            f"expected 'path/to/file.py:callable' or 'package.module:callable' with a Python name "
            f"after ':'; got {use!r}"
        )
    if target.endswith(".py") or "/" in target or "\\" in target:
        path = Path(target).expanduser()
        if not path.is_absolute():
            path = Path(base_dir if base_dir is not None else Path.cwd()) / path
        return _load_file(path.resolve(), attribute, use)
    return _load_module(target, attribute)


def _signature(function: Callable) -> Optional[inspect.Signature]:
    try:
        return inspect.signature(function)
    except (TypeError, ValueError):
        return None


def _keyword_names(signature: inspect.Signature) -> list[str]:
    kinds = (inspect.Parameter.POSITIONAL_OR_KEYWORD, inspect.Parameter.KEYWORD_ONLY)
    return [p.name for p in signature.parameters.values() if p.kind in kinds]


def _takes_var_keywords(signature: inspect.Signature) -> bool:
    return any(p.kind == inspect.Parameter.VAR_KEYWORD for p in signature.parameters.values())


def _required_positional(signature: inspect.Signature) -> int:
    kinds = (inspect.Parameter.POSITIONAL_ONLY, inspect.Parameter.POSITIONAL_OR_KEYWORD)
    return sum(1 for p in signature.parameters.values() if p.kind in kinds and p.default is inspect.Parameter.empty)


def _is_objective_function(target: Callable, params: Mapping[str, Any]) -> bool:
    if "n" not in params:
        return False
    signature = _signature(target)
    if signature is None:
        return True
    required_keywords = [
        p
        for p in signature.parameters.values()
        if p.kind == inspect.Parameter.KEYWORD_ONLY and p.default is inspect.Parameter.empty
    ]
    return (
        "n" not in signature.parameters
        and not _takes_var_keywords(signature)
        and not required_keywords
        and _required_positional(signature) == 1
    )


def _unknown_parameter(key: str, accepted: list[str], label: str, hint: str = "") -> ProblemError:
    close = difflib.get_close_matches(key, accepted, n=1)
    hint = f"; did you mean {close[0]!r}?" if close else hint
    listing = ", ".join(accepted) if accepted else "none"
    return ProblemError(f"unknown parameter {key!r} for problem {label!r} (accepted: {listing}){hint}")


def _check_factory_parameters(factory: Callable, params: Mapping[str, Any], label: str) -> None:
    signature = _signature(factory)
    if signature is None:
        return
    accepted = _keyword_names(signature)
    if not _takes_var_keywords(signature):
        for key in params:
            if key not in accepted:
                hint = ""
                if key == "n" and not isinstance(factory, type):
                    hint = "; an objective function must take exactly one required argument, the candidate"
                raise _unknown_parameter(key, accepted, label, hint)
    variadic = (inspect.Parameter.VAR_POSITIONAL, inspect.Parameter.VAR_KEYWORD)
    required = [
        p.name for p in signature.parameters.values() if p.kind not in variadic and p.default is inspect.Parameter.empty
    ]
    missing = [name for name in required if name not in params]
    if missing:
        hint = ""
        if len(required) == 1 and "n" not in signature.parameters and not isinstance(factory, type):
            hint = "; if it is an objective function, give the number of variables as parameter 'n'"
        raise ProblemError(
            f"missing parameter {missing[0]!r} for problem {label!r} (accepted: {', '.join(accepted) or 'none'}){hint}"
        )


def _wrap_objective(function: Callable, params: Mapping[str, Any], label: str) -> Problem:
    for key in params:
        if key not in OBJECTIVE_PARAMETERS:
            raise _unknown_parameter(key, list(OBJECTIVE_PARAMETERS), label)
    vectorized = params.get("vectorized", False)
    if not isinstance(vectorized, bool):
        raise ProblemError(f"parameter 'vectorized' for problem {label!r} must be true or false; got {vectorized!r}")
    try:
        return FunctionProblem(function, **params)
    except (ValueError, TypeError) as exc:
        raise ProblemError(f"problem {label!r}: {first_line(exc, with_type=False)}") from exc


def build_problem(
    target: Any,
    params: Optional[Mapping[str, Any]] = None,
    label: Optional[str] = None,
    plain_functions: bool = True,
) -> Problem:
    """Make a :class:`~optim.problem.Problem` from a loaded object and parameters.

    The object is used by the first rule that applies:

    1. a ``Problem`` instance is returned as it is; ``params`` must be empty;
    2. a subclass of ``Problem`` is a factory;
    3. when ``plain_functions`` is true, a callable is a plain objective
       function if ``params`` contains ``n`` and the callable has no parameter
       called ``n``, no ``**kwargs`` and exactly one required argument (the
       candidate): it is wrapped in :class:`~optim.problem.FunctionProblem`,
       and ``params`` may only hold :data:`OBJECTIVE_PARAMETERS`;
    4. any other callable is a factory.

    A factory is called with ``params`` as keyword arguments and must return
    a ``Problem``.

    Parameters
    ----------
    target : object
        A Problem instance, a Problem subclass or a callable.
    params : mapping or None
        Parameters of the problem (from the configuration file).
    label : str or None
        How the problem is named in error messages.
    plain_functions : bool
        Whether rule 3 applies (false for registered factories).

    Returns
    -------
    Problem
        The built problem.

    Raises
    ------
    ProblemError
        For unknown or missing parameters, a factory rejecting a value
        (``ValueError`` or ``TypeError``), or a result that is not a Problem.
    """
    label = label if label is not None else getattr(target, "__name__", type(target).__name__)
    if params is None:
        params = {}
    if not isinstance(params, Mapping):
        raise ProblemError(f"parameters of problem {label!r} must be a mapping; got {type(params).__name__}")
    for key in params:
        if not isinstance(key, str):
            raise ProblemError(f"parameter names of problem {label!r} must be strings; got {key!r}")
    params = dict(params)
    if isinstance(target, Problem):
        if params:
            raise ProblemError(f"{label!r} is a ready-made Problem and takes no parameters; got {', '.join(params)}")
        return target
    if isinstance(target, type) and not issubclass(target, Problem):
        raise ProblemError(f"{label!r} is a class but not a subclass of Problem")
    if not callable(target):
        raise ProblemError(f"{label!r} is a {type(target).__name__}, not a Problem, a Problem subclass or a callable")
    if plain_functions and not isinstance(target, type) and _is_objective_function(target, params):
        return _wrap_objective(target, params, label)
    _check_factory_parameters(target, params, label)
    try:
        problem = target(**params)
    except (ValueError, TypeError) as exc:
        raise ProblemError(f"problem {label!r}: {first_line(exc, with_type=False)}") from exc
    if not isinstance(problem, Problem):
        raise ProblemError(f"factory {label!r} returned a {type(problem).__name__}, not a Problem")
    return problem


def _section_lines(doc: str, title: str) -> list[str]:
    lines = inspect.cleandoc(doc).splitlines()
    for index in range(len(lines) - 1):
        underline = lines[index + 1].strip()
        if lines[index].strip() == title and underline and set(underline) == {"-"}:
            body = []
            for position in range(index + 2, len(lines)):
                following = lines[position + 1].strip() if position + 1 < len(lines) else ""
                if lines[position].strip() and following and set(following) == {"-"}:
                    break
                body.append(lines[position])
            return body
    return []


def _docstring_parameters(doc: Optional[str]) -> dict[str, str]:
    """Map each name in a numpydoc "Parameters" section to its description."""
    if not doc:
        return {}
    descriptions: dict[str, list[str]] = {}
    current: list[str] = []
    for line in _section_lines(doc, "Parameters"):
        if not line.strip():
            continue
        if line[0].isspace():
            current.append(line.strip())
            continue
        current = []
        names = line.split(" :", 1)[0].split(":", 1)[0]
        for name in names.split(","):
            descriptions[name.strip().lstrip("*")] = current
    return {name: " ".join(text) for name, text in descriptions.items()}


def factory_parameters(factory: Callable) -> list[FactoryParameter]:
    """The keyword parameters of a problem factory, with defaults and descriptions.

    Parameters
    ----------
    factory : callable or Problem subclass
        Its signature gives the names and defaults; the numpydoc "Parameters"
        section of its docstring (for a class, of the class or its
        ``__init__``) gives the descriptions.

    Returns
    -------
    list of FactoryParameter
        ``(name, default, description)`` in signature order; ``default`` is
        :data:`REQUIRED` when the parameter has none.
    """
    signature = _signature(factory)
    if signature is None:
        return []
    documented = _docstring_parameters(factory.__doc__)
    if isinstance(factory, type) and not documented:
        documented = _docstring_parameters(factory.__init__.__doc__)
    return [
        FactoryParameter(name, signature.parameters[name].default, documented.get(name, ""))
        for name in _keyword_names(signature)
    ]
