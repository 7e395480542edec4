"""The public API of measure, render and the I/O modules: what ``__all__`` promises exists,
the packages re-export it, and every public function, class and method documents itself
with a runnable example (numpy docstring conventions, numpydoc's "Examples" section).
"""

import importlib
import inspect
import subprocess
import sys

import pytest

MODULES = {
    "roomconv.measure": ["sweep", "deconvolve", "quality", "capture"],
    "roomconv.render": ["partitioned", "levels", "mix", "offline", "stream", "batch"],
}
SINGLE = [
    "roomconv.audio",
    "roomconv.safety",
    "roomconv.validate",
    "roomconv.errors",
    "roomconv.signal",
]
ALL_MODULES = [f"{p}.{m}" for p, ms in MODULES.items() for m in ms] + SINGLE
# The convolution engines and level meters keep their own documentation conventions.
DOCUMENTED = [
    m for m in ALL_MODULES if m not in ("roomconv.render.partitioned", "roomconv.render.levels")
]


@pytest.mark.parametrize("name", ALL_MODULES)
def test_all_lists_every_public_definition_and_nothing_else(name):
    mod = importlib.import_module(name)
    assert len(set(mod.__all__)) == len(mod.__all__)
    for n in mod.__all__:
        assert hasattr(mod, n), f"{name}.__all__ names {n}, which is not there"
    own = {
        n
        for n, v in vars(mod).items()
        if not n.startswith("_")
        and (inspect.isfunction(v) or inspect.isclass(v))
        and v.__module__ == name
    }
    assert own <= set(mod.__all__), f"{name}: public but not in __all__: {own - set(mod.__all__)}"


@pytest.mark.parametrize("package", sorted(MODULES))
def test_packages_reexport_their_modules_public_names(package):
    pkg = importlib.import_module(package)
    for m in MODULES[package]:
        mod = importlib.import_module(f"{package}.{m}")
        for n in mod.__all__:
            assert getattr(pkg, n) is getattr(mod, n)
            assert n in pkg.__all__


def _documented(name):
    mod = importlib.import_module(name)
    for n in mod.__all__:
        obj = getattr(mod, n)
        if getattr(obj, "__module__", None) != name:
            continue  # constants, and names another module documents
        if inspect.isfunction(obj) or inspect.isclass(obj):
            yield f"{name}.{n}", obj
        if inspect.isclass(obj):
            for m, f in vars(obj).items():
                if not m.startswith("_") and inspect.isfunction(f):
                    yield f"{name}.{n}.{m}", f


@pytest.mark.parametrize("name", DOCUMENTED)
def test_every_public_function_and_class_has_an_example(name):
    missing = [q for q, obj in _documented(name) if ">>>" not in (inspect.getdoc(obj) or "")]
    assert missing == [], missing


@pytest.mark.parametrize("name", DOCUMENTED)
def test_functions_with_arguments_document_them(name):
    missing = []
    for q, obj in _documented(name):
        if inspect.isclass(obj) and issubclass(obj, BaseException):
            continue
        target = obj.__init__ if inspect.isclass(obj) else obj
        try:
            params = [p for p in inspect.signature(target).parameters if p not in ("self", "cls")]
        except (TypeError, ValueError):
            continue
        doc = inspect.getdoc(obj) or ""
        has_params = "Parameters\n----------" in doc or "Attributes\n----------" in doc
        if params and not has_params and not (inspect.isclass(obj) and target is object.__init__):
            missing.append(q)
    assert missing == [], missing


def test_importing_the_packages_loads_no_sound_library():
    # sounddevice loads PortAudio; it must wait until a sound card is actually used.
    code = "import sys, roomconv.measure, roomconv.render; print('sounddevice' in sys.modules)"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "False"
