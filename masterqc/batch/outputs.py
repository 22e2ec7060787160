"""The run-level outputs: ``summary.json``, ``junit.xml``, ``index.html`` and ``index.csv``.

All four are built from the *summary* dict (:func:`masterqc.batch.runner.run_batch`
assembles it) and written atomically.  ``index.html`` is one self-contained
page (the per-file report's CSS inlined, no network), autoescaped, readable
without JavaScript (rows come worst first) and sortable by verdict, file,
loudness and true peak with a small inline script.
"""

from __future__ import annotations

import importlib.resources
import json
import re
import xml.etree.ElementTree as ET

import jinja2
from markupsafe import Markup

from masterqc.exports import clock_text, index_csv
from masterqc.jsonutil import jsonable
from masterqc.pipeline import write_atomic
from masterqc.problems import problems_text, ranked_problems, readable_message

VERDICT_RANK = {"error": 0, "fail": 1, "warn": 2, "pass": 3}
#: the state words (one set everywhere: pass, warn, fail, error, not checked)
WORD = {"pass": "PASS", "warn": "WARN", "fail": "FAIL", "error": "ERROR", "skipped": "NOT CHECKED"}
#: problems shown in a row before the rest fold into an expandable list
ROW_PROBLEMS_SHOWN = 3
SHAPE = {"pass": "circle", "warn": "triangle", "fail": "square", "error": "diamond", "skipped": "dash"}
CHANGE_TEXT = {"new": "new", "fixed": "fixed", "newly_failing": "newly failing", "changed": "changed",
               "unchanged": ""}


def write_summary_json(summary: dict, path) -> None:
    text = json.dumps(jsonable(summary), indent=2, ensure_ascii=False, allow_nan=False) + "\n"
    write_atomic(path, text.encode("utf-8"))


# ------------------------------------------------------------------ junit

_XML_BAD = re.compile("[^\u0009\u000a\u000d\u0020-\ud7ff\ue000-\ufffd\U00010000-\U0010ffff]")


def xml_text(text) -> str:
    """``text`` with the characters XML 1.0 cannot hold (controls, lone surrogates) shown as ``\\xNN``."""
    return _XML_BAD.sub(lambda m: f"\\x{ord(m.group()):02x}" if ord(m.group()) < 256 else f"\\u{ord(m.group()):04x}",
                        str(text))


def _problems_text(problems: list[dict]) -> str:
    return xml_text("\n".join(f"[{p['status'].upper()}] {p['check']}: {p['message']}" for p in problems))


def junit_xml(summary: dict) -> bytes:
    """JUnit XML: suite ``masterqc.files`` (one testcase per file) and ``masterqc.releases``.

    A failing file has a ``<failure>`` whose message holds every failing finding,
    worst first, on one line (``"FAIL a; FAIL b"``) and whose text lists them one
    per line; an unreadable file an ``<error>`` likewise; warnings go to
    ``<system-out>`` (the testcase passes).
    """
    files = summary["files"]
    releases = [r for r in summary.get("releases", []) if r.get("judged")]
    suites = ET.Element("testsuites", name="masterqc")
    tot = {"tests": 0, "failures": 0, "errors": 0}
    run = summary["run"]

    def suite(name: str, cases: list[tuple[str, str, str | None, list[dict], float]]):
        s = ET.SubElement(suites, "testsuite", name=name, timestamp=run["started_utc"].rstrip("Z"),
                          hostname="localhost")
        n_fail = n_err = 0
        for classname, case_name, verdict, problems, secs in cases:
            tc = ET.SubElement(s, "testcase", classname=xml_text(classname), name=xml_text(case_name),
                               time=f"{secs:.3f}")
            problems = ranked_problems(problems)
            bad = [p for p in problems if p["status"] in ("fail", "error")]
            if verdict == "error":
                n_err += 1
                e = ET.SubElement(tc, "error", message=xml_text(problems_text(bad) or "error"), type="error")
                e.text = _problems_text(bad)
            elif verdict == "fail":
                n_fail += 1
                e = ET.SubElement(tc, "failure", message=xml_text(problems_text(bad) or "fail"), type="fail")
                e.text = _problems_text(bad)
            warns = [p for p in problems if p["status"] == "warn"]
            if warns:
                ET.SubElement(tc, "system-out").text = _problems_text(warns)
        s.set("tests", str(len(cases)))
        s.set("failures", str(n_fail))
        s.set("errors", str(n_err))
        s.set("skipped", "0")
        s.set("time", f"{sum(c[4] for c in cases):.3f}")
        tot["tests"] += len(cases)
        tot["failures"] += n_fail
        tot["errors"] += n_err

    suite("masterqc.files", [((f.get("release") or "").replace("/", ".") or "masterqc", f["rel"], f["verdict"],
                              f["problems"], float(f.get("elapsed_s") or 0.0)) for f in files])
    if releases:
        suite("masterqc.releases", [("release", r["id"], r["verdict"],
                                     [p for p in r["findings"] if p["status"] in ("fail", "error", "warn")], 0.0)
                                    for r in releases])
    for k, v in tot.items():
        suites.set(k, str(v))
    suites.set("time", f"{float(run.get('elapsed_s') or 0.0):.3f}")
    ET.indent(suites)
    return b'<?xml version="1.0" encoding="UTF-8"?>\n' + ET.tostring(suites, encoding="utf-8") + b"\n"


