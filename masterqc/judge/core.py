"""Findings and the comparison rule every section judge uses.

A :class:`Finding` is one judged requirement: check id, status
(``pass | warn | fail | skipped | error``), the measured value as shown, the
limit as text, the miss, the unit, a message and, where it applies, the time
ranges (seconds) where the problem lies.

The precision rule (both promises hold by construction)
--------------------------------------------------------
A value is judged at the precision it is shown with.  The *judging decimals*
of a requirement are the unit's display decimals (:func:`masterqc.spec.types.unit_decimals`:
0.1 for dB, LU and LUFS) or more, when a limit or margin in the spec is written
with more decimals (a ceiling of -0.95 dBTP is judged at 0.01 dB).

1. The measured value is rounded once to the judging decimals
   (:func:`quantize`).  A value exactly half-way between two shown values is
   rounded *towards the nearer limit it could miss* (up for a ceiling, down
   for a floor), so a tie never falls on the passing side.
2. That rounded value is compared with the limit, and it is the value shown
   (``measured``; the unrounded value is kept in ``measured_raw``).

So a value shown as -1.0 dBTP never fails a -1.0 dBTP ceiling (-0.96 is shown
as -1.0 and passes), and a value that fails is always shown beyond the limit
(-0.94 is shown as -0.9, misses by 0.1 dB): what is printed and what is
judged are the same number.  The miss is the distance from the shown value to
the limit, so a failure never shows a miss of 0.0.

Writing a section judge
-----------------------
A module ``masterqc/judge/<section>.py`` defines
``judge(section, result) -> list[Finding]`` (``section`` is the validated
section model, ``result`` the measure result dict) and is registered with one
line in :data:`masterqc.registry.SECTIONS`.  For each requirement it calls
:func:`check_limits` (numeric requirements of :mod:`masterqc.spec.types`) or
:func:`check_allowed` (allowed-values lists); a measured ``None`` gives
``skipped`` with the reason.  Judges are pure: no I/O, no printing.
"""

from __future__ import annotations

from decimal import ROUND_CEILING, ROUND_FLOOR, Decimal

from masterqc.contract import NO_UNIT, STATUSES, Check, Finding  # noqa: F401  (the typed finding of the result contract)
from masterqc.spec.types import Allowed, Requirement, difference_unit, unit_decimals, unit_label

MAX_DECIMALS = 6
_HALF = Decimal("0.5")


def verdict(findings) -> str:
    """``error`` if any finding is an error, else ``fail``, else ``warn``, else ``pass``.

    ``skipped`` findings do not change the verdict.
    """
    statuses = {f.status if isinstance(f, Finding) else f["status"] for f in findings}
    for v in ("error", "fail", "warn"):
        if v in statuses:
            return v
    return "pass"


# ---------------------------------------------------------------- precision

def _dec(x: float) -> Decimal:
    return Decimal(repr(float(x)))


def decimals_of(x: float | None) -> int:
    """Decimal places a number needs (``-0.95`` -> 2, ``0.3`` -> 1, ``-1.0`` -> 0, ``48000.0`` -> 0)."""
    if x is None:
        return 0
    exp = _dec(x).normalize().as_tuple().exponent
    return min(MAX_DECIMALS, max(0, -int(exp)))


def quantize(value: float, decimals: int, ties: str = "up") -> float:
    """``value`` rounded to ``decimals`` places, from its shortest decimal spelling.

    ``ties="up"`` sends an exact half-way value towards +infinity, ``"down"``
    towards -infinity (``quantize(-0.95, 1, "up") == -0.9``,
    ``quantize(-0.95, 1, "down") == -1.0``).
    """
    steps = _dec(value).scaleb(decimals)  # the value counted in display steps (exact)
    if ties == "up":  # nearest step, a half-way value goes to the larger step
        n = (steps + _HALF).to_integral_value(rounding=ROUND_FLOOR)
    elif ties == "down":  # nearest step, a half-way value goes to the smaller step
        n = (steps - _HALF).to_integral_value(rounding=ROUND_CEILING)
    else:
        raise ValueError(f"ties must be 'up' or 'down', not {ties!r}")
    return float(n.scaleb(-decimals))


