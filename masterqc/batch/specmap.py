"""Which delivery spec judges which file of a batch.

``--spec`` names either one delivery spec (every file is judged against it) or
a *spec map*: a small YAML file a house keeps for its nightly run::

    masterqc_spec_map: 1
    specs:                         # first matching rule wins
      - match: "podcasts/**"       # glob on the path below the folder argument
        spec: wrenmoor-spoken.yaml
      - match: "albums/*/**"
        spec: quillfen-album.yaml
      - match: "**"                # everything else
        spec: ostravel-house.yaml
    releases: folder               # optional: folder | root | depth:N | none
    pairs:                         # optional: deliverables compared with their masters
      - deliverable: "*_44k16.wav"
        master: "*_96k24.wav"
        spec: derivation-cd.yaml   # optional (see masterqc.batch.pairing)

A rule may name ``spec_in_folder: FILE`` instead of ``spec:``: the spec is then the
nearest file of that name in the master's folder or above it (up to the folder
given on the command line), so each album or season can carry its own spec::

      - match: "albums/**"
        spec_in_folder: delivery-spec.yaml   # albums/<name>/delivery-spec.yaml
      - match: "**"
        spec: ostravel-house.yaml

A spec found this way came with the masters, not from the operator: its
``extends:`` reaches only its own folder and the map's spec libraries, and every
result it judges is marked ``spec.from_delivery_folder: true`` (shown in the
reports and the index).  ``spec_libraries: [folder, ...]`` (relative to the map)
names the folders whose specs ``extends:`` may use besides the spec's own folder.

A master under such a rule with no such file is judged by the next matching rule;
a folder spec that does not validate makes error rows of the masters it governs
(with the spec's problems), and the rest of the run goes on.

Spec paths are relative to the map file.  In ``match``, ``*`` and ``?`` stay
within one folder level, ``**`` spans any number of levels (including none),
and matching is case-sensitive on the ``/``-separated path below the folder
given on the command line.  A file no rule matches becomes an error row.

The *spec key* of a loaded spec (:func:`spec_key`) is the SHA-256 of the
resolved spec (``extends:`` bases merged, defaults filled) in canonical JSON
together with the measurement overrides of the run (``--layout``): the ledger
reuses a result only under the same key, so editing a base spec re-checks
every file that uses it.
"""

from __future__ import annotations

import hashlib
import json
import os
import re
from dataclasses import dataclass

from masterqc.errors import SpecError

MAP_KEY = "masterqc_spec_map"
MAP_VERSIONS = (1,)


def glob_regex(pattern: str) -> re.Pattern:
    """Compile a ``/``-separated glob (``*``, ``?``, ``[..]``, ``**``) to an anchored regex."""
    out, i, n = [], 0, len(pattern)
    while i < n:
        c = pattern[i]
        if pattern.startswith("**/", i):
            out.append("(?:.*/)?")
            i += 3
        elif pattern.startswith("**", i):
            out.append(".*")
            i += 2
        elif c == "*":
            out.append("[^/]*")
            i += 1
        elif c == "?":
            out.append("[^/]")
            i += 1
        elif c == "[":
            j = pattern.find("]", i + 1)
            if j < 0:
                out.append(re.escape(c))
                i += 1
            else:
                body = pattern[i + 1:j]
                if body.startswith("!"):
                    body = "^" + body[1:]
                out.append(f"[{body}]")
                i = j + 1
        else:
            out.append(re.escape(c))
            i += 1
    # DOTALL: a name may hold a newline, and "*" / "**" must match it like any other character
    return re.compile("".join(out) + r"\Z", re.DOTALL)


def spec_key(loaded, base_options=None) -> str:
    """SHA-256 (hex) identifying a resolved spec plus the run's measurement overrides."""
    doc = {"spec": loaded.spec.model_dump(mode="json"),
           "layout": list(base_options.channel_layout) if base_options is not None and base_options.channel_layout else None}
    text = json.dumps(doc, sort_keys=True, separators=(",", ":"), ensure_ascii=True)
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


