"""HTML and PDF reports of one master, from a result object.

:func:`render_html` returns one self-contained HTML document (inline CSS and
SVG, no scripts, no external references); :func:`render_pdf` prints the same
document with weasyprint (A4 or Letter, page numbers, file name and verdict on
every page); :func:`write_reports` writes ``<stem>.html`` / ``<stem>.pdf``
atomically.  Rendering never measures: every number comes from the result.

Determinism: the same result gives byte-identical HTML (no clock is read;
plots are rendered with fixed ids).  PDFs carry weasyprint's creation date and
so differ in their metadata only.
"""

from __future__ import annotations

import importlib.resources
import json
import os
from pathlib import Path

import jinja2
from markupsafe import Markup

from masterqc.errors import UsageError
from masterqc.fileio import write_atomic

from masterqc.formats import ALL_FORMATS, RENDER_FORMATS, parse_formats  # noqa: E402,F401  (one formats module)

PAPERS = ("a4", "letter")
#: what a report holds: the certificate and its appendix, or the certificate alone
PAGES = ("all", "summary")

_ENV: jinja2.Environment | None = None
_CSS: str | None = None


def _template_text(name: str) -> str:
    return importlib.resources.files("masterqc.templates").joinpath(name).read_text(encoding="utf-8")


def _env() -> jinja2.Environment:
    global _ENV, _CSS
    if _ENV is None:
        _ENV = jinja2.Environment(
            loader=jinja2.FunctionLoader(_template_text),
            autoescape=True,               # every value, whatever the template's name
            undefined=jinja2.StrictUndefined,
            trim_blocks=False, lstrip_blocks=False, keep_trailing_newline=True,
        )
        css = _template_text("report.css")
        for ch in "<&>":
            if ch in css:  # pragma: no cover - guarded by a test
                raise RuntimeError(f"report.css must not contain {ch!r} (it is embedded in well-formed XML)")
        _CSS = css
    return _ENV


def render_html(result: dict, paper: str = "a4", pages: str = "all") -> str:
    """The report of ``result`` as one self-contained HTML document (deterministic).

    ``paper`` ("a4" or "letter") only sets the page size used when printing; ``pages``:
    ``"all"`` (the certificate, then the appendix) or ``"summary"`` (the certificate alone).
    """
    from masterqc.report.view import build_view

    if paper not in PAPERS:
        raise UsageError(f"unknown paper size {paper!r}; use a4 or letter")
    if pages not in PAGES:
        raise UsageError(f"unknown --pages {pages!r}; use all or summary")
    view = build_view(result, paper=paper)
    for key in ("loudness", "true_peak", "spectrum", "spectrogram", "events"):
        if view[key].get("svg"):
            view[key]["svg"] = Markup(view[key]["svg"])  # matplotlib output: escaped by matplotlib
    env = _env()
    template = env.get_template("report.html.j2")
    version = str((result.get("tool") or {}).get("version", ""))
    from masterqc.report.view import STATUS_COLOURS
    return template.render(v=view, css=Markup(_CSS), tool_version=version, colours=STATUS_COLOURS,
                           summary_only=pages == "summary")


class ExternalFetchRefused(ValueError):
    """Raised when a document tries to load anything but an inline ``data:`` URL."""


def inline_only_fetcher(fetch_log: list | None = None):
    """A weasyprint URL fetcher that serves ``data:`` URLs only (a report never loads anything).

    Every URL asked for is appended to ``fetch_log`` when given, so tests can
    prove that rendering requests nothing from outside the document.
    """
    import weasyprint
    from weasyprint import urls

    def refuse(url):
        if fetch_log is not None:
            fetch_log.append(url)
        if not url.startswith("data:"):
            raise ExternalFetchRefused(f"report tried to load {url!r}; reports are self-contained")

    if hasattr(urls, "URLFetcher"):  # weasyprint >= 68: fetcher objects
        class InlineOnly(urls.URLFetcher):
            def fetch(self, url, headers=None):
                refuse(url)
                return super().fetch(url, headers)
        return InlineOnly(allowed_protocols=("data",))

    def fetch(url, *args, **kwargs):  # older weasyprint: a plain function
        refuse(url)
        return weasyprint.default_url_fetcher(url, *args, **kwargs)
    return fetch


