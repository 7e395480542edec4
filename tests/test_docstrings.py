"""Every public definition in ``roomconv`` documents itself, so that the documentation cannot
fall behind the code.

The public API of a module is its ``__all__`` and every other top-level function and class
whose name does not start with an underscore. Docstrings follow the
numpy docstring conventions (numpydoc's "Examples" section holds ``>>>`` lines, which
``pytest --doctest-modules`` runs). Rules checked:

- every public function, class, method and property defined in ``roomconv`` has a docstring;
- every public function and class of the numerics (``analysis``, ``measure``, ``synth``,
  ``render`` and ``roomconv.signal``) has an Examples section with a ``>>>`` line.

Exempt from Examples, not from docstrings: the command-line modules (``roomconv.cli``), whose
functions parse and print and are exercised through the ``cli`` fixture; methods (their
class's example shows them in use).

A module added later is walked as well; a failure lists every name to fix.
"""

from __future__ import annotations

import dataclasses
import importlib
import inspect
import pkgutil

import roomconv

#: Packages (and single modules) whose public functions and classes need a runnable example.
NUMERICS = ("roomconv.analysis", "roomconv.measure", "roomconv.synth", "roomconv.render")
NUMERIC_MODULES = ("roomconv.signal",)


def _modules() -> list:
    mods = [roomconv]
    for info in pkgutil.walk_packages(roomconv.__path__, "roomconv."):
        if info.name.rsplit(".", 1)[-1] == "__main__":
            continue  # running it starts the command line
        mods.append(importlib.import_module(info.name))
    return mods


def _public_names(mod) -> list[str]:
    # __all__ plus every top-level name without an underscore: a command function that only
    # a COMMANDS table refers to is still public by its name.
    names = list(getattr(mod, "__all__", ()))
    return names + [n for n in vars(mod) if not n.startswith("_") and n not in names]


def _definitions():
    """(qualified name, object, kind) of every public function, class, method and property
    defined in roomconv (re-exports are checked where they are defined)."""
    for mod in _modules():
        for n in _public_names(mod):
            obj = getattr(mod, n, None)
            if not (inspect.isfunction(obj) or inspect.isclass(obj)):
                continue
            if obj.__module__ != mod.__name__:
                continue
            yield f"{mod.__name__}.{n}", obj, "class" if inspect.isclass(obj) else "function"
            if not inspect.isclass(obj):
                continue
            for m, v in vars(obj).items():
                if m.startswith("_"):
                    continue
                f = v.fget if isinstance(v, property) else getattr(v, "__func__", v)
                if inspect.isfunction(f):
                    yield f"{mod.__name__}.{n}.{m}", f, "method"


def _needs_example(qualname: str, kind: str) -> bool:
    if kind == "method":
        return False
    return (
        qualname.startswith(tuple(p + "." for p in NUMERICS))
        or qualname.rsplit(".", 1)[0] in NUMERIC_MODULES
    )


def _own_docstring(obj) -> str:
    """The docstring written for ``obj``; a dataclass without one gets its signature as
    ``__doc__`` from the dataclasses module, which documents nothing."""
    doc = (obj.__doc__ or "").strip()
    if (
        inspect.isclass(obj)
        and dataclasses.is_dataclass(obj)
        and doc.startswith(obj.__name__ + "(")
    ):
        return ""
    return doc


def test_the_walk_finds_the_library():
    # Guards the checks below against passing vacuously on an empty walk.
    found = {q for q, _, _ in _definitions()}
    assert "roomconv.analysis.decay.lundeby_truncation" in found
    assert "roomconv.render.offline.RenderSettings.check" in found
    assert "roomconv.signal.db_to_gain" in found
    assert len(found) > 300


def test_every_public_definition_has_a_docstring():
    missing = sorted(q for q, obj, _ in _definitions() if not _own_docstring(obj))
    assert not missing, (
        f"{len(missing)} public definition(s) without a docstring (numpy style: summary, "
        "Parameters with units, Returns, References for a published method, Examples):\n  "
        + "\n  ".join(missing)
    )


def test_every_public_numeric_function_and_class_has_an_example():
    missing = sorted(
        q
        for q, obj, kind in _definitions()
        if _needs_example(q, kind) and ">>>" not in (inspect.getdoc(obj) or "")
    )
    assert not missing, (
        f"{len(missing)} public function(s)/class(es) of the numerics without an Examples "
        "section with a '>>>' line (tiny, fast, no sound, files only in a temporary "
        "folder):\n  " + "\n  ".join(missing)
    )


def test_the_examples_are_collected_as_doctests():
    # The examples only protect anything if pytest runs them: pyproject.toml must collect
    # roomconv/ with --doctest-modules.
    import tomllib
    from pathlib import Path

    cfg = tomllib.loads((Path(__file__).parent.parent / "pyproject.toml").read_text())
    opts = cfg["tool"]["pytest"]["ini_options"]
    assert "roomconv" in opts["testpaths"]
    assert "--doctest-modules" in opts["addopts"]
