"""Import the heavy statistics libraries on a background thread while the design and the fit are built.

``scipy.stats`` and statsmodels take most of a second to import on a small
machine: longer than reading a million-row Parquet file. Modules of prefit
import them inside the functions that use them, so that importing prefit
stays light; :func:`warm_imports` starts the same imports early, on their own
thread, and :func:`imports_ready` waits for them before the rules start.
Building the design and the QR factor runs mostly in numpy and BLAS, outside
the interpreter lock, so the imports overlap it on a second core.

statsmodels serves only the robust estimates (MCD or OGK distances, the MM
fit), which stand aside on a wide table (``stats/robust.py``,
``stats/resistant.py``): a table with more columns than
:data:`ESTIMATES_WARMED_UP_TO` is not worth its 0.4 s of import. Should an
estimate run after all, it imports statsmodels through :func:`serial_import`,
which never lets two threads import side by side.

The rule threads never import a heavy module concurrently: they start only
after :func:`imports_ready` has imported every module warmed up on one thread.
"""

from __future__ import annotations

import importlib
import threading
from types import ModuleType

HEAVY_MODULES = ("scipy.stats",)
ESTIMATE_MODULES = ("statsmodels.robust.covariance",)
#: Tables of more columns do not warm up :data:`ESTIMATE_MODULES`: the robust distances stand aside above 200 numeric
#: predictors (MCD_SAMPLE_ROWS / ESTIMATE_ROWS_PER_COLUMN), the MM fit above 50 parameters.
ESTIMATES_WARMED_UP_TO = 201

_warming: threading.Thread | None = None
_warming_lock = threading.Lock()
_import_lock = threading.Lock()
_warmed: tuple[str, ...] = HEAVY_MODULES + ESTIMATE_MODULES


def _import_heavy_modules() -> None:
    for name in _warmed:
        try:
            serial_import(name)
        except Exception:  # noqa: BLE001  (the rule that needs the module imports it again and reports the failure)
            continue


def serial_import(name: str) -> ModuleType:
    """Import module ``name``, one thread at a time (two threads importing one package side by side can deadlock)."""
    with _import_lock:
        return importlib.import_module(name)


def warm_imports(table_columns: int | None = None) -> None:
    """Start importing the heavy modules on a daemon thread (once per process).

    ``table_columns``, when known, leaves statsmodels out for a table wider than :data:`ESTIMATES_WARMED_UP_TO`.
    """
    global _warming, _warmed
    with _warming_lock:
        if _warming is None:
            wide = table_columns is not None and table_columns > ESTIMATES_WARMED_UP_TO
            _warmed = HEAVY_MODULES if wide else HEAVY_MODULES + ESTIMATE_MODULES
            _warming = threading.Thread(target=_import_heavy_modules, name="prefit-imports", daemon=True)
            _warming.start()


def imports_ready() -> None:
    """Return once every module warmed up is imported (or has failed to import)."""
    with _warming_lock:
        warming = _warming
    if warming is not None:
        warming.join()
    _import_heavy_modules()
