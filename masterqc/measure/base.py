"""The streaming analyzer shape every measurement follows.

An analyzer is built from the stream's facts (:class:`masterqc.audio.StreamInfo`)
and the measurement options (:class:`masterqc.measure.options.MeasureOptions`),
takes float64 blocks of shape (frames, channels) in file order through
:meth:`Analyzer.process`, and returns an :class:`AnalyzerResult` from
:meth:`Analyzer.finish`.  Filter state carries across blocks, so no result
depends on the block size.  Series kept for display have a fixed resolution, so
memory stays flat however long the file is.
"""

from __future__ import annotations

from dataclasses import dataclass, field

# JSON-schema fragments for declaring result keys.
NUMBER = {"type": "number"}
NUMBER_OR_NULL = {"type": ["number", "null"]}
INTEGER = {"type": "integer"}
INTEGER_OR_NULL = {"type": ["integer", "null"]}
BOOLEAN = {"type": "boolean"}
BOOLEAN_OR_NULL = {"type": ["boolean", "null"]}
STRING_OR_NULL = {"type": ["string", "null"]}
NUMBER_LIST = {"type": "array", "items": {"type": "number"}}
NUMBER_OR_NULL_LIST = {"type": "array", "items": {"type": ["number", "null"]}}
INTEGER_LIST = {"type": "array", "items": {"type": "integer"}}
TIME_RANGES = {"type": "array", "items": {"type": "array", "items": {"type": "number"}, "minItems": 2, "maxItems": 2}}


def array_of(item_schema: dict) -> dict:
    return {"type": "array", "items": item_schema}


@dataclass
class AnalyzerResult:
    """What an analyzer returns at the end.

    ``measurements``: flat keys named with their unit (``integrated_lufs``), merged
    into ``result["measurements"]``.
    ``series``: display series (short lists at fixed resolution), merged into
    ``result["series"]`` for the report.
    ``settings``: the choices the analyzer made where the standards leave room
    (hop, percentile method, filter, ...), merged into ``result["settings"]``.
    """

    measurements: dict = field(default_factory=dict)
    series: dict = field(default_factory=dict)
    settings: dict = field(default_factory=dict)


class Analyzer:
    """Base class.  Subclasses set ``name`` and ``measurement_schema`` and implement
    :meth:`process` and :meth:`finish`.

    ``measurement_schema`` maps every measurement key the analyzer produces to a
    JSON-schema fragment; the published result schema is generated from it.
    ``raw_input``: when False (default), the engine replaces non-finite samples by
    0.0 before the block reaches the analyzer, so one NaN cannot poison filter
    state; analyzers that count non-finite samples set it True.
    ``planar_input``: when True, the engine calls :meth:`process_planar` with the block as
    (channels, frames), C-contiguous (one row per channel), instead of :meth:`process`: it
    makes that copy once per block, on its reader thread, for every analyzer that asks, so
    none transposes the block itself.  Planar blocks are always the cleaned ones
    (``raw_input`` must then be False).  :meth:`process` keeps taking (frames, channels).

    Optional ``finish_parts()``: an analyzer whose :meth:`finish` has independent pieces of work
    (each writing only state no other piece reads) may return them as a list of callables; a
    threaded engine calls it once after the analyzer's last block, when it is finished early
    (it keeps :meth:`bind` as it is), runs the parts on any of its threads, several at once, and
    calls :meth:`finish` after the last of them.  :meth:`finish` must also work when nobody
    called ``finish_parts()`` (a sequential run), and give the same results either way.
    """

    name: str = "analyzer"
    measurement_schema: dict = {}
    series_schema: dict = {}
    raw_input: bool = False
    planar_input: bool = False

    def __init__(self, info, options):
        self.info = info
        self.options = options

    def process(self, block) -> None:  # pragma: no cover - interface
        raise NotImplementedError

    def process_planar(self, rows) -> None:
        """The block as (channels, frames); by default :meth:`process` of its transpose.
        An analyzer that sets ``planar_input`` overrides it with the same arithmetic."""
        self.process(rows.T)

    def finish(self) -> AnalyzerResult:  # pragma: no cover - interface
        raise NotImplementedError

    def bind(self, peers) -> None:
        """Called by the engine once before the first block with every analyzer of the
        run (this one included).  An analyzer may arrange here to take, at
        :meth:`finish`, a figure a peer computes anyway instead of computing it
        again (each one documents what it takes).  Peers must not be fed or
        changed.  Default: nothing.
        """

    @classmethod
    def applies_to(cls, info, options) -> bool:
        """Whether this analyzer runs for the stream at all (default: always)."""
        return True
