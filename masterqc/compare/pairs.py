"""Pairing deliverables with their masters by name pattern, for ``masterqc compare FOLDER --pair``.

A rule ``DELIVERABLE_GLOB=MASTER_GLOB`` (the first with one ``*``) pairs every
file below the folder whose name matches the first pattern with the file in the
same folder whose name is the second pattern with the same ``*`` part:
``*_44k16.wav=*_96k24.wav`` pairs ``song_44k16.wav`` with ``song_96k24.wav``.
A master pattern without ``*`` names one master for every match in a folder:
``song_44k16_*.wav=song_96k24.wav``.
A deliverable whose master is missing is listed as unpaired, never guessed.
"""

from __future__ import annotations

import fnmatch
import html
import json
import os
from pathlib import Path

from masterqc.errors import UsageError


def parse_rule(text: str) -> tuple[str, str]:
    if "=" not in text:
        raise UsageError(f"--pair {text!r}: write DELIVERABLE_GLOB=MASTER_GLOB, e.g. '*_44k16.wav=*_96k24.wav'")
    d, m = (x.strip() for x in text.split("=", 1))
    for name, pat, stars in (("deliverable", d, (1,)), ("master", m, (0, 1))):
        if pat.count("*") not in stars or "/" in pat or os.sep in pat or not pat:
            need = "exactly one '*'" if stars == (1,) else "at most one '*' (none: one master for every match)"
            raise UsageError(f"--pair {text!r}: the {name} pattern needs {need} and no folder part")
    return d, m


def find_pairs(folder, rule: tuple[str, str]):
    """``(pairs, unpaired)``: ``[(master, deliverable)]`` and deliverables without a master, sorted."""
    d_pat, m_pat = rule
    pre, post = d_pat.split("*")
    pairs, unpaired = [], []
    for root, dirs, files in os.walk(folder):
        dirs[:] = sorted(x for x in dirs if not x.startswith("."))
        names = set(files)
        for name in sorted(files):
            if name.startswith(".") or not fnmatch.fnmatchcase(name, d_pat):
                continue
            stem = name[len(pre):len(name) - len(post) if post else None]
            master = m_pat.replace("*", stem)
            if master == name:
                continue
            if master in names:
                pairs.append((Path(root) / master, Path(root) / name))
            else:
                unpaired.append(Path(root) / name)
    return pairs, unpaired


def run_pairs(folders, rule_text: str, spec_path, out_dir, formats, quiet: bool, stream) -> int:
    """Compare every pair found below ``folders``; write each pair's outputs and an index; exit code."""
    from masterqc.compare.command import run_compare
    from masterqc.errors import AudioReadError
    rule = parse_rule(rule_text)
    out = Path(out_dir)
    rows = []
    worst = 0
    for folder in folders:
        if not os.path.isdir(folder):
            raise UsageError(f"{folder}: not a folder (with --pair, give folders to search)")
        pairs, unpaired = find_pairs(folder, rule)
        for master, deliv in pairs:
            rel = os.path.relpath(deliv.parent, folder)
            target = out / Path(folder).name / rel
            try:
                r = run_compare(master, deliv, spec_path, target, formats)
                verdict = r.get("verdict") or "measured"
                links = {k: os.path.relpath(target / v, out) for k, v in r["outputs"].items()}
                why = next((f["message"] for f in r.get("findings", []) if f["status"] in ("fail", "error")), "")
                ident = r["identity"]["verdict"]
            except AudioReadError as exc:
                verdict, links, why, ident = "error", {}, str(exc), ""
                worst = max(worst, 3)
            if verdict in ("fail", "error"):
                worst = max(worst, 1)
            rows.append({"master": str(master), "deliverable": str(deliv), "verdict": verdict,
                         "identity": ident, "reason": why, "outputs": links})
            if not quiet:
                stream.write(f"{verdict.upper():8s} {deliv} <- {master.name}{': ' + why if why else ''}\n")
        for deliv in unpaired:
            worst = max(worst, 1)   # a deliverable whose master is not there cannot be shown to derive from it
            rows.append({"master": None, "deliverable": str(deliv), "verdict": "unpaired", "identity": "",
                         "reason": f"no {rule[1]} beside it", "outputs": {}})
            if not quiet:
                stream.write(f"UNPAIRED {deliv}: no master matching {rule[1]} in its folder\n")
    out.mkdir(parents=True, exist_ok=True)
    from masterqc.fileio import write_atomic
    write_atomic(out / "pairs.json", (json.dumps({"rule": rule_text, "pairs": rows}, indent=2) + "\n").encode())
    write_atomic(out / "index.html", _index_html(rule_text, rows).encode("utf-8"))
    return worst


def _index_html(rule: str, rows: list) -> str:
    from masterqc.report.render import _env
    from masterqc.report import render as base
    _env()
    css = base._CSS or ""
    e = html.escape
    body = []
    for r in rows:
        links = " ".join(f'<a href="{e(v)}">{e(k)}</a>' for k, v in r["outputs"].items() if k != "json")
        body.append(f"<tr><td class=\"st-{e(r['verdict'])}\"><strong>{e(r['verdict'].upper())}</strong></td>"
                    f"<td>{e(r['deliverable'])}</td><td>{e(r['master'] or '(none)')}</td>"
                    f"<td>{e(r['identity'].replace('_', ' '))}</td><td>{e(r['reason'])}</td><td>{links}</td></tr>")
    return ("<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\"/><title>masterqc: deliverables and "
            f"their masters</title><style>{css}</style></head><body><header class=\"masthead\"><p class=\"brand\">"
            "<span class=\"brand-name\">masterqc</span> deliverables against their masters</p>"
            f"<p class=\"run-file\">Pairs by the rule {e(rule)}</p></header><main><table class=\"grid\"><thead><tr>"
            "<th scope=\"col\">Verdict</th><th scope=\"col\">Deliverable</th><th scope=\"col\">Master</th>"
            "<th scope=\"col\">Identity</th><th scope=\"col\">First failure</th><th scope=\"col\">Reports</th></tr>"
            "</thead><tbody>" + "".join(body) + "</tbody></table><p class=\"note\">A measurement aid: the receiving "
            "party's own spec and QC govern acceptance.</p></main></body></html>\n")