@dataclass
class Rule:
    match: str
    regex: re.Pattern
    spec_path: str | None
    loaded: object
    key: str | None
    folder_spec: str | None = None  #: ``spec_in_folder`` file name (then spec_path/loaded/key are per folder)


@dataclass
class Unusable:
    """A folder spec that does not validate: the masters it governs become error rows."""

    spec_path: str
    message: str


class SpecMap:
    """The rules of a run: ``lookup(rel) -> Rule | None``; ``releases`` from the map (or None)."""

    #: pairing rules (:mod:`masterqc.batch.pairing`), from the map's ``pairs:``
    pairs: tuple = ()

    def __init__(self, rules: list[Rule], path: str, is_map: bool, releases: str | None = None,
                 base_options=None, libraries=()):
        self.libraries = tuple(libraries)
        self.rules = rules
        self.path = path
        self.is_map = is_map
        self.releases = releases
        self.base_options = base_options
        self._folder_specs: dict = {}

    def lookup(self, rel: str, root: str | None = None) -> "Rule | Unusable | None":
        """The rule judging the master at ``rel`` below ``root`` (a folder-spec rule resolved to its file)."""
        for r in self.rules:
            if not r.regex.match(rel):
                continue
            if r.folder_spec is None:
                return r
            found = self._nearest(r.folder_spec, root, rel)
            if found is None:
                continue
            return self._folder_rule(r, found)
        return None

    def _nearest(self, name: str, root: str | None, rel: str) -> str | None:
        if root is None:
            return None
        parts = rel.split("/")[:-1]
        top = os.path.realpath(root)
        for n in range(len(parts), -1, -1):
            candidate = os.path.join(root, *parts[:n], name)
            if os.path.lexists(candidate) and not os.path.isdir(candidate):
                real = os.path.realpath(candidate)
                # a delivery's spec is taken only from inside the delivery: a link out of it is not followed
                if real != top and not real.startswith(top.rstrip(os.sep) + os.sep):
                    continue
                return os.path.abspath(candidate)
        return None

    def _folder_rule(self, r: Rule, path: str):
        from masterqc.spec.loader import load_spec
        if path not in self._folder_specs:
            try:
                loaded = load_spec(path, libraries=self.libraries, from_delivery_folder=True)
            except SpecError as exc:
                self._folder_specs[path] = Unusable(path, f"its folder spec {path} is invalid: {exc}")
            except Exception as exc:  # never lose the catalogue to one album's spec
                self._folder_specs[path] = Unusable(path, f"its folder spec {path} cannot be read "
                                                          f"({type(exc).__name__})")
            else:
                self._folder_specs[path] = Rule(r.match, r.regex, path, loaded,
                                                spec_key(loaded, self.base_options), r.folder_spec)
        return self._folder_specs[path]


def _is_map_file(path: str) -> bool:
    from masterqc.spec.loader import parse_yaml, _read
    try:
        text, _ = _read(path)
    except SpecError:
        return False  # load_spec names the problem
    data, _pos, problems = parse_yaml(text, path)
    return not problems and isinstance(data, dict) and MAP_KEY in data


def cached_spec(spec_ref: str, here: str, cache: dict, libraries, errs: list):
    """``(path, loaded)`` of the spec a map rule names (``spec_ref``, relative to the map's folder ``here``),
    loaded once per map through ``cache``; ``loaded`` is None when it cannot be loaded, its problems then
    added to ``errs``."""
    from masterqc.spec.loader import load_spec
    sp = spec_ref if os.path.isabs(spec_ref) else os.path.join(here, spec_ref)
    if sp not in cache:
        try:
            cache[sp] = load_spec(sp, libraries=libraries)
        except SpecError as exc:
            errs.extend(exc.problems)
            return sp, None
    return sp, cache[sp]


