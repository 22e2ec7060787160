"""List test functions that compare against numbers with no source written near them.

A review aid for the house rule "every value a test compares against that does not come
from the test's own arithmetic says where it comes from" (DEVELOPERS.md, "Tests").

    .venv/bin/python tools/provenance_scan.py            # flagged functions, one per line
    .venv/bin/python tools/provenance_scan.py -v         # ... with the literals that made them flagged
    .venv/bin/python tools/provenance_scan.py --count    # just the number

What it reads, per ``def test_*`` in ``tests/test_*.py`` (methods of test classes included):

- the numbers a check compares against: numeric literals inside ``assert`` statements and
  inside ``pytest.approx``, ``math.isclose``, ``np.isclose``/``allclose`` and
  ``np.testing.assert_*`` calls (a negative literal counts as one number);
- what it ignores as not an outside value: 0, 1, -1, 2 (and their float forms); a number
  that also appears in the module outside any check (an input the test built, a count of
  things it made, a sample rate it wrote and reads back, a value written in the YAML text of
  a spec: numbers inside string literals other than docstrings count); numbers compared with ``len(...)``
  or ``.shape`` (counts and shapes); tolerances below 1e-6 (floating-point round-off);
  numbers inside an ``assert``'s message; exit codes compared with a ``returncode``/``rc``/
  ``code``/``exit`` name (the README's exit-code table is the source, tested as such); the
  ``line`` and ``column`` of a position in text the test wrote;
- a source near them: any of the words in ``SOURCE_WORDS`` (a standard's name, a reference
  library, "analytic", "from memory", "house choice", "common practice, no source"...) in
  the function's own text (decorators, docstring and comments included), or a line starting
  ``Provenance:`` in the module docstring, which states that every value in the module comes
  from the source named there.

It does not judge whether the source written is right; it finds the places nobody wrote one.
"""

from __future__ import annotations

import argparse
import ast
import re
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
TESTS = ROOT / "tests"

SOURCE_WORDS = re.compile(
    r"ITU-R|BS\.?1770|EBU|Tech 33\d\d|R ?128|AES ?17|AES\d|IEC ?\d|ISO ?\d|RFC ?\d|SMPTE|"
    r"IEEE ?754|WAVE|RIFF|RF64|BWF|AIFF|FLAC format|ISRC|YAML 1\.[12]|yaml\.org|"
    r"pyloudnorm|pyebur128|scipy|soxr|libsamplerate|libsndfile|sox\(1\)|its manual|"
    r"analytic|derivation|derived|20\s*\*?\s*log10|10\s*\*?\s*log10|"
    r"common practice|from memory|house choice|house rule|house target|DEVELOPERS\.md|README|CHANGELOG|"
    r"spec reference|by construction",
    re.IGNORECASE,
)
TRIVIAL = {0, 1, -1, 2}
ROUND_OFF = 1e-6
CHECK_CALLS = {"approx", "isclose", "allclose", "array_equal"}
CHECK_PREFIXES = ("assert_",)
# calls whose arguments are still the compared value (abs(x - 3.5) < 0.1)
PASS_THROUGH = {"abs", "round", "float", "int", "min", "max", "approx", "Decimal", "Fraction"}
EXIT_NAMES = re.compile(r"returncode|(^|_)rc$|exit|(^|_)code$", re.IGNORECASE)
# positions in text the test wrote itself (a spec's line and column)
POSITION_NAMES = re.compile(r"^(line|lineno|col|column)$", re.IGNORECASE)


def _number(node: ast.AST) -> float | None:
    if isinstance(node, ast.Constant) and type(node.value) in (int, float):
        return node.value
    if (isinstance(node, ast.UnaryOp) and isinstance(node.op, ast.USub)
            and isinstance(node.operand, ast.Constant) and type(node.operand.value) in (int, float)):
        return -node.operand.value
    return None


def _call_name(node: ast.Call) -> str:
    f = node.func
    return f.attr if isinstance(f, ast.Attribute) else f.id if isinstance(f, ast.Name) else ""


def _is_check_call(node: ast.AST) -> bool:
    if not isinstance(node, ast.Call):
        return False
    name = _call_name(node)
    return name in CHECK_CALLS or name.startswith(CHECK_PREFIXES)


def _numbers_in(node: ast.AST, skip: set[int]) -> list[tuple[float, int]]:
    """(value, line) of the numbers under ``node``, a negated literal taken as one number."""
    out = []

    def walk(n: ast.AST) -> None:
        if id(n) in skip:
            return
        v = _number(n)
        if v is not None:
            out.append((v, n.lineno))
            return
        if isinstance(n, ast.Call) and not (_is_check_call(n) or _call_name(n) in PASS_THROUGH):
            return  # the arguments of the code under test are its inputs, not what it is held to
        if isinstance(n, ast.JoinedStr):
            return
        for child in ast.iter_child_nodes(n):
            walk(child)

    walk(node)
    return out


def _counted_or_exit(compare: ast.Compare) -> bool:
    """A comparison of a count, a shape or an exit code."""
    for side in (compare.left, *compare.comparators):
        if isinstance(side, ast.Call) and _call_name(side) == "len":
            return True
        if isinstance(side, ast.Attribute) and side.attr in ("shape", "size", "ndim"):
            return True
        name = side.attr if isinstance(side, ast.Attribute) else side.id if isinstance(side, ast.Name) else ""
        if name and (EXIT_NAMES.search(name) or POSITION_NAMES.search(name)):
            return True
    return False