def fmt(value: float | None, decimals: int) -> str:
    """Fixed-point text of an already rounded value (``-0.0`` shown as ``0.0``)."""
    if value is None:
        return "n/a"
    text = f"{value:.{decimals}f}"
    if text.startswith("-") and float(text) == 0.0:
        text = text[1:]
    return text


def judging_decimals(req: Requirement) -> int:
    """Decimals a requirement is judged at: the unit's, or more if the spec writes more."""
    lo, hi = req.limits()
    extra = [decimals_of(x) for x in (lo, hi, req.warn_margin) if x is not None]
    t = getattr(req, f"target_{req.unit}", None)
    if t is not None:
        extra.append(decimals_of(t))
    return max([unit_decimals(req.unit)] + extra)


def limit_text(req: Requirement, decimals: int | None = None) -> str:
    """The limit as people read it: ``"<= -1.0 dBTP"``, ``"-23.0 LUFS +- 1.0 LU"``, ``"10.000 .. 60.000 s"``."""
    dec = judging_decimals(req) if decimals is None else decimals
    u = unit_label(req.unit)
    sp = " " if u else ""
    t = getattr(req, f"target_{req.unit}", None)
    if t is not None:
        tol = getattr(req, f"tolerance_{difference_unit(req.unit)}")
        du = unit_label(difference_unit(req.unit))
        return f"{fmt(t, dec)}{sp}{u} \u00b1 {fmt(tol, dec)}{' ' if du else ''}{du}"
    lo, hi = req.limits()
    if lo is not None and hi is not None:
        return f"{fmt(lo, dec)} .. {fmt(hi, dec)}{sp}{u}"
    if hi is not None:
        return f"<= {fmt(hi, dec)}{sp}{u}"
    return f">= {fmt(lo, dec)}{sp}{u}"


# ---------------------------------------------------------------- checks

def _target(req: Requirement) -> float | None:
    """The target of a target-with-tolerance requirement, else None."""
    t = getattr(req, f"target_{req.unit}", None)
    return float(t) if t is not None else None


def skipped(check: str, message: str, limit: str | None = None, unit: str | None = None,
            severity: str | None = None) -> Finding:
    """A requirement that could not be judged (the message says why)."""
    return Finding(check=check, status="skipped", message=sentence(message), limit=limit, unit=unit,
                   severity=severity)


def error(check: str, message: str) -> Finding:
    """A requirement whose judgement failed for a reason outside the master's content."""
    return Finding(check=check, status="error", message=sentence(message))


#: appended to a missed requirement whose severity is ``warn``
WARN_NOTE = " (the spec counts this as a warning)"

#: singular of the plural nouns that count things in messages ("1 clipped run")
_SINGULAR = {"clipped runs": "clipped run", "dropouts": "dropout",
             "samples beyond full scale": "sample beyond full scale"}

#: first words kept in their own case when a message is made a sentence
_KEEP_CASE = ("bext", "iXML", "dBTP", "dBFS")


def sentence(text: str) -> str:
    """``text`` as a sentence: its first letter a capital (unless it opens with a lower-case term of the
    trade, e.g. "bext"), ending with a full stop."""
    text = text.strip()
    if not text:
        return text
    first = text.split(" ", 1)[0]
    if not any(first.startswith(k) for k in _KEEP_CASE):
        text = text[0].upper() + text[1:]
    return text if text.endswith((".", "!", "?")) else text + "."


def add_detail(f: Finding, text: str) -> None:
    """Add ``text`` to the finding's message, inside its last sentence: before the closing full stop and
    before the warning note.  A ``text`` that opens a new sentence (starts with a capital after ". ")
    is added as one."""
    msg = f.message
    tail = ""
    if msg.endswith("."):
        msg = msg[:-1]
    if msg.endswith(WARN_NOTE):
        msg, tail = msg[: -len(WARN_NOTE)], WARN_NOTE
    if text.startswith(". "):
        f.message = sentence(msg + tail) + " " + sentence(text[2:])
    else:
        f.message = sentence(msg + text + tail)


