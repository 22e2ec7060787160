"""Cascaded second-order sections (transposed direct form II), without importing scipy.signal.

:func:`sosfilt` takes and returns what ``scipy.signal.sosfilt(sos, x, axis=-1, zi=zi)``
does, and its output is bit-for-bit the same: the recursion per section is

    y[n]  = b0 x[n] + z0
    z0    = b1 x[n] - a1 y[n] + z1
    z1    = b2 x[n] - a2 y[n]

evaluated in that order in IEEE double precision, as the compiled scipy kernel does
(sections run one after the other over the whole block, which changes no operation).

Importing ``scipy.signal`` costs about half a second of CPU (it imports most of SciPy,
scipy.stats included), more than the K-weighting of a 10-minute stereo file takes.  The
compiled kernel itself lives in a small extension module of its own
(``scipy/signal/_sosfilt``) that needs only numpy: :func:`compiled_kernel` loads that file
directly (about 0.3 ms), checks it against the plain-Python recursion on a small input
(bit for bit), and :func:`sosfilt` then calls it with the copies and layout
``scipy.signal.sosfilt`` makes, so the arrays handed back are the same bits in the same
memory order.  Preferred to it, when it was built at install time (optional, see
setup.py) and passes the same check, is masterqc's own kernel
(``masterqc/measure/_cascade.c``): the same recursion, in the same order per channel,
with every channel advancing sample by sample together (their independent recursions
overlap in the processor: about 40 % less CPU than scipy's kernel on a stereo block,
measured).  Setting the environment variable ``MASTERQC_OWN_KERNEL=0`` leaves it unused.
Where neither can be loaded or passes the check (another SciPy layout), the first ``PYTHON_BUDGET`` section-samples of a process run in plain Python and
longer work imports ``scipy.signal``; all three give the same bits, so which one runs
changes no result.  The budget is a house choice: about a third of the import's cost, so
a long file pays at most that on top of the import.  Thread-safe: the budget is taken
under a lock, the kernel is loaded once under it.
"""

from __future__ import annotations

import importlib
import importlib.machinery
import importlib.util
import os
import sys
import threading

import numpy as np

#: section-samples (samples x channels x sections) run in Python per process before the
#: compiled kernel is imported (house choice, about 0.15 s of CPU)
PYTHON_BUDGET = 1_500_000

_lock = threading.Lock()
_python_left = PYTHON_BUDGET

#: name of scipy's compiled cascade kernel module (the function ``_sosfilt(sos, x, zi)`` in it
#: filters ``x`` (signals, n) in place, C order, with ``zi`` (signals, sections, 2) in place)
KERNEL_MODULE = "scipy.signal._sosfilt"
#: masterqc's own optional kernel (``cascade(sos, y, z, channels, frames, sections)``)
OWN_KERNEL_MODULE = "masterqc.measure._cascade"
#: environment variable: ``0`` leaves masterqc's own kernel unused (scipy's then runs)
OWN_KERNEL_ENV = "MASTERQC_OWN_KERNEL"
#: the loaded kernel function; None before the first attempt, False when it is not usable
_kernel = None
#: which kernel :func:`compiled_kernel` took: "own", "scipy" or None (not loaded or none usable)
kernel_source = None


def own_module():
    """masterqc's optional compiled module (:data:`OWN_KERNEL_MODULE`), or None when it was not
    built or is switched off by :data:`OWN_KERNEL_ENV`."""
    if os.environ.get(OWN_KERNEL_ENV, "").strip() == "0":
        return None
    try:
        return importlib.import_module(OWN_KERNEL_MODULE)
    except ImportError:
        return None


#: checked_kernel's decisions: name -> the function, or False when it is not usable
_CHECKED: dict = {}
_CHECKED_LOCK = threading.Lock()


def checked_kernel(name: str, check):
    """The function ``name`` of masterqc's optional compiled module when the module is built and
    switched on (:func:`own_module`) and ``check(fn)`` returns True (it compares the kernel with
    numpy's path on a small input); else None, and numpy's path runs.  Decided once per name and
    process; a check that raises counts as failed."""
    fn = _CHECKED.get(name)
    if fn is None:
        with _CHECKED_LOCK:
            if name not in _CHECKED:
                found = False
                module = own_module()
                candidate = getattr(module, name, None) if module is not None else None
                if candidate is not None:
                    try:
                        if check(candidate):
                            found = candidate
                    except Exception:          # noqa: BLE001 - not usable: numpy's path
                        found = False
                _CHECKED[name] = found
            fn = _CHECKED[name]
    return fn or None


