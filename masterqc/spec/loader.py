"""Loading a delivery spec: safe YAML with positions, ``extends:`` and errors people can act on.

YAML is read with PyYAML's safe loader (no object construction, no tags
beyond the plain scalars).  While the node tree is turned into plain values,
the line and column of every key and value are kept, so each validation
problem names the file, the key path, the line and the column.

``extends:`` names one base spec (or a list, applied in order), relative to
the file that says it.  A base must lie inside the folder of the spec that
names it or inside a spec library folder the operator names (``--spec-library``
on the command line, ``spec_libraries:`` in a spec map): never an absolute path,
never ``..`` out of those folders (links are resolved before the check), and
only files ending in ``.yaml`` or ``.yml``.

Hostile specs are refused before parsing: a spec file is at most
:data:`MAX_SPEC_BYTES`, holds no control characters, nests at most
:data:`MAX_DEPTH` levels and writes no number longer than
:data:`MAX_NUMBER_CHARS` characters.  Messages quote at most a short,
sanitised excerpt of a value (:func:`excerpt`).  The file's own keys override the base's: mappings
merge key by key, lists and scalars are replaced, and a key set to ``null``
removes the base's requirement.  A cycle is refused.

Every problem found is raised together as one :class:`masterqc.errors.SpecError`.
"""

from __future__ import annotations

import difflib
import hashlib
import os
import types
import typing
from dataclasses import dataclass, field

import yaml
from pydantic import BaseModel, ValidationError

from masterqc.errors import SpecError
from masterqc.spec.model import SPEC_VERSIONS, build_spec, spec_model

# ------------------------------------------------------------------ results


@dataclass
class LoadedSpec:
    """A validated spec and where it came from."""

    spec: object  #: the validated ``Spec`` model
    path: str  #: the file named by the user
    sha256: str  #: SHA-256 of that file's bytes
    files: list = field(default_factory=list)  #: every file read, ``{"path", "sha256"}``, the named file first
    from_delivery_folder: bool = False  #: the spec came with the masters (``spec_in_folder``), not from the operator
    warnings: list = field(default_factory=list)  #: likely typos, ``(file, key_path, line, column, message)``
    report_fields: dict = field(default_factory=dict)  #: certificate fields from the command line (``--field``)

    @property
    def name(self) -> str:
        return self.spec.name

    def info(self) -> dict:
        """The ``spec`` object of a check result."""
        out = {"name": self.spec.name, "path": self.path, "sha256": self.sha256,
               "files": [dict(f) for f in self.files]}
        version = getattr(self.spec, "version", None)
        if version:
            out["version"] = str(version)
        section = getattr(self.spec, "report", None)
        fields = {k: v for k, v in (section.model_dump() if section is not None else {}).items() if v}
        fields.update(self.report_fields)
        if fields:
            out["report"] = fields
        if self.from_delivery_folder:
            out["from_delivery_folder"] = True
        return out


# ------------------------------------------------------------------ YAML with positions


class _Positions:
    """Line/column (1-based) of keys and values, by key path tuple, with the file they are in."""

    def __init__(self):
        self.key: dict[tuple, tuple] = {}
        self.value: dict[tuple, tuple] = {}

    def update(self, other: "_Positions"):
        self.key.update(other.key)
        self.value.update(other.value)

    def drop(self, path: tuple):
        n = len(path)
        for d in (self.key, self.value):
            for k in [k for k in d if k[:n] == path]:
                del d[k]

    def find(self, path: tuple, prefer_key: bool = False):
        """``(file, line, column)`` of ``path`` or of its nearest ancestor."""
        p = tuple(path)
        while True:
            first, second = (self.key, self.value) if prefer_key else (self.value, self.key)
            if p in first:
                return first[p]
            if p in second:
                return second[p]
            if not p:
                return None
            p = p[:-1]


_TIMESTAMP = "tag:yaml.org,2002:timestamp"
#: the only tags a spec may hold (what plain YAML resolves to); anything else is refused
_PLAIN_TAGS = {f"tag:yaml.org,2002:{t}" for t in ("map", "seq", "str", "int", "float", "bool", "null",
                                                   "timestamp", "merge")}


def _mark(file: str, node) -> tuple:
    return (file, node.start_mark.line + 1, node.start_mark.column + 1)


