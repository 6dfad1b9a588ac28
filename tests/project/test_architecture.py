"""The import-graph contract: data flows one way (docs/architecture.md).

Every module of the package is given a layer; a module may import only from its own layer or below, and no
set of modules may import each other in a circle. Imports inside functions count like any other. The check
reads the source with Python's ast module; nothing is imported or run.

Source: common practice (a layered architecture checked by a contract over the import graph).
"""

import ast
import pathlib

import pytest

PACKAGE = "cladewright"
SRC = pathlib.Path(__file__).resolve().parents[2] / "src" / PACKAGE

#: Layers, bottom (0) to top, and the modules each holds (a name covers its submodules; the longest match wins).
LAYERS = {
    0: ["errors", "progress", "choices", "_kernels"],            # utilities and compiled kernels
    1: ["io"],                                                   # text and bytes <-> plain values
    2: ["alignment", "matrix", "tree"],                          # the three nouns
    3: ["io.readers", "io.__init__"],                            # files -> nouns
    4: ["distances", "build", "support", "polytomies", "rooting", "clusters", "memory", "paths", "interop"],
    5: ["pipeline", "store_tree", "resampling"],                 # alignment -> tree -> support
    6: ["cli", "report", "draw", "textdraw"],                    # the application
    7: ["__init__"],                                             # the public API sees everything
}


def module_name(path):
    rel = path.relative_to(SRC).with_suffix("")
    parts = list(rel.parts)
    return ".".join(parts)


def layer_of(name):
    best, layer = -1, None
    for level, prefixes in LAYERS.items():
        for prefix in prefixes:
            if name == prefix or name.startswith(prefix + "."):
                if len(prefix) > best:
                    best, layer = len(prefix), level
    return layer


def modules():
    return {module_name(p): p for p in sorted(SRC.rglob("*.py"))}


def resolve(importer, node, known):
    """The package modules an import statement reaches (as module names relative to the package)."""
    pkg_parts = importer.split(".")
    is_init = pkg_parts[-1] == "__init__"
    base = pkg_parts[:-1]  # the package holding the importer
    out = []
    if isinstance(node, ast.Import):
        for alias in node.names:
            if alias.name == PACKAGE or alias.name.startswith(PACKAGE + "."):
                out.append(alias.name[len(PACKAGE) + 1:] or "__init__")
        return [_existing(x, known) for x in out]
    if node.level == 0:
        if not node.module or not (node.module == PACKAGE or node.module.startswith(PACKAGE + ".")):
            return []
        target = node.module[len(PACKAGE) + 1:].split(".") if node.module != PACKAGE else []
    else:
        up = node.level - 1
        anchor = base[:len(base) - up] if up else base
        if up > len(base):
            raise AssertionError(f"{importer}: relative import above the package")
        target = anchor + (node.module.split(".") if node.module else [])
    del is_init
    for alias in node.names:
        # `from .pkg import module` names a submodule when one exists
        sub = ".".join(target + [alias.name])
        if sub in known or sub + ".__init__" in known:
            out.append(sub)
        else:
            out.append(".".join(target) if target else "__init__")
    return [_existing(x, known) for x in out]


def _existing(name, known):
    if name in known:
        return name
    if (name + ".__init__") in known:
        return name + ".__init__"
    if name == "":
        return "__init__"
    raise AssertionError(f"import of {PACKAGE}.{name}, which is no module of the package")


def import_graph():
    known = modules()
    graph = {}
    for name, path in known.items():
        tree = ast.parse(path.read_text(encoding="utf-8"), filename=str(path))
        edges = set()
        for node in ast.walk(tree):
            if isinstance(node, (ast.Import, ast.ImportFrom)):
                for target in resolve(name, node, known):
                    if target != name:
                        edges.add(target)
        graph[name] = edges
    return graph


def test_every_module_has_a_layer():
    missing = [m for m in modules() if layer_of(m) is None]
    assert not missing, f"give these modules a layer in tests/project/test_architecture.py and docs/architecture.md: {missing}"


