"""From a stock snapshot to the values each role may take, and back to stock rows.

The search works on *values*: a role's options are the distinct values the
drawer can supply for it.  One value may be made in several ways
(:class:`Recipe`): one piece, or, with ``allow_combos``, two resistors joined in
series or in parallel.  Each piece of a recipe is drawn from one stock row of
its value whose rating suffices; several rows of the same kind and value are
interchangeable.  :meth:`StockOptions.allocate` turns a set of role values back
into stock rows, counting every piece against stock across all roles and all
``builds`` copies (a value used by two roles needs two pieces per copy).

Units: ohm, farad, watt, volt.  Dissipation shares are fractions of the role's
total dissipation taken by one piece: ``R_i/(R_a+R_b)`` in series,
``R_other/(R_a+R_b)`` in parallel, 1 for a single piece.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace
from itertools import combinations_with_replacement

import numpy as np

from inventory.parts import Capacitor, Resistor, StockSnapshot
from inventory.values import format_value
from optimiser.design import Piece, RolePick

__all__ = [
    "RESISTOR_DERATING",
    "CAPACITOR_DERATING",
    "LAST_PIECES_PENALTY",
    "Recipe",
    "RoleOptions",
    "Allocation",
    "StockOptions",
    "value_key",
]

#: A resistor piece may dissipate at most this share of its rating (docs/model.md,
#: "Validity"; common practice).
RESISTOR_DERATING = 0.5
#: A capacitor's |DC voltage| may be at most this share of its rating.
CAPACITOR_DERATING = 0.8
#: Score penalty for each stock row a design empties (see docs/search.md).
LAST_PIECES_PENALTY = 0.25


def value_key(value: float) -> float:
    """A float key for value equality (9 significant figures)."""
    return float(f"{float(value):.9g}")


@dataclass(frozen=True)
class Recipe:
    """One way to make a role's value.

    ``parts`` are the piece values (one, or two for a joined pair), ``joined``
    is ``None``, ``"series"`` or ``"parallel"`` and ``shares`` the share of the
    role's dissipation each piece takes.
    """

    value: float
    parts: tuple[float, ...]
    joined: str | None = None
    shares: tuple[float, ...] = (1.0,)


@dataclass
class RoleOptions:
    """The distinct values of one kind the drawer can supply, sorted ascending.

    ``best_rating[i]`` is the most permissive rating any recipe of
    ``values[i]`` offers: for resistors the largest role dissipation (W) the
    pieces allow at full rating, ``min_i(rating_i / share_i)``; for capacitors
    the largest voltage rating (V).  The search evaluates with it; the
    allocation later picks rows whose ratings suffice for the real stress.
    """

    kind: str
    values: np.ndarray
    recipes: list[tuple[Recipe, ...]]
    best_rating: np.ndarray

    def __len__(self) -> int:
        return int(self.values.size)

    def index(self, value: float) -> int:
        i = int(np.searchsorted(self.values, value))
        for j in (i, i - 1, i + 1):
            if 0 <= j < self.values.size and value_key(self.values[j]) == value_key(value):
                return j
        raise KeyError(value)


@dataclass
class Allocation:
    """Stock rows chosen for every role of one design."""

    picks: dict[str, RolePick]
    used: dict[int, int]             # row index -> pieces per copy
    emptied: int                     # rows (resistor/transistor, real) emptied
    emptied_caps: int                # capacitor rows emptied (not scored)
    joined: int                      # roles made of two pieces
    ratings: dict[str, dict[str, float]] = field(default_factory=dict)


class StockOptions:
    """Per-kind value options of a snapshot for ``builds`` copies.

    Parameters
    ----------
    snapshot : StockSnapshot
    builds : int
        Identical copies to build; a row must hold ``count × builds`` pieces.
    allow_combos : bool
        Add two stock resistors in series or parallel as one value.
    """

    def __init__(self, snapshot: StockSnapshot, builds: int = 1, allow_combos: bool = False):
        self.snapshot = snapshot
        self.builds = int(builds)
        self.allow_combos = bool(allow_combos)
        self.rows: list[Resistor | Capacitor] = [*snapshot.resistors, *snapshot.capacitors]
        self._by_value: dict[tuple[str, float], list[int]] = {}
        for i, r in enumerate(self.rows):
            if r.qty <= 0 or not (r.value > 0):
                continue
            self._by_value.setdefault((r.kind, value_key(r.value)), []).append(i)
        for rows in self._by_value.values():
            rows.sort(key=lambda i: (-self._rating(self.rows[i]), -self.rows[i].qty))
        self.resistor = self._options("resistor")
        self.capacitor = self._options("capacitor")

    # -- helpers ---------------------------------------------------------
    @staticmethod
    def _rating(row) -> float:
        return float(row.power_w if row.kind == "resistor" else row.voltage_v)

    def rows_of(self, kind: str, value: float) -> list[int]:
        return self._by_value.get((kind, value_key(value)), [])

    def _best_single_rating(self, kind: str, value: float, pieces: int = 1) -> float:
        """Best rating of a row that can give ``pieces`` pieces per copy (0 if none)."""
        best = 0.0
        for i in self.rows_of(kind, value):
            if self.rows[i].qty >= pieces * self.builds:
                best = max(best, self._rating(self.rows[i]))
        return best

    def _options(self, kind: str) -> RoleOptions:
        singles = sorted({v for (k, v) in self._by_value if k == kind})
        table: dict[float, list[tuple[Recipe, float]]] = {}
        for v in singles:
            r = self._best_single_rating(kind, v)
            if r > 0:
                table.setdefault(v, []).append((Recipe(v, (v,)), r))
        if kind == "resistor" and self.allow_combos:
            avail = [v for v in singles if self._best_single_rating(kind, v) > 0
                     or self._pair_rows_ok(v)]
            for a, b in combinations_with_replacement(avail, 2):
                if a == b and not self._pair_rows_ok(a):
                    continue
                if a != b and (self._best_single_rating(kind, a) <= 0
                               or self._best_single_rating(kind, b) <= 0):
                    continue
                ra = self._pair_rating(a) if a == b else self._best_single_rating(kind, a)
                rb = ra if a == b else self._best_single_rating(kind, b)
                s = a + b
                ser = Recipe(value_key(s), (a, b), "series", (a / s, b / s))
                par = Recipe(value_key(a * b / s), (a, b), "parallel", (b / s, a / s))
                for rec in (ser, par):
                    eff = min(ra / rec.shares[0], rb / rec.shares[1])
                    table.setdefault(rec.value, []).append((rec, eff))
        values = np.array(sorted(table), dtype=float)
        recipes = [tuple(rec for rec, _ in sorted(table[v], key=lambda t: (t[0].joined is not None, -t[1])))
                   for v in values]
        best = np.array([max(r for _, r in table[v]) for v in values], dtype=float)
        return RoleOptions(kind, values, recipes, best)

    def _pair_rows_ok(self, v: float) -> bool:
        """Two equal pieces per copy: one row with 2·builds or two rows with builds each."""
        rows = self.rows_of("resistor", v)
        big = [i for i in rows if self.rows[i].qty >= 2 * self.builds]
        ok = [i for i in rows if self.rows[i].qty >= self.builds]
        return bool(big) or len(ok) >= 2

    def _pair_rating(self, v: float) -> float:
        rows = self.rows_of("resistor", v)
        best = 0.0
        for i in rows:
            if self.rows[i].qty >= 2 * self.builds:
                best = max(best, self._rating(self.rows[i]))
        ok = sorted((self._rating(self.rows[i]) for i in rows
                     if self.rows[i].qty >= self.builds), reverse=True)
        if len(ok) >= 2:
            best = max(best, ok[1])
        return best

    # -- allocation ------------------------------------------------------
    def allocate(self, roles: dict[str, tuple[str, float, float]],
                 extra_used: dict[int, int] | None = None) -> Allocation | None:
        """Choose stock rows for every role, or ``None`` when stock cannot supply them.

        Parameters
        ----------
        roles : dict
            role -> (kind, value, stress): ``stress`` is the role's DC
            dissipation in W (resistors) or |DC voltage| in V (capacitors).
        extra_used : dict, optional
            Row index -> pieces per copy already taken (not used here; for callers).

        Returns
        -------
        Allocation or None
            Among all ways that fit stock and ratings, the one emptying the
            fewest real resistor rows, then fewest capacitor rows, then with the
            fewest joined pairs.
        """
        order = sorted(roles)
        choices: list[list[tuple[Recipe, tuple[int, ...]]]] = []
        for role in order:
            kind, value, stress = roles[role]
            opts = self.resistor if kind == "resistor" else self.capacitor
            try:
                recs = opts.recipes[opts.index(value)]
            except KeyError:
                return None
            alts = []
            for rec in recs:
                cand = []
                for part, share in zip(rec.parts, rec.shares, strict=False):
                    rows = [i for i in self.rows_of(kind, part)
                            if self._stress_ok(self.rows[i], stress, share)]
                    cand.append(rows)
                if len(rec.parts) == 1:
                    alts += [(rec, (i,)) for i in cand[0]]
                else:
                    alts += [(rec, (i, j)) for i in cand[0] for j in cand[1]
                             if not (rec.parts[0] == rec.parts[1] and j < i)]
            if not alts:
                return None
            # try single pieces first, then the fullest rows, then the lowest rating
            # that suffices: higher-rated and scarce rows stay free for where they
            # are needed (and the first allocation of least cost is the one kept)
            alts.sort(key=lambda a: (a[0].joined is not None,
                                     -min(self.rows[i].qty for i in a[1]),
                                     sum(self._rating(self.rows[i]) for i in a[1])))
            choices.append(alts)

        best: list = [None, None]
        used: dict[int, int] = dict(extra_used or {})

        def cost() -> tuple[int, int]:
            er = ec = 0
            for i, c in used.items():
                row = self.rows[i]
                if c > 0 and row.qty - c * self.builds <= 0 and (row.id is None or row.id >= 0):
                    if row.kind == "resistor":
                        er += 1
                    else:
                        ec += 1
            return er, ec

        def dfs(k: int, picked: list, joined: int) -> None:
            if k == len(order):
                key = (*cost(), joined)
                if best[0] is None or key < best[0]:
                    best[0] = key
                    best[1] = list(picked)
                return
            for rec, rows in choices[k]:
                ok = True
                for i in rows:
                    used[i] = used.get(i, 0) + 1
                    if used[i] * self.builds > self.rows[i].qty:
                        ok = False
                if ok:
                    picked.append((rec, rows))
                    dfs(k + 1, picked, joined + (rec.joined is not None))
                    picked.pop()
                for i in rows:
                    used[i] -= 1
                if best[0] == (0, 0, 0):
                    return

        dfs(0, [], 0)
        if best[1] is None:
            return None
        used = {}
        picks: dict[str, RolePick] = {}
        ratings: dict[str, dict[str, float]] = {}
        for role, (rec, rows) in zip(order, best[1], strict=False):
            kind = roles[role][0]
            counts: dict[int, int] = {}
            for i in rows:
                counts[i] = counts.get(i, 0) + 1
                used[i] = used.get(i, 0) + 1
            stress = roles[role][2]
            need: dict[int, float] = {}
            for i, sh in zip(rows, rec.shares, strict=False):
                n = (sh * stress / RESISTOR_DERATING if kind == "resistor"
                     else abs(stress) / CAPACITOR_DERATING)
                need[i] = max(need.get(i, 0.0), float(n))
            pieces = tuple(replace(self._piece(i, c), need=need[i]) for i, c in counts.items())
            picks[role] = RolePick(role, rec.value, format_value(rec.value, kind), pieces, rec.joined)
            if kind == "resistor":
                eff = min(self._rating(self.rows[i]) / s for i, s in zip(rows, rec.shares, strict=False))
                share = max(rec.shares)
                ratings[role] = {"power_w": eff * share, "power_share": share}
            else:
                r = self.rows[rows[0]]
                ratings[role] = {"voltage_v": float(r.voltage_v), "polarised": bool(r.polarised)}
        er, ec, j = best[0]
        return Allocation(picks, used, er, ec, j, ratings)

    @staticmethod
    def _stress_ok(row, stress: float, share: float) -> bool:
        if row.kind == "resistor":
            return share * stress <= RESISTOR_DERATING * float(row.power_w) * (1 + 1e-9)
        return abs(stress) <= CAPACITOR_DERATING * float(row.voltage_v) * (1 + 1e-9)

    def _piece(self, i: int, count: int) -> Piece:
        r = self.rows[i]
        if r.kind == "resistor":
            return Piece(r.value, count, r.id, r.location, "resistor", r.tolerance, r.power_w)
        return Piece(r.value, count, r.id, r.location, "capacitor", r.tolerance, r.voltage_v,
                     r.dielectric)
