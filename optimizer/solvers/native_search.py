"""The compiled parts of the exact solver (``solvers/native/*.c``): loading and calling them.

``levels.c`` is the twin of the pure-Python search in :mod:`optimizer.solvers.search` — the same
levels, bounds and visiting order — and runs the desk-scale searches some 50–100 times faster;
``active_set.c`` is the twin of the active-set loop of :func:`optimizer.solvers.bounds.polish`.
They are found, in order:

1. as the extension module ``optimizer.solvers.native._levels`` that ``pip install`` builds;
2. compiled on first use from the bundled C source with the machine's C compiler into a cache
   folder (``$BASISWISE_CACHE`` or ``~/.cache/basiswise``), for a source checkout;
3. otherwise not at all: the pure-Python search runs (same answers, slower).

``BASISWISE_SEARCH=python`` forces the pure-Python search (tests compare the two).
"""

from __future__ import annotations

import ctypes
import hashlib
import os
import shutil
import subprocess
import sys
import sysconfig
import tempfile
import threading
from pathlib import Path

import numpy as np

__all__ = ["native_search", "run_native", "run_active_set"]

_SOURCES = [Path(__file__).resolve().parent / "native" / name
            for name in ("levels.c", "active_set.c")]
_DIRECT_MAX_N = 12  # smaller searches mostly end within milliseconds: called directly
_DIRECT_SLICE = 0.25  # seconds a direct call from the main thread may run before it moves on
_lib: ctypes.CDLL | None = None
last_interrupt: tuple[bool, int] | None = None  # (stopped, nodes) of the last Ctrl-C'd search
_tried = False

_P = ctypes.c_void_p  # pointers are passed as addresses (faster than data_as for ~25 arrays)


class _Problem(ctypes.Structure):
    _fields_ = [
        ("n", ctypes.c_int), ("m", ctypes.c_int), ("g", ctypes.c_int),
        ("R", _P), ("z", _P), ("sl", _P), ("aw", _P), ("pm", _P),
        ("lo", _P), ("hi", _P),
        ("G", _P), ("h", _P), ("rest", _P),
        ("has_m", ctypes.c_int), ("mg", _P), ("mrest", _P),
        ("budget", ctypes.c_double), ("mtol", ctypes.c_double),
        ("Mp", _P), ("u", _P), ("off", ctypes.c_double), ("fz", ctypes.c_double), ("g2", _P),
        ("sep", ctypes.c_int), ("W", _P), ("D", _P), ("capsep", _P),
        ("K", ctypes.c_double), ("best_f", ctypes.c_double), ("best_y", _P),
        ("improved", ctypes.c_int), ("time_limit", ctypes.c_double),
        ("nodes", ctypes.c_longlong), ("stopped", ctypes.c_int),
        ("frontier", ctypes.c_double), ("cancel", ctypes.c_void_p),
        ("has_c", ctypes.c_int), ("has_cb", ctypes.c_int), ("ctab", _P), ("coff", _P),
        ("cw", ctypes.c_double), ("ow", ctypes.c_double), ("cbudget", ctypes.c_double),
        ("ctol", ctypes.c_double), ("crest", _P), ("c0", _P), ("mt", _P),
    ]


def _cache_dir() -> Path:
    base = os.environ.get("BASISWISE_CACHE")
    return Path(base) if base else Path.home() / ".cache" / "basiswise"


def _compile() -> Path | None:
    """Compile the bundled source into the cache folder (atomic rename); ``None`` on failure."""
    if not all(src.is_file() for src in _SOURCES):
        return None
    cc = os.environ.get("CC") or sysconfig.get_config_var("CC") or "cc"
    cc = cc.split()[0]
    if shutil.which(cc) is None:
        return None
    src = b"".join(path.read_bytes() for path in _SOURCES)
    tag = hashlib.sha256(src + sys.version.encode()).hexdigest()[:16]
    out = _cache_dir() / f"levels-{tag}{sysconfig.get_config_var('EXT_SUFFIX') or '.so'}"
    if out.is_file():
        return out
    try:
        out.parent.mkdir(parents=True, exist_ok=True)
        fd, tmp = tempfile.mkstemp(suffix=".so", dir=out.parent)
        os.close(fd)
        cmd = [cc, "-O2", "-fPIC", "-shared", f"-I{sysconfig.get_paths()['include']}",
               *map(str, _SOURCES), "-o", tmp, "-lm"]
        if sys.platform == "darwin":
            cmd[1:1] = ["-undefined", "dynamic_lookup"]
        done = subprocess.run(cmd, capture_output=True, timeout=120)
        if done.returncode != 0:
            os.unlink(tmp)
            return None
        os.replace(tmp, out)
        return out
    except (OSError, subprocess.SubprocessError):
        return None


