"""The manual's Python examples run, and print what the manual says they print.

Every ```python block of README.md and docs/*.md is run, the blocks of one page in order in
one namespace (later blocks continue earlier ones, as the text says), in a fresh folder. A
top-level ``print(...)`` whose line ends in a comment must print exactly that comment (text
after two spaces or a colon is commentary: ``# 0  (weak TI)``, ``# 1 7: why``). A block that
cannot run as it stands — a sketch with placeholders, a cluster, a long map — is marked on the
line before its fence with ``<!-- snippet: not run (reason) -->`` and only compiled.

The printed values themselves are checked against outside references elsewhere (the physics
tests); this file keeps the manual true to the code.
"""

from __future__ import annotations

import ast
import contextlib
import io
import re
import tokenize
from pathlib import Path

import matplotlib
import pytest

matplotlib.use("Agg")

ROOT = Path(__file__).resolve().parents[1]
#: the marker a block that is not run carries on the line before its fence
SKIP = re.compile(r"<!--\s*snippet:\s*not run\b.*-->")
FENCE = re.compile(r"^```python[ \t]*\n(.*?)^```", re.S | re.M)


def blocks(page: Path) -> list[tuple[int, str, bool]]:
    """The ```python blocks of a page: (line number, code, marked not run)."""
    text = page.read_text(encoding="utf-8")
    out = []
    for match in FENCE.finditer(text):
        line = text.count("\n", 0, match.start()) + 1
        before = text[: match.start()].rstrip("\n").rsplit("\n", 1)[-1]
        out.append((line, match.group(1), bool(SKIP.search(before))))
    return out


#: the pages with Python examples
PAGES = [p for p in [ROOT / "README.md", *sorted((ROOT / "docs").glob("*.md"))] if blocks(p)]


def expected_output(comment: str, printed: str) -> bool:
    """Whether ``printed`` is what the ``# comment`` after a print says it prints."""
    if comment == printed:
        return True
    rest = comment[len(printed) :] if comment.startswith(printed) else None
    return rest is not None and (rest.startswith("  ") or rest.startswith(":"))


def comments_by_line(code: str) -> dict[int, str]:
    """Trailing comments of a block, by line number (1-based)."""
    out = {}
    for tok in tokenize.generate_tokens(io.StringIO(code).readline):
        if tok.type == tokenize.COMMENT:
            out[tok.start[0]] = tok.string[1:].strip()
    return out


def is_print(node: ast.stmt) -> bool:
    return (
        isinstance(node, ast.Expr)
        and isinstance(node.value, ast.Call)
        and isinstance(node.value.func, ast.Name)
        and node.value.func.id == "print"
    )


def run_page(page: Path, root: Path = ROOT) -> list[str]:
    """Run a page's blocks; returns the mismatches between the manual and the output."""
    namespace: dict[str, object] = {"__name__": "__main__"}
    problems = []
    for line, code, skipped in blocks(page):
        where = f"{page.relative_to(root)}, block at line {line}"
        tree = ast.parse(code, filename=where)  # every block must at least be valid Python
        if skipped:
            continue
        comments = comments_by_line(code)
        for node in tree.body:
            unit = compile(ast.Module(body=[node], type_ignores=[]), where, "exec")
            out = io.StringIO()
            with contextlib.redirect_stdout(out):
                exec(unit, namespace)  # noqa: S102 - the manual's own code
            comment = comments.get(node.end_lineno or node.lineno)
            if is_print(node) and comment is not None:
                printed = out.getvalue().rstrip("\n")
                if not expected_output(comment, printed):
                    problems.append(
                        f"{where}, line {line + node.lineno}: the manual says {comment!r}, "
                        f"the code prints {printed!r}"
                    )
    return problems


@pytest.mark.parametrize("page", PAGES, ids=lambda p: str(p.relative_to(ROOT)))
def test_manual_examples_run_and_print_what_they_say(page, tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)  # the examples write their files here
    assert run_page(page) == []


def test_the_comparison_tells_commentary_from_a_wrong_value():
    assert expected_output("1 [0, 0, 0] 2", "1 [0, 0, 0] 2")
    assert expected_output("0  (weak TI (0;111))", "0")
    assert expected_output("1 7: Wilson loop answers, parity cannot", "1 7")
    assert not expected_output("1 [0, 0, 0] 2", "1")  # a prefix is not the value
    assert not expected_output("1693 8385", "1694 8385")


def test_a_wrong_printed_value_in_the_manual_is_caught(tmp_path):
    page = tmp_path / "page.md"
    page.write_text("```python\nprint(1 + 1)   # 3\nprint(2)  # 2\n```\n", encoding="utf-8")
    problems = run_page(page, root=tmp_path)
    assert len(problems) == 1 and "'3'" in problems[0] and "'2'" in problems[0]
