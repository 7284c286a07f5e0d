"""The layout check of `make lint` (.ci/check_layout.py) refuses what it is meant to refuse.

Small made-up trees, each with one broken rule, and the repository itself, which must pass.
"""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parent.parent
SCRIPT = REPO / ".ci" / "check_layout.py"


def run(root: Path) -> subprocess.CompletedProcess[str]:
    return subprocess.run(
        [sys.executable, str(SCRIPT), str(root)], capture_output=True, text=True, check=False
    )


def tree(root: Path, files: dict[str, str]) -> Path:
    for name, text in files.items():
        path = root / name
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_text(text)
    (root / "python" / "toposweep").mkdir(parents=True, exist_ok=True)
    (root / "python" / "toposweep" / "__init__.py").touch()
    return root


# two folders: `high` may use `low`, `low` uses nothing
CLEAN = {
    "src/lib.rs": "pub mod high;\npub mod low;\npub mod error;\n",
    "src/error.rs": "pub struct E;\n",
    "src/low/mod.rs": "//! Low.\n//!\n//! Uses: nothing but `error`.\n\npub mod a;\npub mod b;\n",
    "src/low/a.rs": "use crate::error::E;\nuse crate::low::b::g;\n",
    "src/low/b.rs": "pub fn g() {}\n",
    "src/high/mod.rs": "//! High.\n//!\n//! Uses: low.\n\npub mod c;\n",
    "src/high/c.rs": "use crate::low::a;\n",
}


def test_a_clean_tree_passes(tmp_path: Path) -> None:
    done = run(tree(tmp_path, CLEAN))
    assert done.returncode == 0, done.stderr
    assert "2 folders" in done.stdout


def test_a_folder_using_one_it_does_not_list_is_refused(tmp_path: Path) -> None:
    files = dict(CLEAN)
    files["src/low/b.rs"] = "use crate::high::c;\npub fn g() {}\n"
    done = run(tree(tmp_path, files))
    assert done.returncode == 1
    assert "low/ may not use high/" in done.stderr
    assert "folders in a circle: high -> low" in done.stderr


def test_a_circle_of_modules_in_one_folder_is_refused(tmp_path: Path) -> None:
    files = dict(CLEAN)
    files["src/low/b.rs"] = "use crate::low::a::X;\npub fn g() {}\n"
    done = run(tree(tmp_path, files))
    assert done.returncode == 1
    assert "modules in a circle (test code left out): low::a, low::b" in done.stderr


def test_a_circle_closed_only_by_test_code_is_allowed(tmp_path: Path) -> None:
    files = dict(CLEAN)
    files["src/low/b.rs"] = (
        "pub fn g() {}\n\n#[cfg(test)]\nmod tests {\n    use crate::low::a;\n}\n"
    )
    done = run(tree(tmp_path, files))
    assert done.returncode == 0, done.stderr


def test_paths_in_comments_do_not_count(tmp_path: Path) -> None:
    files = dict(CLEAN)
    files["src/low/b.rs"] = "/// see [`crate::high::c`]\npub fn g() {} // crate::high\n"
    done = run(tree(tmp_path, files))
    assert done.returncode == 0, done.stderr


def test_a_top_file_using_a_folder_is_refused(tmp_path: Path) -> None:
    files = dict(CLEAN)
    files["src/error.rs"] = "use crate::low::b::g;\npub struct E;\n"
    done = run(tree(tmp_path, files))
    assert done.returncode == 1
    assert "a file at the top of src/ uses the folder low/" in done.stderr


@pytest.mark.parametrize("lazy", [False, True])
def test_a_python_subpackage_in_a_circle_is_refused(tmp_path: Path, lazy: bool) -> None:
    back = "def f():\n    from ..top import x\n" if lazy else "from ..top import x\n"
    files = dict(CLEAN)
    files["python/toposweep/top.py"] = "from .sub.inner import y\nx = 1\n"
    files["python/toposweep/sub/__init__.py"] = ""
    files["python/toposweep/sub/inner.py"] = back + "y = 2\n"
    done = run(tree(tmp_path, files))
    assert done.returncode == 1
    assert "a subpackage in a circle: toposweep.sub, toposweep.top" in done.stderr


def test_top_level_modules_in_a_circle_are_refused(tmp_path: Path) -> None:
    files = dict(CLEAN)
    files["python/toposweep/one.py"] = "from .two import y\nx = 1\n"
    files["python/toposweep/two.py"] = "y = 2\n\ndef f():\n    from .one import x\n"
    done = run(tree(tmp_path, files))
    assert done.returncode == 1  # a function's import closes it: still a circle
    assert "modules in a circle: toposweep.one, toposweep.two" in done.stderr
    # the same circle at import time is refused
    files["python/toposweep/two.py"] = "from .one import x\ny = 2\n"
    done = run(tree(tmp_path, files))
    assert done.returncode == 1
    assert "importing each other at import time: toposweep.one, toposweep.two" in done.stderr


def test_the_repository_keeps_its_layout() -> None:
    done = run(REPO)
    assert done.returncode == 0, done.stderr
    assert "no circle" in done.stdout
