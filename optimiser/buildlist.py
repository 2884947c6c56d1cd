"""The build list (docs/requests.md): several requests, their counts, what may be bought.

    [[build]]
    request = "preamp.toml"   # a request file relative to the list, or a [build.request] table
                              # (a single stage, or a chain the chain search designs)
    count = 4                 # copies wanted (default: the request's `builds`)
    identical = true          # all copies on the same values (default)
    name = "preamp"           # optional: how the plan names this build

    [purchase]                # optional: leave out to plan from stock alone
    series = "E24"
    cap_series = "E6"
    resistor_price = 0.02
    capacitor_price = 0.10
    line_cost = 0.50
    pack = 10
    resistor_tolerance = "1%"
    resistor_power = "0.25W"
    capacitor_tolerance = "10%"
    capacitor_voltage = "50V"

Every unknown key and every bad value is an :class:`~inventory.errors.InputError`
naming the file, the line (when it can be found) and the key.
"""

from __future__ import annotations

import re
import tomllib
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Any

from inventory.errors import InputError, InputErrors
from optimiser.purchase import PurchaseOptions
from optimiser.request import PAIR_TOPOLOGY, Request
from optimiser.search.chains import check_chain_request

__all__ = ["BuildSpec", "BuildList", "load_buildlist", "parse_buildlist",
           "BUILD_KEYS", "PURCHASE_KEYS"]

BUILD_KEYS = ("request", "count", "identical", "name")
PURCHASE_KEYS = ("series", "cap_series", "resistor_price", "capacitor_price", "line_cost",
                 "pack", "resistor_tolerance", "resistor_power", "capacitor_tolerance",
                 "capacitor_voltage")
TOP_KEYS = ("build", "purchase")


@dataclass(frozen=True)
class BuildSpec:
    """One ``[[build]]``: ``count`` copies of ``request``."""

    name: str
    request: Request
    count: int
    identical: bool = True
    source: str | None = None      # the request file as written in the list, if any


@dataclass(frozen=True)
class BuildList:
    """A parsed build list."""

    builds: tuple[BuildSpec, ...]
    purchase: PurchaseOptions | None = None
    path: Path | None = None

    @property
    def total_copies(self) -> int:
        return sum(b.count for b in self.builds)


class _Locator:
    """Finds the line of a key in the TOML text (best effort: tomllib keeps no positions)."""

    _header = re.compile(r"^\s*\[\[?\s*([A-Za-z0-9_.\-\" ]+?)\s*\]\]?\s*(#.*)?$")

    def __init__(self, text: str | None) -> None:
        self.lines = (text or "").splitlines()

    def find(self, section: str | None, index: int | None, key: str | None) -> int | None:
        """Line (from 1) of ``key`` in ``[section]`` (the ``index``-th ``[[section]]``);
        the section's header line when the key is not there; None when neither is."""
        cur: str | None = None
        cur_idx: int | None = None
        counts: dict[str, int] = {}
        header = None
        for n, raw in enumerate(self.lines, start=1):
            m = self._header.match(raw)
            if m:
                name = m.group(1).replace('"', "").replace(" ", "")
                if raw.strip().startswith("[["):
                    counts[name] = counts.get(name, -1) + 1
                    cur, cur_idx = name, counts[name]
                elif "." in name and cur is not None and name.split(".")[0] == cur:
                    pass                     # a sub-table of the current entry
                else:
                    cur, cur_idx = name, None
                if (cur == section and (index is None or cur_idx == index)
                        and header is None and section is not None):
                    header = n
                continue
            here = cur == section and (index is None or cur_idx == index)
            if here and key is not None and re.match(rf'^\s*"?{re.escape(key)}"?\s*=', raw):
                return n
        return header


def _err(message: str, file: str | None, loc: _Locator, section: str | None,
         index: int | None, key: str | None, field: str) -> InputError:
    return InputError(message, file=file, line=loc.find(section, index, key), field=field)


