"""The public API is typed: every public function and class carries annotations, and the package says so.

Sources: PEP 484 (type hints: a function is typed when each parameter and its return are annotated; a class
is constructed through its ``__init__``, whose parameters are annotated) and PEP 561 (a package that ships
its own annotations carries a ``py.typed`` marker file inside the package, and its distribution must
include that file). "Public" is every name in ``cladewright.__all__`` and in the ``__all__`` of each of the
package's modules (common practice: ``__all__`` lists a module's public names). The check reads signatures
with Python's inspect module; nothing is run.
"""

import importlib
import inspect
import pkgutil
import re
from pathlib import Path

import click
import pytest

import cladewright

ROOT = next(p for p in Path(__file__).resolve().parents if (p / "pyproject.toml").is_file())


def _modules():
    names = ["cladewright"] + [m.name for m in pkgutil.walk_packages(cladewright.__path__, "cladewright.")]
    return sorted(name for name in names if not name.endswith("__main__"))


MODULES = _modules()


def _ours(obj):
    return (getattr(obj, "__module__", None) or "").split(".")[0] == "cladewright"


def _function_of(obj):
    """The Python function behind a public callable: itself, a compiled kernel's ``py_func``, a command's callback."""
    if isinstance(obj, click.Command):
        obj = obj.callback  # click.pass_context and the like wrap it (functools.wraps): unwrapped below
    obj = getattr(obj, "py_func", obj)  # numba dispatchers keep the Python function they compile
    obj = inspect.unwrap(obj) if inspect.isfunction(obj) else obj
    return obj if inspect.isfunction(obj) else None


def _unannotated(func, *, bound, needs_return=True):
    """What of ``func``'s signature lacks an annotation: parameter names, and 'return'."""
    params = list(inspect.signature(func, follow_wrapped=False).parameters.values())
    if bound and params:
        params = params[1:]  # self or cls
    missing = [p.name for p in params if p.annotation is inspect.Parameter.empty]
    if needs_return and inspect.signature(func, follow_wrapped=False).return_annotation is inspect.Signature.empty:
        missing.append("return")
    return missing


def _is_protocol(cls):
    return bool(getattr(cls, "_is_protocol", False))


def _constructor(cls):
    """The ``__init__`` (or ``__new__``, for a named tuple) the package wrote for ``cls``, or None when the
    constructor is inherited from outside the package (an exception class that adds no parameters)."""
    if _is_protocol(cls):
        return None  # a Protocol (PEP 544) is a structural type, never constructed
    for klass in cls.__mro__:
        if not _ours(klass):
            return None
        for name in ("__init__", "__new__"):
            member = vars(klass).get(name)
            if inspect.isfunction(member) or isinstance(member, staticmethod):
                return getattr(member, "__func__", member)
    return None


def _public(module):
    """(qualified name, object) for every function and class in the module's ``__all__``."""
    out = []
    for name in getattr(module, "__all__", []):
        obj = getattr(module, name)
        if inspect.isclass(obj) or _function_of(obj) is not None:
            out.append((f"{module.__name__}.{name}", obj))
    return out


def _gaps(qualname, obj):
    """What is not annotated about one public function or class (its constructor only)."""
    if inspect.isclass(obj):
        init = _constructor(obj)
        missing = _unannotated(init, bound=True, needs_return=False) if init is not None else []
        return [f"{qualname}({', '.join(missing)})"] if missing else []
    missing = _unannotated(_function_of(obj), bound=False)
    return [f"{qualname}({', '.join(missing)})"] if missing else []


def _member_gaps(qualname, cls):
    """What is not annotated about the public methods and properties a class of the package defines."""
    if not _ours(cls):
        return []
    found = []
    for name, member in vars(cls).items():
        if name.startswith("_"):
            continue
        if isinstance(member, property):
            func, bound, needs_return = member.fget, True, True
        elif isinstance(member, staticmethod):
            func, bound, needs_return = member.__func__, False, True
        elif isinstance(member, classmethod):
            func, bound, needs_return = member.__func__, True, True
        elif inspect.isfunction(member):
            func, bound, needs_return = member, True, True
        else:
            continue
        missing = _unannotated(func, bound=bound, needs_return=needs_return)
        if missing:
            found.append(f"{qualname}.{name}({', '.join(missing)})")
    return found


def test_the_walk_reaches_the_public_api():
    # The names the walk must meet (read from the sources and cladewright.__all__): a rename or a lost walk
    # over the package must not leave this file checking nothing.
    seen = {name for module in MODULES for name, _ in _public(importlib.import_module(module))}
    assert {"cladewright.Tree", "cladewright.DistanceMatrix", "cladewright.Alignment", "cladewright.read_alignment",
            "cladewright.build_tree", "cladewright.bootstrap", "cladewright.io.readers.read_trees",
            "cladewright.tree.Tree", "cladewright.io.newick_writer.format_newick"} <= seen
    assert {f"cladewright.{name}" for name in cladewright.__all__
            if inspect.isclass(getattr(cladewright, name)) or _function_of(getattr(cladewright, name))} <= seen


@pytest.mark.parametrize("name", MODULES)
def test_public_functions_and_classes_are_annotated(name):
    # PEP 484: every parameter and the return of a function; the parameters of a class's __init__
    module = importlib.import_module(name)
    gaps = [gap for qualname, obj in _public(module) for gap in _gaps(qualname, obj)]
    assert not gaps, "annotate these (the names in brackets lack one):\n" + "\n".join(gaps)


@pytest.mark.parametrize("name", MODULES)
def test_public_methods_and_properties_are_annotated(name):
    # PEP 484, for the methods and properties of each public class the package defines
    module = importlib.import_module(name)
    gaps = [gap for qualname, obj in _public(module) if inspect.isclass(obj) for gap in _member_gaps(qualname, obj)]
    assert not gaps, "annotate these (the names in brackets lack one):\n" + "\n".join(gaps)


def test_the_package_carries_the_py_typed_marker():
    # PEP 561: the marker sits inside the installed package's folder ...
    package_dir = Path(cladewright.__file__).resolve().parent
    assert (package_dir / "py.typed").is_file()
    # ... and the distribution includes it (package data of pyproject.toml, read as text: tomllib is 3.11+)
    pyproject = (ROOT / "pyproject.toml").read_text(encoding="utf-8")
    section = re.search(r"^\[tool\.setuptools\.package-data\]\n(.*?)(?=^\[|\Z)", pyproject, re.M | re.S)
    assert section is not None
    assert re.search(r'^cladewright\s*=\s*\[[^\]]*"py\.typed"', section.group(1), re.M)
