"""Output formats: the one place that names them, parses ``--format`` and says whether reports render.

``check``, ``judge``, ``demo`` and the batch runner write any of
:data:`ALL_FORMATS`; ``report`` re-renders :data:`RENDER_FORMATS`.  A format
list is returned in the canonical order (json, html, pdf) whatever order it was
written in; an unknown or empty list raises :class:`masterqc.errors.UsageError`.
"""

from __future__ import annotations

from masterqc.errors import UsageError

#: every output format, in the order they are written
ALL_FORMATS = ("json", "html", "pdf")
#: the formats the report renderer writes
RENDER_FORMATS = ("html", "pdf")
#: what ``check`` writes when ``--format`` is not given (json only while reports cannot be rendered)
DEFAULT_FORMATS = ALL_FORMATS


def parse_formats(text, allowed=ALL_FORMATS, option: str = "--format") -> tuple[str, ...]:
    """``"html,json"`` -> ``("json", "html")``; :class:`UsageError` naming an unknown format or an empty list."""
    items = [str(x) for x in text] if isinstance(text, (list, tuple)) else str(text or "").split(",")
    wanted = {x.strip().lower() for x in items if x.strip()}
    unknown = sorted(wanted - set(allowed))
    if unknown:
        raise UsageError(f"{option}: unknown format {', '.join(unknown)} (choose from {', '.join(allowed)})")
    if not wanted:
        raise UsageError(f"{option}: no format given (choose from {', '.join(allowed)})")
    return tuple(f for f in allowed if f in wanted)


def reports_available() -> str | None:
    """None when HTML/PDF rendering can be imported, else the reason it cannot."""
    try:
        from masterqc.report.render import write_reports  # noqa: F401
    except Exception as exc:  # ImportError or a broken renderer
        return f"{type(exc).__name__}: {exc}"
    return None


def default_formats() -> tuple[str, ...]:
    """:data:`DEFAULT_FORMATS`, or json only when the renderer is unavailable."""
    return DEFAULT_FORMATS if reports_available() is None else ("json",)


def formats_for(text, option: str = "--format", warn=None) -> tuple[str, ...]:
    """The formats a command writes: parsed from ``text``, or the default when ``text`` is None.

    Asking for HTML/PDF where reports cannot be rendered is a :class:`UsageError`; the default
    falls back to JSON only and calls ``warn(message)`` when given.
    """
    if text is None:
        formats = default_formats()
        if "html" not in formats and warn is not None:
            warn(f"HTML/PDF reports unavailable ({reports_available()}); writing JSON only")
        return formats
    formats = parse_formats(text, option=option)
    if any(f in RENDER_FORMATS for f in formats):
        why = reports_available()
        if why is not None:
            raise UsageError(f"{option} {text}: HTML/PDF reports cannot be rendered here ({why}); use {option} json")
    return formats
