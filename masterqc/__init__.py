"""masterqc: prove that an audio master meets its delivery spec.

Data flows one way: read (:mod:`masterqc.audio`) -> measure (:mod:`masterqc.measure`)
-> judge (:mod:`masterqc.judge`) -> render (:mod:`masterqc.report`), with
:mod:`masterqc.batch` around it for folders.
"""

__version__ = "0.1.0"
