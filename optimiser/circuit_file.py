"""A given circuit for ``analyse`` (docs/requests.md), read from TOML.

The file holds the request keys (``topology`` and ``supply_v`` required; any
targets), plus::

    [parts]               # role = value, written as in the stock file
    R1 = "47k"
    C_IN = "1u"
    RC = "#12"            # or a stock item by id: "#12" takes value and ratings from the store

    [transistor]          # inline figures (as the stock columns) ...
    hfe_min = 100
    hfe_max = 300
    ft = "250M"
    cob = "4p"
    # ... or, at top level instead:  transistor = "GP-N1"  (a stock label)

    [tolerances]          # optional; default 5 % for resistors, 20 % for capacitors
    R1 = "1%"

Two transistors (a chain of two stages, or a cascode; docs/requests.md): ``topology
= ["ce", "cc"]`` (with ``coupling = "capacitor"``, the default, or ``"direct"``) or
``topology = "cascode"``; parts by their namespaced roles (``S1.RC = "4k7"``,
``C_COUPLE = "1u"``; a cascode's own ``R1``, ``R2``, ``R3``, ``C_B``, ...), and the
transistor once for both or per stage (``[S1.transistor]``, ``S2.transistor = "LABEL"``).
:func:`parse_circuit` returns a :class:`PairCircuit` for those.

Stock references (``"#id"`` parts, a transistor label) are resolved through a
``store`` object with ``item(id)`` and ``transistor(label)`` (the inventory store),
fetched lazily, so a circuit with plain values never opens the store.
"""

from __future__ import annotations

import re
from collections.abc import Callable
from dataclasses import dataclass, field

import numpy as np

from inventory import values as V
from inventory.errors import ErrorList, InputError
from inventory.parts import (
    DEFAULT_CAPACITOR_TOLERANCE,
    DEFAULT_RESISTOR_TOLERANCE,
    Capacitor,
    Resistor,
    Transistor,
)

from .request import CIRCUIT_KEYS, Request, _line_of, parse_request, read_toml
from .stage import RESISTOR_ROLES, PartRatings, StageBatch
from .stages import NAMES as TOPOLOGY_NAMES
from .stages import module as stage_module
from .stages import pair_form
from .stages.base import role_problems
from .stages.pair import PairBatch

__all__ = ["Circuit", "PairCircuit", "parse_circuit", "load_circuit", "TRANSISTOR_KEYS"]

TRANSISTOR_KEYS = ("label", "hfe_min", "hfe_max", "hfe_typ", "vbe", "ic_ref", "vaf", "vce_sat",
                   "vceo", "ic_max", "pd", "ft", "cob", "polarity")
_ID = re.compile(r"^\s*#\s*(\d+)\s*$")


@dataclass
class Circuit:
    """One stage with given values, ready for :func:`optimiser.evaluate.evaluate`."""

    request: Request
    values: dict[str, float]
    transistor: Transistor
    tolerances: dict[str, float]
    labels: dict[str, str] = field(default_factory=dict)
    stock_ids: dict[str, int] = field(default_factory=dict)
    ratings: PartRatings = field(default_factory=PartRatings)
    stock_parts: dict[str, object] = field(default_factory=dict)

    def batch(self) -> StageBatch:
        return StageBatch.from_values(self.request.topology, **self.values)


@dataclass
class PairCircuit:
    """Two transistors with given values, for :func:`optimiser.pair_evaluate.evaluate_pair`."""

    request: Request
    form: object                         # optimiser.stages.pair.PairForm
    values: dict[str, float]
    transistors: tuple[Transistor, Transistor]
    tolerances: dict[str, float]
    labels: dict[str, str] = field(default_factory=dict)
    stock_ids: dict[str, int] = field(default_factory=dict)
    ratings: PartRatings = field(default_factory=PartRatings)
    stock_parts: dict[str, object] = field(default_factory=dict)

    def batch(self):
        return PairBatch.from_values(self.form, **self.values)


