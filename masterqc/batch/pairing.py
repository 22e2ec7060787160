"""Deliverables compared with their masters inside a batch run (``pairs:`` in a spec map).

A spec map may name pairing rules besides its spec rules::

    masterqc_spec_map: 1
    specs:
      - match: "**"
        spec: house.yaml
    pairs:                              # optional
      - deliverable: "*_44k16.wav"      # one '*', no folder part
        master: "*_96k24.wav"           # the same '*' part, in the same folder (no '*': one fixed name)
        spec: derivation-cd.yaml        # optional: whose derivation: section judges the pair

Every file of the run is still checked against its own spec.  After that, each
file whose name matches a rule's ``deliverable`` pattern is compared with the
file of the ``master`` name in its folder (``masterqc compare``), judged by the
rule's spec (without one: the spec that judged the deliverable), and its
comparison report is written beside the deliverable's own reports as
``<deliverable>.from.<master>.json|html|pdf``.  The first rule a name matches
pairs it.  A deliverable whose master is not in its folder is listed as
unpaired, never guessed, and counts as a failure (it cannot be shown to derive
from its master).  ``summary.json`` lists the pairs under ``pairs`` and the
index page shows them in a section of their own.
"""

from __future__ import annotations

import fnmatch
import html
import os
import posixpath
from dataclasses import dataclass

from markupsafe import Markup

PAIR_KEYS = ("deliverable", "master", "spec")


@dataclass(frozen=True)
class PairRule:
    deliverable: str
    master: str
    spec_path: str | None     #: absolute, or None: the spec judging the deliverable
    loaded: object = None     #: the loaded spec of ``spec_path``

    def master_name(self, name: str) -> str | None:
        """The master's file name for a deliverable named ``name``; None when ``name`` does not match."""
        if not fnmatch.fnmatchcase(name, self.deliverable):
            return None
        pre, post = self.deliverable.split("*")
        stem = name[len(pre):len(name) - len(post) if post else None]
        master = self.master.replace("*", stem)
        return None if master == name else master


def parse_pairs(value, map_path: str, where, libraries=()) -> tuple[list[PairRule], list[tuple]]:
    """``(rules, problems)`` from a spec map's ``pairs:`` value; problems are SpecError tuples naming the key."""
    from masterqc.batch.specmap import cached_spec
    from masterqc.spec.loader import excerpt

    rules, errs = [], []
    if not isinstance(value, list) or not value:
        return [], [(map_path, "pairs", *where(("pairs",)),
                     "pairs must be a non-empty list of {deliverable, master} rules, e.g. "
                     "deliverable: '*_44k16.wav', master: '*_96k24.wav'")]
    here = os.path.dirname(os.path.abspath(map_path))
    cache: dict = {}
    for i, item in enumerate(value):
        kp = ("pairs", i)
        if (not isinstance(item, dict) or set(item) - set(PAIR_KEYS)
                or not all(isinstance(item.get(k), str) for k in ("deliverable", "master"))
                or not isinstance(item.get("spec", ""), str)):
            errs.append((map_path, f"pairs[{i}]", *where(kp),
                         "each pairing rule is a mapping with 'deliverable' and 'master' (file name patterns "
                         "with one '*') and optionally 'spec' (the spec whose derivation: section judges the pair)"))
            continue
        bad = False
        for key, stars in (("deliverable", (1,)), ("master", (0, 1))):
            pat = item[key]
            if pat.count("*") not in stars or "/" in pat or os.sep in pat or not pat:
                need = "exactly one '*'" if stars == (1,) else "at most one '*' (none: one master for every match)"
                errs.append((map_path, f"pairs[{i}].{key}", *where(kp + (key,)),
                             f"{key} pattern {excerpt(pat)} needs {need} and no folder part"))
                bad = True
        if bad:
            continue
        spec_path, loaded = None, None
        if item.get("spec"):
            spec_path, loaded = cached_spec(item["spec"], here, cache, libraries, errs)
            if loaded is None:
                continue
        rules.append(PairRule(item["deliverable"], item["master"], spec_path, loaded))
    return rules, errs


def find_batch_pairs(items, rules) -> list[tuple]:
    """``[(rule, deliverable item, master item or None)]`` over a run's items, in the items' order."""
    by_folder: dict = {}
    for it in items:
        by_folder.setdefault(os.path.dirname(it.path), {})[os.path.basename(it.path)] = it
    out = []
    for it in items:
        name = os.path.basename(it.path)
        for rule in rules:
            master = rule.master_name(name)
            if master is not None:
                out.append((rule, it, by_folder[os.path.dirname(it.path)].get(master)))
                break
    return out


def _safe_folder(out_dir: str, folder: str) -> bool:
    """Create ``folder`` and say whether it really lies inside ``out_dir`` (links followed)."""
    from masterqc.batch.names import inside
    if not inside(out_dir, folder):
        return False
    try:
        os.makedirs(folder, exist_ok=True)
    except OSError:
        return False
    return inside(out_dir, folder)