def _own_kernel():
    """masterqc's compiled cascade with the calling convention of scipy's kernel, or None
    when it was not built (or is switched off by :data:`OWN_KERNEL_ENV`)."""
    module = own_module()
    if module is None:
        return None
    cascade = module.cascade
    cascade_into = getattr(module, "cascade_into", None)

    def kernel(sos, y, z):
        cascade(sos, y, z, y.shape[0], y.shape[1], sos.shape[0])

    if cascade_into is not None:
        def into(sos, x, y, z):
            cascade_into(sos, x, y, z, x.shape[0], x.shape[1], sos.shape[0])
        kernel.into = into        # filters a C-ordered x into a fresh y: no copy of x first
    return kernel


def _take_budget(work: int) -> bool:
    """True when ``work`` section-samples may run in Python (and books them)."""
    global _python_left
    with _lock:
        if work <= _python_left:
            _python_left -= work
            return True
        _python_left = 0       # from now on the compiled kernel: it is imported anyway
        return False


def _load_kernel_module():
    """scipy's ``signal/_sosfilt`` extension module, loaded from its file without running
    ``scipy/signal/__init__`` (which imports most of SciPy); None when there is no such file."""
    loaded = sys.modules.get(KERNEL_MODULE)
    if loaded is not None:
        return loaded
    spec = importlib.util.find_spec("scipy")
    if spec is None or not spec.submodule_search_locations:
        return None
    for base in spec.submodule_search_locations:
        for suffix in importlib.machinery.EXTENSION_SUFFIXES:
            path = os.path.join(base, "signal", "_sosfilt" + suffix)
            if os.path.isfile(path):
                kspec = importlib.util.spec_from_file_location(KERNEL_MODULE, path)
                module = importlib.util.module_from_spec(kspec)
                kspec.loader.exec_module(module)
                # registered under its own name: a later ``import scipy.signal`` takes this
                # module object instead of loading the extension a second time
                sys.modules.setdefault(KERNEL_MODULE, module)
                return sys.modules[KERNEL_MODULE]
    return None


def _kernel_self_check(kernel) -> bool:
    """True when ``kernel`` gives the plain-Python recursion's bits (and updates zi) on small
    inputs with a non-zero initial state: stereo with two sections, and three channels with
    three sections (the general loop of masterqc's own kernel)."""
    sos = np.array([[1.53, -2.69, 1.19, 1.0, -1.69, 0.73],
                    [1.0, -2.0, 1.0, 1.0, -1.99, 0.99],
                    [0.2, 0.4, 0.2, 1.0, -0.37, 0.19]])
    for channels, sections in ((2, 2), (3, 3)):
        s = sos[:sections]
        x = np.sin(np.arange(channels * 97, dtype=np.float64) * 0.37).reshape(channels, 97)
        zi = np.arange(sections * channels * 2, dtype=np.float64).reshape(sections, channels, 2) * 1e-3
        ref, ref_z = sosfilt_python(s, x, zi)
        y = np.array(x, order="C")
        z = np.array(np.moveaxis(zi, 0, 1), order="C")
        kernel(np.ascontiguousarray(s), y, z)
        if not (np.array_equal(y, ref) and np.array_equal(np.moveaxis(z, 0, 1), ref_z)):
            return False
        into = getattr(kernel, "into", None)
        if into is not None:            # out of place: the same bits, the input untouched
            xc = np.array(x, order="C")
            y2 = np.empty_like(xc)
            z2 = np.array(np.moveaxis(zi, 0, 1), order="C")
            into(np.ascontiguousarray(s), xc, y2, z2)
            if not (np.array_equal(y2, ref) and np.array_equal(np.moveaxis(z2, 0, 1), ref_z)
                    and np.array_equal(xc, x)):
                return False
    return True


def compiled_kernel():
    """masterqc's own compiled cascade kernel, else scipy's, or None when neither can be used
    here (loaded once; each must pass :func:`_kernel_self_check`)."""
    global _kernel, kernel_source
    k = _kernel
    if k is None:
        with _lock:
            if _kernel is None:
                _kernel, kernel_source = False, None
                try:
                    own = _own_kernel()
                    if own is not None and _kernel_self_check(own):
                        _kernel, kernel_source = own, "own"
                except Exception:               # noqa: BLE001 - any failure: scipy's kernel
                    pass
                if _kernel is False:
                    try:
                        module = _load_kernel_module()
                        fn = getattr(module, "_sosfilt", None) if module is not None else None
                        if fn is not None and _kernel_self_check(fn):
                            _kernel, kernel_source = fn, "scipy"
                    except Exception:           # noqa: BLE001 - any failure: the other two paths
                        pass
            k = _kernel
    return k or None