#: most values a spec may expand to (aliases included): a guard against alias bombs
MAX_VALUES = 100_000
#: largest spec (or spec map) file read, bytes (house choice: real specs are a few KiB)
MAX_SPEC_BYTES = 1 << 20
#: deepest nesting of mappings and lists (house choice; a spec needs about 5)
MAX_DEPTH = 64
#: longest number literal accepted, characters (house choice; Python refuses int() of over 4300 digits)
MAX_NUMBER_CHARS = 100
#: longest chain of ``extends:`` bases followed, files (house choice; a house spec needs two or three)
MAX_EXTENDS_CHAIN = 32
#: longest excerpt of a value quoted in a message, characters
EXCERPT_CHARS = 40


def excerpt(value, limit: int = EXCERPT_CHARS) -> str:
    """A short, printable, quoted excerpt of ``value`` for a message (never the whole of a long text)."""
    from masterqc.fileio import shown
    text = value if isinstance(value, str) else repr(value)
    cut = len(text) > limit
    text = shown(text[:limit])
    return f"'{text}{'...' if cut else ''}'" if isinstance(value, str) else text + ("..." if cut else "")


def _line_col(text: str, index: int) -> tuple[int, int]:
    line = text.count("\n", 0, index) + 1
    return line, index - (text.rfind("\n", 0, index) + 1) + 1


def _allowed_char(o: int) -> bool:
    """The characters a YAML 1.1 stream may hold (PyYAML's printable set), BOM excepted."""
    return (o in (0x09, 0x0A, 0x0D, 0x85) or 0x20 <= o <= 0x7E or 0xA0 <= o <= 0xD7FF
            or 0xE000 <= o <= 0xFFFD or 0x10000 <= o <= 0x10FFFF)


def _prescan(text: str, file: str) -> list:
    """Problems found before the YAML parser runs: forbidden characters and nesting depth.

    The depth counted is flow brackets (``[`` ``{``) plus block indentation levels
    plus inline ``- `` markers, outside quotes and comments: never less than the
    parser's own nesting, so a deep document is refused before it can exhaust
    the parser's recursion.
    """
    for i, c in enumerate(text):
        if not _allowed_char(ord(c)):
            line, col = _line_col(text, i)
            return [(file, "", line, col, f"the character U+{ord(c):04X} is not allowed in a spec "
                                          "(control characters and NUL bytes cannot be YAML text)")]
    indents = [0]
    flow = 0
    for n, raw in enumerate(text.split("\n"), start=1):
        line = raw.rstrip("\r")
        body = line.lstrip(" ")
        if body and not body.startswith("#") and flow == 0:
            ind = len(line) - len(body)
            while indents and ind < indents[-1]:
                indents.pop()
            if not indents or ind > indents[-1]:
                indents.append(ind)
        inline = 0
        quote = None
        j = len(line) - len(body)
        if flow == 0:
            while body[inline * 2:inline * 2 + 2] in ("- ", "? "):
                inline += 1
        for k in range(j, len(line)):
            c = line[k]
            if quote:
                if c == quote:
                    quote = None
                continue
            if c in "'\"" and (k == 0 or line[k - 1] in " [{,:-?"):
                quote = c
            elif c == "#" and (k == 0 or line[k - 1] in " \t"):
                break
            elif c in "[{":
                flow += 1
                if flow + len(indents) + inline > MAX_DEPTH:
                    return [(file, "", n, k + 1, f"nesting is too deep (more than {MAX_DEPTH} levels)")]
            elif c in "]}":
                flow = max(0, flow - 1)
        if len(indents) + inline + flow > MAX_DEPTH:
            return [(file, "", n, 1, f"nesting is too deep (more than {MAX_DEPTH} levels)")]
    return []

class _TooLarge(Exception):
    pass


