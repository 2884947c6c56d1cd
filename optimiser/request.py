"""A design request (docs/requests.md) as a typed, validated object.

All values are SI: ohm, hertz, volt; temperatures in °C as the user gives them
(the device model converts to kelvin).  ``None`` means "unconstrained".
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass

from . import stages as _stages
from .stages import cascode as _cascode

__all__ = ["TOPOLOGIES", "Request", "parse_request", "load_request", "REQUEST_KEYS",
           "DEFAULTS", "DEFAULT_GAIN_DB", "NO_LIMIT"]

#: The topologies a request may name (the modules of :mod:`optimiser.stages`).
TOPOLOGIES = _stages.NAMES
_TOPOLOGY_CHOICE = f"{', '.join(TOPOLOGIES[:-1])} or {TOPOLOGIES[-1]}"


@dataclass(frozen=True)
class Request:
    #: a single stage's name, a chain's two stage names, or "cascode"
    topology: str | tuple[str, str]
    supply_v: float
    load_ohm: float | None = None          # None: open (no load)
    source_ohm: float = 0.0
    mid_hz: float = 1000.0
    gain: float | None = None              # target |v_load / v_emf| in V/V
    gain_tol_db: float = 1.0
    f_low_max_hz: float | None = None
    f_high_min_hz: float | None = None
    zin_min_ohm: float | None = None
    ic_drift_max_pct: float | None = None
    temp_c: tuple[float, float] = (25.0, 25.0)
    input_vpk: float = 0.01
    thd_max_pct: float | None = None
    ic_min_a: float | None = None          # least quiescent collector current, A
    builds: int = 1
    transistor: str = "any"
    allow_combos: bool = False
    min_yield_pct: float | None = None
    yield_samples: int | None = None       # None: yield not asked for (unless min_yield_pct)
    seed: int = 0
    mains: bool = False                    # the supply is derived from the mains (cautions)
    zout_max_ohm: float | None = None      # largest output impedance, ohm (analyse)
    coupling: str | None = None            # a chain's coupling: "capacitor" or "direct"
    #: keys the file left out whose default (:data:`DEFAULTS`) was filled in
    assumed: tuple[str, ...] = ()
    #: judge the flat-passband validity (no file sets it: False only in the chain
    #: proof's relaxed stage requests, where a stage alone, into an open load, may peak
    #: where its chain does not; docs/search.md, "What is proven")
    flat_passband: bool = True
    #: capacitor roles whose voltage rating is not judged (no file sets it: in the
    #: chain proof's relaxed stage requests the role that becomes the chain's C_COUPLE,
    #: which sees another voltage there than it does alone)
    unrated_caps: tuple[str, ...] = ()

    @property
    def gain_db(self) -> float | None:
        return None if self.gain is None else 20.0 * math.log10(self.gain)

    @property
    def is_pair(self) -> bool:
        """Two transistors: a chain of two stages or a cascode."""
        return not isinstance(self.topology, str) or self.topology == PAIR_TOPOLOGY

    @property
    def wants_yield(self) -> bool:
        return self.min_yield_pct is not None or self.yield_samples is not None

    @property
    def samples(self) -> int:
        return self.yield_samples if self.yield_samples is not None else 2000

    def to_json(self) -> dict:
        d = asdict(self)
        d["temp_c"] = list(self.temp_c)
        d["gain_db"] = self.gain_db
        d["assumed"] = list(self.assumed)
        if not isinstance(self.topology, str):
            d["topology"] = list(self.topology)
        if not self.is_pair:
            del d["coupling"]
        if self.flat_passband:
            del d["flat_passband"]
        if not self.unrated_caps:
            del d["unrated_caps"]
        else:
            d["unrated_caps"] = list(self.unrated_caps)
        return d


# --------------------------------------------------------------------------------------
# Reading a request from TOML (docs/requests.md)
# --------------------------------------------------------------------------------------

#: Keys a request file may hold; ``parts``, ``tolerances`` and a ``[transistor]`` table
#: belong to a given circuit (``analyse``) and are passed over here.
REQUEST_KEYS = (
    "topology", "supply_v", "load_ohm", "source_ohm", "mid_hz", "gain_db", "gain",
    "gain_tol_db", "f_low_max_hz", "f_high_min_hz", "zin_min_ohm", "ic_drift_max_pct",
    "temp_c", "input_vpk", "thd_max_pct", "ic_min_a", "builds", "transistor", "allow_combos",
    "min_yield_pct", "yield_samples", "seed", "mains", "zout_max_ohm", "coupling",
)
#: The two-transistor form named by a word (chains are named by a list of two stages).
PAIR_TOPOLOGY = "cascode"
#: Why a request read for single stages refuses two transistors.
_SEARCH_SINGLE = ("only a single stage ({choice}) is read here; `drawerfit design` and a "
                  "build list search the chains [\"ce\", \"cc\"] and [\"cb\", \"cc\"], and a two-transistor "
                  "circuit with given values can be checked with `drawerfit analyse`")
CIRCUIT_KEYS = ("parts", "tolerances")
#: Targets a request file gets when it leaves them out, so that an unstated target
#: never ranks a stage a bench would refuse (common practice: a stage distorting
#: more than a few per cent at its stated input level, or biased at a few
#: microamperes where leakage and noise set the point, is not a working stage).
#: The THD ceiling applies at the request's ``input_vpk``.  Write the key to change
#: it, or ``"none"`` to have no limit.
DEFAULTS = {"thd_max_pct": 5.0, "ic_min_a": 100e-6}
#: The gain target (dB) a request to design gets when it names none, per topology:
#: each topology module's ``DEFAULT_GAIN_DB`` (ce and cb: 20 dB; cc: none), and the
#: cascode's (20 dB); a chain of two stages gets none.
#: ``gain_db = "none"`` asks for no gain target.
DEFAULT_GAIN_DB = {**{m.NAME: m.DEFAULT_GAIN_DB for m in _stages.modules()
                      if m.DEFAULT_GAIN_DB is not None},
                   _cascode.NAME: _cascode.DEFAULT_GAIN_DB}
#: What a key's value may be to mean "no limit" (TOML has no null).
NO_LIMIT = ("none", "off")
#: Largest supply the tool accepts, V (single-supply small-signal stages).
MAX_SUPPLY_V = 400.0
#: Resistances a request may name (load, source, Z_in bound), ohm: 1 mΩ to 1 TΩ.
MIN_OHM, MAX_OHM = 1e-3, 1e12


def _line_of(text: str | None, key: str) -> int | None:
    """Line (from 1) where ``key = ...`` first appears in the TOML text, if found."""
    if not text:
        return None
    import re

    m = re.search(rf"^[ \t]*{re.escape(key)}[ \t]*=", text, re.M)
    return None if m is None else text.count("\n", 0, m.start()) + 1


def _header_line(text: str | None, table: str) -> int | None:
    """Line (from 1) of the ``[table]`` header in the TOML text, if found."""
    import re

    m = re.search(rf"^[ \t]*\[[ \t]*{re.escape(table)}[ \t]*\]", text or "", re.M)
    return None if m is None else text.count("\n", 0, m.start()) + 1


def parse_request(mapping: dict, *, file: str | None = None, text: str | None = None,
                  extra_keys: tuple[str, ...] = CIRCUIT_KEYS,
                  default_gain: bool = True, pairs: bool = False) -> Request:
    """A :class:`Request` from a parsed TOML mapping, every value checked.

    Values may be numbers (SI) or text with SI prefixes (``"10k"``, ``"100e3"``,
    ``"250M"``).  Unknown keys, wrong types and out-of-range numbers raise
    :class:`~inventory.errors.InputError` naming ``file``, the line (when the
    TOML ``text`` is given) and the key; several bad keys raise one
    :class:`~inventory.errors.InputErrors` holding every one of them.  Targets of
    :data:`DEFAULTS` (and, with ``default_gain``, the gain of
    :data:`DEFAULT_GAIN_DB`: a request to design from, not a given circuit) the
    mapping leaves out are filled in and listed in
    ``Request.assumed``.  With ``pairs`` (a given circuit for ``analyse``) the
    topology may also be two stages (``["ce", "cc"]``, with ``coupling``) or
    ``"cascode"``, and ``zout_max_ohm`` is read; without it (a request to design)
    both are refused with the reason.
    """
    from inventory import values as V
    from inventory.errors import ErrorList, InputError

    def err(key, msg):
        return InputError(msg, file=file, line=_line_of(text, key), field=key)

    if not isinstance(mapping, dict):
        raise InputError("a request must be a table of key = value", file=file)
    problems = ErrorList()          # every bad key is reported, not only the first
    errors, collect = problems.errors, problems.collect

    for key in mapping:
        if key not in REQUEST_KEYS and key not in extra_keys:
            errors.append(err(key, f"unknown key '{key}' (known: {', '.join(REQUEST_KEYS)})"))

    def num(key, value, *, lo=None, hi=None, lo_open=False, integer=False, reader=None):
        if isinstance(value, bool):
            raise err(key, f"expected a number, got {value!r}")
        try:
            if reader is not None:
                x = reader(value)
            elif isinstance(value, (int, float)):
                x = float(value)
            elif isinstance(value, str):
                x = float(value.strip())
            else:
                raise ValueError
        except InputError as e:
            raise err(key, e.message) from None
        except (TypeError, ValueError):
            raise err(key, f"expected a number, got {value!r}") from None
        if not math.isfinite(x):
            raise err(key, f"expected a finite number, got {value!r}")
        if integer:
            if x != int(x):
                raise err(key, f"expected a whole number, got {value!r}")
            x = int(x)
        if lo is not None and (x <= lo if lo_open else x < lo):
            raise err(key, f"{value!r} is out of range: must be {'>' if lo_open else '≥'} {lo:g}")
        if hi is not None and x > hi:
            raise err(key, f"{value!r} is out of range: must be ≤ {hi:g}")
        return x

    def no_limit(value) -> bool:
        return isinstance(value, str) and value.strip().lower() in NO_LIMIT

    ohm = lambda v: V.parse_value(v, "resistor") if isinstance(v, str) else float(v)  # noqa: E731
    hz = lambda v: V.parse_frequency(v, positive=False)  # noqa: E731
    volt = lambda v: V.parse_voltage(v, positive=False)  # noqa: E731
    amp = lambda v: V.parse_value(v) if isinstance(v, str) else float(v)  # noqa: E731

    kw: dict = {}
    m = mapping
    with collect():
        if "topology" not in mapping:
            raise err("topology", f"missing required key 'topology' ({_TOPOLOGY_CHOICE})")
        topo = mapping["topology"]
        pair = isinstance(topo, list) or (isinstance(topo, str)
                                          and topo.strip().lower() == PAIR_TOPOLOGY)
        if pair and not pairs:
            raise err("topology", _SEARCH_SINGLE.format(choice=_TOPOLOGY_CHOICE))
        if isinstance(topo, list):
            names = [t.strip().lower() if isinstance(t, str) else t for t in topo]
            if len(names) != 2 or any(t not in TOPOLOGIES for t in names):
                raise err("topology", f"a chain is two stages, each {_TOPOLOGY_CHOICE}, "
                                      f"e.g. [\"ce\", \"cc\"]; got {topo!r}")
            kw["topology"] = tuple(names)
        elif pair:
            kw["topology"] = PAIR_TOPOLOGY
        elif not isinstance(topo, str) or topo.strip().lower() not in TOPOLOGIES:
            more = (f", two of them as a list (a chain) or \"{PAIR_TOPOLOGY}\"" if pairs
                    else "")
            raise err("topology", f"unknown topology {topo!r}: use {_TOPOLOGY_CHOICE}{more}")
        else:
            kw["topology"] = topo.strip().lower()
    with collect():
        if "coupling" in m and "topology" not in kw and pairs:
            pass                            # the topology's own error says what is wrong
        elif "coupling" in m:
            c = m["coupling"]
            if not pairs:
                raise err("coupling", _SEARCH_SINGLE.format(choice=_TOPOLOGY_CHOICE))
            if not isinstance(kw.get("topology", ()), tuple):
                raise err("coupling", "coupling joins the two stages of a chain: give "
                                      "topology as a list of two stages, e.g. [\"ce\", \"cc\"]")
            choice = " or ".join(f'"{x}"' for x in _stages.PAIR_COUPLINGS)
            if not isinstance(c, str) or c.strip().lower() not in _stages.PAIR_COUPLINGS:
                raise err("coupling", f"unknown coupling {c!r}: use {choice}")
            c = c.strip().lower()
            try:
                _stages.pair_form(kw["topology"], c)      # the form says which joins exist
            except ValueError as e:
                raise err("coupling", str(e)) from None
            kw["coupling"] = c
        elif isinstance(kw.get("topology"), tuple):
            kw["coupling"] = "capacitor"
    with collect():
        if "zout_max_ohm" in m:
            if not pairs:
                raise err("zout_max_ohm", "zout_max_ohm is a target of two-transistor "
                                          "circuits (a chain request, `drawerfit analyse`); "
                                          "the single-stage search does not use it: leave it "
                                          "out of a single-stage request")
            kw["zout_max_ohm"] = num("zout_max_ohm", m["zout_max_ohm"], lo=0, lo_open=True,
                                     hi=MAX_OHM, reader=ohm)
    with collect():
        if "supply_v" not in mapping:
            raise err("supply_v", "missing required key 'supply_v' (the supply voltage)")
        kw["supply_v"] = num("supply_v", mapping["supply_v"], lo=0, lo_open=True,
                             hi=MAX_SUPPLY_V, reader=volt)
    with collect():
        if "load_ohm" in m:
            lo = m["load_ohm"]
            kw["load_ohm"] = None if (isinstance(lo, str) and lo.strip().lower()
                                      in ("", "none", "open")) \
                else num("load_ohm", lo, lo=MIN_OHM, hi=MAX_OHM, reader=ohm)
    with collect():
        if "source_ohm" in m:
            kw["source_ohm"] = num("source_ohm", m["source_ohm"], lo=0, hi=MAX_OHM, reader=ohm)
    with collect():
        if "mid_hz" in m:
            kw["mid_hz"] = num("mid_hz", m["mid_hz"], lo=1e-3, hi=100e9, reader=hz)
    with collect():
        if "gain_db" in m and "gain" in m:
            raise err("gain", "give either gain_db or gain, not both")
        if "gain_db" in m and not no_limit(m["gain_db"]):
            db = num("gain_db", m["gain_db"], lo=-100, hi=200)
            kw["gain"] = 10.0 ** (db / 20.0)
        if "gain" in m and not no_limit(m["gain"]):
            kw["gain"] = num("gain", m["gain"], lo=0, lo_open=True, hi=1e9)
    with collect():
        if "gain_tol_db" in m:
            kw["gain_tol_db"] = num("gain_tol_db", m["gain_tol_db"], lo=0, lo_open=True, hi=60)
    for key in ("f_low_max_hz", "f_high_min_hz"):
        with collect():
            if key in m:
                kw[key] = num(key, m[key], lo=0, lo_open=True, hi=100e9, reader=hz)
    with collect():
        if "zin_min_ohm" in m:
            kw["zin_min_ohm"] = num("zin_min_ohm", m["zin_min_ohm"], lo=0, lo_open=True,
                                    hi=MAX_OHM, reader=ohm)
    with collect():
        if "ic_drift_max_pct" in m:
            kw["ic_drift_max_pct"] = num("ic_drift_max_pct", m["ic_drift_max_pct"], lo=0,
                                         lo_open=True, hi=1000)
    with collect():
        if "temp_c" in m:
            t = m["temp_c"]
            if isinstance(t, (int, float)) and not isinstance(t, bool):
                t = [t, t]
            if not isinstance(t, list) or len(t) != 2:
                raise err("temp_c", f"expected two temperatures [low, high] in °C, got {t!r}")
            a = num("temp_c", t[0], lo=-60, hi=150)
            b = num("temp_c", t[1], lo=-60, hi=150)
            if a > b:
                raise err("temp_c", f"the low end {a:g} °C is above the high end {b:g} °C")
            kw["temp_c"] = (a, b)
    with collect():
        if "input_vpk" in m:
            kw["input_vpk"] = num("input_vpk", m["input_vpk"], lo=0, lo_open=True,
                                  hi=kw.get("supply_v", MAX_SUPPLY_V), reader=volt)
    assumed = []
    if ("gain_db" not in m and "gain" not in m and default_gain
            and isinstance(kw.get("topology"), str) and kw.get("topology") in DEFAULT_GAIN_DB):
        kw["gain"] = 10.0 ** (DEFAULT_GAIN_DB[kw["topology"]] / 20.0)
        assumed.append("gain_db")
    for key, lo, hi, reader in (("thd_max_pct", 0, 100, None), ("ic_min_a", 0, 1.0, amp)):
        with collect():
            if key not in m:
                kw[key] = DEFAULTS[key]
                assumed.append(key)
            elif no_limit(m[key]):
                kw[key] = None
            else:
                kw[key] = num(key, m[key], lo=lo, lo_open=True, hi=hi, reader=reader)
    with collect():
        if "builds" in m:
            kw["builds"] = num("builds", m["builds"], lo=1, hi=1e6, integer=True)
    with collect():
        if "transistor" in m:
            tr = m["transistor"]
            if isinstance(tr, str):
                if not tr.strip():
                    raise err("transistor", "empty transistor label")
                kw["transistor"] = tr.strip()
            elif isinstance(tr, dict) and "transistor" in extra_keys:
                kw["transistor"] = "inline"
            else:
                raise err("transistor", f"expected a stock label or \"any\", got {tr!r}")
    for key in ("allow_combos", "mains"):
        with collect():
            if key in m:
                if not isinstance(m[key], bool):
                    raise err(key, f"expected true or false, got {m[key]!r}")
                kw[key] = m[key]
    with collect():
        if "min_yield_pct" in m:
            kw["min_yield_pct"] = num("min_yield_pct", m["min_yield_pct"], lo=0, hi=100)
    with collect():
        if "yield_samples" in m:
            kw["yield_samples"] = num("yield_samples", m["yield_samples"], lo=1, hi=1e7,
                                      integer=True)
    with collect():
        if "seed" in m:
            kw["seed"] = num("seed", m["seed"], lo=0, hi=2**63 - 1, integer=True)
    problems.raise_any()
    return Request(**kw, assumed=tuple(assumed))


def read_toml(path) -> tuple[dict, str]:
    """Parse a TOML file; a syntax error becomes an InputError with file and line."""
    import re
    import tomllib
    from pathlib import Path

    from inventory.errors import InputError

    p = Path(path)
    try:
        text = p.read_text(encoding="utf-8-sig")      # a leading BOM is dropped
    except OSError as e:
        raise InputError(f"cannot read the file: {e.strerror or e}", file=str(path)) from None
    except UnicodeDecodeError as e:
        data = p.read_bytes()
        line = data.count(b"\n", 0, e.start) + 1
        raise InputError(f"not UTF-8 text (byte 0x{data[e.start]:02x}); save the file as UTF-8",
                         file=str(path), line=line) from None
    try:
        return tomllib.loads(text), text
    except tomllib.TOMLDecodeError as e:
        msg = str(e)
        m = re.search(r"line (\d+)", msg)
        raise InputError(f"not valid TOML: {msg}", file=str(path),
                         line=int(m[1]) if m else None) from None


def load_request(path, *, chains: bool = False) -> Request:
    """Read and check a request file (TOML).  With ``chains`` (``design``) the topology
    may also be two stages or a cascode, read as for ``analyse``; which of them the
    search designs is the search's to say."""
    from inventory.errors import InputError

    mapping, text = read_toml(path)
    topo = mapping.get("topology")
    pairs = chains and (isinstance(topo, list) or (isinstance(topo, str)
                                                   and topo.strip().lower() == PAIR_TOPOLOGY))
    if isinstance(mapping.get("transistor"), dict):
        raise InputError("a [transistor] table describes one given transistor (for `analyse`); "
                         "a request picks from stock: write transistor = \"LABEL\" or leave "
                         "it out for any", file=str(path), line=_header_line(text, "transistor"),
                         field="transistor")
    return parse_request(mapping, file=str(path), text=text,
                         extra_keys=CIRCUIT_KEYS + ("transistor",), pairs=pairs)
