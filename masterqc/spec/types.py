"""Reusable requirement types of the delivery spec.

Every requirement in a spec is one of a few shapes, built here once and reused
by every section:

=====================  =====================================================
``ceiling(unit)``      ``{max_<unit>, warn_margin_<d>, severity}``
``floor(unit)``        ``{min_<unit>, warn_margin_<d>, severity}``
``bounds(unit)``       ``{min_<unit>?, max_<unit>?, warn_margin_<d>, severity}``
``target(unit)``       ``{target_<unit>, tolerance_<d>}`` *or* ``{min_<unit>?, max_<unit>?}``,
                       plus ``warn_margin_<d>`` and ``severity``
``allowed(item_type)`` ``[v1, v2, ...]`` or ``{allowed: [...], severity}``
=====================  =====================================================

``<unit>`` is the unit of the measured quantity (``lufs``, ``dbtp``, ``s``,
...), ``<d>`` the unit of a *difference* of that quantity (``lu`` for LUFS,
``db`` for dBTP and dBFS; see :data:`UNITS`), so every key a person writes
names its unit: ``true_peak: {max_dbtp: -1.0, warn_margin_db: 0.3}``.

``severity`` is ``fail`` (default) or ``warn``: a missed ``warn`` requirement
gives a warning, never a failure.  ``warn_margin_<d>`` (>= 0) turns a pass that
lies within that distance of a limit into a warning (e.g. warn within 0.3 dB
of the true-peak ceiling).

The factories are cached: ``ceiling("dbtp") is ceiling("dbtp")``.  Every
requirement instance answers :meth:`Requirement.limits` ``-> (low, high)``
(``None`` for an open side), :attr:`Requirement.warn_margin` and
:attr:`Requirement.unit`, which is all :mod:`masterqc.judge.core` needs.

A new unit is one line in :data:`UNITS`.  A new section builds its fields from
these factories, e.g.::

    class Section(SpecModel):
        ultrasonic_energy: ceiling("db") | None = None

All models forbid unknown keys and are strict (a quoted ``"-23"`` or ``true``
is not a number), so the loader can name the key of every mistake.
"""

from __future__ import annotations

import functools
from decimal import Decimal
from typing import Any, ClassVar, Literal

from pydantic import BaseModel, ConfigDict, Field, create_model, model_validator

Severity = Literal["fail", "warn"]

# The one unit table (label, difference unit, decimals) lives in the neutral contract module;
# the judge, the terminal table and the report read the same one.
from masterqc.contract import UNITS, difference_unit, unit_decimals, unit_label  # noqa: E402,F401


#: units of quantities that cannot be negative -> what they measure (for the message)
NON_NEGATIVE_UNITS = {"s": "a duration", "ms": "a duration", "hz": "a frequency", "count": "a count",
                      "bits": "a bit depth", "percent": "a share of time"}




class SpecModel(BaseModel):
    """Base of every spec model: unknown keys refused, no silent type coercion, no NaN or infinity."""

    model_config = ConfigDict(extra="forbid", strict=True, frozen=True, allow_inf_nan=False)


class Requirement(SpecModel):
    """Base of the numeric requirement shapes.  ``unit`` is set by the factory."""

    unit: ClassVar[str] = ""
    severity: Severity = Field("fail", description="'fail' (default) or 'warn': what missing this requirement gives")

    def limits(self) -> tuple[float | None, float | None]:
        """``(low, high)`` in :attr:`unit`; ``None`` for an open side."""
        raise NotImplementedError

    @property
    def warn_margin(self) -> float | None:
        """Warning margin in the difference unit, or None."""
        return getattr(self, f"warn_margin_{difference_unit(self.unit)}", None)

    def _get(self, stem: str):
        return getattr(self, f"{stem}_{self.unit}", None)

    @model_validator(mode="after")
    def _check_possible(self):
        """A duration, count, rate, bit depth or share below zero is a value no delivery can mean."""
        if self.unit in NON_NEGATIVE_UNITS:
            for stem in ("min", "max", "target"):
                v = self._get(stem)
                if v is not None and v < 0:
                    what = NON_NEGATIVE_UNITS[self.unit]
                    raise ValueError(f"{stem}_{self.unit} is {v:g}: {what} cannot be negative")
        return self