def count_words(n, what: str) -> str:
    """``"no clipped runs"``, ``"1 clipped run"``, ``"3 clipped runs"``."""
    if n == 0:
        return f"no {what}"
    if n == 1 and what in _SINGULAR:
        return f"1 {_SINGULAR[what]}"
    return f"{n:g} {what}" if isinstance(n, float) else f"{n} {what}"


def limit_words(req: Requirement, decimals: int | None = None) -> str:
    """The limit in words: ``"at most -1.0 dBTP"``, ``"-23.0 LUFS \u00b1 1.0 LU"``,
    ``"10.000 to 60.000 s"``, ``"at least 24 bits"``; a count ceiling of 0 is ``"none"``."""
    dec = judging_decimals(req) if decimals is None else decimals
    u = unit_label(req.unit)
    sp = " " if u else ""
    if _target(req) is not None:
        return limit_text(req, dec)
    lo, hi = req.limits()
    if lo is not None and hi is not None:
        return f"{fmt(lo, dec)} to {fmt(hi, dec)}{sp}{u}"
    if hi is not None:
        if req.unit == "count" and hi == 0:
            return "none"
        return f"at most {fmt(hi, dec)}{sp}{u}"
    return f"at least {fmt(lo, dec)}{sp}{u}"


def _is_noun_count(req: Requirement, what: str) -> bool:
    """A count whose ``what`` is a plural noun ("clipped runs"), phrased "3 clipped runs" in messages."""
    return req.unit == "count" and not what.endswith("count")


def check_limits(check: str, what: str, value: float | None, req: Requirement, *,
                 where_s=None, missing_reason: str | None = None) -> Finding:
    """Judge ``value`` (in ``req.unit``) against a ceiling, floor, bounds or target requirement.

    ``what`` names the quantity for the message ("true peak"; for a count, its plural noun:
    "clipped runs"); ``where_s`` lists ``[start_s, end_s]`` ranges attached when the status is
    warn or fail.  A ``value`` of None gives ``skipped`` with ``missing_reason``.

    Messages are sentences a person would write, with the value, the limit and by how much:
    "True peak is -0.4 dBTP, 0.6 dB above the limit of -1.0 dBTP.",
    "No clipped runs (limit: none).", "3 clipped runs where the spec allows none."
    """
    dec = judging_decimals(req)
    limit = limit_text(req)  # at judging_decimals(req), the same step as the value
    words = limit_words(req, dec)
    u = unit_label(req.unit)
    du = unit_label(difference_unit(req.unit))
    sp, dsp = (" " if u else ""), (" " if du else "")
    noun = _is_noun_count(req, what)
    if value is None:
        reason = missing_reason or "the measurement does not exist for this file"
        f = skipped(check, f"{what}: not judged; {reason}", limit=limit, unit=u,
                    severity=req.severity)
        f.limit_low, f.limit_high = req.limits()
        f.target, f.decimals, f.miss_unit = _target(req), dec, du
        return f
    lo, hi = req.limits()
    # ties go towards the limit the value is nearer to (the one it could miss)
    if hi is not None and (lo is None or value >= (lo + hi) / 2.0):
        ties = "up"
    else:
        ties = "down"
    shown = quantize(value, dec, ties)
    s = _dec(shown)
    base = dict(check=check, measured=shown, measured_raw=float(value), limit=limit, unit=u,
                severity=req.severity, decimals=dec, measured_text=f"{fmt(shown, dec)}{sp}{u}",
                limit_low=lo, limit_high=hi, target=_target(req), miss_unit=du)
    missed_status = "fail" if req.severity == "fail" else "warn"
    note = "" if req.severity == "fail" else WARN_NOTE
    where = [list(w) for w in (where_s or [])]
    value_words = count_words(int(shown) if dec == 0 else shown, what) if noun else \
        f"{what} is {fmt(shown, dec)}{sp}{u}"
    t = _target(req)
    target_words = f" (target {limit_text(req, dec)})" if t is not None else ""
    # a missed ceiling, else a missed floor: the same sentence with its own words for the side
    for edge, beyond, count_side, side in ((hi, None if hi is None else s - _dec(hi), "more", "above"),
                                           (lo, None if lo is None else _dec(lo) - s, "fewer", "below")):
        if beyond is None or beyond <= 0:
            continue
        miss = float(beyond)
        if noun and side == "above" and edge == 0:
            text = f"{value_words} where the spec allows none"
        elif noun:
            text = f"{value_words}, {fmt(miss, dec)} {count_side} than the limit of {fmt(edge, dec)}"
        else:
            text = (f"{value_words}, {fmt(miss, dec)}{dsp}{du} {side} the limit of "
                    f"{fmt(edge, dec)}{sp}{u}{target_words}")
        return Finding(status=missed_status, miss=miss, where_s=where, message=sentence(text + note), **base)
    m = req.warn_margin
    if m:  # a margin of None or 0 never warns
        dm = _dec(m)
        for edge, near in ((hi, hi is not None and s > _dec(hi) - dm), (lo, lo is not None and s < _dec(lo) + dm)):
            if near:
                return Finding(status="warn", where_s=where,
                               message=sentence(f"{value_words}: within the limit of {fmt(edge, dec)}{sp}{u}, but "
                                                f"less than the {fmt(m, dec)}{dsp}{du} margin from it"), **base)
    return Finding(status="pass", message=sentence(f"{value_words} (limit: {words})"), **base)


