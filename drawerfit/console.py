"""Where the application writes: one Rich console for results, one for problems."""

from __future__ import annotations

import json
import math
import os
import sys

from rich.console import Console

__all__ = ["out", "err", "emit_json", "jsonable", "SEVERITY_STYLE", "SEVERITY_LABEL",
           "caution_line", "severity_css"]

#: Width when the output is not a terminal (a file or a pipe), so that tables of
#: ranked designs are not cut to 80 columns; COLUMNS still wins when set.
PIPE_WIDTH = 132

out = Console(highlight=False)
if not out.is_terminal and "COLUMNS" not in os.environ:
    out = Console(highlight=False, width=PIPE_WIDTH)
err = Console(stderr=True, highlight=False, soft_wrap=True)

#: How a caution of each severity (optimiser.cautions.SEVERITIES) looks, in every
#: view: a Rich style (colours as hex, so the build sheet's HTML can use the same).
SEVERITY_STYLE = {"danger": "bold #d0202e", "warning": "#c07000", "note": "#808080"}
#: The word that leads a caution line of each severity.
SEVERITY_LABEL = {"danger": "danger", "warning": "caution", "note": "note"}


def caution_line(c) -> str:
    """Rich markup for one :class:`~optimiser.cautions.Caution`: the styled word, the text."""
    from rich.markup import escape

    sev = getattr(c, "severity", "warning")
    return f"[{SEVERITY_STYLE[sev]}]{SEVERITY_LABEL[sev]}:[/] {escape(c.text)}"


def severity_css(selector: str = "li") -> str:
    """CSS rules ``<selector>.<severity>`` with the colours and weight of :data:`SEVERITY_STYLE`."""
    from rich.style import Style

    rules = []
    for sev, spec in SEVERITY_STYLE.items():
        st = Style.parse(spec)
        decl = f"color: {st.color.triplet.hex};" if st.color and st.color.triplet else ""
        if st.bold:
            decl += " font-weight: 700;"
        rules.append(f"{selector}.{sev} {{ {decl.strip()} }}")
    return "\n".join(rules)


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
