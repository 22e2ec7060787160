"""The spec loader's parts one by one: positions, guards, ``extends:`` resolution, messages.

Fast and free of audio (it runs under ``make mutation``).  Sources of the values:

* the characters a YAML stream may hold: YAML 1.1, section 5.1 (c-printable:
  TAB, LF, CR, NEL, 0x20-0x7E, 0xA0-0xD7FF, 0xE000-0xFFFD, 0x10000-0x10FFFF);
* line and column are 1-based, counted in characters (house choice, the way
  editors show them); PyYAML's marks are 0-based, so the loader adds one;
* the size, depth, number-length and excerpt limits are the loader's own
  (house choice: MAX_SPEC_BYTES, MAX_DEPTH, MAX_NUMBER_CHARS, EXCERPT_CHARS);
* the wording of every message is the project's own (house choice).
"""

from __future__ import annotations

import hashlib
import os

import pytest

from masterqc.errors import SpecError
from masterqc.spec import loader as L


def problems(exc_info) -> list:
    return [tuple(p) for p in exc_info.value.problems]


def write(folder, name, text):
    p = folder / name
    p.parent.mkdir(parents=True, exist_ok=True)
    p.write_text(text, encoding="utf-8")
    return p


GOOD = "spec_version: 1\nname: invented house spec\n"


# ------------------------------------------------------------------ small helpers

def test_excerpt_quotes_text_and_cuts_at_the_limit():
    assert L.EXCERPT_CHARS == 40
    assert L.excerpt("abc") == "'abc'"
    assert L.excerpt("x" * 40) == "'" + "x" * 40 + "'"
    assert L.excerpt("x" * 41) == "'" + "x" * 40 + "...'"
    assert L.excerpt("a\x1bb") == "'a\\x1bb'"  # a control character is shown escaped
    assert L.excerpt(12.5) == "12.5"  # a number is not quoted
    assert L.excerpt(list(range(30))) == repr(list(range(30)))[:40] + "..."
    assert L.excerpt("abcdef", limit=3) == "'abc...'"


def test_line_col_is_one_based():
    text = "ab\ncd\n\nef"
    assert L._line_col(text, 0) == (1, 1)
    assert L._line_col(text, 1) == (1, 2)
    assert L._line_col(text, 3) == (2, 1)
    assert L._line_col(text, 4) == (2, 2)
    assert L._line_col(text, 7) == (4, 1)


@pytest.mark.parametrize("o, ok", [
    (0x00, False), (0x08, False), (0x09, True), (0x0A, True), (0x0B, False), (0x0C, False), (0x0D, True),
    (0x1F, False), (0x20, True), (0x7E, True), (0x7F, False), (0x84, False), (0x85, True), (0x86, False),
    (0x9F, False), (0xA0, True), (0xD7FF, True), (0xD800, False), (0xDFFF, False), (0xE000, True),
    (0xFFFD, True), (0xFFFE, False), (0xFFFF, False), (0x10000, True), (0x10FFFF, True)])
def test_allowed_characters_are_yaml_printable(o, ok):
    # YAML 1.1 section 5.1, c-printable (the byte-order mark 0xFEFF is inside 0xE000-0xFFFD)
    assert L._allowed_char(o) is ok


def test_dotted_key_paths():
    assert L._dotted(()) == ""
    assert L._dotted(("loudness",)) == "loudness"
    assert L._dotted(("loudness", "integrated")) == "loudness.integrated"
    assert L._dotted(("sampling", "conversions", 1, "true_peak")) == "sampling.conversions[1].true_peak"
    assert L._dotted((0, "a")) == "[0].a"


def test_positions_find_the_nearest_ancestor_and_prefer_keys():
    pos = L._Positions()
    pos.key[("a",)] = ("f", 1, 1)
    pos.value[("a",)] = ("f", 1, 4)
    pos.value[("a", "b")] = ("f", 2, 6)
    pos.key[("a", "c")] = ("f", 3, 3)
    assert pos.find(("a",)) == ("f", 1, 4)
    assert pos.find(("a",), prefer_key=True) == ("f", 1, 1)
    assert pos.find(("a", "b"), prefer_key=True) == ("f", 2, 6)  # no key mark: the value's
    assert pos.find(("a", "c")) == ("f", 3, 3)  # no value mark: the key's
    assert pos.find(("a", "x", "y")) == ("f", 1, 4)
    assert pos.find(("z",)) is None
    other = L._Positions()
    other.value[("z",)] = ("g", 9, 9)
    pos.update(other)
    assert pos.find(("z",)) == ("g", 9, 9)
    pos.drop(("a",))
    assert pos.find(("a", "b")) is None and pos.find(("z",)) == ("g", 9, 9)
    assert ("a",) not in pos.key


# ------------------------------------------------------------------ prescan: characters and depth

def test_a_control_character_is_named_at_its_line_and_column():
    out = L._prescan("name: a\nx: b\x07c\n", "s.yaml")
    assert out == [("s.yaml", "", 2, 5, "the character U+0007 is not allowed in a spec (control characters and "
                                          "NUL bytes cannot be YAML text)")]
    assert L._prescan("a: \u00e9\u2603\U0001F600\n", "s.yaml") == []


def test_flow_depth_limit_counts_brackets():
    # one indentation level (the top) plus 63 brackets is 64 levels: allowed; one more is refused
    assert L.MAX_DEPTH == 64
    assert L._prescan("[" * 63 + "]" * 63, "s") == []
    assert L._prescan("[" * 64 + "]" * 64, "s") == [("s", "", 1, 64, "nesting is too deep (more than 64 levels)")]
    assert L._prescan("{" * 64, "s")[0][2:4] == (1, 64)
    # closing brackets bring the count down again: many shallow lists on one line pass
    assert L._prescan("[" * 40 + "]" * 40 + "[" * 40 + "]" * 40, "s") == []
    # extra closing brackets never make the count negative
    assert L._prescan("]" * 10 + "[" * 63, "s") == []