#: The names of a two-transistor circuit's parts (each a table for its roles or
#: its transistor).
STAGE_TABLES = ("S1", "S2")


def _flatten(table: dict) -> dict:
    """``{"S1": {"RC": x}}`` (TOML's dotted keys and [parts.S1]) as ``{"S1.RC": x}``."""
    out = {}
    for k, v in table.items():
        if k in STAGE_TABLES and isinstance(v, dict):
            out.update({f"{k}.{r}": x for r, x in v.items()})
        else:
            out[k] = v
    return out


def _kind(role: str) -> str:
    return "resistor" if role in RESISTOR_ROLES else "capacitor"


def parse_circuit(mapping: dict, *, file: str | None = None, text: str | None = None,
                  store: Callable[[], object] | None = None) -> Circuit:
    """Check and convert a parsed circuit file.

    Parameters
    ----------
    mapping : dict
        The TOML document.
    file, text : str, optional
        File name and raw text, for messages that name file and line.
    store : callable, optional
        Returns the stock store; called only when a stock label or id is used.
    """

    def err(key, msg, line_key=None):
        return InputError(msg, file=file, line=_line_of(text, line_key or key.split(".")[-1]),
                          field=key)

    problems = ErrorList()          # every bad key is reported, not only the first
    errors, collect = problems.errors, problems.collect

    req = None
    with collect():
        req = parse_request(mapping, file=file, text=text,
                            extra_keys=CIRCUIT_KEYS + ("transistor",) + STAGE_TABLES,
                            default_gain=False, pairs=True)
    if req is not None and req.is_pair:
        return _parse_pair(mapping, req, problems, file=file, text=text, store=store)
    for key in STAGE_TABLES:
        if key in mapping:
            errors.append(err(key, f"'{key}' names a stage of a two-transistor circuit; a "
                                   f"{mapping.get('topology')} stage has one transistor"))
    topo = req.topology if req is not None else (
        mapping.get("topology", "").strip().lower()
        if isinstance(mapping.get("topology"), str) else None)
    if topo not in TOPOLOGY_NAMES:
        raise _all(errors)
    mod = stage_module(topo)
    parts = mapping.get("parts")
    if not isinstance(parts, dict) or not parts:
        errors.append(err("parts", "missing [parts] table: give role = value for each part "
                                   f"({', '.join(mod.REQUIRED)} for {topo})", "[parts]"))
        parts = {}

    get_store = _store_getter(store, file)

    values: dict[str, float] = {}
    labels: dict[str, str] = {}
    ids: dict[str, int] = {}
    stock_parts: dict[str, object] = {}
    power_w, voltage_v, polarised, tol_stock = {}, {}, {}, {}
    bad_roles: set[str] = set()
    for role, raw in parts.items():
        with collect():
            bad_roles.add(role)
            _part(role, raw, topo, err, get_store, values, labels, ids, stock_parts, power_w,
                  voltage_v, polarised, tol_stock)
            bad_roles.discard(role)
    missing = [r for r in mod.REQUIRED if r not in values and r not in bad_roles]
    if missing and parts:
        errors.append(err("parts", f"missing part{'s' if len(missing) > 1 else ''} "
                                   f"{', '.join(missing)} for a {topo} stage", "[parts]"))
    if parts and not bad_roles:
        for problem in role_problems(mod, values):
            errors.append(err("parts", problem, "[parts]"))

    # transistor
    transistor = None
    with collect():
        tr = mapping.get("transistor")
        if isinstance(tr, str):
            if tr.strip().lower() == "any":
                raise err("transistor", "analyse needs one transistor: a stock label or a "
                                        "[transistor] table with hfe_min and hfe_max")
            transistor = get_store().transistor(tr.strip())
            if transistor is None:
                raise err("transistor", f"no transistor labelled '{tr.strip()}' in stock")
        elif isinstance(tr, dict):
            transistor = _inline_transistor(tr, err)
        else:
            raise err("transistor", "missing transistor: give transistor = \"LABEL\" or a "
                                    "[transistor] table with hfe_min and hfe_max", "[transistor]")

    tols = _tolerances(mapping.get("tolerances", {}), values, bad_roles, tol_stock, _kind,
                       err, problems)
    ratings = _ratings(power_w, voltage_v, polarised)
    return Circuit(req, values, transistor, tols, labels, ids, ratings, stock_parts)