def _load() -> ctypes.CDLL | None:
    global _lib, _tried
    if _tried:
        return _lib
    _tried = True
    path = None
    try:
        from .native import _levels  # built by pip install

        path = _levels.__file__
    except ImportError:
        built = _compile()
        path = str(built) if built is not None else None
    if path is None:
        return None
    try:
        lib = ctypes.CDLL(path)
        lib.bw_enumerate.argtypes = [ctypes.POINTER(_Problem)]
        lib.bw_enumerate.restype = ctypes.c_int
        vp, ci = ctypes.c_void_p, ctypes.c_int
        lib.bw_active_set.argtypes = [ci, ci, vp, vp, vp, vp, vp, vp, vp, ci, vp, vp]
        lib.bw_active_set.restype = ci
        lib.bw_problem_size.restype = ci
        if lib.bw_problem_size() != ctypes.sizeof(_Problem):  # the two layouts drifted apart
            return None
    except (OSError, AttributeError):
        return None
    _lib = lib
    return _lib


def native_search() -> bool:
    """Whether the compiled search is available (and not switched off)."""
    if os.environ.get("BASISWISE_SEARCH", "").lower() == "python":
        return False
    return _load() is not None


def _d(a) -> np.ndarray:
    return np.ascontiguousarray(a, dtype=np.float64)


def _interruptible(lib, p: _Problem, cancel: ctypes.c_int, keep: dict) -> int:
    """Run the search in a helper thread so that Ctrl-C in the main thread can stop it.

    ctypes releases the GIL during the call, so the main thread keeps waiting in short waits; on
    KeyboardInterrupt it sets ``cancel`` (the search stops within 1,024 nodes), waits for the
    search to end and re-raises. Further interrupts while it waits are swallowed: the C loop
    reads and writes the arrays in ``keep`` until it returns, so they must outlive it (the
    thread holds them too). The end is signalled by an Event set when the C call has returned,
    not by ``Thread.join``: on Python 3.11 a ``join`` cut short by KeyboardInterrupt marks a
    thread that still runs as stopped, and the arrays would be freed under the search.
    """
    global last_interrupt
    out: list[int] = []
    done = threading.Event()

    def search() -> None:
        try:
            out.append(lib.bw_enumerate(ctypes.byref(p)))
        finally:
            done.set()

    worker = threading.Thread(target=search, name="basiswise-search", daemon=True)
    worker.bw_arrays = (p, cancel, keep)  # alive as long as the thread object is
    worker.bw_done = done
    try:
        worker.start()  # inside: an interrupt while it starts must still stop and wait for it
        _wait(worker)
    except KeyboardInterrupt:
        cancel.value = 1
        _wait_through_interrupts(done)
        last_interrupt = (bool(p.stopped), int(p.nodes))
        raise
    return out[0] if out else 1


def _wait(worker: threading.Thread) -> None:
    """Wait for the search thread's C call to return, in short waits (KeyboardInterrupt seen)."""
    done = worker.bw_done
    while not done.is_set():
        done.wait(0.05)


def _wait_through_interrupts(done: threading.Event) -> None:
    """Wait for the search to end, ignoring any further KeyboardInterrupt meanwhile."""
    while not done.is_set():
        try:
            done.wait(0.05)
        except KeyboardInterrupt:
            continue


