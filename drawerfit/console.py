"""Where the application writes: one Rich console for results, one for problems."""

from __future__ import annotations

import json
import math
import os
import sys

from rich.console import Console

__all__ = ["out", "err", "emit_json", "jsonable"]

#: Width when the output is not a terminal (a file or a pipe), so that tables of
#: ranked designs are not cut to 80 columns; COLUMNS still wins when set.
PIPE_WIDTH = 132

out = Console(highlight=False)
if not out.is_terminal and "COLUMNS" not in os.environ:
    out = Console(highlight=False, width=PIPE_WIDTH)
err = Console(stderr=True, highlight=False, soft_wrap=True)


def jsonable(obj):
    """Turn numpy scalars/arrays, tuples and non-finite floats into plain JSON values."""
    try:
        import numpy as np
    except ImportError:  # pragma: no cover
        np = None
    if isinstance(obj, dict):
        return {str(k): jsonable(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [jsonable(v) for v in obj]
    if np is not None and isinstance(obj, np.ndarray):
        return [jsonable(v) for v in obj.tolist()]
    if np is not None and isinstance(obj, np.generic):
        obj = obj.item()
    if isinstance(obj, float) and not math.isfinite(obj):
        return None
    if hasattr(obj, "to_json"):
        return jsonable(obj.to_json())
    return obj


def emit_json(obj) -> None:
    """Print ``obj`` as JSON on stdout (plain, no Rich markup)."""
    sys.stdout.write(json.dumps(jsonable(obj), indent=2) + "\n")
    sys.stdout.flush()