def _all(errors: list[InputError]) -> InputError:
    """One error, or every one of several (sorted by line)."""
    gathered = ErrorList()
    gathered.errors.extend(errors)
    return gathered.combined()


def _store_getter(store: Callable[[], object] | None, file: str | None) -> Callable[[], object]:
    """The store, opened on first use (only a stock label or id needs it)."""
    opened: list[object] = []

    def get_store():
        if not opened:
            if store is None:
                raise InputError("stock references need the store", file=file)
            opened.append(store())
        return opened[0]
    return get_store


def _tolerances(raw_t, values: dict[str, float], bad: set[str], tol_stock: dict[str, float],
                kind_of: Callable[[str], str], err, problems: ErrorList) -> dict[str, float]:
    """The ``[tolerances]`` table read against the parts (every bad entry collected;
    raises the collected errors), then each part without one given: its stock
    item's tolerance, else the default of its kind."""

    tols: dict[str, float] = {}
    if not isinstance(raw_t, dict):
        problems.errors.append(err("tolerances",
                                   "expected a [tolerances] table of role = tolerance"))
        raw_t = {}
    for role, t in raw_t.items():
        with problems.collect():
            if role not in values:
                if role in bad:
                    continue
                raise err(f"tolerances.{role}",
                          f"tolerance for '{role}', which is not among the parts", role)
            try:
                tols[role] = V.parse_tolerance(t)
            except InputError as e:
                raise err(f"tolerances.{role}", e.message, role) from None
    if problems.errors:
        raise _all(problems.errors)
    for role in values:
        if role not in tols:
            tols[role] = tol_stock.get(role, DEFAULT_RESISTOR_TOLERANCE if kind_of(role) ==
                                       "resistor" else DEFAULT_CAPACITOR_TOLERANCE)
    return tols


def _ratings(power_w: dict, voltage_v: dict, polarised: dict) -> PartRatings:
    return PartRatings(
        power_w={k: np.asarray(v) for k, v in power_w.items()},
        voltage_v={k: np.asarray(v) for k, v in voltage_v.items()},
        polarised={k: np.asarray(v) for k, v in polarised.items()},
    )


def _part(role, raw, topo, err, get_store, values, labels, ids, stock_parts, power_w,
          voltage_v, polarised, tol_stock, form=None) -> None:
    """Read one ``[parts]`` entry into the tables (raises InputError for a bad one);
    ``form``: the two-transistor form whose roles these are (``topo`` unused then)."""

    key = f"parts.{role}"
    names = stage_module(topo).ROLE_NAMES if form is None else form.role_names
    if role not in names:
        what = f"a {topo} stage" if form is None else f"a {form.name} circuit"
        raise err(key, f"unknown role '{role}' for {what} (roles: {', '.join(names)})", role)
    kind = _kind(role) if form is None else form.kind(role)
    m = _ID.match(raw) if isinstance(raw, str) else None
    if m:
        item_id = int(m[1])
        if item_id > 2**31 - 1:          # beyond the store's integer ids
            raise err(key, f"no stock item with id {item_id}; see `drawerfit stock list`", role)
        try:
            part = get_store().item(item_id)
        except InputError as e:
            raise err(key, e.message, role) from None
        ok = isinstance(part, Resistor) if kind == "resistor" else isinstance(part, Capacitor)
        if not ok:
            raise err(key, f"stock item #{item_id} is not a {kind}", role)
        value = float(part.value)
        ids[role] = item_id
        stock_parts[role] = part
        tol_stock[role] = part.tolerance
        if kind == "resistor":
            power_w[role] = part.power_w
        else:
            voltage_v[role] = part.voltage_v
            polarised[role] = part.polarised
    else:
        if isinstance(raw, bool) or not isinstance(raw, (str, int, float)):
            raise err(key, f"expected a value such as \"4k7\", got {raw!r}", role)
        try:
            value = V.parse_value(raw, kind)
        except InputError as e:
            raise err(key, e.message, role) from None
    if value <= 0:
        raise err(key, f"{role} must be greater than zero", role)
    values[role] = value
    try:
        labels[role] = V.format_value(values[role], kind)
    except Exception:
        labels[role] = str(raw)