def _to_plain(loader, node, path: tuple, pos: _Positions, file: str, problems: list, depth: int = 0,
              budget=None):
    budget = budget if budget is not None else [MAX_VALUES]
    budget[0] -= 1
    if budget[0] < 0:
        raise _TooLarge(node)
    if depth > MAX_DEPTH:
        problems.append((file, _dotted(path), node.start_mark.line + 1, node.start_mark.column + 1,
                         f"nesting is too deep (more than {MAX_DEPTH} levels)"))
        return None
    pos.value[path] = _mark(file, node)
    if node.tag not in _PLAIN_TAGS:
        problems.append((file, _dotted(path), node.start_mark.line + 1, node.start_mark.column + 1,
                         f"the YAML tag {node.tag!r} is not allowed: a spec holds plain values only"))
        return None
    if node.tag == _TIMESTAMP:
        return node.value  # a date stays the text it was written as
    if isinstance(node, yaml.MappingNode):
        own = {id(k) for k, _v in node.value}
        loader.flatten_mapping(node)  # YAML merge keys (<<): the merged pairs come first
        out = {}
        written = set()  # keys this mapping writes itself (a merged key may be overridden, not repeated)
        for knode, vnode in node.value:
            if not isinstance(knode, yaml.ScalarNode):
                problems.append((file, _dotted(path), knode.start_mark.line + 1, knode.start_mark.column + 1,
                                 "a key must be a plain word, not a list or mapping"))
                continue
            key = _scalar(loader, knode, path, file, problems)
            if not isinstance(key, str):
                key = str(key) if key is not None else "null"
            if key in written:
                problems.append((file, _dotted(path + (key,)), knode.start_mark.line + 1,
                                 knode.start_mark.column + 1, f"key {excerpt(key)} is given twice"))
                continue
            if id(knode) in own:
                written.add(key)
            if key in out:  # a merged value this mapping overrides
                pos.drop(path + (key,))
            pos.key[path + (key,)] = _mark(file, knode)
            out[key] = _to_plain(loader, vnode, path + (key,), pos, file, problems, depth + 1, budget)
        return out
    if isinstance(node, yaml.SequenceNode):
        return [_to_plain(loader, v, path + (i,), pos, file, problems, depth + 1, budget)
                for i, v in enumerate(node.value)]
    return _scalar(loader, node, path, file, problems)


def _scalar(loader, node, path, file, problems):
    """A scalar's value; an over-long number or one Python cannot build is a problem at its position."""
    where = (file, _dotted(path), node.start_mark.line + 1, node.start_mark.column + 1)
    if node.tag in ("tag:yaml.org,2002:int", "tag:yaml.org,2002:float") and len(node.value) > MAX_NUMBER_CHARS:
        problems.append(where + (f"a number of {len(node.value)} characters is too long "
                                 f"(at most {MAX_NUMBER_CHARS})",))
        return None
    try:
        return loader.construct_object(node)
    except (ValueError, OverflowError, TypeError) as exc:
        problems.append(where + (f"this value cannot be read ({type(exc).__name__})",))
        return None


def parse_yaml(text: str, file: str):
    """``(data, positions, problems)`` of one YAML document (safe loading only)."""
    problems: list = _prescan(text, file)
    pos = _Positions()
    if problems:
        return None, pos, problems
    try:
        loader = yaml.SafeLoader(text)
    except yaml.YAMLError as exc:  # the reader's own character check (the prescan should have caught it)
        mark = getattr(exc, "problem_mark", None)
        problems.append((file, "", mark.line + 1 if mark else 1, mark.column + 1 if mark else 1,
                         "not valid YAML: the text holds a character YAML does not allow"))
        return None, pos, problems
    try:
        try:
            node = loader.get_single_node()
        except yaml.MarkedYAMLError as exc:
            mark = exc.problem_mark or exc.context_mark
            line, col = (mark.line + 1, mark.column + 1) if mark else (None, None)
            msg = " ".join(x for x in (exc.context, exc.problem) if x)
            if len(msg) > 160:
                msg = msg[:160] + "..."
            problems.append((file, "", line, col, f"not valid YAML: {msg}"))
            return None, pos, problems
        except yaml.YAMLError as exc:
            mark = getattr(exc, "problem_mark", None)
            problems.append((file, "", mark.line + 1 if mark else 1, mark.column + 1 if mark else 1,
                             f"not valid YAML ({type(exc).__name__})"))
            return None, pos, problems
        except RecursionError:
            problems.append((file, "", 1, 1, f"nesting is too deep (more than {MAX_DEPTH} levels)"))
            return None, pos, problems
        if node is None:
            problems.append((file, "", 1, 1, "the spec file is empty"))
            return None, pos, problems
        try:
            data = _to_plain(loader, node, (), pos, file, problems)
        except _TooLarge as exc:
            n = exc.args[0]
            problems.append((file, "", n.start_mark.line + 1, n.start_mark.column + 1,
                             f"the spec expands to more than {MAX_VALUES} values (aliases repeated?)"))
            return None, pos, problems
        except yaml.MarkedYAMLError as exc:
            mark = exc.problem_mark or exc.context_mark
            problems.append((file, "", mark.line + 1 if mark else 1, mark.column + 1 if mark else 1,
                             f"not valid YAML: {exc.problem}"))
            return None, pos, problems
        except yaml.YAMLError as exc:
            problems.append((file, "", 1, 1, f"not valid YAML ({type(exc).__name__})"))
            return None, pos, problems
        except RecursionError:
            problems.append((file, "", 1, 1, f"nesting is too deep (more than {MAX_DEPTH} levels)"))
            return None, pos, problems
    finally:
        loader.dispose()
    if not isinstance(data, dict):
        kind = "a list" if isinstance(data, list) else "a single value"  # never quoted: it may not be a spec at all
        problems.append((file, "", pos.value[()][1], pos.value[()][2],
                         f"a spec must be a mapping of keys (spec_version, name, sections), not {kind}"))
        return None, pos, problems
    return data, pos, problems