def test_flow_depth_ignores_quoted_and_commented_brackets():
    assert L._prescan("a: '" + "[" * 80 + "'\n", "s") == []
    assert L._prescan('a: "' + "{" * 80 + '"\n', "s") == []
    assert L._prescan("a: 1 # " + "[" * 80 + "\n", "s") == []
    assert L._prescan("# " + "[" * 80 + "\n", "s") == []
    assert L._prescan("a:\t# " + "[" * 80 + "\n", "s") == []  # after a tab too
    # a "#" inside a word starts no comment: 64 brackets after it are counted (column of the 64th: 5 + 64;
    # columns 1-based, house choice; 64 levels: MAX_DEPTH, house choice)
    assert L._prescan("a: x#" + "[" * 64 + "\n", "s") == [("s", "", 1, 69, "nesting is too deep (more than 64 levels)")]
    # a quote inside a word does not open a quoted span (by construction: 8 characters, then the 64th bracket)
    assert L._prescan("a: it's " + "[" * 64 + "\n", "s")[0][3] == 72


def test_block_depth_counts_indentation_and_list_markers():
    deep = "".join(" " * i + f"k{i}:\n" for i in range(63)) + " " * 63 + "v: 1\n"  # 64 levels
    assert L._prescan(deep, "s") == []
    # 65 levels (by construction), over MAX_DEPTH 64 (house choice); reported on line 65 of the text
    deeper = "".join(" " * i + f"k{i}:\n" for i in range(64)) + " " * 64 + "v: 1\n"
    assert L._prescan(deeper, "s") == [("s", "", 65, 1, "nesting is too deep (more than 64 levels)")]
    # blank and comment lines do not change the indentation
    assert L._prescan(deep.replace("k10:\n", "k10:\n\n" + " " * 70 + "# note\n"), "s") == []
    # going back out pops levels
    back = deep + "top: 1\n" + deep.replace("k", "j")
    assert L._prescan(back, "s") == []
    # "- " markers on one line nest too: 63 of them after the top level is 64
    assert L._prescan("- " * 63 + "x\n", "s") == []
    assert L._prescan("- " * 64 + "x\n", "s") == [("s", "", 1, 1, "nesting is too deep (more than 64 levels)")]
    assert L._prescan("? " * 64 + "x\n", "s")[0][2] == 1


# ------------------------------------------------------------------ parsing

def test_parse_yaml_keeps_positions_of_keys_and_values():
    data, pos, probs = L.parse_yaml("spec_version: 1\nloudness:\n  integrated: {max_lufs: -14}\n", "s.yaml")
    assert probs == [] and data == {"spec_version": 1, "loudness": {"integrated": {"max_lufs": -14}}}
    assert pos.key[("loudness", "integrated")] == ("s.yaml", 3, 3)
    # by construction: 1-based line and column (house choice) of the "{" and of "-14" in line 3
    assert pos.value[("loudness", "integrated")] == ("s.yaml", 3, 15)
    assert pos.value[("loudness", "integrated", "max_lufs")] == ("s.yaml", 3, 26)
    assert pos.value[()] == ("s.yaml", 1, 1)


def test_parse_yaml_lists_and_dates_and_merge_keys():
    text = "base: &b {x: 1, y: 2}\nother:\n  <<: *b\n  y: 3\nwhen: 2024-05-01\nl: [a, 1]\nnull: ~\n"
    data, pos, probs = L.parse_yaml(text, "s")
    assert probs == []
    # YAML 1.1 merge key (yaml.org/type/merge.html): the mapping's own keys override merged ones
    assert data["other"] == {"x": 1, "y": 3}
    assert pos.value[("other", "y")] == ("s", 4, 6) and pos.value[("other", "x")] == ("s", 1, 14)
    d2, _pos, probs = L.parse_yaml("a: &a {x: 1}\nb: &b {x: 2, z: 3}\nc: {<<: [*a, *b]}\n", "s")
    assert probs == [] and d2["c"] == {"x": 1, "z": 3}  # the first mapping listed wins
    _d, _pos, probs = L.parse_yaml("a: &a {x: 1}\nc:\n  <<: *a\n  y: 1\n  y: 2\n", "s")
    assert probs == [("s", "c.y", 5, 3, "key 'y' is given twice")]
    assert data["when"] == "2024-05-01"  # a date stays text
    assert data["l"] == ["a", 1] and pos.value[("l", 1)] == ("s", 6, 8)
    assert data["null"] is None  # the key null is the text "null"
    data, _pos, _p = L.parse_yaml("1: a\ntrue: b\n", "s")
    assert data == {"1": "a", "True": "b"}  # keys are text


