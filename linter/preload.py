"""Import the heavy statistics libraries on a background thread while the design and the fit are built.

``scipy.stats`` and statsmodels take most of a second to import on a small
machine: longer than reading a million-row Parquet file. Modules of prefit
import them inside the functions that use them, so that importing prefit
stays light; :func:`warm_imports` starts the same imports early, on their own
thread, and :func:`imports_ready` waits for them before the rules start.
Building the design and the QR factor runs mostly in numpy and BLAS, outside
the interpreter lock, so the imports overlap it on a second core.

The rule threads never import a heavy module concurrently: they start only
after :func:`imports_ready` has imported every module of
:data:`HEAVY_MODULES` on one thread.
"""

from __future__ import annotations

import importlib
import threading

HEAVY_MODULES = ("scipy.stats", "statsmodels.robust.covariance")

_warming: threading.Thread | None = None
_warming_lock = threading.Lock()


def _import_heavy_modules() -> None:
    for name in HEAVY_MODULES:
        try:
            importlib.import_module(name)
        except Exception:  # noqa: BLE001  (the rule that needs the module imports it again and reports the failure)
            continue


def warm_imports() -> None:
    """Start importing :data:`HEAVY_MODULES` on a daemon thread (once per process)."""
    global _warming
    with _warming_lock:
        if _warming is None:
            _warming = threading.Thread(target=_import_heavy_modules, name="prefit-imports", daemon=True)
            _warming.start()


def imports_ready() -> None:
    """Return once every module of :data:`HEAVY_MODULES` is imported (or has failed to import)."""
    with _warming_lock:
        warming = _warming
    if warming is not None:
        warming.join()
    _import_heavy_modules()