# ------------------------------------------------------------------ extends


def _read(path: str) -> tuple[str, bytes]:
    """The text and bytes of a spec file: a regular file of at most :data:`MAX_SPEC_BYTES`, UTF-8."""
    from masterqc.fileio import open_regular_file
    try:
        with open_regular_file(path) as f:
            size = os.fstat(f.fileno()).st_size
            if size > MAX_SPEC_BYTES:
                raise SpecError([(path, "", None, None, f"the spec file is {size} bytes; a spec may be at most "
                                                        f"{MAX_SPEC_BYTES} bytes (1 MiB)")])
            raw = f.read(MAX_SPEC_BYTES + 1)
    except OSError as exc:
        raise SpecError([(path, "", None, None, f"cannot read the spec file ({exc.strerror or exc})")]) from None
    if len(raw) > MAX_SPEC_BYTES:  # grew while being read
        raise SpecError([(path, "", None, None, f"the spec file is larger than {MAX_SPEC_BYTES} bytes (1 MiB)")])
    try:
        return raw.decode("utf-8-sig"), raw
    except UnicodeDecodeError as exc:
        line = raw.count(b"\n", 0, exc.start) + 1
        col = exc.start - (raw.rfind(b"\n", 0, exc.start) + 1) + 1
        raise SpecError([(path, "", line, col,
                          f"the spec file is not UTF-8 text (byte offset {exc.start})")]) from None


def _inside(folder_real: str, path_real: str) -> bool:
    return path_real == folder_real or path_real.startswith(folder_real.rstrip(os.sep) + os.sep)


def resolve_base(rel: str, here: str, libraries=()) -> str | None:
    """The file ``extends: rel`` names from a spec in folder ``here``, or None when it is not allowed or absent.

    Looked for relative to ``here``, then relative to each library folder; taken only
    when its real path (links resolved) lies inside ``here`` or a library folder.
    """
    if os.path.isabs(rel) or not rel.lower().endswith((".yaml", ".yml")):
        return None
    roots = [os.path.realpath(here)] + [os.path.realpath(lib) for lib in libraries]
    for base in [here, *libraries]:
        candidate = os.path.join(base, rel)
        real = os.path.realpath(candidate)
        if any(_inside(r, real) for r in roots) and os.path.isfile(real):
            return candidate
    return None


def _merge(base: dict, over: dict, bpos: _Positions, opos: _Positions, path: tuple = ()) -> dict:
    out = dict(base)
    for k, v in over.items():
        p = path + (k,)
        if v is None and k in out:
            del out[k]
            bpos.drop(p)
        elif isinstance(v, dict) and isinstance(out.get(k), dict):
            out[k] = _merge(out[k], v, bpos, opos, p)
        else:
            bpos.drop(p)
            out[k] = v
    return out