@pytest.mark.parametrize("text, problem", [
    ("", ("s", "", 1, 1, "the spec file is empty")),
    ("# only a comment\n", ("s", "", 1, 1, "the spec file is empty")),
    ("- a\n- b\n", ("s", "", 1, 1, "a spec must be a mapping of keys (spec_version, name, sections), not a list")),
    ("\n  just text\n", ("s", "", 2, 3,
                         "a spec must be a mapping of keys (spec_version, name, sections), not a single value")),
    ("a: 1\na: 2\n", ("s", "a", 2, 1, "key 'a' is given twice")),
    ("x:\n  ? [a, b]\n  : 1\n", ("s", "x", 2, 5, "a key must be a plain word, not a list or mapping")),
    ("a: !!python/object:os.system x\n", ("s", "a", 1, 4, "the YAML tag 'tag:yaml.org,2002:python/object:os.system' "
                                                          "is not allowed: a spec holds plain values only")),
    ("a: !custom 3\n", ("s", "a", 1, 4, "the YAML tag '!custom' is not allowed: a spec holds plain values only")),
    ("a: " + "1" * 101 + "\n", ("s", "a", 1, 4, "a number of 101 characters is too long (at most 100)")),
    ("a: 0." + "5" * 99 + "\n", ("s", "a", 1, 4, "a number of 101 characters is too long (at most 100)")),
    ("a: *nothing\n", ("s", "", 1, 4, "not valid YAML: found undefined alias 'nothing'")),
])
def test_parse_yaml_problems(text, problem):
    data, _pos, probs = L.parse_yaml(text, "s")
    assert data is None or problem[-1].startswith("key ") or "tag" in problem[-1] or "number" in problem[-1] \
        or "plain word" in problem[-1]
    assert problem in probs


def test_a_number_of_100_characters_is_read():
    data, _pos, probs = L.parse_yaml("a: " + "1" * 100 + "\nb: 1.5\n", "s")
    assert probs == [] and data["a"] == int("1" * 100) and data["b"] == 1.5


def test_a_value_python_cannot_build_is_named():
    # YAML 1.1 reads 1_0 as the int 10 and 1:30 as 1*60 + 30 = 90 (yaml.org/type/int: "_" ignored, ":" for
    # base 60); a huge float overflows to inf in PyYAML, an int in base 60 is read
    data, _pos, probs = L.parse_yaml("a: 1_0\nb: 1:30\n", "s")
    assert probs == [] and data == {"a": 10, "b": 90}


def test_yaml_syntax_error_names_line_and_column_and_is_short():
    _d, _p, probs = L.parse_yaml("a: 1\nb: [1, 2\nc: 3\n", "s.yaml")
    assert len(probs) == 1
    f, key, line, col, msg = probs[0]
    assert (f, key, line, col) == ("s.yaml", "", 3, 2)
    assert msg.startswith("not valid YAML: while parsing a flow sequence expected ',' or ']'")
    _d, _p, probs = L.parse_yaml("a: 'x" + "y" * 300 + "\n", "s")
    assert len(probs[0][4]) <= len("not valid YAML: ") + 163


# ------------------------------------------------------------------ reading files

def test_read_limits_size_and_encoding(tmp_path):
    assert L.MAX_SPEC_BYTES == 1 << 20
    p = tmp_path / "big.yaml"
    p.write_bytes(b"#" * (L.MAX_SPEC_BYTES + 1))
    with pytest.raises(SpecError) as e:
        L._read(str(p))
    assert problems(e) == [(str(p), "", None, None, f"the spec file is {L.MAX_SPEC_BYTES + 1} bytes; a spec may be "
                                                    "at most 1048576 bytes (1 MiB)")]
    p.write_bytes(b"#" * L.MAX_SPEC_BYTES)
    assert len(L._read(str(p))[0]) == L.MAX_SPEC_BYTES
    p.write_bytes(b"a: 1\nname: caf\xe9\n")
    with pytest.raises(SpecError) as e:
        L._read(str(p))
    assert problems(e) == [(str(p), "", 2, 10, "the spec file is not UTF-8 text (byte offset 14)")]
    p.write_bytes(b"\xef\xbb\xbfa: 1\n")  # a UTF-8 byte-order mark is dropped
    assert L._read(str(p)) == ("a: 1\n", b"\xef\xbb\xbfa: 1\n")
    with pytest.raises(SpecError) as e:
        L._read(str(tmp_path / "absent.yaml"))
    (f, key, line, col, msg), = problems(e)
    assert (f, key, line, col) == (str(tmp_path / "absent.yaml"), "", None, None)
    assert msg.startswith("cannot read the spec file (")


# ------------------------------------------------------------------ extends: where a base may be

def test_resolve_base_inside_the_folder_or_a_library(tmp_path):
    here, lib, outside = tmp_path / "specs", tmp_path / "lib", tmp_path / "elsewhere"
    write(here, "base.yaml", GOOD)
    write(here, "sub/deep.YML", GOOD)
    write(lib, "house.yaml", GOOD)
    write(outside, "secret.yaml", GOOD)
    write(here, "notes.txt", GOOD)
    assert L.resolve_base("base.yaml", str(here)) == os.path.join(str(here), "base.yaml")
    assert L.resolve_base("sub/deep.YML", str(here)) == os.path.join(str(here), "sub/deep.YML")
    assert L.resolve_base("house.yaml", str(here)) is None
    assert L.resolve_base("house.yaml", str(here), [str(lib)]) == os.path.join(str(lib), "house.yaml")
    assert L.resolve_base("../elsewhere/secret.yaml", str(here)) is None
    assert L.resolve_base("../elsewhere/secret.yaml", str(here), [str(lib)]) is None
    assert L.resolve_base(str(here / "base.yaml"), str(here)) is None  # absolute
    assert L.resolve_base("notes.txt", str(here)) is None
    assert L.resolve_base("missing.yaml", str(here)) is None
    assert L.resolve_base("sub", str(here)) is None
    os.symlink(outside / "secret.yaml", here / "link.yaml")
    assert L.resolve_base("link.yaml", str(here)) is None  # a link out of the folder
    os.symlink(here / "base.yaml", here / "inner.yaml")
    assert L.resolve_base("inner.yaml", str(here)) == os.path.join(str(here), "inner.yaml")
    # a sibling folder whose name starts with the folder's name is not inside it
    write(tmp_path / "specs2", "x.yaml", GOOD)
    assert L.resolve_base("../specs2/x.yaml", str(here)) is None
    assert L._inside("/a/b", "/a/b") and L._inside("/a/b", "/a/b/c") and not L._inside("/a/b", "/a/bc")