# ------------------------------------------------------------------ index.html

INDEX_CSS = """
body { max-width: none; width: 100%; padding: 20px 2.5vw 32px; }
.index-counts { display: flex; gap: 10px; flex-wrap: wrap; margin: 10px 0 4px; padding: 0; list-style: none; }
.index-counts li { border: 2px solid currentColor; padding: 4px 10px; font-weight: bold; }
.index-counts .n { font-size: 20px; margin-right: 4px; }
table.index { width: 100%; border-collapse: collapse; margin-top: 6px; }
table.index th { text-align: left; font-size: 12px; border-bottom: 2px solid var(--ink); padding: 4px 6px; vertical-align: bottom; }
table.index th.num { text-align: right; }
table.index th button { font: inherit; font-weight: bold; text-transform: inherit; letter-spacing: inherit; background: none; border: 0; padding: 0; cursor: pointer; color: inherit; }
table.index th[aria-sort="ascending"] button::after { content: " \\25B2"; }
table.index th[aria-sort="descending"] button::after { content: " \\25BC"; }
table.index td { border-bottom: 1px solid var(--rule); padding: 4px 6px; vertical-align: top; font-size: 12.5px; }
table.index td.file { overflow-wrap: break-word; word-break: normal; min-width: 10em; }
table.index td.num { white-space: nowrap; text-align: right; }
table.index td.problems { min-width: 18em; }
ul.problems { list-style: none; margin: 0; padding: 0; }
ul.problems li { margin: 0 0 2px; display: grid; grid-template-columns: 4.2em 1fr; column-gap: 0.4em; }
ul.problems .word { font-weight: bold; font-size: 0.85em; padding-top: 0.1em; }
details.more-problems summary { cursor: pointer; color: var(--muted); font-size: 12px; }
details.more-problems[open] summary { margin-bottom: 2px; }
.how { display: block; color: var(--muted); font-size: 11.5px; }
table.index td.status { white-space: nowrap; font-weight: bold; }
table.index .icon { vertical-align: -3px; margin-right: 4px; }
.first-problem { display: block; color: var(--muted); font-size: 11.5px; }
.change { font-size: 11px; font-weight: bold; text-transform: uppercase; letter-spacing: 0.04em; }
.change-newly_failing { color: var(--fail); }
.change-fixed { color: var(--pass); }
.change-new { color: var(--unjudged); }
.links a { margin-right: 6px; }
.changes li { margin: 2px 0; }
.skipped-paths li { font-size: 12px; }
"""