def render_pdf(result: dict, paper: str = "a4", html: str | None = None, fetch_log: list | None = None,
               pages: str = "all") -> bytes:
    """The PDF of the same document (:func:`render_html`) printed by weasyprint.

    ``fetch_log``: a list that receives every URL weasyprint asks for (only
    inline ``data:`` images are ever served).
    """
    import weasyprint

    if html is None:
        html = render_html(result, paper=paper, pages=pages)
    doc = weasyprint.HTML(string=html, base_url=None, url_fetcher=inline_only_fetcher(fetch_log))
    return doc.write_pdf()


def pdf_page_count(html: str) -> int:
    """How many pages weasyprint lays ``html`` out on (for tests and checks)."""
    import weasyprint
    return len(weasyprint.HTML(string=html, base_url=None, url_fetcher=inline_only_fetcher()).render().pages)


def write_reports(result: dict, out_dir, stem: str, formats=RENDER_FORMATS, paper: str = "a4",
                  pages: str = "all") -> list[Path]:
    """Write ``<stem>.html`` and/or ``<stem>.pdf`` for ``result`` into ``out_dir``; return the paths.

    ``formats`` may include ``"json"`` (ignored here: the caller writes the
    result itself).  Everything is rendered before anything is written, and
    each file is written atomically, so a failure leaves no half-written report.
    """
    fmts = parse_formats(formats)
    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    if not stem or os.sep in stem or (os.altsep and os.altsep in stem):
        raise UsageError(f"report name {stem!r} must be a plain file name stem")
    from masterqc.stagelog import stage
    with stage("render_html"):
        html = render_html(result, paper=paper, pages=pages) if ("html" in fmts or "pdf" in fmts) else None
    payloads: list[tuple[Path, bytes]] = []
    if "html" in fmts:
        payloads.append((out / f"{stem}.html", html.encode("utf-8")))
    if "pdf" in fmts:
        with stage("render_pdf"):
            payloads.append((out / f"{stem}.pdf", render_pdf(result, paper=paper, html=html, pages=pages)))
    written = []
    for path, data in payloads:
        write_atomic(path, data)
        written.append(path)
    return written


def load_result(path) -> dict:
    """Read a saved result JSON for re-rendering; :class:`UsageError` names the file and what is wrong.

    JSON syntax errors give the line and column.  The object must look like a
    masterqc result (``file``, ``format`` and ``measurements`` objects), or be
    the error result of a master that could not be read (``verdict: "error"``).
    """
    p = Path(path)
    try:
        text = p.read_text(encoding="utf-8")
    except FileNotFoundError:
        raise UsageError(f"{p}: no such result file") from None
    except IsADirectoryError:
        raise UsageError(f"{p}: is a directory, not a result JSON file") from None
    except UnicodeDecodeError as exc:
        raise UsageError(f"{p}: not a UTF-8 text file (byte {exc.start}): not a result JSON") from None
    except OSError as exc:
        raise UsageError(f"{p}: cannot read ({exc.strerror or exc})") from None
    try:
        result = json.loads(text)
    except json.JSONDecodeError as exc:
        raise UsageError(f"{p}: invalid JSON at line {exc.lineno}, column {exc.colno}: {exc.msg}") from None
    if not isinstance(result, dict):
        raise UsageError(f"{p}: not a masterqc result (the top level is a {type(result).__name__}, "
                         "not an object)")
    name = (result.get("tool") or {}).get("name") if isinstance(result.get("tool"), dict) else None
    if name not in (None, "masterqc"):
        raise UsageError(f"{p}: not a masterqc result (tool.name is {name!r})")
    if not isinstance(result.get("file"), dict):
        raise UsageError(f"{p}: not a masterqc result (key 'file' is missing or not an object)")
    is_error_result = result.get("verdict") == "error" and "measurements" not in result
    for key in ("format", "measurements"):
        if key not in result and is_error_result:
            continue  # a master that could not be read: its report says why
        if not isinstance(result.get(key), dict):
            raise UsageError(f"{p}: not a masterqc result (key {key!r} is missing or not an object)")
    if not isinstance(result.get("findings", []), list):
        raise UsageError(f"{p}: key 'findings' must be a list")
    from masterqc.contract import ResultFormatError, upgrade_result
    try:
        return upgrade_result(result, str(p))  # an older saved result is upgraded, a newer one refused
    except ResultFormatError as exc:
        raise UsageError(str(exc)) from None