def test_merge_overrides_removes_and_replaces():
    base = {"a": {"x": 1, "y": 2}, "l": [1, 2], "k": 1, "gone": {"z": 1}}
    over = {"a": {"y": 3, "w": 4}, "l": [9], "gone": None, "new": None}
    bpos, opos = L._Positions(), L._Positions()
    bpos.value[("gone", "z")] = ("b", 5, 1)
    bpos.value[("l",)] = ("b", 2, 1)
    bpos.value[("a", "x")] = ("b", 3, 1)
    out = L._merge(base, over, bpos, opos)
    assert out == {"a": {"x": 1, "y": 3, "w": 4}, "l": [9], "k": 1, "new": None}
    assert base == {"a": {"x": 1, "y": 2}, "l": [1, 2], "k": 1, "gone": {"z": 1}}  # not changed in place
    assert ("gone", "z") not in bpos.value and ("l",) not in bpos.value and ("a", "x") in bpos.value


def test_extends_list_applies_bases_in_order_and_the_file_last(tmp_path):
    write(tmp_path, "one.yaml", GOOD + "description: one\npeaks: {true_peak: {max_dbtp: -1.0}}\n")
    write(tmp_path, "two.yaml", GOOD + "extends: one.yaml\ndescription: two\n"
                                       "loudness: {integrated: {target_lufs: -14.0, tolerance_lu: 1.0}}\n")
    write(tmp_path, "three.yaml", GOOD + "peaks: {true_peak: {max_dbtp: -2.0}}\n")
    top = write(tmp_path, "top.yaml", "spec_version: 1\nname: top\nextends: [two.yaml, three.yaml]\n")
    ls = L.load_spec(top)
    assert ls.spec.name == "top" and ls.spec.description == "two"
    assert ls.spec.peaks.true_peak.max_dbtp == -2.0  # the later base wins
    assert ls.spec.loudness.integrated.target_lufs == -14.0
    assert [os.path.basename(f["path"]) for f in ls.files] == ["top.yaml", "two.yaml", "one.yaml", "three.yaml"]
    assert ls.sha256 == hashlib.sha256(top.read_bytes()).hexdigest()
    assert ls.files[2]["sha256"] == hashlib.sha256((tmp_path / "one.yaml").read_bytes()).hexdigest()
    assert ls.info() == {"name": "top", "path": str(top), "sha256": ls.sha256, "files": ls.files}
    assert ls.name == "top" and ls.warnings == []


def test_a_base_reached_twice_is_listed_once_and_the_delivery_flag_is_kept(tmp_path):
    write(tmp_path, "house.yaml", GOOD)
    write(tmp_path, "a.yaml", GOOD + "extends: house.yaml\n")
    write(tmp_path, "b.yaml", GOOD + "extends: ./house.yaml\n")
    top = write(tmp_path, "top.yaml", GOOD + "extends: [a.yaml, b.yaml]\n")
    ls = L.load_spec(top, from_delivery_folder=True)
    assert [os.path.basename(f["path"]) for f in ls.files] == ["top.yaml", "a.yaml", "house.yaml", "b.yaml"]
    assert ls.info()["from_delivery_folder"] is True
    assert "from_delivery_folder" not in L.load_spec(top).info()


def test_a_base_in_a_library_folder(tmp_path):
    write(tmp_path / "lib", "house.yaml", GOOD + "peaks: {true_peak: {max_dbtp: -1.5}}\n")
    top = write(tmp_path / "specs", "top.yaml", GOOD + "extends: house.yaml\n")
    with pytest.raises(SpecError) as e:
        L.load_spec(top)
    assert problems(e) == [(str(top), "extends", 3, 10, "base spec 'house.yaml' not found in this spec's folder "
                                                        "(extends may not leave them: no '..' out of them, no links "
                                                        "out of them)")]
    with pytest.raises(SpecError) as e:
        L.load_spec(top, libraries=[tmp_path / "other"])
    assert "not found in this spec's folder or the spec library folders" in problems(e)[0][4]
    ls = L.load_spec(top, libraries=[tmp_path / "lib"])
    assert ls.spec.peaks.true_peak.max_dbtp == -1.5


@pytest.mark.parametrize("ext, key, col, msg", [
    ("/etc/x.yaml", "extends", 10, "extends '/etc/x.yaml' is an absolute path; name a base spec relative to this "
                                   "spec's folder or to a spec library folder"),
    ("base.txt", "extends", 10, "extends 'base.txt' is not a spec file name (base specs end in .yaml or .yml)"),
    ("[a.yaml, 3]", "extends", 10, "extends must be a file name or a list of file names"),
    ("{a: b.yaml}", "extends", 10, "extends must be a file name or a list of file names"),
    ("[ok.yaml, base.json]", "extends[1]", 20,
     "extends 'base.json' is not a spec file name (base specs end in .yaml or .yml)"),
])
def test_bad_extends_are_named_at_their_position(tmp_path, ext, key, col, msg):
    write(tmp_path, "ok.yaml", GOOD)
    top = write(tmp_path, "top.yaml", GOOD + f"extends: {ext}\n")
    with pytest.raises(SpecError) as e:
        L.load_spec(top)
    assert problems(e) == [(str(top), key, 3, col, msg)]


def test_every_bad_base_is_reported_and_a_problem_in_a_base_names_the_base(tmp_path):
    bad = write(tmp_path, "bad.yaml", GOOD + "peaks: [\n")
    top = write(tmp_path, "top.yaml", GOOD + "extends: [bad.yaml, nope.yaml, x.txt]\n")
    with pytest.raises(SpecError) as e:
        L.load_spec(top)
    got = problems(e)
    assert [(p[0], p[1]) for p in got] == [(str(bad), ""), (str(top), "extends[1]"), (str(top), "extends[2]")]