class Ceiling(Requirement):
    def limits(self):
        return (None, self._get("max"))


class Floor(Requirement):
    def limits(self):
        return (self._get("min"), None)


class Bounds(Requirement):
    def limits(self):
        return (self._get("min"), self._get("max"))

    @model_validator(mode="after")
    def _check_order(self):
        lo, hi = self._get("min"), self._get("max")
        u = self.unit
        if lo is None and hi is None:
            raise ValueError(f"give min_{u}, max_{u} or both")
        if lo is not None and hi is not None and lo > hi:
            raise ValueError(f"contradictory limits: min_{u} ({lo:g}) is above max_{u} ({hi:g})")
        return self


class Target(Requirement):
    """A target with a tolerance (``target_<u>`` +- ``tolerance_<d>``), or min/max."""

    def limits(self):
        t = self._get("target")
        if t is not None:
            tol = getattr(self, f"tolerance_{difference_unit(self.unit)}")
            # in decimal, so -23.0 +- 0.7 gives -23.7 and -22.3, not binary neighbours of them
            dt, dtol = Decimal(repr(float(t))), Decimal(repr(float(tol)))
            return (float(dt - dtol), float(dt + dtol))
        return (self._get("min"), self._get("max"))

    @property
    def target_value(self) -> float | None:
        """The target itself; with only min/max given, the middle of the two (or None)."""
        t = self._get("target")
        if t is not None:
            return t
        lo, hi = self._get("min"), self._get("max")
        if lo is not None and hi is not None:
            return (lo + hi) / 2.0
        return None

    @model_validator(mode="after")
    def _check_shape(self):
        u, d = self.unit, difference_unit(self.unit)
        t, tol = self._get("target"), getattr(self, f"tolerance_{d}")
        lo, hi = self._get("min"), self._get("max")
        if t is not None:
            if tol is None:
                raise ValueError(f"target_{u} needs tolerance_{d} (e.g. tolerance_{d}: 1.0)")
            if lo is not None or hi is not None:
                raise ValueError(f"give either target_{u} with tolerance_{d}, or min_{u}/max_{u}, not both")
        else:
            if tol is not None:
                raise ValueError(f"tolerance_{d} needs target_{u}")
            if lo is None and hi is None:
                raise ValueError(f"give target_{u} with tolerance_{d}, or min_{u}/max_{u}")
            if lo is not None and hi is not None and lo > hi:
                raise ValueError(f"contradictory limits: min_{u} ({lo:g}) is above max_{u} ({hi:g})")
        return self


def _margin_field(d: str):
    return (float | None, Field(None, ge=0.0, description=f"warn when a pass lies within this many {unit_label(d)} of a limit"))


def _class_name(kind: str, unit: str) -> str:
    return f"{kind}{unit.capitalize()}"


@functools.cache
def ceiling(unit: str) -> type[Ceiling]:
    """Requirement ``{max_<unit>, warn_margin_<d>, severity}``."""
    d = difference_unit(unit)
    return create_model(
        _class_name("Ceiling", unit), __base__=Ceiling,
        **{f"max_{unit}": (float, Field(..., description=f"highest allowed value, {unit_label(unit)}")),
           f"warn_margin_{d}": _margin_field(d)},
        unit=(ClassVar[str], unit))


@functools.cache
def floor(unit: str) -> type[Floor]:
    """Requirement ``{min_<unit>, warn_margin_<d>, severity}``."""
    d = difference_unit(unit)
    return create_model(
        _class_name("Floor", unit), __base__=Floor,
        **{f"min_{unit}": (float, Field(..., description=f"lowest allowed value, {unit_label(unit)}")),
           f"warn_margin_{d}": _margin_field(d)},
        unit=(ClassVar[str], unit))


