"""Which delivery spec judges which file of a batch.

``--spec`` names either one delivery spec (every file is judged against it) or
a *spec map*: a small YAML file a house keeps for its nightly run::

    masterqc_spec_map: 1
    specs:                         # first matching rule wins
      - match: "podcasts/**"       # glob on the path below the folder argument
        spec: lantern-lane-spoken.yaml
      - match: "albums/*/**"
        spec: copperfield-album.yaml
      - match: "**"                # everything else
        spec: harbourlight-house.yaml
    releases: folder               # optional: folder | root | depth:N | none

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

import yaml

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
    return re.compile("".join(out) + r"\Z")


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
    spec_path: str
    loaded: object
    key: str


class SpecMap:
    """The rules of a run: ``lookup(rel) -> Rule | None``; ``releases`` from the map (or None)."""

    def __init__(self, rules: list[Rule], path: str, is_map: bool, releases: str | None = None):
        self.rules = rules
        self.path = path
        self.is_map = is_map
        self.releases = releases

    def lookup(self, rel: str) -> Rule | None:
        for r in self.rules:
            if r.regex.match(rel):
                return r
        return None

    def specs(self) -> list[Rule]:
        """One rule per distinct spec key, in rule order."""
        seen, out = set(), []
        for r in self.rules:
            if r.key not in seen:
                seen.add(r.key)
                out.append(r)
        return out


def _is_map_file(path: str) -> bool:
    try:
        with open(path, "rb") as f:
            text = f.read(1 << 20).decode("utf-8-sig", errors="replace")
    except OSError:
        return False  # load_spec names the problem
    try:
        data = yaml.safe_load(text)
    except yaml.YAMLError:
        return False
    return isinstance(data, dict) and MAP_KEY in data


def load_spec_map(path, base_options=None) -> SpecMap:
    """Load ``--spec``: a single delivery spec or a spec map; SpecError names the file, key and line."""
    from masterqc.spec.loader import load_spec

    path = os.fspath(path)
    if not _is_map_file(path):
        loaded = load_spec(path)
        return SpecMap([Rule("**", glob_regex("**"), path, loaded, spec_key(loaded, base_options))], path, False)
    from masterqc.spec.loader import parse_yaml
    with open(path, "rb") as f:
        text = f.read().decode("utf-8-sig")
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
    unknown = sorted(set(data) - {MAP_KEY, "specs", "releases", "description"})
    for k in unknown:
        errs.append((path, k, *where((k,)), f"unknown key {k!r} in a spec map (keys: {MAP_KEY}, specs, releases, description)"))
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
    here = os.path.dirname(os.path.abspath(path))
    rules, cache = [], {}
    for i, item in enumerate(items):
        kp = ("specs", i)
        if not isinstance(item, dict) or set(item) - {"match", "spec"} or not isinstance(item.get("match"), str) \
                or not isinstance(item.get("spec"), str):
            errs.append((path, f"specs[{i}]", *where(kp), "each rule is a mapping with text keys 'match' (a glob) and 'spec' (a file)"))
            continue
        sp = item["spec"] if os.path.isabs(item["spec"]) else os.path.join(here, item["spec"])
        if sp not in cache:
            try:
                cache[sp] = load_spec(sp)
            except SpecError as exc:
                errs.extend(exc.problems)
                continue
        loaded = cache[sp]
        rules.append(Rule(item["match"], glob_regex(item["match"]), sp, loaded, spec_key(loaded, base_options)))
    if errs:
        raise SpecError(errs)
    return SpecMap(rules, path, True, releases)