@pytest.mark.parametrize("value, msg", [
    ('"1"', "spec_version is written as text; write the number 1 without quotes"),
    ("' 1 '", "spec_version is written as text; write the number 1 without quotes"),
    ("2", "spec_version 2 is not one this masterqc reads (supported: 1)"),
    ("true", "spec_version True is not one this masterqc reads (supported: 1)"),
    ("one", "spec_version 'one' is not one this masterqc reads (supported: 1)"),
])
def test_spec_version_checked_before_anything_else(tmp_path, value, msg):
    top = write(tmp_path, "top.yaml", f"name: x\nspec_version: {value}\nextends: missing.yaml\n")
    with pytest.raises(SpecError) as e:
        L.load_spec(top)
    # by construction: line 2, column 15 (1-based, house choice) is where the value starts in the text above
    assert problems(e) == [(str(top), "spec_version", 2, 15, msg)]


def test_a_spec_without_spec_version_names_the_missing_key(tmp_path):
    top = write(tmp_path, "top.yaml", "name: x\n")
    with pytest.raises(SpecError) as e:
        L.load_spec(top)
    assert problems(e) == [(str(top), "spec_version", 1, 1, "missing required key 'spec_version'")]


def test_a_long_chain_of_bases_is_refused(tmp_path):
    # 32 files in a chain are read; the 33rd is refused at the extends of the 32nd (house choice)
    assert L.MAX_EXTENDS_CHAIN == 32
    for i in range(40):
        write(tmp_path, f"s{i}.yaml", GOOD + f"extends: s{i + 1}.yaml\n")
    write(tmp_path, "s40.yaml", GOOD)
    assert len(L.load_spec(tmp_path / "s9.yaml").files) == 32
    with pytest.raises(SpecError) as e:
        L.load_spec(tmp_path / "s8.yaml")
    assert problems(e) == [(str(tmp_path / "s39.yaml"), "extends", 3, 10,
                            "the chain of extends: bases is too long (more than 32 files)")]


def test_a_base_nulled_key_leaves_no_position(tmp_path):
    write(tmp_path, "base.yaml", GOOD + "peaks: {true_peak: {max_dbtp: -1.0}}\n")
    top = write(tmp_path, "top.yaml", GOOD + "extends: base.yaml\npeaks: null\n")
    ls = L.load_spec(top)
    assert ls.spec.peaks is None


# ------------------------------------------------------------------ validation messages

def msgs(text):
    with pytest.raises(SpecError) as e:
        L.load_spec_text(GOOD + text, "t.yaml")
    return problems(e)


@pytest.mark.parametrize("text, item", [
    ("peaks: {true_peak: {max_dbtp: '-1'}}\n",
     ("t.yaml", "peaks.true_peak.max_dbtp", 3, 31, "expected a number, got the text '-1'; remove the quotes")),
    ("peaks: {true_peak: {max_dbtp: -1 dBTP}}\n",
     ("t.yaml", "peaks.true_peak.max_dbtp", 3, 31, "expected a number, got the text '-1 dBTP'; write the number "
                                                   "alone, the unit is in the key name")),
    ("peaks: {true_peak: {max_dbtp: true}}\n",
     ("t.yaml", "peaks.true_peak.max_dbtp", 3, 31, "expected a number, got true (a yes/no value)")),
    ("peaks: {true_peak: {max_dbtp: null}}\n",
     ("t.yaml", "peaks.true_peak.max_dbtp", 3, 31, "expected a number, got null")),
    ("peaks: {true_peak: {max_dbtp: [1]}}\n",
     ("t.yaml", "peaks.true_peak.max_dbtp", 3, 31, "expected a number, got a list")),
    ("peaks: {true_peak: {max_dbtp: {a: 1}}}\n",
     ("t.yaml", "peaks.true_peak.max_dbtp", 3, 31, "expected a number, got a mapping")),
    ("peaks: {true_peak: {max_db: -1.0}}\n",
     ("t.yaml", "peaks.true_peak.max_db", 3, 21, "unknown key 'max_db'; wrong unit? here it is written 'max_dbtp'")),
    ("peaks: {truepeak: {max_dbtp: -1.0}}\n",
     ("t.yaml", "peaks.truepeak", 3, 9, "unknown key 'truepeak'; did you mean 'true_peak'?")),
    ("peaks: {true_pk: {max_dbtp: -1.0}}\n",
     ("t.yaml", "peaks.true_pk", 3, 9, "unknown key 'true_pk'; wrong unit? here it is written 'true_peak'")),
    ("sampling: {conversions: [{target_rate_hz: 48000, zzz: 1}]}\n",
     ("t.yaml", "sampling.conversions[0].zzz", 3, 50,
      "unknown key 'zzz'; valid keys here: energy_above_nyquist, target_rate_hz, true_peak")),
    ("sampling: {conversions: 48000}\n",
     ("t.yaml", "sampling.conversions", 3, 25, "expected a list (e.g. [a, b]), got the number 48000")),
    ("peaks: 3\n", ("t.yaml", "peaks", 3, 8, "expected a mapping of keys, got the number 3")),
    ("description: 3\n", ("t.yaml", "description", 3, 14, "expected text, got the number 3")),
    ("sampling: {upsampled: [maybe]}\n",
     ("t.yaml", "sampling.upsampled[0]", 3, 24, "expected true or false, got the text 'maybe'")),
    ("sampling: {conversions: [{target_rate_hz: 48000.5}]}\n",
     ("t.yaml", "sampling.conversions[0].target_rate_hz", 3, 43, "expected a whole number, got the number 48000.5")),
    ("sampling: {conversions: [{target_rate_hz: 100}]}\n",
     ("t.yaml", "sampling.conversions[0].target_rate_hz", 3, 43,
      "the number 100 is out of range: must be greater than or equal to 8000")),
    ("sampling: {upsampled_min_confidence: 1.5}\n",
     ("t.yaml", "sampling.upsampled_min_confidence", 3, 38,
      "the number 1.5 is out of range: must be less than or equal to 1")),
    ("sampling: {upsampled: []}\n", ("t.yaml", "sampling.upsampled", 3, 23, "the list must not be empty")),
    ("duration: {total: {min_s: -1.0}}\n",
     ("t.yaml", "duration.total", 3, 19, "min_s is -1: a duration cannot be negative")),
    ("duration: {length: {min_s: 1.0}}\n",
     ("t.yaml", "duration.length", 3, 12, "unknown key 'length'; valid keys here: total")),
])
def test_validation_messages_name_key_line_and_column(text, item):
    assert item in msgs(text)