def run_native(prep: dict, best_f: float, time_limit: float):
    """Run the compiled search on prepared arrays (see :func:`integer_search.prepare_levels`).

    Returns ``(best_f, best_y or None, nodes, frontier or None)``, ``best_y`` on the levels.
    """
    lib = _load()
    if lib is None:
        raise RuntimeError("the compiled search is not available")
    n, g = prep["n"], prep["g"]
    keep = {}

    def ptr(name, a):
        arr = _d(a) if a is not None else np.zeros(1)
        if arr.size == 0:
            arr = np.zeros(1)
        keep[name] = arr
        return arr.ctypes.data

    def iptr(name, a):
        arr = np.ascontiguousarray(a, dtype=np.int64)
        keep[name] = arr
        return arr.ctypes.data

    best_y = np.zeros(n)
    p = _Problem()
    p.n, p.m, p.g = n, prep["Mp"].shape[0], g
    p.R, p.z, p.sl, p.aw, p.pm = (ptr("R", prep["R"]), ptr("z", prep["z"]),
                                  ptr("sl", prep["slope"]), ptr("aw", prep["absw"]),
                                  ptr("pm", prep["psimin"]))
    p.lo, p.hi = iptr("lo", prep["lo"]), iptr("hi", prep["hi"])
    p.G, p.h, p.rest = ptr("G", prep["G"]), ptr("h", prep["h"]), ptr("rest", prep["rest"])
    p.has_m = int(prep["has_m"])
    p.mg, p.mrest = ptr("mg", prep["mg"]), ptr("mrest", prep["mrest"])
    p.budget, p.mtol = float(prep["budget"]), float(prep["mtol"])
    p.Mp, p.u = ptr("Mp", prep["Mp"]), ptr("u", prep["u"])
    p.off, p.fz, p.g2 = float(prep["off"]), float(prep["fz"]), ptr("g2", prep["g2"])
    p.sep = int(prep["W"] is not None)
    p.W, p.D, p.capsep = ptr("W", prep["W"]), ptr("D", prep["D"]), ptr("capsep", prep["capsep"])
    p.K = float(prep["K"])
    p.best_f = float(best_f)
    p.best_y = best_y.ctypes.data
    p.time_limit = max(float(time_limit), 0.0)
    p.has_c, p.has_cb = int(prep["has_c"]), int(prep["has_cb"])
    p.ctab, p.coff = ptr("ctab", prep["ctab"]), iptr("coff", prep["coff"])
    p.cw, p.ow = float(prep["cw"]), float(prep["ow"])
    p.cbudget, p.ctol = float(prep["cbudget"]), float(prep["ctol"])
    p.crest = ptr("crest", prep["crest"])
    p.c0, p.mt = iptr("c0", prep["c0"]), iptr("mt", prep["mt"])
    cancel = ctypes.c_int(0)
    p.cancel = ctypes.addressof(cancel)
    keep["best_y"] = best_y
    main = threading.current_thread() is threading.main_thread()
    first_nodes, improved = 0, False
    if n <= _DIRECT_MAX_N or not main:
        # small books: called directly; from the main thread only for a first slice of time,
        # so that a rare long search on a small book still reaches a Ctrl-C promptly
        if main:
            p.time_limit = min(p.time_limit, _DIRECT_SLICE)
        rc = lib.bw_enumerate(ctypes.byref(p))
        rest = max(float(time_limit), 0.0) - _DIRECT_SLICE
        if main and rc == 0 and p.stopped and rest > 0:
            # search again in the helper thread with the incumbent found (best_f, best_y kept):
            # a fresh complete search, so its own frontier is the bound if it stops too
            first_nodes, improved = int(p.nodes), bool(p.improved)
            p.time_limit = rest
            rc = _interruptible(lib, p, cancel, keep)
    else:
        rc = _interruptible(lib, p, cancel, keep)
    if rc != 0:
        raise MemoryError("the compiled search could not allocate its work space")
    frontier = float(p.frontier) if p.stopped else None
    improved = improved or bool(p.improved)
    return float(p.best_f), (best_y if improved else None), first_nodes + int(p.nodes), frontier


def run_active_set(A2: np.ndarray, b2: np.ndarray, C: np.ndarray, d: np.ndarray,
                   scale: np.ndarray, active: list[int], max_iter: int):
    """The compiled active-set loop of :func:`optimizer.solvers.bounds.polish`.

    Returns ``(x, mult)`` (multipliers per row of ``C``, negative ones set to 0), or ``None``
    when a working set's system is singular (the caller then runs the numpy loop).
    """
    lib = _load()
    if lib is None:
        raise RuntimeError("the compiled active-set solve is not available")
    n, m = A2.shape[0], C.shape[0]
    arrs = [_d(A2), _d(b2), _d(C.reshape(m, n)) if m else np.zeros(1), _d(d) if m else np.zeros(1),
            _d(scale) if m else np.zeros(1)]
    act = np.zeros(max(m, 1), dtype=np.intc)
    act[: len(active)] = active
    nact = ctypes.c_int(len(active))
    x, mult = np.zeros(n), np.zeros(max(m, 1))
    rc = lib.bw_active_set(n, m, *(a.ctypes.data for a in arrs), act.ctypes.data,
                           ctypes.addressof(nact), int(max_iter), x.ctypes.data, mult.ctypes.data)
    if rc == 1:
        raise MemoryError("the compiled active-set solve could not allocate its work space")
    if rc != 0:
        return None
    return x, mult[:m]