@functools.cache
def bounds(unit: str) -> type[Bounds]:
    """Requirement ``{min_<unit>?, max_<unit>?, warn_margin_<d>, severity}`` (at least one limit)."""
    d = difference_unit(unit)
    return create_model(
        _class_name("Bounds", unit), __base__=Bounds,
        **{f"min_{unit}": (float | None, Field(None, description=f"lowest allowed value, {unit_label(unit)}")),
           f"max_{unit}": (float | None, Field(None, description=f"highest allowed value, {unit_label(unit)}")),
           f"warn_margin_{d}": _margin_field(d)},
        unit=(ClassVar[str], unit))


@functools.cache
def target(unit: str) -> type[Target]:
    """Requirement ``{target_<unit>, tolerance_<d>}`` or ``{min_<unit>?, max_<unit>?}``."""
    d = difference_unit(unit)
    return create_model(
        _class_name("Target", unit), __base__=Target,
        **{f"target_{unit}": (float | None, Field(None, description=f"target value, {unit_label(unit)}")),
           f"tolerance_{d}": (float | None, Field(None, ge=0.0, description=f"allowed distance from the target, {unit_label(d)}")),
           f"min_{unit}": (float | None, Field(None, description=f"lowest allowed value, {unit_label(unit)} (instead of a target)")),
           f"max_{unit}": (float | None, Field(None, description=f"highest allowed value, {unit_label(unit)} (instead of a target)")),
           f"warn_margin_{d}": _margin_field(d)},
        unit=(ClassVar[str], unit))


class Allowed(SpecModel):
    """Base of allowed-values lists; ``allowed`` holds the accepted values."""

    severity: Severity = Field("fail", description="'fail' (default) or 'warn'")
    example: ClassVar[str] = "..."

    @model_validator(mode="before")
    @classmethod
    def _from_list(cls, data: Any):
        if isinstance(data, list):
            return {"allowed": data}
        if isinstance(data, dict):
            return data
        from masterqc.spec.loader import excerpt
        raise ValueError(f"expected a list of allowed values (e.g. [{_example(cls)}]) "
                         f"or {{allowed: [...], severity: warn}}, got {type(data).__name__} {excerpt(data)}")

    @classmethod
    def __get_pydantic_json_schema__(cls, core_schema, handler):
        """Published as: a plain list of values, or the ``{allowed, severity}`` mapping."""
        ref = handler(core_schema)
        obj = handler.resolve_ref_schema(ref)
        items = obj["properties"]["allowed"]["items"]  # list[...] always has an items schema
        obj.setdefault("description", "a list of allowed values, or {allowed: [...], severity: warn}")
        return {"anyOf": [{"type": "array", "items": items, "minItems": 1}, dict(obj)],
                "description": obj["description"]}

    def accepts(self, value) -> bool:
        return value in self.allowed  # type: ignore[attr-defined]


def _example(cls) -> str:
    return cls.example


@functools.cache
def allowed(item_type, example: str = "...", name: str | None = None) -> type[Allowed]:
    """Requirement: the measured value must be one of a list.

    In YAML either a plain list (severity ``fail``) or ``{allowed: [...], severity: warn}``.
    ``item_type`` is a type such as ``int``, ``str`` or ``list[str]``; ``example``
    appears in the error message when a single value is given where a list is needed;
    ``name`` names the model in the published schema.
    """
    name = name or "Allowed" + "".join(c for c in str(getattr(item_type, "__name__", item_type) if isinstance(item_type, type) else item_type).title() if c.isalnum())
    return create_model(
        name, __base__=Allowed,
        allowed=(list[item_type], Field(..., min_length=1, description="accepted values")),
        example=(ClassVar[str], example))