def test_missing_required_key_points_at_the_mapping_that_lacks_it():
    assert ("t.yaml", "sampling.conversions[0].target_rate_hz", 5, 5, "missing required key 'target_rate_hz'") \
        in msgs("sampling:\n  conversions:\n  - true_peak: {max_dbtp: -1.0}\n")


def test_problems_are_sorted_by_position_and_not_repeated():
    got = msgs("peaks: {true_peak: {max_dbtp: x}}\ndescription: 3\nloudness: 4\n")
    assert [(p[1], p[2]) for p in got] == [("peaks.true_peak.max_dbtp", 3), ("description", 4), ("loudness", 5)]
    assert len({(p[1], p[4]) for p in got}) == len(got)


def test_load_spec_text_refuses_extends_and_hashes_the_text():
    text = GOOD + "extends: base.yaml\n"
    with pytest.raises(SpecError) as e:
        L.load_spec_text(text, "inline")
    assert problems(e) == [("inline", "extends", 3, 1, "extends needs a spec file (it is resolved relative to it)")]
    ls = L.load_spec_text(GOOD, "inline")
    digest = hashlib.sha256(GOOD.encode()).hexdigest()
    assert (ls.path, ls.sha256, ls.files) == ("inline", digest, [{"path": "inline", "sha256": digest}])
    with pytest.raises(SpecError) as e:
        L.load_spec_text("a: [\n")
    assert problems(e)[0][0] == "<spec>"


# ------------------------------------------------------------------ plausibility warnings

def test_plausibility_warnings_name_the_forgotten_minus_sign(tmp_path):
    p = write(tmp_path, "w.yaml", GOOD + "loudness:\n  integrated: {target_lufs: 14, tolerance_lu: 1}\n"
                                         "peaks: {true_peak: {max_dbtp: 1}}\n")
    ls = L.load_spec(p)
    # by construction: positions (1-based, house choice) of the values in the text written above
    assert ls.warnings == [
        (str(p), "loudness.integrated.target_lufs", 4, 29,
         "target_lufs: 14 LUFS is above 0; programme loudness is negative in LUFS (a missing minus sign? -14)"),
        (str(p), "peaks.true_peak.max_dbtp", 5, 31,
         "max_dbtp: 1 dBTP is above full scale; a true-peak ceiling is normally at or below 0 dBTP "
         "(a missing minus sign? -1)")]


def test_plausibility_warnings_leave_plausible_values_alone():
    pos = L._Positions()
    data = {"loudness": {"integrated": {"target_lufs": 0, "max_lufs": -0.5}},
            "peaks": {"true_peak": {"max_dbtp": 0.0}, "ceiling_dbtp": 0.5},
            "flag_lufs": True, "lst": [{"max_dbtp": 2}], "text_lufs": "12"}
    got = L.plausibility_warnings(data, pos, "d.yaml")
    assert [(w[0], w[1], w[2], w[3]) for w in got] == [("d.yaml", "peaks.ceiling_dbtp", None, None),
                                                         ("d.yaml", "lst[0].max_dbtp", None, None)]
    assert L.plausibility_warnings({"target_lufs": 0.01}, pos, "d")[0][4].startswith("target_lufs: 0.01 LUFS is above 0")
    assert L.plausibility_warnings(5, pos, "d") == []


# ------------------------------------------------------------------ edges of the helpers

def test_line_col_of_a_text_that_opens_with_a_newline():
    assert L._line_col("\nab", 2) == (2, 2)
    assert L._line_col("\n\nab", 1) == (2, 1)


def test_describe_names_each_kind_of_value():
    # by construction: each value is shown back as written (wording: house choice)
    assert [L._describe(v) for v in (None, False, "ab", 3, 2.5, [1], {"a": 1}, ("a",))] == [
        "null", "false (a yes/no value)", "the text 'ab'", "the number 3", "the number 2.5", "a list", "a mapping",
        "('a',)"]


@pytest.mark.parametrize("text, item", [
    # two underscores: the stem drops the last word only
    ("sampling: {ultrasonic_energy_5s: {max_db: -20.0}}\n",
     ("t.yaml", "sampling.ultrasonic_energy_5s", 3, 12,
      "unknown key 'ultrasonic_energy_5s'; wrong unit? here it is written 'ultrasonic_energy_3s'")),
    # no key with the same stem: the closest key by difflib's ratio (at least 0.5: 2*3/(3+9) for 'tru')
    ("peaks: {truepeak_x: {max_dbtp: -1.0}}\n",
     ("t.yaml", "peaks.truepeak_x", 3, 9, "unknown key 'truepeak_x'; did you mean 'true_peak'?")),
    ("peaks: {tru: {max_dbtp: -1.0}}\n",
     ("t.yaml", "peaks.tru", 3, 9, "unknown key 'tru'; did you mean 'true_peak'?")),
    # inside the mapping form of an allowed-values list
    ("sampling: {upsampled: {allowed: [false], bogus: 1}}\n",
     ("t.yaml", "sampling.upsampled.bogus", 3, 42, "unknown key 'bogus'; valid keys here: allowed, severity")),
])
def test_unknown_key_suggestions(text, item):
    assert item in msgs(text)