def _inline_transistor(tr: dict, err) -> Transistor:

    errors = [err(f"transistor.{key}", f"unknown transistor key '{key}' "
                                       f"(known: {', '.join(TRANSISTOR_KEYS)})", key)
              for key in tr if key not in TRANSISTOR_KEYS]
    errors += [err(f"transistor.{key}", f"missing {key} in [transistor]", "[transistor]")
               for key in ("hfe_min", "hfe_max") if key not in tr]

    def number(key, reader=None, lo=0.0):
        v = tr[key]
        try:
            if isinstance(v, bool):
                raise ValueError
            x = reader(v) if (reader and isinstance(v, str)) else float(v)
        except InputError as e:
            raise err(f"transistor.{key}", e.message, key) from None
        except (TypeError, ValueError):
            raise err(f"transistor.{key}", f"expected a number, got {v!r}", key) from None
        if not np.isfinite(x):
            raise err(f"transistor.{key}", f"expected a finite number, got {v!r}", key)
        if x <= lo:
            raise err(f"transistor.{key}", f"{v!r} is out of range: must be > {lo:g}", key)
        return x

    freq = lambda v: V.parse_frequency(v)  # noqa: E731
    cap = lambda v: V.parse_value(v, "capacitor")  # noqa: E731
    volt = lambda v: V.parse_voltage(v)  # noqa: E731
    amp = lambda v: V.parse_value(v)  # noqa: E731
    readers = {"vbe": volt, "vaf": volt, "vce_sat": volt, "vceo": volt, "ic_ref": amp,
               "ic_max": amp, "pd": lambda v: V.parse_power(v), "ft": freq, "cob": cap}
    kw = {}
    for key in ("hfe_min", "hfe_max", "hfe_typ", "vbe", "ic_ref", "vaf", "vce_sat", "vceo",
                "ic_max", "pd", "ft", "cob"):
        if key in tr:
            try:
                kw[key] = number(key, readers.get(key))
            except InputError as e:
                errors.append(e)
    if errors:
        raise _all(errors)
    if kw["hfe_min"] > kw["hfe_max"]:
        raise err("transistor.hfe_min", "hfe_min is above hfe_max", "hfe_min")
    if "hfe_typ" in kw and not kw["hfe_min"] <= kw["hfe_typ"] <= kw["hfe_max"]:
        raise err("transistor.hfe_typ", f"hfe_typ {kw['hfe_typ']:g} lies outside hfe_min..hfe_max "
                                        f"({kw['hfe_min']:g}..{kw['hfe_max']:g})", "hfe_typ")
    if "vbe" in kw and not 0.2 <= kw["vbe"] <= 1.2:
        raise err("transistor.vbe", f"vbe {kw['vbe']:g} V is out of range 0.2–1.2 V", "vbe")
    polarity = tr.get("polarity", "npn")
    if not isinstance(polarity, str) or polarity.strip().lower() != "npn":
        raise err("transistor.polarity", "only npn stages are analysed", "polarity")
    label = tr.get("label", "inline")
    if not isinstance(label, str) or not label.strip():
        raise err("transistor.label", f"expected a non-empty text, got {label!r}", "label")
    label = label.strip()
    return Transistor(label, **kw)


