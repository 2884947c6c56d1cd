"""The build sheet: files to print and build from (``--sheet DIR``).

The writer lives in :mod:`drawerfit.sheet.writer` (:func:`write_sheet`, the single
entry point); its names are re-exported here but loaded on first use, so that the
command line, which names the sheet options, starts without the plotting and
engine modules.
"""

from __future__ import annotations

from importlib import import_module

__all__ = ["write_sheet", "WrittenSheet", "ratings_of", "echo_sheet", "SHEET_FILES"]


def __getattr__(name: str):
    if name in __all__:
        return getattr(import_module("drawerfit.sheet.writer"), name)
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