def _load_tree(path: str, stack: tuple, files: list, ext_pos=None, libraries=()):
    """Read ``path`` and its bases; return (merged data, positions, problems)."""
    real = os.path.realpath(path)
    if real in stack:
        chain = " -> ".join(os.path.basename(p) for p in stack + (real,))
        file, line, col = ext_pos if ext_pos else (path, None, None)
        raise SpecError([(file, "extends", line, col, f"extends makes a cycle: {chain}")])
    if len(stack) >= MAX_EXTENDS_CHAIN:
        file, line, col = ext_pos if ext_pos else (path, None, None)
        raise SpecError([(file, "extends", line, col, "the chain of extends: bases is too long "
                                                      f"(more than {MAX_EXTENDS_CHAIN} files)")])
    text, raw = _read(path)
    files.append({"path": os.fspath(path), "sha256": hashlib.sha256(raw).hexdigest()})
    data, pos, problems = parse_yaml(text, os.fspath(path))
    if data is None:
        return None, pos, problems
    version = data.get("spec_version")
    if "spec_version" in data and (version not in SPEC_VERSIONS or isinstance(version, bool)):
        f, line, col = pos.value[("spec_version",)]
        if isinstance(version, str) and version.strip() in {str(v) for v in SPEC_VERSIONS}:
            msg = f"spec_version is written as text; write the number {version.strip()} without quotes"
        else:
            msg = (f"spec_version {excerpt(version)} is not one this masterqc reads "
                   f"(supported: {', '.join(map(str, SPEC_VERSIONS))})")
        problems.append((f, "spec_version", line, col, msg))
        return None, pos, problems
    ext = data.get("extends")
    if ext is None:
        return data, pos, problems
    if isinstance(ext, str):
        bases = [(ext, ("extends",))]
    elif isinstance(ext, list) and all(isinstance(x, str) for x in ext):
        bases = [(x, ("extends", i)) for i, x in enumerate(ext)]
    else:
        f, line, col = pos.value[("extends",)]
        problems.append((f, "extends", line, col, "extends must be a file name or a list of file names"))
        return None, pos, problems
    merged: dict = {}
    mpos = _Positions()
    here = os.path.dirname(os.path.abspath(path))
    for rel, p in bases:
        where = pos.value[p]
        if os.path.isabs(rel):
            problems.append((where[0], _dotted(p), where[1], where[2],
                             f"extends {excerpt(rel)} is an absolute path; name a base spec relative to this "
                             "spec's folder or to a spec library folder"))
            continue
        if not rel.lower().endswith((".yaml", ".yml")):
            problems.append((where[0], _dotted(p), where[1], where[2],
                             f"extends {excerpt(rel)} is not a spec file name (base specs end in .yaml or .yml)"))
            continue
        bpath = resolve_base(rel, here, libraries)
        if bpath is None:
            libs = " or the spec library folders" if libraries else ""
            problems.append((where[0], _dotted(p), where[1], where[2],
                             f"base spec {excerpt(rel)} not found in this spec's folder{libs} "
                             "(extends may not leave them: no '..' out of them, no links out of them)"))
            continue
        bdata, bpos, bprob = _load_tree(bpath, stack + (real,), files, where, libraries)
        problems.extend(bprob)
        if bdata is None:
            continue
        bdata.pop("extends", None)
        bpos.drop(("extends",))
        merged = _merge(merged, bdata, mpos, bpos)
        mpos.update(bpos)
    merged = _merge(merged, data, mpos, pos)
    mpos.update(pos)
    # keys set to null in this file to remove a base requirement leave no trace
    return merged, mpos, problems


# ------------------------------------------------------------------ pydantic errors -> problems


def _dotted(path) -> str:
    out = ""
    for p in path:
        out += f"[{p}]" if isinstance(p, int) else (f".{p}" if out else str(p))
    return out


def _candidates(ann) -> list:
    """Model classes or list item types an annotation can hold."""
    origin = typing.get_origin(ann)
    if origin in (typing.Union, types.UnionType):
        out = []
        for a in typing.get_args(ann):
            out += _candidates(a)
        return out
    if origin in (list, tuple):
        return [("list", a) for a in typing.get_args(ann)]
    return [ann]


def _model_at(path: tuple):
    """The model class holding the keys at ``path`` (None if not a mapping of a model)."""
    current = [spec_model()]
    for p in path:
        nxt = []
        for c in current:
            if isinstance(p, int):
                if isinstance(c, tuple) and c[0] == "list":
                    nxt += _candidates(c[1])
            elif isinstance(c, type) and issubclass(c, BaseModel) and p in c.model_fields:
                nxt += _candidates(c.model_fields[p].annotation)
        current = nxt
    for c in current:
        if isinstance(c, type) and issubclass(c, BaseModel):
            return c
    return None