def test_the_package_entry_point_loads_a_file(tmp_path):
    from masterqc.spec import load_spec
    p = write(tmp_path, "s.yaml", GOOD)
    assert load_spec(p).spec.name == "invented house spec"
    assert load_spec(str(p)).path == str(p)


def test_find_walks_up_one_level_at_a_time():
    pos = L._Positions()
    pos.value[("a",)] = ("f", 1, 4)
    pos.value[("a", "b")] = ("f", 2, 6)
    assert pos.find(("a", "b", "z")) == ("f", 2, 6)


def test_inside_a_folder_written_with_a_trailing_separator():
    assert L._inside("/a/b/", "/a/b/c") and not L._inside("/a/b/", "/a/bc")


def test_merge_drops_the_positions_of_a_nested_key_it_removes():
    bpos = L._Positions()
    bpos.value[("a", "b")] = ("base", 3, 5)
    bpos.value[("a", "b", "x")] = ("base", 3, 9)
    bpos.value[("a", "c")] = ("base", 4, 5)
    out = L._merge({"a": {"b": {"x": 1}, "c": 2}}, {"a": {"b": None}}, bpos, L._Positions())
    assert out == {"a": {"c": 2}}
    assert ("a", "b") not in bpos.value and ("a", "b", "x") not in bpos.value and ("a", "c") in bpos.value
    bpos.value[("a", "c")] = ("base", 4, 5)
    L._merge({"a": {"c": 2}}, {"a": {"c": 3}}, bpos, L._Positions())
    assert ("a", "c") not in bpos.value  # replaced: the new file's position will be used


def test_a_cycle_names_the_chain_of_files(tmp_path):
    write(tmp_path, "a.yaml", GOOD + "extends: b.yaml\n")
    b = write(tmp_path, "b.yaml", "extends: [a.yaml]\n")
    with pytest.raises(SpecError) as e:
        L.load_spec(tmp_path / "a.yaml")
    assert problems(e) == [(str(b), "extends", 1, 11, "extends makes a cycle: a.yaml -> b.yaml -> a.yaml")]


def test_problems_on_one_line_are_in_column_order():
    # pydantic reports true_peak before sample_peak (the model's order); the problems follow the text
    # (by construction: columns 33 and 59 of the flow mapping on line 3, 1-based, house choice)
    got = msgs("peaks: {sample_peak: {max_dbfs: x}, true_peak: {max_dbtp: y}}\n")
    assert [(p[1], p[2], p[3]) for p in got] == [("peaks.sample_peak.max_dbfs", 3, 33),
                                                 ("peaks.true_peak.max_dbtp", 3, 59)]


# ------------------------------------------------------------------ the spec object of a result; schema header

def test_info_is_the_spec_object_of_a_result():
    # the keys of a result's "spec" object are the result contract's (house choice)
    text = GOOD + "version: 2.1\nreport: {client: Invented Client, job: '', operator: A. Tester}\n"
    ls = L.load_spec_text(text, "inline")
    digest = hashlib.sha256(text.encode()).hexdigest()
    assert ls.info() == {"name": "invented house spec", "path": "inline", "sha256": digest,
                         "files": [{"path": "inline", "sha256": digest}], "version": "2.1",
                         "report": {"client": "Invented Client", "operator": "A. Tester"}}  # empty job left out
    ls.report_fields = {"job": "J-7", "operator": "B. Checker"}  # --field overrides the spec's own fields
    ls.from_delivery_folder = True
    info = ls.info()
    assert info["report"] == {"client": "Invented Client", "job": "J-7", "operator": "B. Checker"}
    assert info["from_delivery_folder"] is True
    assert info["files"] is not ls.files[0] and info["files"][0] is not ls.files[0]  # copies, not the loader's own
    bare = L.load_spec_text(GOOD, "inline").info()
    assert set(bare) == {"name", "path", "sha256", "files"}  # no version, no report, not from the folder
    only_cli = L.load_spec_text(GOOD, "inline")
    only_cli.report_fields = {"client": "C"}
    assert only_cli.info()["report"] == {"client": "C"}
    assert L.load_spec_text(GOOD + "version: 3\n", "inline").info()["version"] == "3"


def test_validation_problems_of_inline_text_name_the_given_name():
    with pytest.raises(SpecError) as e:
        L.load_spec_text(GOOD + "description: [1]\n", "inline text")
    assert [p[:3] for p in problems(e)] == [("inline text", "description", 3)]


def test_suggestion_without_valid_keys_is_empty():
    assert L._suggest("anything", []) == ""


def test_model_at_a_scalar_or_list_of_scalars_is_none():
    from masterqc.spec.model import spec_model
    assert L._model_at(()) is spec_model()
    assert L._model_at(("peaks",)).__name__ == "PeaksSection"
    assert L._model_at(("name",)) is None  # a text, not a mapping
    assert L._model_at(("sampling", "conversions")) is None  # a list, not a mapping
    assert L._model_at(("sampling", "conversions", 0)) is not None  # each item is a mapping
    assert L._model_at(("no_such_key",)) is None


