#!/usr/bin/env python3
"""Check that the code's folders use each other in one direction only (run by `make lint`).

Rust (`src/`): every folder's ``mod.rs`` names the folders it may use in a line
``//! Uses: a, b.`` (or ``//! Uses: nothing ...``). The ``crate::`` paths of every file are read
as text, comments left out, and each path is attributed to the folder it names. A folder may use
the ones it lists and the files at the top of ``src/`` (``error``, ``sampling``, ``lib.rs``);
those files use no folder. Test code (``tests.rs``, ``test_rng.rs`` and the ``#[cfg(test)]
mod tests`` at the end of a file) counts for the folder rule, since tests of a low folder that
need a high one belong higher up. Apart from the folder rule, no two modules may use each other
in a circle, test code left out (a test may borrow a sibling's test model).

Python (``python/toposweep/``): no subpackage is in a circle with the others or with the
top-level modules (a module of a subpackage counts as its subpackage), every import counted,
also those inside functions; and no two modules import each other at import time (imports at
the top of a module, outside functions and ``if TYPE_CHECKING``). A circle of top-level modules
closed only through an import inside a function is listed, not refused.

Exits 1 and prints every broken rule, else prints one line of counts.
"""

from __future__ import annotations

import ast
import re
import sys
from pathlib import Path

REPO = Path(__file__).resolve().parent.parent

CRATE_PATH = re.compile(r"\bcrate::((?:[a-z_][a-z0-9_]*::)*[a-z_][a-z0-9_]*)")
USES_LINE = re.compile(r"^//!\s*Uses:\s*(.*)$", re.MULTILINE)
TEST_START = re.compile(r"^#\[cfg\(test\)\]\s*\n\s*(pub(\(crate\))?\s+)?mod tests\b", re.MULTILINE)


def strip_comments(code: str) -> str:
    """Drop `//` comments (doc comments included) line by line; paths in strings stay."""
    return "\n".join(line.split("//", 1)[0] for line in code.splitlines())


def rust_module(path: Path, src: Path) -> tuple[str, ...]:
    """src/point/engine.rs -> ("point", "engine"); a mod.rs names its folder, lib.rs ()."""
    parts = path.relative_to(src).with_suffix("").parts
    if parts[-1] in ("mod", "lib"):
        parts = parts[:-1]
    return tuple(parts)


def find_cycle(graph: dict[str, set[str]]) -> list[list[str]]:
    """Every strongly connected component with more than one node (Tarjan), sorted."""
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    stack: list[str] = []
    on_stack: set[str] = set()
    found: list[list[str]] = []
    counter = [0]

    def visit(v: str) -> None:
        index[v] = low[v] = counter[0]
        counter[0] += 1
        stack.append(v)
        on_stack.add(v)
        for w in sorted(graph.get(v, ())):
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

    for v in sorted(graph):
        if v not in index:
            visit(v)
    return sorted(found)


def check_rust(root: Path) -> tuple[list[str], str]:
    """The broken rules of src/ and a line of counts."""
    src = root / "src"
    errors: list[str] = []
    files = sorted(src.rglob("*.rs"))
    modules = {rust_module(f, src) for f in files}
    folders = sorted(p.name for p in src.iterdir() if p.is_dir())
    allowed: dict[str, set[str]] = {}
    for folder in folders:
        mod = src / folder / "mod.rs"
        found = USES_LINE.search(mod.read_text()) if mod.exists() else None
        if found is None:
            errors.append(
                f"src/{folder}/mod.rs: no '//! Uses: ...' line naming the folders it may use"
            )
            allowed[folder] = set()
            continue
        words = found.group(1).split(".", 1)[0]
        named = (
            set() if words.strip().startswith("nothing") else {w.strip() for w in words.split(",")}
        )
        for name in sorted(named - set(folders)):
            errors.append(f"src/{folder}/mod.rs: 'Uses:' names {name!r}, which is no folder")
        allowed[folder] = named & set(folders)

    module_graph: dict[str, set[str]] = {}
    folder_graph: dict[str, set[str]] = {f: set() for f in folders}
    edges = 0
    for f in files:
        here = rust_module(f, src)
        text = f.read_text()
        test_only = f.name in ("tests.rs", "test_rng.rs")
        cut = TEST_START.search(text)
        body, tests = (text, "") if cut is None else (text[: cut.start()], text[cut.start() :])
        if test_only:
            body, tests = "", text
        for code, is_test in ((body, False), (tests, True)):
            for m in CRATE_PATH.finditer(strip_comments(code)):
                parts = tuple(m.group(1).split("::"))
                # the longest prefix that is a module: crate::point::engine::X -> point::engine
                target = next(
                    (parts[:n] for n in range(len(parts), 0, -1) if parts[:n] in modules), ()
                )
                if not target or target == here[: len(target)] or here == target[: len(here)]:
                    continue  # the crate root, or a module's own parent or child
                src_folder = here[0] if len(here) > 1 or (src / here[0]).is_dir() else None
                dst_folder = target[0] if (src / target[0]).is_dir() else None
                if not is_test:
                    module_graph.setdefault("::".join(here), set()).add("::".join(target))
                    edges += 1
                where = f"{f.relative_to(root)}: crate::{m.group(1)}"
                if src_folder is None and dst_folder is not None:
                    errors.append(
                        f"{where}: a file at the top of src/ uses the folder {dst_folder}/"
                    )
                elif src_folder and dst_folder and src_folder != dst_folder:
                    folder_graph[src_folder].add(dst_folder)
                    if dst_folder not in allowed.get(src_folder, set()):
                        errors.append(
                            f"{where}: {src_folder}/ may not use {dst_folder}/ "
                            f"(src/{src_folder}/mod.rs 'Uses:' line)"
                        )
    for comp in find_cycle(folder_graph):
        errors.append("src/: folders in a circle: " + " -> ".join(comp))
    for comp in find_cycle(module_graph):
        errors.append("src/: modules in a circle (test code left out): " + ", ".join(comp))
    summary = (
        f"rust: {len(files)} files, {len(folders)} folders, "
        f"{sum(map(len, folder_graph.values()))} folder edges, {edges} paths, no circle"
    )
    return errors, summary


