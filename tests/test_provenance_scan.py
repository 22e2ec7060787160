"""Every number a test compares against says where it comes from (tools/provenance_scan.py).

House rule (DEVELOPERS.md, "Tests"): a value a check compares against that does not come from
the test's own arithmetic carries its source beside it -- a standard and its section, a
reference library, an analytic derivation, "common practice, no source", "from memory" or
"house choice".  The scan lists test functions that compare against a numeric literal with
no such word in their text; it is tested here on planted source, then run on the suite.
"""

from __future__ import annotations

import importlib.util
import textwrap
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
_spec = importlib.util.spec_from_file_location("provenance_scan", ROOT / "tools" / "provenance_scan.py")
scan_tool = importlib.util.module_from_spec(_spec)
_spec.loader.exec_module(scan_tool)


def flagged(source: str) -> list[str]:
    return [name for name, _line, _values in scan_tool.scan_source(textwrap.dedent(source))]


def test_a_bare_literal_is_flagged_and_a_source_clears_it():
    bare = '''
        def test_level(m):
            assert m["level_db"] == pytest.approx(-42.5, abs=0.05)
    '''
    assert flagged(bare) == ["test_level"]
    for source in ("house choice", "from memory", "analytic", "common practice, no source",
                   "EBU Tech 3341 Table 1", "pyloudnorm", "ITU-R BS.1770-5 Annex 2"):
        assert flagged(bare.replace("abs=0.05)", f"abs=0.05)  # {source}")) == [], source


def test_methods_of_test_classes_and_the_words_above_a_def_count():
    source = '''
        class TestLevels:
            def test_one(self, m):
                assert m > 17.25

        # house choice: the floor of the display
        def test_two(m):
            assert m > 17.25
    '''
    assert flagged(source) == ["TestLevels.test_one"]


def test_the_test_s_own_numbers_counts_and_round_off_are_not_flagged():
    source = '''
        SPEC = "loudness: {target_lufs: -16.5}"

        def test_own(x, spec, proc):
            y = make(frames=4800)
            assert y.frames == 4800              # an input the test built
            assert len(y.events) == 7            # a count
            assert y.data.shape == (4800, 6)     # a shape
            assert proc.returncode == 3          # an exit code (README table)
            assert spec.target == -16.5          # written in the spec text above
            assert abs(y.mean) < 1e-9            # round-off
            assert f(17.25, 3.5) is True         # arguments of the code under test
            assert y.ok, f"{y} not within 99.5"  # an assert's message
    '''
    assert flagged(source) == []


def test_a_module_provenance_line_covers_every_function():
    source = '''
        """Judge rule tests.

        Provenance: house choice, the judging rule of DEVELOPERS.md.
        """

        def test_tie():
            assert check(20.05) == 20.1
    '''
    assert flagged(source) == []
    assert flagged(source.replace("Provenance:", "Context:")) == ["test_tie"]


def test_every_test_function_in_the_suite_names_the_source_of_its_numbers():
    found = scan_tool.scan(sorted((ROOT / "tests").glob("test_*.py")))
    lines = [f"{path.name}:{line} {name}: {', '.join(f'{v:g}' for v, _ in values)}"
             for path, name, line, values in found]
    assert lines == [], ("write the source beside these numbers (a standard and its section, a reference "
                         "library, 'analytic: <derivation>', 'by construction', 'house choice', 'from memory', "
                         "'common practice, no source'):\n" + "\n".join(lines))