def test_published_spec_schema_declares_its_draft_and_title():
    from masterqc.spec.model import spec_json_schema
    schema = spec_json_schema()
    # JSON Schema 2020-12, Core, section 8.1.1: "$schema" names the dialect by this URI
    assert schema["$schema"] == "https://json-schema.org/draft/2020-12/schema"
    assert schema["title"] == "masterqc delivery spec"  # house choice


def test_a_strict_lower_bound_is_named():
    # dropout_min_s must be above 0 (house choice: a dropout has a length)
    assert msgs("integrity: {dropout_min_s: 0}\n") == [
        ("t.yaml", "integrity.dropout_min_s", 3, 28, "the number 0 is out of range: must be greater than 0")]


def test_one_message_at_two_keys_of_one_line_is_kept_twice():
    # problems are told apart by key path and message, not by line
    got = msgs("peaks: {sample_peak: {max_dbfs: x}, true_peak: {max_dbtp: x}}\n")
    assert [(p[1], p[2]) for p in got] == [("peaks.sample_peak.max_dbfs", 3), ("peaks.true_peak.max_dbtp", 3)]
    assert got[0][4] == got[1][4]


def test_the_value_budget_counts_every_expanded_value(monkeypatch):
    # the budget (house choice: MAX_VALUES = 100 000) at a small size, so it stays cheap under make mutation
    assert L.MAX_VALUES == 100_000
    monkeypatch.setattr(L, "MAX_VALUES", 20)
    # a mapping of two keys, each a list of 3: 1 + 2 keys' values + 2 * 3 items = 9 values;
    # the document mapping and its two keys (spec_version, name) are 3 more, then "a" and "b"
    body = "a: &x [1, 2, 3]\nb: *x\n"
    # values (keys are not counted): the document mapping 1, spec_version and name 2, the list under a 1
    # and its items 3, the same list again under b 1 + 3: 11
    monkeypatch.setattr(L, "MAX_VALUES", 11)
    data, _pos, probs = L.parse_yaml(GOOD + body, "b.yaml")
    assert probs == [] and data["b"] == [1, 2, 3]
    monkeypatch.setattr(L, "MAX_VALUES", 10)
    (p,) = L.parse_yaml(GOOD + body, "b.yaml")[2]
    # the 11th value is b's last item: the aliased node, written on line 3, column 14
    assert p == ("b.yaml", "", 3, 14, "the spec expands to more than 10 values (aliases repeated?)")
    bomb = "a0: &a0 [x, x, x]\na1: &a1 [*a0, *a0, *a0]\na2: [*a1, *a1, *a1]\n"  # 3 + 9 + 27 items
    monkeypatch.setattr(L, "MAX_VALUES", 20)
    (p,) = L.parse_yaml(GOOD + bomb, "b.yaml")[2]
    assert p[0] == "b.yaml" and p[4] == "the spec expands to more than 20 values (aliases repeated?)"


def test_a_repeated_error_is_listed_once_and_the_rest_still_follow():
    # house choice: one problem per key path and message (pydantic may report one key more than once
    # through a union); the errors are built by hand here, as pydantic documents for from_exception_data
    from pydantic import ValidationError
    text = GOOD + "description: 3\nversion: [1]\n"
    data, pos, probs = L.parse_yaml(text, "r.yaml")
    assert probs == []
    err = {"type": "string_type", "loc": ("description",), "input": 3}
    exc = ValidationError.from_exception_data("Spec", [err, dict(err), {"type": "list_type", "loc": ("version",),
                                                                         "input": 1}])
    assert L.problems_from_validation(exc, data, pos, "r.yaml") == [
        ("r.yaml", "description", 3, 14, "expected text, got the number 3"),
        ("r.yaml", "version", 4, 10, "expected a list (e.g. [a, b]), got the number 1")]


def test_every_base_of_a_list_is_looked_at_after_a_bad_one(tmp_path):
    write(tmp_path, "b.yml", GOOD + "peaks: {true_peak: {max_dbtp: -2.0}}\n")  # .yml is a spec file name too
    top = write(tmp_path, "top.yaml", GOOD + "extends: [/abs/x.yaml, base.txt, missing.yaml]\n")
    with pytest.raises(SpecError) as e:
        L.load_spec(top)
    # by construction: the columns (1-based) of the three list items in the "extends: [...]" line above
    assert [(p[1], p[3]) for p in problems(e)] == [("extends[0]", 11), ("extends[1]", 24), ("extends[2]", 34)]
    assert L.load_spec(write(tmp_path, "top2.yaml", GOOD + "extends: [b.yml]\n")).spec.peaks.true_peak.max_dbtp \
        == -2.0


def test_a_library_base_may_extend_another_library_base(tmp_path):
    write(tmp_path / "lib", "house.yaml", GOOD + "peaks: {true_peak: {max_dbtp: -1.5}}\n")
    write(tmp_path / "lib2", "label.yaml", GOOD + "extends: house.yaml\n")
    top = write(tmp_path / "specs", "top.yaml", GOOD + "extends: label.yaml\n")
    ls = L.load_spec(top, libraries=[tmp_path / "lib", tmp_path / "lib2"])
    assert ls.spec.peaks.true_peak.max_dbtp == -1.5


def test_keys_after_a_repeated_or_non_scalar_key_are_still_read():
    text = GOOD + "description: a\ndescription: b\n[x]: 1\nversion: 2\n"
    data, _pos, probs = L.parse_yaml(text, "k.yaml")
    assert [(p[1], p[2], p[4]) for p in probs] == [
        ("description", 4, "key 'description' is given twice"),
        ("", 5, "a key must be a plain word, not a list or mapping")]
    assert data == {"spec_version": 1, "name": "invented house spec", "description": "a", "version": 2}
