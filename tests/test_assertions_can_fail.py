"""Every ``assert`` in the suite can fail (house rule: no assert that cannot fail).

An AST scan of every ``tests/*.py`` and ``bench/*.py`` file flags assert statements whose
truth is fixed when the source is written:

- a constant (``assert True``, ``assert 1``, ``assert "text"``; ``assert None`` and
  ``assert 0`` are always false and also flagged: use ``pytest.fail``),
- an f-string (``assert f"{x} in err"`` is a non-empty string: always true),
- a non-empty literal (tuple, list, set, dict; ``assert (x == 1, "message")`` is the
  classic slip), and an empty one (always false),
- a boolean expression fixed by a constant operand (``assert x or True``,
  ``assert x == 1 or "why"``, ``assert x and False``), ``not <constant>``, and a
  comparison of two constants (``assert 1 == 1``),
- a lambda (always truthy).

The scan is tested on planted source text, so it is known to catch each form.
"""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent
SCANNED_DIRS = ("tests", "bench")


def _constant_truth(node: ast.AST) -> bool | None:
    """True/False when ``node``'s truth value is fixed by the source alone, else None."""
    if isinstance(node, ast.Constant):
        return bool(node.value)
    if isinstance(node, ast.JoinedStr):
        # an f-string with any literal text is non-empty; one of only {fields} may be empty,
        # but asserting the text of a formatted value is no check either
        return True if any(isinstance(v, ast.Constant) and v.value for v in node.values) else None
    if isinstance(node, (ast.Tuple, ast.List, ast.Set)):
        if any(isinstance(e, ast.Starred) for e in node.elts):
            return None
        return bool(node.elts)
    if isinstance(node, ast.Dict):
        if any(k is None for k in node.keys):  # {**x}
            return None
        return bool(node.keys)
    if isinstance(node, ast.Lambda):
        return True
    if isinstance(node, ast.UnaryOp) and isinstance(node.op, ast.Not):
        inner = _constant_truth(node.operand)
        return None if inner is None else not inner
    if isinstance(node, ast.BoolOp):
        truths = [_constant_truth(v) for v in node.values]
        if isinstance(node.op, ast.Or) and any(t is True for t in truths):
            return True
        if isinstance(node.op, ast.And) and any(t is False for t in truths):
            return False
        if all(t is not None for t in truths):
            return all(truths) if isinstance(node.op, ast.And) else any(truths)
        return None
    if isinstance(node, ast.Compare):
        operands = [node.left, *node.comparators]
        if all(isinstance(o, ast.Constant) for o in operands):
            try:
                return bool(eval(compile(ast.Expression(node), "<assert>", "eval")))  # noqa: S307
            except Exception:  # pragma: no cover - e.g. 1 < "a"
                return None
    return None


def unfailable_asserts(source: str, filename: str = "<source>") -> list[tuple[int, str]]:
    """(line, source text) of every assert in ``source`` whose test is fixed by the source."""
    tree = ast.parse(source, filename=filename)
    found = []
    for node in ast.walk(tree):
        if isinstance(node, ast.Assert) and _constant_truth(node.test) is not None:
            found.append((node.lineno, ast.get_source_segment(source, node) or ast.dump(node.test)))
    return found


def _scanned_files() -> list[Path]:
    files = []
    for d in SCANNED_DIRS:
        files.extend(sorted((ROOT / d).glob("*.py")))
    return files


def test_the_suite_has_files_to_scan():
    files = _scanned_files()
    assert Path(__file__).resolve() in files
    assert len(files) >= 40, [str(f) for f in files]


def test_no_assert_in_the_suite_is_fixed_by_its_source():
    offenders = []
    for path in _scanned_files():
        for line, text in unfailable_asserts(path.read_text(encoding="utf-8"), str(path)):
            offenders.append(f"{path.relative_to(ROOT)}:{line}: {text}")
    assert offenders == [], "asserts that cannot fail (or cannot pass):\n" + "\n".join(offenders)


# --- the scan itself -------------------------------------------------------------------

PLANTED = [
    "assert True",
    "assert 1",
    "assert 'text in err'",
    "assert f'{path}: invalid JSON at line 3'",
    "assert (x == 1, 'x should be 1')",
    "assert [x]",
    "assert {'a': x}",
    "assert {x}",
    "assert x or True",
    "assert x == 1 or 'explained'",
    "assert not None",
    "assert 1 == 1",
    "assert lambda: x",
    "assert None",
    "assert ()",
    "assert x and False",
]

FINE = [
    "assert x",
    "assert x == 1",
    "assert f'{x}' in err",
    "assert (x == 1), 'message'",
    "assert x in (1, 2)",
    "assert not x",
    "assert x or y",
    "assert [*xs]",
    "assert {**d}",
    "assert f'{x}'",
    "assert err.count(f'{p}') == 1",
]


@pytest.mark.parametrize("line", PLANTED)
def test_the_scan_catches_a_planted_unfailable_assert(line):
    source = f"def test_planted(x, y, err, path, xs, d, p):\n    {line}\n"
    found = unfailable_asserts(source)
    assert [ln for ln, _ in found] == [2], (line, found)
    assert found[0][1] == line


@pytest.mark.parametrize("line", FINE)
def test_the_scan_leaves_a_real_check_alone(line):
    source = f"def test_real(x, y, err, path, xs, d, p):\n    {line}\n"
    assert unfailable_asserts(source) == []


def test_the_scan_reports_every_planted_assert_in_a_file_by_line():
    source = "\n".join(["import os", "def test_a(x):", "    assert x == 2", "    assert f'{x} ok'",
                        "def test_b():", "    assert True", "    assert os.sep"]) + "\n"
    # by construction: the f-string and the assert True are lines 4 and 6 of the planted text
    assert [ln for ln, _ in unfailable_asserts(source)] == [4, 6]