def _number(v: Any, *, what: str) -> float:
    if isinstance(v, bool) or not isinstance(v, (int, float)):
        raise ValueError(f"{what} must be a number, not {v!r}")
    if v != v or v in (float("inf"), float("-inf")):
        raise ValueError(f"{what} must be a finite number, not {v!r}")
    return float(v)


def _parse_purchase(table: Any, file: str | None, loc: _Locator) -> PurchaseOptions:
    from inventory.values import SERIES, parse_power, parse_tolerance, parse_voltage

    if not isinstance(table, dict):
        raise _err("must be a table ([purchase])", file, loc, None, None, "purchase", "purchase")
    out: dict[str, Any] = {}
    for key, v in table.items():
        field = f"purchase.{key}"

        def bad(msg: str, key=key, field=field) -> InputError:
            return _err(msg, file, loc, "purchase", None, key, field)

        if key not in PURCHASE_KEYS:
            raise bad(f"unknown key (known: {', '.join(PURCHASE_KEYS)})")
        try:
            if key in ("series", "cap_series"):
                name = str(v).strip().upper() if isinstance(v, str) else None
                if name not in SERIES:
                    raise ValueError(f"unknown series {v!r} (choose from {', '.join(SERIES)})")
                out[key] = name
            elif key in ("resistor_price", "capacitor_price", "line_cost"):
                x = _number(v, what="a price")
                if x < 0:
                    raise ValueError(f"a price cannot be negative ({v!r})")
                out[key] = x
            elif key == "pack":
                if isinstance(v, bool) or not isinstance(v, int) or v < 1:
                    raise ValueError(f"must be a whole number of pieces, 1 or more, not {v!r}")
                out[key] = int(v)
            elif key in ("resistor_tolerance", "capacitor_tolerance"):
                t = parse_tolerance(v)
                if not 0 < t < 1:
                    raise ValueError(f"a tolerance must lie between 0 and 100 %, not {v!r}")
                out[key] = float(t)
            elif key == "resistor_power":
                out[key] = float(parse_power(v))
            elif key == "capacitor_voltage":
                out[key] = float(parse_voltage(v))
        except InputError as exc:
            raise bad(exc.message) from None
        except (ValueError, TypeError) as exc:
            raise bad(str(exc)) from None
    return PurchaseOptions(**out)


def _parse_request_entry(v: Any, i: int, file: str | None, base: Path, loc: _Locator
                         ) -> tuple[Request, str | None, str]:
    from optimiser.request import load_request, parse_request

    field = f"build[{i + 1}].request"
    if isinstance(v, str):
        if not v.strip():
            raise _err("is empty: give a request file", file, loc, "build", i, "request", field)
        path = (base / v).resolve() if not Path(v).is_absolute() else Path(v)
        if not path.is_file():
            raise _err(f"no such request file {v!r} (looked at {path})", file, loc, "build", i,
                       "request", field)
        req = load_request(path, chains=True)
        if req.is_pair:
            try:
                check_chain_request(req)
            except InputError as exc:
                raise _err(f"{v}: {exc.message}", file, loc, "build", i, "request",
                           f"{field}.{exc.field}") from None
        return req, v, v
    if isinstance(v, dict):
        topo = v.get("topology")
        pairs = isinstance(topo, list) or (isinstance(topo, str)
                                           and topo.strip().lower() == PAIR_TOPOLOGY)
        try:
            req = parse_request(v, file=file, extra_keys=(), pairs=pairs)
            if req.is_pair:
                check_chain_request(req)
        except InputError as exc:
            def one(e: InputError) -> InputError:
                sub = f"{field}.{e.field}" if e.field else field
                line = e.line or loc.find("build", i, e.field) or loc.find("build", i, None)
                return InputError(e.message, file=e.file or file, line=line, field=sub)
            if isinstance(exc, InputErrors):          # every bad key, one line each
                raise InputErrors([one(e) for e in exc.errors]) from None
            raise one(exc) from None
        return req, None, f"build {i + 1}"
    raise _err(f"must be a file name or a [build.request] table, not {v!r}", file, loc,
               "build", i, "request", field)