def check_below_measurable(check: str, what: str, req: Requirement, reason: str) -> Finding:
    """Judge a quantity known only to lie below the measurable range (e.g. loudness of digital
    silence, below the -70 LUFS absolute gate): a floor or target is missed, a ceiling is met.

    A master with no gated loudness cannot meet a loudness target, so it must not pass by being
    skipped; it equally cannot exceed a ceiling.
    """
    dec = judging_decimals(req)
    limit = limit_text(req)  # at judging_decimals(req), the same step as the value
    u = unit_label(req.unit)
    lo, hi = req.limits()
    base = dict(check=check, measured=None, measured_raw=None, limit=limit, unit=u,
                severity=req.severity, decimals=dec, measured_text="below measurable range",
                limit_low=lo, limit_high=hi, target=_target(req), miss_unit=unit_label(difference_unit(req.unit)))
    if lo is not None:
        status = "fail" if req.severity == "fail" else "warn"
        note = "" if req.severity == "fail" else WARN_NOTE
        return Finding(status=status,
                       message=sentence(f"{what}: {reason}, so it is below the limit of {fmt(lo, dec)} {u}".rstrip()
                                        + note),
                       **base)
    return Finding(status="pass", message=sentence(f"{what}: {reason} (limit: {limit_words(req, dec)})"), **base)


def _allowed_words(values: list[str]) -> str:
    """``"48000 Hz"``, ``"48000 Hz or 96000 Hz"``, ``"wav, aiff or flac"``."""
    if len(values) == 1:
        return values[0]
    return ", ".join(values[:-1]) + " or " + values[-1]