def python_imports(path: Path, name: str) -> tuple[set[str], set[str]]:
    """(every toposweep module `name` imports, those imported at import time)."""
    tree = ast.parse(path.read_text(), str(path))
    package = name if path.name == "__init__.py" else name.rsplit(".", 1)[0]
    every: set[str] = set()
    eager: set[str] = set()

    def resolve(node: ast.ImportFrom | ast.Import) -> list[str]:
        if isinstance(node, ast.Import):
            return [a.name for a in node.names if a.name.startswith("toposweep")]
        if node.level:
            base = package.split(".")
            base = base[: len(base) - node.level + 1]
            mod = ".".join(base + ([node.module] if node.module else []))
        else:
            mod = node.module or ""
        if not mod.startswith("toposweep"):
            return []
        # `from . import x` / `from .pkg import mod`: x may be a module
        return [mod] + [f"{mod}.{a.name}" for a in node.names]

    def add(node: ast.Import | ast.ImportFrom, top: bool) -> None:
        for mod in resolve(node):
            every.add(mod)
            if top:
                eager.add(mod)

    def walk(body: list[ast.stmt], top: bool) -> None:
        for node in body:
            if isinstance(node, (ast.Import, ast.ImportFrom)):
                add(node, top)
            elif isinstance(node, (ast.FunctionDef, ast.AsyncFunctionDef)):
                for sub in ast.walk(node):  # runs when called: not at import time
                    if isinstance(sub, (ast.Import, ast.ImportFrom)):
                        add(sub, False)
            elif isinstance(node, ast.If) and "TYPE_CHECKING" in ast.unparse(node.test):
                walk(node.body, False)
                walk(node.orelse, top)
            else:
                for field in ("body", "orelse", "finalbody"):
                    walk(getattr(node, field, []), top)
                for handler in getattr(node, "handlers", []):
                    walk(handler.body, top)

    walk(tree.body, True)
    return every, eager


def check_python(root: Path) -> tuple[list[str], str]:
    """The broken rules of python/toposweep/ and a line of counts."""
    pkg = root / "python" / "toposweep"
    errors: list[str] = []
    files = sorted(pkg.rglob("*.py"))
    names = {}
    for f in files:
        rel = f.relative_to(pkg.parent).with_suffix("")
        parts = rel.parts[:-1] if rel.name == "__init__" else rel.parts
        names[".".join(parts)] = f
    package_graph: dict[str, set[str]] = {}
    eager_graph: dict[str, set[str]] = {}

    def unit(mod: str) -> str:
        """toposweep.results.store -> toposweep.results; toposweep.sweep -> toposweep.sweep."""
        return ".".join(mod.split(".")[:2])

    for name, f in names.items():
        every, eager = python_imports(f, name)
        every = {m for m in every if m in names and m != name}
        eager = {m for m in eager if m in names and m != name}
        if name != "toposweep":  # the package's __init__ gathers the public names
            src_unit = unit(name)
            for m in every:
                if m != "toposweep" and unit(m) != src_unit:
                    package_graph.setdefault(src_unit, set()).add(unit(m))
        # a package imports its own children (and a module its package) without a circle
        eager_graph[name] = {
            m for m in eager if not m.startswith(name + ".") and not name.startswith(m + ".")
        }
    for comp in find_cycle(package_graph):
        if any((pkg / c.split(".")[1]).is_dir() for c in comp):
            errors.append("python/toposweep: a subpackage in a circle: " + ", ".join(comp))
        else:  # (even when a function's import closes it: move what both need one level down)
            errors.append("python/toposweep: modules in a circle: " + ", ".join(comp))
    for comp in find_cycle(eager_graph):
        errors.append(
            "python/toposweep: modules importing each other at import time: " + ", ".join(comp)
        )
    units = {unit(n) for n in names if n != "toposweep"}
    summary = f"python: {len(files)} modules in {len(units)} top-level units, no circle"
    return errors, summary


def main(argv: list[str]) -> int:
    """Run both checks on the repository (or the folder given); 1 if any rule is broken."""
    root = Path(argv[0]) if argv else REPO
    errors: list[str] = []
    summaries = []
    for check in (check_rust, check_python):
        found, summary = check(root)
        errors += found
        summaries.append(summary)
    if errors:
        print("\n".join(errors), file=sys.stderr)
        print(f"layout: {len(errors)} broken rule(s)", file=sys.stderr)
        return 1
    print("layout: " + "; ".join(summaries))
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