def _checked_numbers(func: ast.AST) -> list[tuple[float, int]]:
    found: list[tuple[float, int]] = []
    skip: set[int] = set()
    for node in ast.walk(func):
        if isinstance(node, ast.Assert) and node.msg is not None:
            skip.add(id(node.msg))
            for n in ast.walk(node.msg):
                skip.add(id(n))
        if isinstance(node, ast.Compare) and _counted_or_exit(node):
            for n in ast.walk(node):
                skip.add(id(n))
    seen: set[int] = set()
    for node in ast.walk(func):
        if isinstance(node, ast.Assert) or _is_check_call(node):
            if id(node) in seen:
                continue
            root = node.test if isinstance(node, ast.Assert) else node
            seen.update(id(n) for n in ast.walk(root))
            found.extend(_numbers_in(root, skip))
    # a number inside an assert that is also a check call is found twice: keep one per place
    return sorted(set(found), key=lambda t: (t[1], t[0]))


NUMBER_IN_TEXT = re.compile(r"(?<![\w.])-?\d+(?:\.\d+)?(?![\w.])")


def _docstring_ids(tree: ast.Module) -> set[int]:
    out = set()
    for node in ast.walk(tree):
        if isinstance(node, (ast.Module, ast.FunctionDef, ast.AsyncFunctionDef, ast.ClassDef)) and node.body:
            first = node.body[0]
            if isinstance(first, ast.Expr) and isinstance(first.value, ast.Constant):
                out.add(id(first.value))
    return out


def _numbers_outside_checks(tree: ast.Module) -> set[float]:
    """Every number in the module that is not inside an assert or a check call, including the
    numbers written inside string literals that are not docstrings (a spec's YAML text)."""
    inside: set[int] = set(_docstring_ids(tree))
    for node in ast.walk(tree):
        if isinstance(node, ast.Assert) or _is_check_call(node):
            for n in ast.walk(node):
                inside.add(id(n))
    out: set[float] = set()
    for node in ast.walk(tree):
        if id(node) in inside:
            continue
        v = _number(node)
        if v is not None:
            out.add(v)
            if isinstance(node, ast.UnaryOp):
                inside.add(id(node.operand))  # the operand alone is not a second number
        elif isinstance(node, ast.Constant) and type(node.value) in (int, float):
            out.add(node.value)
        elif isinstance(node, ast.Constant) and isinstance(node.value, str):
            for token in NUMBER_IN_TEXT.findall(node.value):
                out.add(float(token))
    return out


def _outside(value: float, built: set[float]) -> bool:
    if value in TRIVIAL or value in built:
        return False
    if isinstance(value, float) and 0 < abs(value) < ROUND_OFF:
        return False
    return True


def _test_functions(tree: ast.Module):
    for node in tree.body:
        if isinstance(node, (ast.FunctionDef, ast.AsyncFunctionDef)) and node.name.startswith("test"):
            yield node.name, node
        elif isinstance(node, ast.ClassDef) and node.name.startswith("Test"):
            for item in node.body:
                if isinstance(item, (ast.FunctionDef, ast.AsyncFunctionDef)) and item.name.startswith("test"):
                    yield f"{node.name}.{item.name}", item


def _function_text(lines: list[str], func: ast.AST) -> str:
    first = min([func.lineno, *(d.lineno for d in func.decorator_list)])
    # comments written just above the def belong to it
    while first > 1 and lines[first - 2].lstrip().startswith("#"):
        first -= 1
    return "\n".join(lines[first - 1:func.end_lineno])


def scan_source(source: str, filename: str = "<source>") -> list[tuple[str, int, list[tuple[float, int]]]]:
    """(function name, line, [(value, line)]) of every test function whose outside numbers
    have no source word near them."""
    tree = ast.parse(source, filename=filename)
    doc = ast.get_docstring(tree) or ""
    if any(line.strip().startswith("Provenance:") for line in doc.splitlines()):
        return []
    lines = source.splitlines()
    built = _numbers_outside_checks(tree)
    flagged = []
    for name, func in _test_functions(tree):
        values = [(v, ln) for v, ln in _checked_numbers(func) if _outside(v, built)]
        if values and not SOURCE_WORDS.search(_function_text(lines, func)):
            flagged.append((name, func.lineno, values))
    return flagged


def scan(paths: list[Path]) -> list[tuple[Path, str, int, list[tuple[float, int]]]]:
    out = []
    for path in paths:
        for name, line, values in scan_source(path.read_text(encoding="utf-8"), str(path)):
            out.append((path, name, line, values))
    return out


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("paths", nargs="*", type=Path, help="test files (default: tests/test_*.py)")
    ap.add_argument("-v", "--verbose", action="store_true", help="show the numbers found")
    ap.add_argument("--count", action="store_true", help="print only the number of flagged functions")
    args = ap.parse_args(argv)
    paths = args.paths or sorted(TESTS.glob("test_*.py"))
    found = scan(paths)
    if args.count:
        print(len(found))
        return 0
    for path, name, line, values in found:
        rel = path.resolve().relative_to(ROOT) if path.resolve().is_relative_to(ROOT) else path
        shown = ", ".join(f"{v:g}@{ln}" for v, ln in values) if args.verbose else ""
        print(f"{rel}:{line}: {name}" + (f"  [{shown}]" if shown else ""))
    files = len({p for p, *_ in found})
    print(f"{len(found)} test functions in {files} files compare against numbers with no source near them",
          file=sys.stderr)
    return 0


if __name__ == "__main__":
    sys.exit(main())