def _sosfilt_kernel(kernel, sos, x, axis, zi):
    """What ``scipy.signal.sosfilt`` does around its kernel for a 2-D float64 ``x``: fresh
    C-ordered (signals, n) copies of ``x`` and of ``zi``, filtered in place, handed back in
    the caller's axis order as views (so their memory order is sosfilt's too)."""
    n_sec = sos.shape[0]
    signals_first = axis in (1, -1)
    want = (n_sec, x.shape[0], 2) if signals_first else (n_sec, 2, x.shape[1])
    zi = np.asarray(zi, dtype=np.float64)
    if zi.shape != want:
        raise ValueError(f"Invalid zi shape: with axis={axis!r}, an input of shape {x.shape!r} and "
                         f"{n_sec} sections, zi must have shape {want!r}, got {zi.shape!r}")
    sos = np.ascontiguousarray(sos, dtype=np.float64)
    if signals_first:
        z = np.array(np.moveaxis(zi, 0, 1), order="C")           # (signals, sections, 2)
        into = getattr(kernel, "into", None)
        if into is not None and x.dtype == np.float64 and x.flags.c_contiguous:
            y = np.empty(x.shape)                                 # the same recursion, read from x
            into(sos, x, y, z)
        else:
            y = np.array(x, dtype=np.float64, order="C")
            kernel(sos, y, z)
        return y, np.moveaxis(z, 0, 1)
    y = np.array(x.T, dtype=np.float64, order="C")
    z = np.array(np.moveaxis(zi, (0, 1), (1, 2)), order="C")      # (signals, sections, 2)
    kernel(sos, y, z)
    return y.T, np.moveaxis(z, (1, 2), (0, 1))


def _section(b0: float, b1: float, b2: float, a1: float, a2: float, xs: list, z0: float, z1: float):
    out = [0.0] * len(xs)
    i = 0
    for x in xs:
        y = b0 * x + z0
        z0 = b1 * x - a1 * y + z1
        z1 = b2 * x - a2 * y
        out[i] = y
        i += 1
    return out, z0, z1


def sosfilt_python(sos: np.ndarray, x: np.ndarray, zi: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """The recursion of the module docstring in plain Python: ``x`` (channels, n) float64,
    ``zi`` (sections, channels, 2); returns fresh ``(y, zf)``."""
    y = np.empty(x.shape)
    zf = np.array(zi, dtype=np.float64)
    rows = sos.tolist()
    for c in range(x.shape[0]):
        xs = x[c].tolist()
        for s, (b0, b1, b2, _a0, a1, a2) in enumerate(rows):
            xs, zf[s, c, 0], zf[s, c, 1] = _section(b0, b1, b2, a1, a2, xs,
                                                    float(zf[s, c, 0]), float(zf[s, c, 1]))
        y[c] = xs
    return y, zf


def sosfilt(sos, x, axis: int = -1, zi=None):
    """``scipy.signal.sosfilt(sos, x, axis=axis, zi=zi)`` for float64 2-D ``x`` with
    ``axis`` -1 (channels, n; ``zi`` (sections, channels, 2)) or 0 (n, channels; ``zi``
    (sections, 2, channels), as scipy lays it out); ``zi`` is required.  Returns ``(y, zf)`` with ``y`` a fresh array shaped like ``x``."""
    sos = np.asarray(sos, dtype=np.float64)
    x = np.asarray(x)
    if zi is None or x.ndim != 2 or axis not in (0, 1, -1) or sos.ndim != 2 or sos.shape[1] != 6:
        raise ValueError("sosfilt here takes sos (sections, 6), a 2-D x, axis 0 or -1 and zi")
    if x.dtype != np.float64 or not np.all(sos[:, 3] == 1.0):
        from scipy.signal import sosfilt as compiled
        return compiled(sos, x, axis=axis, zi=zi)
    kernel = compiled_kernel()
    if kernel is not None:
        return _sosfilt_kernel(kernel, sos, x, axis, zi)
    if _take_budget(x.size * sos.shape[0]):
        if axis in (1, -1):
            return sosfilt_python(sos, x, zi)
        # axis 0: zi is (sections, 2, channels); the compiled kernel works on (channels, n) and
        # hands back the transposed views: so do we (a reduction over a C- or F-ordered array
        # may add in a different order)
        y, zf = sosfilt_python(sos, x.T, np.swapaxes(zi, 1, 2))
        return y.T, np.swapaxes(zf, 1, 2)
    from scipy.signal import sosfilt as compiled
    return compiled(sos, x, axis=axis, zi=zi)
