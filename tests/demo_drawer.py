"""The demo drawer as shipped (drawerfit/data/demo_stock.csv), for tests that search it."""

from __future__ import annotations

import tempfile
from importlib import resources
from pathlib import Path

from inventory.store import open_store


def demo_snapshot():
    """The demo drawer's snapshot, imported into a throwaway store."""
    store = open_store(str(Path(tempfile.mkdtemp()) / "demo.sqlite"))
    with resources.as_file(resources.files("drawerfit") / "data" / "demo_stock.csv") as p:
        store.import_csv(p)
    snap = store.snapshot()
    store.close()
    return snap