def parse_buildlist(data: dict, *, file: str | None = None, base_dir: str | Path | None = None,
                    text: str | None = None) -> BuildList:
    """Check a decoded build list and turn it into a :class:`BuildList`.

    Parameters
    ----------
    data : dict
        The decoded TOML.
    file : str, optional
        The list's name for messages.
    base_dir : path, optional
        Where request file names are taken from (default: the current folder).
    text : str, optional
        The TOML text, to give line numbers in messages.

    Raises
    ------
    InputError
        Naming the file, the line when found, and the key (``build[2].count``).
    """
    loc = _Locator(text)
    base = Path(base_dir) if base_dir is not None else Path.cwd()
    for key in data:
        if key not in TOP_KEYS:
            raise _err("unknown key (known: [[build]] and [purchase])", file, loc, None, None,
                       key, key)
    entries = data.get("build")
    if entries is None:
        raise InputError("no [[build]] entries: say which requests to build", file=file,
                         field="build")
    if not isinstance(entries, list) or not all(isinstance(e, dict) for e in entries):
        raise _err("must be an array of tables ([[build]])", file, loc, None, None, "build",
                   "build")
    if not entries:
        raise InputError("no [[build]] entries", file=file, field="build")
    builds = []
    for i, e in enumerate(entries):
        for key in e:
            if key not in BUILD_KEYS:
                raise _err(f"unknown key (known: {', '.join(BUILD_KEYS)})", file, loc, "build",
                           i, key, f"build[{i + 1}].{key}")
        if "request" not in e:
            raise _err("missing: give a request file or a [build.request] table", file, loc,
                       "build", i, None, f"build[{i + 1}].request")
        request, source, default_name = _parse_request_entry(e["request"], i, file, base, loc)
        count = e.get("count", request.builds)
        if isinstance(count, bool) or not isinstance(count, int) or count < 1:
            raise _err(f"must be a whole number of copies, 1 or more, not {count!r}", file, loc,
                       "build", i, "count", f"build[{i + 1}].count")
        identical = e.get("identical", True)
        if not isinstance(identical, bool):
            raise _err(f"must be true or false, not {identical!r}", file, loc, "build", i,
                       "identical", f"build[{i + 1}].identical")
        name = e.get("name", default_name)
        if not isinstance(name, str) or not name.strip():
            raise _err(f"must be a non-empty text, not {name!r}", file, loc, "build", i, "name",
                       f"build[{i + 1}].name")
        builds.append(BuildSpec(name.strip(), replace(request, builds=count), count, identical,
                                source))
    names = [b.name for b in builds]
    for i, n in enumerate(names):
        if names.index(n) != i:
            raise _err(f"two builds are both named {n!r}: give one a `name`", file, loc, "build",
                       i, None, f"build[{i + 1}]")
    purchase = None
    if "purchase" in data:
        purchase = _parse_purchase(data["purchase"], file, loc)
    return BuildList(tuple(builds), purchase, Path(file) if file else None)


def load_buildlist(path: str | Path) -> BuildList:
    """Read and check a build-list TOML file (request files relative to it)."""
    p = Path(path)
    shown = str(path)
    try:
        text = p.read_text(encoding="utf-8")
    except FileNotFoundError:
        raise InputError("no such file", file=shown) from None
    except (OSError, UnicodeDecodeError) as exc:
        raise InputError(f"cannot read it ({exc})", file=shown) from None
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        m = re.search(r"line (\d+)", str(exc))
        raise InputError(f"not valid TOML ({exc})", file=shown,
                         line=int(m.group(1)) if m else None) from None
    return parse_buildlist(data, file=shown, base_dir=p.parent, text=text)
