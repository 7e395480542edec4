"""The architecture as the source shows it: no import circles, the terminal workbench never
imports the command line, the numerics never import a front end or the job layer,
``synth`` does not reach into ``analysis``, and no front end writes a file itself.

Each module's imports are read with Python's own parser (``ast``), so nothing is imported
to check them. The graph is checked with Tarjan's strongly-connected-components algorithm
(Tarjan, R. (1972). Depth-first search and linear graph algorithms. SIAM J. Comput. 1(2),
146-160): a circle is a component of more than one module, or a module importing itself.
"""

from __future__ import annotations

import ast
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
NUMERICS = ("roomconv.measure", "roomconv.analysis", "roomconv.synth", "roomconv.render")
FRONT_ENDS = ("roomconv.cli", "roomconv.demo", "tui")


def _module_name(path: Path) -> str:
    parts = list(path.relative_to(ROOT).with_suffix("").parts)
    if parts[-1] == "__init__":
        parts.pop()
    return ".".join(parts)


def _modules() -> dict[str, Path]:
    files = [*(ROOT / "roomconv").rglob("*.py"), *(ROOT / "tui").rglob("*.py")]
    return {_module_name(p): p for p in files if "__pycache__" not in p.parts}


def _resolve(name: str, known: dict) -> str | None:
    """The project module an import lands in (a name inside a module counts as the module)."""
    while name:
        if name in known:
            return name
        name = name.rpartition(".")[0]
    return None


def _imports(mod: str, path: Path, known: dict) -> set[str]:
    package = mod if path.name == "__init__.py" else mod.rpartition(".")[0]
    out = set()
    for node in ast.walk(ast.parse(path.read_text(), str(path))):
        names = []
        if isinstance(node, ast.Import):
            names = [a.name for a in node.names]
        elif isinstance(node, ast.ImportFrom):
            base = node.module or ""
            if node.level:
                anchor = package.split(".")
                anchor = anchor[: len(anchor) - (node.level - 1)]
                base = ".".join(anchor + ([base] if base else []))
            # "from pkg import mod" imports the module; "from pkg import name" the package.
            names = [
                f"{base}.{a.name}" if f"{base}.{a.name}" in known else base for a in node.names
            ]
        for n in names:
            target = _resolve(n, known)
            if target is not None and target != mod:
                out.add(target)
    return out


def _graph() -> dict[str, set[str]]:
    known = _modules()
    return {m: _imports(m, p, known) for m, p in known.items()}


def _cycles(graph: dict[str, set[str]]) -> list[list[str]]:
    """Tarjan's algorithm (1972): the strongly connected components of more than one node."""
    sys.setrecursionlimit(max(10000, sys.getrecursionlimit()))
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    stack: list[str] = []
    on_stack: set[str] = set()
    found: list[list[str]] = []

    def visit(v: str) -> None:
        index[v] = low[v] = len(index)
        stack.append(v)
        on_stack.add(v)
        for w in graph.get(v, ()):
            if w not in index:
                visit(w)
                low[v] = min(low[v], low[w])
            elif w in on_stack:
                low[v] = min(low[v], index[w])
        if low[v] == index[v]:
            comp = []
            while True:
                w = stack.pop()
                on_stack.discard(w)
                comp.append(w)
                if w == v:
                    break
            if len(comp) > 1:
                found.append(sorted(comp))

    for v in graph:
        if v not in index:
            visit(v)
    return found


def test_the_cycle_finder_finds_a_known_circle():
    # A graph with one circle a → b → c → a and a tail d → a: exactly {a, b, c}.
    assert _cycles({"a": {"b"}, "b": {"c"}, "c": {"a"}, "d": {"a"}}) == [["a", "b", "c"]]
    assert _cycles({"a": {"b"}, "b": set()}) == []


def test_the_import_graph_has_no_circles():
    assert _cycles(_graph()) == []


def _within(mod: str, packages) -> bool:
    return any(mod == p or mod.startswith(p + ".") for p in packages)


def test_the_workbench_imports_no_command_line_module():
    bad = {
        m: sorted(t for t in deps if _within(t, ("roomconv.cli",)))
        for m, deps in _graph().items()
        if _within(m, ("tui",))
    }
    assert {m: d for m, d in bad.items() if d} == {}


def test_numerics_import_neither_front_ends_nor_the_job_layer():
    up = (*FRONT_ENDS, "roomconv.jobs")
    bad = {
        m: sorted(t for t in deps if _within(t, up))
        for m, deps in _graph().items()
        if _within(m, NUMERICS)
    }
    assert {m: d for m, d in bad.items() if d} == {}


def test_the_job_layer_imports_no_front_end():
    bad = {
        m: sorted(t for t in deps if _within(t, FRONT_ENDS))
        for m, deps in _graph().items()
        if _within(m, ("roomconv.jobs",))
    }
    assert {m: d for m, d in bad.items() if d} == {}


def test_synth_does_not_import_analysis_and_measure_and_analysis_stay_apart():
    g = _graph()
    pairs = [
        ("roomconv.synth", "roomconv.analysis"),
        ("roomconv.analysis", "roomconv.measure"),
        ("roomconv.measure", "roomconv.analysis"),
    ]
    for src, dst in pairs:
        bad = {
            m: sorted(t for t in deps if _within(t, (dst,)))
            for m, deps in g.items()
            if _within(m, (src,))
        }
        assert {m: d for m, d in bad.items() if d} == {}, (src, dst)


#: Calls that write files; front ends leave them to the job layer.
WRITERS = {
    "write_audio",
    "write_json",
    "write_text",
    "write_provenance",
    "WriteGuard",
    "mkdir",
    "make_folder",
    "write_bytes",
    "write",
    "atomic_path",
    "check_output",
}


def _writes(path: Path) -> list[str]:
    found = []
    label = path.relative_to(ROOT) if path.is_relative_to(ROOT) else path.name
    for node in ast.walk(ast.parse(path.read_text(), str(path))):
        if isinstance(node, ast.Call):
            f = node.func
            name = f.attr if isinstance(f, ast.Attribute) else getattr(f, "id", "")
            # sys.stderr.write / print-like stream writes are not files.
            stream = (
                isinstance(f, ast.Attribute)
                and isinstance(f.value, ast.Attribute)
                and f.value.attr in ("stderr", "stdout")
            )
            if name in WRITERS and not stream:
                found.append(f"{label}:{node.lineno} {name}")
            if name == "open" and any(
                isinstance(a, ast.Constant)
                and isinstance(a.value, str)
                and set(a.value) & set("wax+")
                for a in node.args[1:]
            ):
                found.append(f"{label}:{node.lineno} open for writing")
    return found


def test_front_ends_write_no_file_themselves():
    files = [
        *(ROOT / "tui").rglob("*.py"),
        *(ROOT / "roomconv" / "cli").rglob("*.py"),
        *(ROOT / "roomconv" / "demo").rglob("*.py"),
    ]
    assert [w for p in files for w in _writes(p)] == []


def test_the_writer_scan_finds_a_write(tmp_path):
    probe = tmp_path / "probe.py"
    probe.write_text(
        "import soundfile as sf\nsf.write('x.wav', [0.0], 8000)\n"
        "open('y.txt', 'w')\nimport sys\nsys.stderr.write('note')\n"
    )
    assert len(_writes(probe)) == 2