def _parse_pair(mapping, req, problems, *, file, text, store) -> PairCircuit:
    """The two-transistor part of :func:`parse_circuit` (the request already read)."""
    errors, collect = problems.errors, problems.collect

    def line(key):
        for k in (key, f'"{key}"', key.split(".")[-1]):
            n = _line_of(text, k)
            if n is not None:
                return n
        return None

    def err(key, msg, line_key=None):
        return InputError(msg, file=file, line=line(line_key or key.split(".", 1)[-1]),
                          field=key)

    form = pair_form(req.topology, req.coupling)
    for key, v in mapping.items():
        if key in STAGE_TABLES:
            if not isinstance(v, dict):
                errors.append(err(key, f"expected a table [{key}.transistor] or "
                                       f"{key}.transistor = \"LABEL\""))
                continue
            for sub in v:
                if sub != "transistor":
                    errors.append(err(f"{key}.{sub}", f"unknown key '{key}.{sub}': parts go "
                                                      f"in [parts] as {key}.{sub} = value, "
                                                      f"the transistor in [{key}.transistor]"))
    parts = mapping.get("parts")
    if not isinstance(parts, dict) or not parts:
        errors.append(err("parts", "missing [parts] table: give role = value for each part "
                                   f"({', '.join(form.required)} for a {form.name} circuit)",
                          "[parts]"))
        parts = {}
    parts = _flatten(parts)
    get_store = _store_getter(store, file)

    values, labels, ids, stock_parts = {}, {}, {}, {}
    power_w, voltage_v, polarised, tol_stock = {}, {}, {}, {}
    bad: set[str] = set()
    for role, raw in parts.items():
        with collect():
            bad.add(role)
            _part(role, raw, None, err, get_store, values, labels, ids, stock_parts, power_w,
                  voltage_v, polarised, tol_stock, form=form)
            bad.discard(role)
    missing = [r for r in form.required if r not in values and r not in bad]
    if missing and parts:
        errors.append(err("parts", f"missing part{'s' if len(missing) > 1 else ''} "
                                   f"{', '.join(missing)} for a {form.name} circuit", "[parts]"))
    if parts and not bad:
        for problem in form.problems(values):
            errors.append(err("parts", problem, "[parts]"))

    # transistors: once for both, or per stage
    both = mapping.get("transistor")
    transistors = []
    read: dict[int, Transistor | None] = {}
    for stage in STAGE_TABLES:
        own = mapping.get(stage, {}).get("transistor") if isinstance(mapping.get(stage),
                                                                     dict) else None
        tr, where = (own, f"{stage}.transistor") if own is not None else (both, "transistor")
        if id(tr) in read and tr is not None:
            transistors.append(read[id(tr)])
            continue
        t = None
        with collect():
            if isinstance(tr, str):
                if tr.strip().lower() == "any":
                    raise err(where, "analyse needs given transistors: a stock label or a "
                                     "[transistor] table with hfe_min and hfe_max")
                t = get_store().transistor(tr.strip())
                if t is None:
                    raise err(where, f"no transistor labelled '{tr.strip()}' in stock")
            elif isinstance(tr, dict):
                t = _inline_transistor(tr, lambda k, msg, lk=None, w=where: err(
                    f"{w}.{k.split('.', 1)[-1]}", msg, lk))
            else:
                raise err(where, f"missing transistor for {stage}: give transistor = "
                                 "\"LABEL\" or a [transistor] table for both, or "
                                 f"[{stage}.transistor]", "[transistor]")
        read[id(tr)] = t
        transistors.append(t)

    raw_t = mapping.get("tolerances", {})
    tols = _tolerances(_flatten(raw_t) if isinstance(raw_t, dict) else raw_t, values, bad,
                       tol_stock, form.kind, err, problems)
    ratings = _ratings(power_w, voltage_v, polarised)
    return PairCircuit(req, form, values, tuple(transistors), tols, labels, ids, ratings,
                       stock_parts)


def load_circuit(path, *, store: Callable[[], object] | None = None) -> Circuit | PairCircuit:
    """Read and check a circuit file (TOML) for ``analyse``."""
    mapping, text = read_toml(path)
    return parse_circuit(mapping, file=str(path), text=text, store=store)