def _stem(key: str) -> str:
    return key.rsplit("_", 1)[0] if "_" in key else key


def _suggest(key: str, valid: list[str]) -> str:
    if not valid:
        return ""
    same_stem = [v for v in valid if _stem(v) == _stem(key) and "_" in key and "_" in v]
    if same_stem:
        v = same_stem[0]
        return f"; wrong unit? here it is written {v!r}"
    close = difflib.get_close_matches(key, valid, n=1, cutoff=0.5)
    if close:
        return f"; did you mean {close[0]!r}?"
    return f"; valid keys here: {', '.join(sorted(valid))}"


def _walk(data, loc) -> tuple[tuple, bool]:
    """The part of a pydantic ``loc`` that indexes into ``data`` (dropping union tags)."""
    path, cur = [], data
    for i, p in enumerate(loc):
        if isinstance(cur, dict) and isinstance(p, str) and p in cur:
            path.append(p)
            cur = cur[p]
        elif isinstance(cur, list) and isinstance(p, int) and 0 <= p < len(cur):
            path.append(p)
            cur = cur[p]
        elif i == len(loc) - 1 and isinstance(p, str) and isinstance(cur, dict):
            path.append(p)  # a missing or unknown key at the end
            return tuple(path), True
    return tuple(path), False


def _describe(value) -> str:
    if value is None:
        return "null"
    if isinstance(value, bool):
        return f"{str(value).lower()} (a yes/no value)"
    if isinstance(value, str):
        return f"the text {excerpt(value)}"
    if isinstance(value, (int, float)):
        return f"the number {excerpt(value)}"
    if isinstance(value, list):
        return "a list"
    if isinstance(value, dict):
        return "a mapping"
    return repr(value)


def _message(err: dict, path: tuple, data) -> str:
    t = err["type"]
    inp = err.get("input")
    key = path[-1] if path else ""
    if t == "extra_forbidden":
        model = _model_at(path[:-1])
        valid = list(model.model_fields) if model else []
        return f"unknown key {excerpt(str(key))}{_suggest(str(key), valid)}"
    if t == "missing":
        return f"missing required key {key!r}"
    if t in ("float_type", "float_parsing", "int_type", "int_parsing", "int_from_float"):
        want = "a whole number" if t.startswith("int") else "a number"
        msg = f"expected {want}, got {_describe(inp)}"
        if isinstance(inp, str) and any(c.isalpha() for c in inp):
            msg += "; write the number alone, the unit is in the key name"
        elif isinstance(inp, str):
            msg += "; remove the quotes"
        return msg
    if t == "list_type":
        return f"expected a list (e.g. [a, b]), got {_describe(inp)}"
    if t in ("model_type", "model_attributes_type", "dict_type"):
        return f"expected a mapping of keys, got {_describe(inp)}"
    if t == "string_type":
        return f"expected text, got {_describe(inp)}"
    if t == "bool_type":
        return f"expected true or false, got {_describe(inp)}"
    if t == "literal_error":
        return f"{_describe(inp)} is not allowed here; expected {err.get('ctx', {}).get('expected', '')}"
    if t == "value_error":
        msg = err["msg"]
        return msg[len("Value error, "):] if msg.startswith("Value error, ") else msg
    if t in ("greater_than_equal", "greater_than", "less_than_equal", "less_than"):
        return f"{_describe(inp)} is out of range: {err['msg'].replace('Input should be', 'must be')}"
    if t == "too_short":
        return "the list must not be empty"
    return err["msg"]


def problems_from_validation(exc: ValidationError, data: dict, pos: _Positions, default_file: str) -> list:
    """Turn a pydantic error into ``(file, key_path, line, column, message)`` problems."""
    out, seen = [], set()
    errors = exc.errors(include_url=False)
    # a union of a model and null reports the model's errors; drop pure union-tag noise
    for err in errors:
        path, at_key = _walk(data, err["loc"])
        msg = _message(err, path, data)
        where = pos.find(path, prefer_key=(err["type"] in ("extra_forbidden",)))
        if err["type"] == "missing":
            where = pos.find(path[:-1], prefer_key=True)
        file, line, col = where if where else (default_file, None, None)
        item = (file, _dotted(path), line, col, msg)
        if (item[1], msg) in seen:
            continue
        seen.add((item[1], msg))
        out.append(item)
    out.sort(key=lambda p: (p[0], p[2] if p[2] is not None else 0, p[3] or 0))
    return out