def load_spec_map(path, base_options=None, libraries=()) -> SpecMap:
    """Load ``--spec``: a single delivery spec or a spec map; SpecError names the file, key and line.

    ``libraries``: spec library folders named on the command line (``--spec-library``);
    a map adds its own ``spec_libraries``.
    """
    from masterqc.spec.loader import _read, load_spec, parse_yaml

    path = os.fspath(path)
    libraries = tuple(os.path.abspath(os.fspath(x)) for x in libraries)
    if not _is_map_file(path):
        loaded = load_spec(path, libraries=libraries)
        return SpecMap([Rule("**", glob_regex("**"), path, loaded, spec_key(loaded, base_options))], path, False,
                       base_options=base_options, libraries=libraries)
    text, _ = _read(path)
    data, pos, problems = parse_yaml(text, path)
    if problems:
        raise SpecError(problems)

    def where(keypath):
        found = pos.find(keypath)
        return (found[1], found[2]) if found else (None, None)

    errs = []
    version = data.get(MAP_KEY)
    if version not in MAP_VERSIONS:
        errs.append((path, MAP_KEY, *where((MAP_KEY,)), f"{MAP_KEY} must be one of {list(MAP_VERSIONS)}, not {version!r}"))
    from masterqc.spec.loader import excerpt
    unknown = sorted(set(data) - {MAP_KEY, "specs", "releases", "description", "spec_libraries", "pairs"})
    for k in unknown:
        errs.append((path, k, *where((k,)), f"unknown key {excerpt(k)} in a spec map "
                                            f"(keys: {MAP_KEY}, specs, releases, spec_libraries, pairs, description)"))
    here = os.path.dirname(os.path.abspath(path))
    libs = data.get("spec_libraries")
    if libs is not None:
        if not isinstance(libs, list) or not all(isinstance(x, str) and x for x in libs):
            errs.append((path, "spec_libraries", *where(("spec_libraries",)),
                         "spec_libraries must be a list of folders (relative to the map)"))
        else:
            for i, lib in enumerate(libs):
                full = lib if os.path.isabs(lib) else os.path.join(here, lib)
                if not os.path.isdir(full):
                    errs.append((path, f"spec_libraries[{i}]", *where(("spec_libraries", i)),
                                 f"spec library folder {excerpt(lib)} does not exist"))
                else:
                    libraries += (os.path.abspath(full),)
    releases = data.get("releases")
    if releases is not None:
        from masterqc.batch.releases import parse_release_mode
        try:
            parse_release_mode(releases)
        except ValueError as exc:
            errs.append((path, "releases", *where(("releases",)), str(exc)))
    items = data.get("specs")
    if not isinstance(items, list) or not items:
        errs.append((path, "specs", *where(("specs",)), "specs must be a non-empty list of {match, spec} rules"))
        items = []
    rules, cache = [], {}
    for i, item in enumerate(items):
        kp = ("specs", i)
        ok = (isinstance(item, dict) and isinstance(item.get("match"), str)
              and not set(item) - {"match", "spec", "spec_in_folder"}
              and (isinstance(item.get("spec"), str)) != (isinstance(item.get("spec_in_folder"), str)))
        if not ok:
            errs.append((path, f"specs[{i}]", *where(kp),
                         "each rule is a mapping with 'match' (a glob) and either 'spec' (a file) "
                         "or 'spec_in_folder' (a file name looked for in each master's folder and above)"))
            continue
        if "spec_in_folder" in item:
            name = item["spec_in_folder"]
            if not name or "/" in name or os.sep in name or name in (".", ".."):
                errs.append((path, f"specs[{i}].spec_in_folder", *where(kp + ("spec_in_folder",)),
                             f"spec_in_folder must be a plain file name, not {excerpt(name)}"))
                continue
            rules.append(Rule(item["match"], glob_regex(item["match"]), None, None, None, name))
            continue
        sp, loaded = cached_spec(item["spec"], here, cache, libraries, errs)
        if loaded is None:
            continue
        rules.append(Rule(item["match"], glob_regex(item["match"]), sp, loaded, spec_key(loaded, base_options)))
    pairs = []
    if "pairs" in data:
        from masterqc.batch.pairing import parse_pairs
        pairs, pair_errs = parse_pairs(data["pairs"], path, where, libraries)
        errs.extend(pair_errs)
    if errs:
        raise SpecError(errs)
    specmap = SpecMap(rules, path, True, releases, base_options, libraries)
    specmap.pairs = tuple(pairs)
    return specmap