INDEX_TEMPLATE = r"""<!DOCTYPE html>
{%- macro icon(status) -%}
{%- set shape = SHAPE.get(status, "dash") -%}
<svg xmlns="http://www.w3.org/2000/svg" class="icon st-{{ status }}" viewBox="0 0 16 16" width="16" height="16" aria-hidden="true">
{%- if shape == "circle" -%}
<circle cx="8" cy="8" r="7.2" fill="currentColor"/><path d="M4.3 8.4 L7 11 L11.9 5.3" fill="none" stroke="#fff" stroke-width="2"/>
{%- elif shape == "triangle" -%}
<path d="M8 0.9 L15.4 14.6 L0.6 14.6 Z" fill="currentColor"/><path d="M8 5.2 L8 10" stroke="#000" stroke-width="1.9"/><circle cx="8" cy="12.3" r="1.05" fill="#000"/>
{%- elif shape == "square" -%}
<rect x="0.8" y="0.8" width="14.4" height="14.4" fill="currentColor"/><path d="M4.6 4.6 L11.4 11.4 M11.4 4.6 L4.6 11.4" stroke="#fff" stroke-width="2.1"/>
{%- elif shape == "diamond" -%}
<path d="M8 0.5 L15.5 8 L8 15.5 L0.5 8 Z" fill="currentColor"/><path d="M8 4.2 L8 9.1" stroke="#fff" stroke-width="1.9"/><circle cx="8" cy="11.5" r="1.05" fill="#fff"/>
{%- else -%}
<circle cx="8" cy="8" r="6.5" fill="none" stroke="currentColor" stroke-width="1.5"/><path d="M4.6 8 L11.4 8" stroke="currentColor" stroke-width="1.8"/>
{%- endif -%}
</svg>
{%- endmacro %}
{%- macro problem_item(p, path) -%}
<li class="st-{{ p.status }}"><span class="word">{{ WORD[p.status] }}</span><span>{{ readable(p.message, path) }}</span></li>
{%- endmacro %}
{%- macro problem_list(problems, path="") -%}
{%- set cut = problems|length > ROW_SHOWN -%}
{%- set head = problems[:ROW_SHOWN - 1] if cut else problems -%}
<ul class="problems">{% for p in head %}{{ problem_item(p, path) }}{% endfor %}</ul>
{%- if cut %}{% set rest = problems[ROW_SHOWN - 1:] %}
<details class="more-problems"><summary>{{ rest|length }} more ({{ tally(rest) }})</summary><ul class="problems">{% for p in rest %}{{ problem_item(p, path) }}{% endfor %}</ul></details>
{%- endif %}
{%- endmacro %}
<html lang="en">
<head>
<meta charset="utf-8"/>
<meta name="viewport" content="width=device-width, initial-scale=1"/>
<title>masterqc batch: {{ counts.files }} files, {{ headline }}</title>
<style>{{ css }}</style>
</head>
<body class="status-{{ overall }}">
<header class="masthead">
<p class="brand"><span class="brand-name">masterqc</span> batch index · run {{ run.id }} · {{ run.started_utc }}{% if spec_names %} · spec <span class="spec">{{ spec_names|join(", ") }}</span>{% endif %}</p>
<p class="run-file">{{ run.roots|join(", ") }}</p>
<div class="verdict st-{{ overall }}" role="status">
<div class="verdict-word">{{ icon(overall) }}<span class="run-verdict">{{ WORD[overall] }}</span></div>
<p class="verdict-summary">{{ headline }}. {{ counts.measured }} measured, {{ counts.rejudged }} re-judged from stored measurements (no audio read), {{ counts.reused - counts.rejudged }} reused (identical to another file){% if counts.not_analysed %}, {{ counts.not_analysed }} not analysed (see their rows){% endif %}; {{ "%.1f"|format(run.elapsed_s) }} s on {{ run.backend }}.</p>
</div>
<ul class="index-counts">
{%- for v in ["fail", "error", "warn", "pass"] %}
<li class="st-{{ v }}">{{ icon(v) }}<span class="n">{{ counts[v] }}</span>{{ WORD[v] }}</li>
{%- endfor %}
</ul>
</header>

{%- if releases %}
<section id="releases">
<h2>Releases</h2>
<table class="index grid" id="release-table">
<thead><tr><th scope="col">Verdict</th><th scope="col">Release</th><th scope="col" class="num">Tracks</th><th scope="col" class="num">Duration</th><th scope="col" class="num">Pooled loudness</th><th scope="col" class="num">Loudness spread</th><th scope="col">Format</th><th scope="col">Problems, worst first</th></tr></thead>
<tbody>
{%- for r in releases %}
{%- set st = r.verdict or "skipped" %}
<tr class="row-{{ st }}">
<td class="status st-{{ st }}">{{ icon(st) }}{{ WORD[st] }}</td>
<td class="file">{{ wrapname(r.id) }}<span class="first-problem">spec {{ r.spec or "none" }}{% if r.mixed_specs %} (its files use several specs; the release is judged with this one, its first file's){% endif %}</span></td>
<td class="num">{{ r.measurements.track_count }}{% if r.measurements.unreadable_count %} ({{ r.measurements.unreadable_count }} unreadable){% endif %}</td>
<td class="num">{{ clock(r.measurements.total_duration_s) }}</td>
<td class="num">{{ fmt(r.measurements.pooled_integrated_lufs, "LUFS") }}</td>
<td class="num">{{ fmt(r.measurements.track_loudness_spread_lu, "LU") }}</td>
<td>{{ r.format_text }}</td>
<td class="problems">{% set rp = ranked(r.findings) %}{% if rp %}{{ problem_list(rp) }}{% elif r.verdict %}all release requirements met{% else %}not checked: the spec has no release section{% endif %}</td>
</tr>
{%- endfor %}
</tbody>
</table>
<p class="note">Pooled loudness: the gating blocks of every track gated together (ITU-R BS.1770-5 integrated loudness of the release as one programme). Spread: loudest minus quietest track.</p>
</section>
{%- endif %}
{{ pairs_section }}
<section id="changes">
<h2>Since the previous run</h2>
{%- if previous_run is none %}
<p class="note">No earlier complete run wrote to this output folder; every file counts as new.</p>
{%- else %}
<p class="note">Compared with run {{ previous_run.run_id }} of {{ previous_run.started_utc }}.</p>
<ul class="changes">
<li><strong>Newly failing ({{ changes.newly_failing|length }})</strong>{% if changes.newly_failing %}: {{ changes.newly_failing|join(", ") }}{% endif %}</li>
<li><strong>Fixed ({{ changes.fixed|length }})</strong>{% if changes.fixed %}: {{ changes.fixed|join(", ") }}{% endif %}</li>
<li><strong>New ({{ changes.new|length }})</strong>{% if changes.new %}: {{ changes.new|join(", ") }}{% endif %}</li>
<li><strong>Gone ({{ changes.gone|length }})</strong>{% if changes.gone %}: {{ changes.gone|join(", ") }}{% endif %}</li>
</ul>
{%- endif %}
</section>

<section id="files">
<h2>Files</h2>
<table class="index grid" id="file-table">
<thead><tr>
<th scope="col" data-key="verdict" aria-sort="ascending"><button type="button">Verdict</button></th>
<th scope="col" data-key="file"><button type="button">File</button></th>
<th scope="col" class="num" data-key="loudness"><button type="button">Integrated loudness</button></th>
<th scope="col" class="num" data-key="peak"><button type="button">True peak</button></th>
<th scope="col" class="num" data-key="duration"><button type="button">Duration</button></th>
<th scope="col">Problems, worst first</th>
<th scope="col">Change</th>
<th scope="col">Reports</th>
</tr></thead>
<tbody>
{%- for f in files %}
<tr class="row-{{ f.verdict }}">
<td class="status st-{{ f.verdict }}" data-sort="{{ RANK[f.verdict] }}">{{ icon(f.verdict) }}{{ WORD[f.verdict] }}</td>
<td class="file" data-sort="{{ f.rel }}">{{ wrapname(f.rel) }}{% if f.missing_audio %}<span class="first-problem">truncated: {{ f.missing_audio.missing_text }}</span>{% endif %}{% if f.spec_from_delivery_folder %}<span class="first-problem">judged by a spec from the delivery folder</span>{% endif %}</td>
<td class="num" data-sort="{{ sortnum(f.integrated_lufs) }}">{{ fmt(f.integrated_lufs, "LUFS") }}</td>
<td class="num" data-sort="{{ sortnum(f.true_peak_dbtp) }}">{{ fmt(f.true_peak_dbtp, "dBTP") }}</td>
<td class="num" data-sort="{{ sortnum(f.duration_s) }}">{{ clock(f.duration_s) }}</td>
<td class="problems">{% set fp = ranked(f.problems) %}{% if fp %}{{ problem_list(fp, f.path) }}{% else %}<span class="how">no problems</span>{% endif %}</td>
<td><span class="change change-{{ f.change }}">{{ CHANGE_TEXT[f.change] }}</span>{% if f.how == "rejudged" %}<span class="how">re-judged</span>{% elif f.how == "measured" %}<span class="how">measured</span>{% elif f.reused %}<span class="how">reused</span>{% endif %}</td>
<td class="links">{% for kind, href in f.outputs.items() %}<a href="{{ href }}">{{ kind }}</a>{% endfor %}</td>
</tr>
{%- endfor %}
</tbody>
</table>
<p class="note">Worst first. Levels are shown to 0.1; durations as m:ss or h:mm:ss; the per-file reports hold every finding and <code>events.csv</code> every located event. The same rows as a spreadsheet: <a href="index.csv">index.csv</a>.</p>
</section>

{%- if skipped_paths %}
<section id="skipped">
<h2>Not checked ({{ skipped_paths|length }})</h2>
<ul class="skipped-paths">
{%- for p in skipped_paths %}<li><code>{{ p.path }}</code>: {{ p.message }}</li>{% endfor %}
</ul>
</section>
{%- endif %}
<p class="note">The receiving party's own delivery spec and QC govern acceptance; this index summarises masterqc's measurements only.</p>
<script>
(function () {
  var table = document.getElementById("file-table");
  if (!table) return;
  var heads = table.querySelectorAll("th[data-key]");
  heads.forEach(function (th, col) {
    th.querySelector("button").addEventListener("click", function () {
      var index = Array.prototype.indexOf.call(th.parentNode.children, th);
      var asc = th.getAttribute("aria-sort") !== "ascending";
      heads.forEach(function (h) { h.removeAttribute("aria-sort"); });
      th.setAttribute("aria-sort", asc ? "ascending" : "descending");
      var body = table.tBodies[0];
      var rows = Array.prototype.slice.call(body.rows);
      rows.sort(function (a, b) {
        var x = a.cells[index].getAttribute("data-sort"), y = b.cells[index].getAttribute("data-sort");
        var nx = parseFloat(x), ny = parseFloat(y);
        var c = (!isNaN(nx) && !isNaN(ny)) ? nx - ny : x.localeCompare(y);
        return asc ? c : -c;
      });
      rows.forEach(function (r) { body.appendChild(r); });
    });
  });
})();
</script>
</body>
</html>
"""