def check_allowed(check: str, what: str, value, req: Allowed, *, show=str,
                  missing_reason: str | None = None, unit: str | None = None, says=None) -> Finding:
    """Judge whether ``value`` is one of ``req.allowed``; ``show`` formats values for the message,
    ``unit`` (e.g. "Hz") is recorded for renderers.

    ``says``: for a yes/no measurement, ``(sentence if true, sentence if false)`` in plain words
    ("Polarity: the channels are inverted", "Polarity: the channels are not inverted"); the
    message is that sentence, with "the spec does not allow this" when it misses.  The limit of
    a yes/no requirement reads "yes" or "no" (or "yes or no").
    """
    is_bool = all(isinstance(v, bool) for v in req.allowed)
    shown_allowed = [("yes" if v else "no") if is_bool else show(v) for v in req.allowed]
    limit = _allowed_words(shown_allowed)
    if value is None:
        return skipped(check, f"{what}: not judged; {missing_reason or 'the value is unknown for this file'}",
                       limit=limit, severity=req.severity, unit=unit)
    shown = ("yes" if value else "no") if isinstance(value, bool) and is_bool else show(value)
    base = dict(check=check, measured=value, measured_raw=value, limit=limit, severity=req.severity,
                measured_text=shown, unit=unit)
    ok = req.accepts(value)
    status = "pass" if ok else ("fail" if req.severity == "fail" else "warn")
    note = "" if req.severity == "fail" or ok else WARN_NOTE
    if isinstance(value, bool) and says is not None:
        text = says[0] if value else says[1]
        if not ok:
            text += "; the spec does not allow this"
        return Finding(status=status, message=sentence(text + note), **base)
    if ok:
        return Finding(status="pass", message=sentence(f"{what} is {shown} (allowed: {limit})"), **base)
    return Finding(status=status, message=sentence(f"{what} is {shown}, which the spec does not allow "
                                                   f"(allowed: {limit}){note}"), **base)


# ---------------------------------------------------------------- declared checks

_NO_GATED_LOUDNESS = "the programme has no gated loudness (digital silence or below the -70 LUFS gate)"


#: result parts a declared field may name as ``<part>.<key>``; a bare key is in ``measurements``
FIELD_PARTS = ("format", "metadata", "normalisation")


def measured_field(result: dict, field: str) -> tuple[bool, object]:
    """``(present, value)`` of a declared measurement field (``integrated_lufs``, ``format.duration_s``,
    ``metadata.bext``, ``normalisation.limiting_needed_db``)."""
    part, dot, key = field.partition(".")
    if dot and part in FIELD_PARTS:
        src = result.get(part) or {}
    else:
        src, key = result.get("measurements") or {}, field
    return key in src, src.get(key)


def judge_checks(section, result: dict, checks) -> list[Finding]:
    """Judge every declared :class:`Check` whose requirement the section sets, in order.

    A field missing from the result is skipped naming it; a null value is skipped with the
    check's ``null_means`` (or judged below the measurable range, see ``below_gate_after_s``).
    """
    out = []
    duration = (result.get("format") or {}).get("duration_s")
    for c in checks:
        if c.kind == "section":  # judged by the section's own judge
            continue
        req = getattr(section, c.spec_key, None)
        if req is None:
            continue
        if c.kind == "allowed":
            out.append(_judge_allowed(c, req, result))
            continue
        if req.unit != c.unit:
            raise ValueError(f"check {c.check}: requirement unit {req.unit!r} is not the measurement's {c.unit!r}")
        present, value = measured_field(result, c.measurement)
        if not present:
            out.append(check_limits(c.check, c.what, None, req,
                                    missing_reason=f"the measurement {c.measurement} is missing from the result"))
            continue
        if value is None and c.below_gate_after_s is not None and duration is not None \
                and duration >= c.below_gate_after_s:
            out.append(check_below_measurable(c.check, c.what, req, _NO_GATED_LOUDNESS))
            continue
        where = measured_field(result, c.where)[1] if c.where else None
        out.append(check_limits(c.check, c.what, value, req, where_s=where or [], missing_reason=c.null_means))
    return out


def _judge_allowed(c: Check, req: Allowed, result: dict) -> Finding:
    """One declared allowed-values check (a list value is compared as a list)."""
    show = c.show or str
    unit = None if c.unit == NO_UNIT else unit_label(c.unit)
    value = measured_field(result, c.measurement)[1]  # a missing field is null
    if isinstance(value, tuple):
        value = list(value)
    if c.null_when is not None and value is not None and measured_field(result, c.null_when[0])[1] == c.null_when[1]:
        value = None
    return check_allowed(c.check, c.what, value, req, show=show, unit=unit, missing_reason=c.null_means)