def test_no_import_runs_up_the_layers():
    graph = import_graph()
    upward = []
    for src, targets in graph.items():
        for dst in targets:
            if layer_of(dst) > layer_of(src):
                upward.append(f"{src} (layer {layer_of(src)}) imports {dst} (layer {layer_of(dst)})")
    assert not upward, "imports that run up the layers:\n" + "\n".join(sorted(upward))


def test_no_import_cycle():
    graph = import_graph()
    # Tarjan's strongly connected components, iteratively
    index, low, on, stack, comps, counter = {}, {}, set(), [], [], [0]
    for root in graph:
        if root in index:
            continue
        work = [(root, iter(sorted(graph[root])))]
        index[root] = low[root] = counter[0]
        counter[0] += 1
        stack.append(root)
        on.add(root)
        while work:
            v, it = work[-1]
            for w in it:
                if w not in index:
                    index[w] = low[w] = counter[0]
                    counter[0] += 1
                    stack.append(w)
                    on.add(w)
                    work.append((w, iter(sorted(graph[w]))))
                    break
                if w in on:
                    low[v] = min(low[v], index[w])
            else:
                work.pop()
                if work:
                    low[work[-1][0]] = min(low[work[-1][0]], low[v])
                if low[v] == index[v]:
                    comp = []
                    while True:
                        w = stack.pop()
                        on.discard(w)
                        comp.append(w)
                        if w == v:
                            break
                    if len(comp) > 1:
                        comps.append(sorted(comp))
    assert not comps, f"modules that import each other in a circle: {comps}"


def test_no_module_imports_another_modules_private_names():
    known = modules()
    found = []
    for name, path in known.items():
        for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
            if isinstance(node, ast.ImportFrom) and (node.level or (node.module or "").startswith(PACKAGE)):
                for alias in node.names:
                    if alias.name.startswith("_") and not alias.name.startswith("__"):
                        found.append(f"{name}: {alias.name}")
    assert not found, "private names imported across modules:\n" + "\n".join(found)


@pytest.mark.parametrize("name", sorted(modules()))
def test_modules_hold_one_idea(name):
    # ~400 lines is the guide's size for one idea per module (docs/architecture.md); a little slack for
    # docstrings is allowed
    lines = modules()[name].read_text(encoding="utf-8").count("\n")
    assert lines <= 420, f"{name} has {lines} lines: it holds two ideas; split it"


def test_the_contract_catches_an_upward_import(tmp_path):
    # the check itself: an import from the nouns up to the command line is caught
    graph = {"tree": {"cli.app"}, "cli.app": set()}
    upward = [(s, d) for s, ts in graph.items() for d in ts if layer_of(d) > layer_of(s)]
    assert upward == [("tree", "cli.app")]


def test_the_architecture_page_shows_every_module_in_its_layer():
    # docs/architecture.md must match the code: every top-level module or package of the source tree stands
    # in the page's layer diagram at the layer this contract gives it (source: the page itself)
    import re

    page = (SRC.parents[1] / "docs" / "architecture.md").read_text(encoding="utf-8")
    diagram = page.split("## The layers", 1)[1].split("```")[1]
    shown, layer = {}, None
    for line in diagram.splitlines():
        m = re.match(r"^\s*(\d)\s", line)
        if m:
            layer = int(m.group(1))
        for name in re.findall(r"(?<![\w/.])([a-z_]+(?:\.py|/))(?=\s)", line):
            key = name.rstrip("/").removesuffix(".py")
            shown.setdefault(key, layer)
    top = {p.name.removesuffix(".py") for p in SRC.iterdir()
           if (p.suffix == ".py" and p.name != "__init__.py") or (p.is_dir() and (p / "__init__.py").exists())}
    missing = sorted(top - set(shown))
    assert not missing, f"docs/architecture.md does not show: {missing}"
    wrong = {k: (shown[k], layer_of(k)) for k in top if shown[k] != layer_of(k)}
    assert not wrong, f"layers in docs/architecture.md differ from this contract (page, code): {wrong}"