def _fmt(value, unit: str) -> str:
    if value is None:
        return "n/a"
    dec = 3 if unit == "s" else 1
    text = f"{value:.{dec}f}"
    if text.startswith("-") and float(text) == 0:
        text = text[1:]
    return f"{text} {unit}"


_SEPARATORS = re.compile(r"([/\\_\-]+)")


def _wrapname(text) -> Markup:
    """A file or release name, escaped, with a break opportunity after every separator
    (``/ \\ _ -``; spaces break anyway; never before an extension), so a narrow column wraps it there, not mid-word."""
    from markupsafe import escape
    from masterqc.fileio import shown
    parts = _SEPARATORS.split(shown(str(text)))
    out = []
    for i, part in enumerate(parts):
        out.append(str(escape(part)))
        if i % 2 == 1:
            out.append("<wbr>")
    return Markup("".join(out))


def _tally(problems) -> str:
    n = {}
    for p in problems:
        n[p["status"]] = n.get(p["status"], 0) + 1
    return ", ".join(f"{n[st]} {WORD[st].lower()}" for st in ("error", "fail", "warn") if st in n)


def _ranked(findings) -> list[dict]:
    return ranked_problems(findings or [])


def _sortnum(value) -> str:
    return "-1e9" if value is None else repr(float(value))