# ------------------------------------------------------------------ entry points


def load_spec(path, libraries=(), from_delivery_folder: bool = False) -> LoadedSpec:
    """Read, merge and validate the spec at ``path``.

    ``libraries`` are the folders (besides the spec's own) that ``extends:`` may
    reach; ``from_delivery_folder`` marks a spec that came with the masters.
    Raises :class:`masterqc.errors.SpecError` listing every problem with file,
    key path, line and column.
    """
    path = os.fspath(path)
    libraries = tuple(os.path.abspath(os.fspath(x)) for x in libraries)
    files: list = []
    try:
        data, pos, problems = _load_tree(path, (), files, None, libraries)
    except RecursionError:  # a chain of bases too long to follow
        raise SpecError([(path, "extends", None, None, "the chain of extends: bases is too long")]) from None
    if problems:
        raise SpecError(problems)
    try:
        spec = build_spec(data)
    except ValidationError as exc:
        raise SpecError(problems_from_validation(exc, data, pos, path)) from None
    except RecursionError:
        raise SpecError([(path, "", 1, 1, f"nesting is too deep (more than {MAX_DEPTH} levels)")]) from None
    unique, seen = [], set()
    for f in files:  # a base reached twice (two variants of one house spec) is listed once
        key = os.path.realpath(f["path"])
        if key not in seen:
            seen.add(key)
            unique.append(f)
    return LoadedSpec(spec=spec, path=path, sha256=files[0]["sha256"], files=unique,
                      from_delivery_folder=from_delivery_folder, warnings=plausibility_warnings(data, pos, path))


def plausibility_warnings(data: dict, pos: _Positions, default_file: str) -> list:
    """Values a spec may hold but that are almost surely typos, as ``(file, key_path, line, column, message)``.

    * a loudness in LUFS above 0 (``target_lufs: 14``): programme loudness is negative
      on the LUFS scale (ITU-R BS.1770: 0 LUFS is a full-scale 997 Hz sine in one
      channel), so a positive value is a forgotten minus sign;
    * a true-peak ceiling above 0 dBTP (``max_dbtp: 1``): a ceiling is meant to
      keep the peaks below full scale.
    """
    out = []

    def visit(value, path):
        if isinstance(value, dict):
            for k, v in value.items():
                visit(v, path + (k,))
        elif isinstance(value, list):
            for i, v in enumerate(value):
                visit(v, path + (i,))
        elif isinstance(value, (int, float)) and not isinstance(value, bool) and path:
            key = str(path[-1])
            msg = None
            if key.endswith("_lufs") and value > 0:
                msg = (f"{key}: {value:g} LUFS is above 0; programme loudness is negative in LUFS "
                       f"(a missing minus sign? -{value:g})")
            elif key in ("max_dbtp", "ceiling_dbtp") and value > 0:
                msg = (f"{key}: {value:g} dBTP is above full scale; a true-peak ceiling is normally at or "
                       f"below 0 dBTP (a missing minus sign? -{value:g})")
            if msg:
                where = pos.find(path) or (default_file, None, None)
                out.append((where[0], _dotted(path), where[1], where[2], msg))

    visit(data, ())
    return out


def load_spec_text(text: str, name: str = "<spec>") -> LoadedSpec:
    """Validate a spec given as YAML text (``extends:`` is not allowed here)."""
    data, pos, problems = parse_yaml(text, name)
    if not problems and data is not None and "extends" in data:
        f, line, col = pos.key[("extends",)]
        problems.append((f, "extends", line, col, "extends needs a spec file (it is resolved relative to it)"))
    if problems:
        raise SpecError(problems)
    try:
        spec = build_spec(data)
    except ValidationError as exc:
        raise SpecError(problems_from_validation(exc, data, pos, name)) from None
    digest = hashlib.sha256(text.encode("utf-8")).hexdigest()
    return LoadedSpec(spec=spec, path=name, sha256=digest, files=[{"path": name, "sha256": digest}])