def compare_pairs(items, rules, formats, out_dir, stream=None) -> tuple[list[dict], int]:
    """Compare every pair among ``items`` (the run's :class:`~masterqc.batch.runner.Item` rows): one row each,
    and how many pairs could not be read.  Reports go only into folders that really lie inside ``out_dir``."""
    from masterqc.compare.command import output_stem, run_compare
    from masterqc.errors import AudioReadError, UsageError
    from masterqc.fileio import shown

    rows = []
    unreadable = 0
    for rule, deliv, master in find_batch_pairs(items, rules):
        row = {"deliverable": deliv.rel, "master": master.rel if master is not None else None,
               "rule": f"{rule.deliverable}={rule.master}", "spec": None, "verdict": "unpaired",
               "identity": None, "summary": None, "first_problem": None, "outputs": {}}
        if master is None:
            row["first_problem"] = (f"no {rule.master_name(os.path.basename(deliv.path))} beside it: a deliverable "
                                    "cannot be shown to derive from a master that is not there")
        elif not _safe_folder(out_dir, deliv.out_folder):
            row.update(verdict="error", first_problem=f"its output folder {deliv.out_folder} resolves outside "
                                                      f"{out_dir}; the pair was not compared")
        else:
            loaded = rule.loaded if rule.loaded is not None else (deliv.rule.loaded if deliv.rule else None)
            row["spec"] = loaded.name if loaded is not None else None
            try:
                r = run_compare(master.path, deliv.path, out_dir=deliv.out_folder, formats=formats, loaded=loaded)
            except AudioReadError as exc:
                row.update(verdict="error", first_problem=str(exc))
                unreadable += 1
            except UsageError as exc:
                row.update(verdict="error", first_problem=str(exc))
            except Exception as exc:  # one pair must not cost the run its index
                row.update(verdict="error", first_problem=f"the comparison stopped: {type(exc).__name__}: {exc}")
            else:
                from masterqc.compare.render import summary_sentences
                findings = r.get("findings") or []
                row.update(verdict=r.get("verdict") or "measured", identity=r["identity"]["verdict"],
                           summary=summary_sentences(r)[0],
                           first_problem=next((f["message"] for s in ("error", "fail", "warn") for f in findings
                                               if f["status"] == s), None),
                           outputs={k: posixpath.join(deliv.out_rel, v) for k, v in r["outputs"].items()})
        rows.append(row)
        if stream is not None:
            stream.write(f"pair {row['verdict'].upper():8s} {shown(deliv.rel)} <- "
                         f"{shown(master.rel) if master is not None else '(no master)'}\n")
            stream.flush()
    return rows, unreadable


def add_pairs(summary: dict, items, specmap, formats, stream=None) -> None:
    """Compare the run's pairs (when the spec map has ``pairs:``) and record them in ``summary``:
    ``pairs`` rows, ``counts.pairs`` / ``counts.pairs_failed``, and the exit code (a failed or unpaired
    deliverable or one that could not be compared: 1; a pair whose files could not be read: 3)."""
    rules = getattr(specmap, "pairs", None) or []
    if not rules:
        return
    rows, unreadable = compare_pairs(items, rules, tuple(formats), summary["run"]["out_dir"], stream)
    summary["pairs"] = rows
    failed = [r for r in rows if r["verdict"] in ("fail", "error", "unpaired")]
    summary["counts"]["pairs"] = len(rows)
    summary["counts"]["pairs_failed"] = len(failed)
    code = summary["exit_code"]
    if unreadable:
        code = 3
    elif failed and code == 0:
        code = 1
    summary["exit_code"] = code


_WORD = {"pass": "PASS", "warn": "WARN", "fail": "FAIL", "error": "ERROR", "unpaired": "NO MASTER",
         "measured": "MEASURED"}
_IDENTITY = {"same": "same programme", "different_mix": "different mix", "different_programme": "different programme"}


def worst_verdict(summary: dict) -> str | None:
    """The worst pair verdict of a run as an index status (an unpaired deliverable counts as a failure)."""
    seen = {("fail" if r["verdict"] == "unpaired" else r["verdict"]) for r in summary.get("pairs") or []}
    return next((v for v in ("error", "fail", "warn") if v in seen), None)


def index_section(summary: dict) -> Markup:
    """The index page's section listing the pairs (empty when the run had no pairing rules)."""
    from masterqc.fileio import shown
    rows = summary.get("pairs")
    if not rows:
        return Markup("")

    def e(v) -> str:
        return html.escape(shown(v) if isinstance(v, str) else str(v))

    body = []
    for r in rows:
        st = r["verdict"] if r["verdict"] in ("pass", "warn", "fail", "error") else (
            "fail" if r["verdict"] == "unpaired" else "skipped")
        words = "".join(f'<span class="first-problem">{e(t)}</span>' for t in (r.get("summary"), r.get("first_problem"))
                        if t)
        links = "".join(f'<a href="{e(href)}">{e(kind)}</a>' for kind, href in r["outputs"].items())
        body.append(f'<tr class="row-{st}"><td class="status st-{st}">{_WORD.get(r["verdict"], e(r["verdict"]))}</td>'
                    f'<td class="file">{e(r["deliverable"])}{words}</td>'
                    f'<td>{e(r["master"]) if r["master"] else "none found"}</td>'
                    f'<td>{e(_IDENTITY.get(r.get("identity"), "n/a"))}</td>'
                    f'<td class="links">{links}</td></tr>')
    return Markup(
        '<section id="pairs">\n<h2>Deliverables against their masters</h2>\n'
        '<table class="index grid" id="pair-table">\n<thead><tr><th scope="col">Verdict</th>'
        '<th scope="col">Deliverable</th><th scope="col">Master</th><th scope="col">Identity</th>'
        '<th scope="col">Comparison</th></tr></thead>\n<tbody>\n' + "\n".join(body) + "\n</tbody>\n</table>\n"
        '<p class="note">Each deliverable is measured against the master in its folder that the spec map\'s '
        "pairing rules name (alignment, gain, response, folded content, requantisation, peaks and loudness); "
        "the verdict is the spec's derivation: section. The comparison report holds the figures.</p>\n</section>\n")
