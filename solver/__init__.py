"""shockslate solver: a 2D planar / axisymmetric finite-volume Euler solver.

Knows nothing of the web. Data flows one way: sketch -> shapes -> mask -> kernel -> fields.

Compiled kernels are cached in one per-user folder shared by the command line, the server and the tests
(``$SHOCKSLATE_CACHE_DIR``, else ``$XDG_CACHE_HOME/shockslate``, else ``~/.cache/shockslate``), so that a kernel
compiled once is not compiled again by another entry point. numba reads ``NUMBA_CACHE_DIR`` when it is first
imported, so it is set here, before any module of the solver imports numba; a value set by the caller wins.
"""
import os
from pathlib import Path


def cache_dir() -> Path:
    """The per-user folder for shockslate's compiled-kernel cache."""
    explicit = os.environ.get("SHOCKSLATE_CACHE_DIR")
    if explicit:
        return Path(explicit)
    base = os.environ.get("XDG_CACHE_HOME") or str(Path.home() / ".cache")
    return Path(base) / "shockslate"


os.environ.setdefault("NUMBA_CACHE_DIR", str(cache_dir() / "numba"))