def _report_css() -> str:
    try:
        return importlib.resources.files("masterqc.templates").joinpath("report.css").read_text(encoding="utf-8")
    except (OSError, ModuleNotFoundError):  # pragma: no cover - a broken install still gets a plain page
        return ""


def index_html(summary: dict) -> str:
    """The index page of a run (autoescaped; every value from ``summary``)."""
    from masterqc.fileio import shown
    # every value shown is escaped for HTML, and control characters in names (newlines, terminal
    # escape codes) are shown as \n, \x1b ...; the packaged CSS (Markup) passes as it is
    env = jinja2.Environment(autoescape=True, undefined=jinja2.StrictUndefined, keep_trailing_newline=True,
                             finalize=lambda v: v if isinstance(v, Markup) or not isinstance(v, str) else shown(v))
    tpl = env.from_string(INDEX_TEMPLATE)
    counts = summary["counts"]
    overall = "pass"
    from masterqc.batch.pairing import worst_verdict
    for v in ("error", "fail", "warn"):
        if (counts.get(v) or any(r.get("verdict") == v for r in summary.get("releases", []))
                or worst_verdict(summary) == v):
            overall = v
            break
    parts = [f"{counts[v]} {v}" for v in ("fail", "error", "warn", "pass") if counts.get(v)]
    headline = ", ".join(parts) or "no files"
    files = sorted(summary["files"], key=lambda f: (VERDICT_RANK.get(f["verdict"], 9), f["rel"]))
    releases = []
    for r in summary.get("releases", []):
        m = r["measurements"]
        fmt_parts = []
        if m["sample_rates_hz"]:
            fmt_parts.append(" / ".join(f"{x} Hz" for x in m["sample_rates_hz"]))
        if m["sample_formats"]:
            fmt_parts.append(" / ".join(m["sample_formats"]))
        if m["channel_counts"]:
            fmt_parts.append(" / ".join(f"{x} ch" for x in m["channel_counts"]))
        releases.append(dict(r, format_text=", ".join(fmt_parts) or "n/a"))
    releases.sort(key=lambda r: (VERDICT_RANK.get(r["verdict"] or "pass", 9), r["id"]))
    spec_names = sorted({f["spec"] for f in summary["files"] if f.get("spec")})
    # the CSS is masterqc's own packaged file, never input: marked safe so quotes survive in <style>
    return tpl.render(css=Markup(_report_css() + INDEX_CSS), run=summary["run"], counts=counts, overall=overall,
                      headline=headline, files=files, releases=releases, changes=summary["changes"],
                      previous_run=summary.get("previous_run"), skipped_paths=summary.get("skipped_paths", []),
                      spec_names=spec_names, WORD=WORD, SHAPE=SHAPE, RANK=VERDICT_RANK, CHANGE_TEXT=CHANGE_TEXT,
                      fmt=_fmt, sortnum=_sortnum, clock=lambda v: clock_text(v) or "n/a",
                      wrapname=_wrapname, readable=readable_message, tally=_tally, ranked=_ranked,
                      ROW_SHOWN=ROW_PROBLEMS_SHOWN, pairs_section=_pairs_section(summary))


def _pairs_section(summary: dict):
    from masterqc.batch.pairing import index_section
    return index_section(summary)


def write_run_outputs(summary: dict, out_dir: str) -> dict:
    """Write ``summary.json``, ``junit.xml``, ``index.html`` and ``index.csv`` into ``out_dir``; returns their names."""
    import os
    summary = jsonable(summary)  # names that are not valid UTF-8 shown as \xNN in every output
    write_summary_json(summary, os.path.join(out_dir, "summary.json"))
    write_atomic(os.path.join(out_dir, "junit.xml"), junit_xml(summary))
    write_atomic(os.path.join(out_dir, "index.html"), index_html(summary).encode("utf-8"))
    write_atomic(os.path.join(out_dir, "index.csv"), index_csv(summary))
    return {"summary": "summary.json", "junit": "junit.xml", "index": "index.html", "index_csv": "index.csv"}
