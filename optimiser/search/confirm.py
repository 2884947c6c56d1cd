"""Confirmation of survivors by the full engine (:func:`optimiser.evaluate.evaluate`):
capacitor choice at the leaves, stock rows allocated with the ratings of the very
pieces, the large-signal figures of the ranked designs."""

from __future__ import annotations

import itertools
import math
from dataclasses import replace

import numpy as np

from inventory.parts import StockSnapshot
from optimiser import ac
from optimiser.dc import operating_point
from optimiser.design import Design
from optimiser.device import device_from_transistor
from optimiser.evaluate import evaluate
from optimiser.options import CAPACITOR_DERATING, StockOptions
from optimiser.request import Request
from optimiser.score import score_gain_target, score_terms
from optimiser.search.limits import gain_window
from optimiser.search.miss_pool import MissPool, miss_rank
from optimiser.search.skeletons import Skeletons, cap_roles, resistor_roles
from optimiser.search.stock import _alloc_caps, _ratings_best, _stresses
from optimiser.stage import PartRatings, StageBatch

#: Skeletons confirmed by one call of the engine: more vectorise better, fewer
#: confirm less beyond the score a design of the same batch would have set to beat.
CONFIRM_BATCH = 12
#: Capacitor combinations evaluated at once for one skeleton; beyond it an even
#: sample of this many is tried first (``stats["cap_enum_truncated"]`` counts it) and
#: the rest only when none of the sample meets the request: the capacitors picked
#: may then not be the smallest adequate ones (the score does not depend on them),
#: but a skeleton is never dropped while some combination would meet the request.
CAP_ENUM_LIMIT = 4096


def _evaluate(request, batch, t, ratings=None, *, band_edges=True, large_signal=True,
              corner_gain=False):
    return evaluate(request, batch, t, ratings, band_edges=band_edges, large_signal=large_signal,
                    corner_gain=corner_gain)


def _cap_free_ok(ev) -> np.ndarray:
    """Skeleton-pass checks that no choice of capacitors can change.

    Validity (operating point, corners, transistor limits, resistor derating
    at the best ratings in stock), the drift and least-current targets and a
    missing ft/cob.
    """
    fails = ev.target_fail()
    ok = np.asarray(ev.valid, dtype=bool).copy()
    for key in ("ic_drift_pct", "ic_a", "f_high_hz"):   # f_high here only: "transistor lacks ft/cob"
        if key in fails:
            ok &= ~np.asarray(fails[key], dtype=bool)
    return ok


def _large_signal(request: Request, snapshot: StockSnapshot, designs: list[Design]) -> None:
    """THD, swing and the clipping warning of the ranked designs, in place.

    Distortion and swing do not enter the score; THD is a target only with
    ``thd_max_pct`` (then it was computed while confirming, without the swing);
    what is missing is computed here, once, for the designs returned.
    """
    def missing(v) -> bool:
        return v is None or (isinstance(v, float) and math.isnan(v))

    need = [d for d in designs
            if missing(d.metrics.get("thd_pct")) or missing(d.metrics.get("swing_vpk"))]
    groups: dict[str, list[Design]] = {}
    for d in need:
        groups.setdefault(d.transistor, []).append(d)
    for label, ds in groups.items():
        t = snapshot.transistor(label)
        roles = sorted({r for d in ds for r in d.values()})
        vals = {r: np.array([d.values().get(r, 0.0) for d in ds]) for r in roles}
        ev = _evaluate(request, StageBatch.from_values(ds[0].topology, **vals), t, None,
                       band_edges=False, large_signal=True)
        for j, d in enumerate(ds):
            m = ev.metrics_of(j)
            d.metrics["thd_pct"], d.metrics["swing_vpk"] = m.get("thd_pct"), m.get("swing_vpk")
            d.warnings += [r.text(j) for r in ev.rules
                           if r.key == "clipping" and bool(r.fail[j])]


#: Targets a different choice of capacitors may still meet (the others fail for
#: every choice once they fail with the largest capacitors in stock).
UP_KEYS = {"f_low_hz", "f_high_hz", "flat_passband", "gain"}


def _cap_targets(request, sk: Skeletons, li: np.ndarray, rows: list[dict], croles) -> np.ndarray:
    """First-order estimate of the smallest capacitance of each role (F), shape (k, roles).

    Each capacitor gets an equal share of the lower band edge: its own corner
    at f_low_max/len(roles) (or mid_hz/(10·len(roles)) without a target), seen
    through the resistance around it at the skeleton's operating point.
    """
    nr = len(croles)
    f = (request.f_low_max_hz if request.f_low_max_hz else request.mid_hz / 10.0) / nr
    w = 2 * math.pi * f
    rs = float(request.source_ohm or 0.0)
    rl = float(request.load_ohm) if request.load_ohm else math.inf
    out = np.zeros((len(rows), nr))
    for a, (i, m) in enumerate(zip(li, rows, strict=False)):
        r1, r2, rc, re, byp = (float(getattr(sk, k)[i]) for k in ("R1", "R2", "RC", "RE", "RE_BYP"))
        ic = max(m["ic_a"], 1e-12)
        re_small = 0.02585 / ic
        beta = float(sk.transistor.beta_nominal)
        rth = r1 * r2 / (r1 + r2)
        for k, role in enumerate(croles):
            if role == "C_IN":
                r = rs + max(m["zin_ohm"], 1.0)
            elif role == "C_OUT":
                r = (max(m["zout_ohm"], 1.0) + rl) if math.isfinite(rl) else math.inf
            elif role == "C_BYP":
                rsx = rth * rs / (rth + rs) if rs > 0 else 0.0
                seen = re + re_small + rsx / (beta + 1)
                r = byp * seen / (byp + seen)
            else:  # C_B
                r = rth * ((beta + 1) * (re_small + (re * rs / (re + rs) if rs > 0 else 0.0))) / (
                    rth + (beta + 1) * (re_small + (re * rs / (re + rs) if rs > 0 else 0.0)))
            out[a, k] = 0.0 if not math.isfinite(r) else 1.0 / (w * max(r, 1e-3))
    return out


def _pick_at_least(values: np.ndarray, allowed: np.ndarray, need: float) -> int:
    """Index of the smallest allowed value ≥ need, else the largest allowed."""
    ok = allowed & (values >= need * (1 - 1e-9))
    idx = np.flatnonzero(ok)
    if idx.size:
        return int(idx[0])
    return int(np.flatnonzero(allowed)[-1])


def _confirm_group(request, opts: StockOptions, sk: Skeletons, entries, stats, pool):
    """Full evaluation of skeletons of one transistor and form; returns the designs found."""
    V = float(request.supply_v)
    croles = cap_roles(sk.topology, sk.form)
    cv = opts.capacitor.values
    t = sk.transistor
    t_empty = int(t.qty - request.builds <= 0 and (t.id is None or t.id >= 0))
    li_all, rows, allocs, allowed, st_all = [], [], [], [], []
    for _lb2, _, _, i, row in entries:
        st = _stresses(sk, i, {k: [v] for k, v in row.items()}, 0, V, request.unrated_caps)
        rroles = resistor_roles(sk.topology, sk.form, float(sk.RC[i]))
        alloc = opts.allocate({r: ("resistor", float(getattr(sk, r)[i]), st[r]) for r in rroles})
        if alloc is None:
            stats["pruned"]["stock_or_rating"] = stats["pruned"].get("stock_or_rating", 0) + 1
            continue
        al = np.array([opts.capacitor.best_rating * CAPACITOR_DERATING >= st[c] * (1 - 1e-9)
                       for c in croles]).reshape(len(croles), cv.size)
        if not al.any(axis=1).all():
            stats["pruned"]["capacitor_rating"] = stats["pruned"].get("capacitor_rating", 0) + 1
            continue
        li_all.append(i)
        rows.append(row)
        allocs.append(alloc)
        allowed.append(al)
        st_all.append(st)
    if not li_all:
        return []
    stats["confirmed_skeletons"] = stats.get("confirmed_skeletons", 0) + len(li_all)
    li = np.array(li_all)
    part = sk.take(li)
    need = _cap_targets(request, sk, li, rows, croles)
    k_n = len(li)
    vec = np.array([[_pick_at_least(cv, allowed[a][k], need[a, k]) for k in range(len(croles))]
                    for a in range(k_n)])
    top_vec = np.array([[int(np.flatnonzero(allowed[a][k])[-1]) for k in range(len(croles))]
                        for a in range(k_n)])
    accepted: dict[int, tuple] = {}
    first: dict[int, object] = {}
    pending = _top_screen(request, opts, part, croles, need, top_vec, stats)
    for rnd in range(4):
        if pending.size == 0:
            break
        if rnd == 3:
            vec[pending] = top_vec[pending]
        elif rnd > 0:
            for a in pending:
                for k in range(len(croles)):
                    vec[a, k] = _pick_at_least(cv, allowed[a][k], cv[vec[a, k]] * 4.0 * (1 + 1e-9))
        ev = _eval_vectors(request, opts, part.take(pending), croles, vec[pending],
                           large_signal=("thd" if rnd == 0 and request.thd_max_pct is not None
                                         else False))
        stats["full_evaluations"] = stats.get("full_evaluations", 0) + pending.size
        still = []
        for j, a in enumerate(pending):
            if rnd == 0:
                first[a] = ev.take(np.array([j]))
                fk = set(ev.failed_keys(j))
                if "thd_pct" in fk:         # (what starts the THD check of the skeletons)
                    stats["pruned"]["thd_confirm"] = stats["pruned"].get("thd_confirm", 0) + 1
                if fk - UP_KEYS - {"zin_ohm"}:
                    _pool_design(request, opts, sk, li[a], rows[a], allocs[a], vec[a], st_all[a],
                                 first[a], croles, t_empty, pool)
                    continue            # fails on something capacitors cannot change
            if bool(ev.meets[j]):
                calloc = _alloc_caps(opts, croles, vec[a], st_all[a])
                if calloc is not None:
                    accepted[a] = (vec[a].copy(), ev.take(np.array([j])), calloc)
                    continue
            if rnd == 3 and not bool(ev.meets[j]):
                _pool_design(request, opts, sk, li[a], rows[a], allocs[a], vec[a], st_all[a],
                             ev.take(np.array([j])), croles, t_empty, pool)
                if not _cap_helpable(ev, j, request):
                    continue
            still.append(a)
        pending = np.array(still, dtype=int)
        if rnd == 3:
            break
    # the rest: every allowed combination the stock can supply, after a screen
    keep = _screen_caps(request, opts, part, list(pending), croles, allowed, stats)
    for a in pending:
        if keep[a] is None:
            continue
        got = _enumerate_caps(request, opts, part.take(np.array([a])), croles, keep[a],
                              st_all[a], stats)
        if got is not None:
            accepted[a] = got
    if not accepted:
        return []
    # final check with the ratings of the very pieces chosen
    keys = list(accepted)
    vecs = np.array([accepted[a][0] for a in keys])
    fin_part = part.take(np.array(keys))
    caps = {r: cv[vecs[:, k]] for k, r in enumerate(croles)}
    ratings = PartRatings(power_w={}, power_share={}, voltage_v={}, polarised={})
    for role in ("R1", "R2", "RC", "RE", "RE_BYP") + tuple(croles):
        vals = []
        for a in keys:
            rr = {**allocs[a].ratings, **accepted[a][2].ratings}.get(role)
            vals.append(rr)
        if all(v is None for v in vals):
            continue
        if role.startswith("C_"):
            ratings.voltage_v[role] = np.array([v["voltage_v"] for v in vals])
            ratings.polarised[role] = np.array([v["polarised"] for v in vals])
        else:
            ratings.power_w[role] = np.array([v["power_w"] if v else np.inf for v in vals])
            ratings.power_share[role] = np.array([v["power_share"] if v else 1.0 for v in vals])
    evf = _evaluate(request, fin_part.batch(caps), t, ratings, band_edges=True,
                    large_signal=False)
    stats["full_evaluations"] = stats.get("full_evaluations", 0) + len(keys)
    out = []
    for j, a in enumerate(keys):
        if not bool(evf.meets[j]):
            stats["pruned"]["final_check"] = stats["pruned"].get("final_check", 0) + 1
            continue
        out.append(_make_design(request, sk, int(li[a]), rows[a], allocs[a], accepted[a][2],
                                evf.take(np.array([j])), first.get(a), croles, t_empty))
    return out


def f_low_missed(request: Request, batch: StageBatch, transistor) -> np.ndarray:
    """True where the engine's f_low of these stages lies above ``f_low_max_hz``; (n,) bool.

    The engine's own figure (:func:`optimiser.ac.band_edges` against the midband gain,
    at the nominal operating point, as :func:`optimiser.evaluate.evaluate` takes it),
    without the upper edge, the corners and the rules.  The engine takes as f_low a
    root between the largest grid point below mid_hz where |H| is under
    |H(mid)|·10^(−EDGE_DB/20) and the next one; so where some grid point above
    f_low_max_hz (and below mid_hz) is under that line, f_low lies above it, and
    only the stages this leaves open get the full edge search.
    """
    model = device_from_transistor(transistor)
    lim = float(request.f_low_max_hz)

    def solve(b):
        op = operating_point(b.topology, request.supply_v, b, model)
        ss = ac.small_signal(op, model)
        h_mid = np.abs(ac.midband(request, b, model, op, ss, want_zout=False)["h"])
        return op, ss, h_mid

    op, ss, h_mid = solve(batch)
    grid = ac.edge_grid(request.mid_hz)
    pts = grid[(grid > lim * (1 + 1e-9)) & (grid < request.mid_hz)]
    missed = np.zeros(batch.n, dtype=bool)
    if pts.size:
        h = np.abs(ac.frequency_response(request, batch, model, op, pts, ss))
        missed = (h < (h_mid * 10.0 ** (-ac.EDGE_DB / 20.0))[None, :]).any(axis=0)
    rest = np.flatnonzero(~missed)
    if rest.size:
        sub = batch.take(rest)
        op, ss, h_mid = solve(sub)
        f_low, _, _ = ac.band_edges(request, sub, model, op, h_mid, ss, want_high=False)
        missed[rest] = np.isfinite(f_low) & (f_low > lim)
    return missed


#: Skeletons the confirmation's screen (:func:`_top_screen`) must have dropped before
#: every later skeleton of the search is screened the same way ahead of its quick
#: evaluation (:func:`f_low_prescreen`): where f_low_max is not what stops them, the
#: screen would only add its cost.  Either way the screen is exact (A1).
PRESCREEN_AFTER = 10


def prescreen_active(request, stats) -> bool:
    """Whether :func:`f_low_prescreen` is in effect in this search: f_low_max_hz is
    set and the confirmation's screen has dropped :data:`PRESCREEN_AFTER` skeletons."""
    return (request.f_low_max_hz is not None
            and stats["pruned"].get("f_low_largest_caps", 0) >= PRESCREEN_AFTER)


def f_low_prescreen(request, opts, part: Skeletons, stats) -> np.ndarray:
    """Mask of the skeletons ``part`` to keep: while :func:`prescreen_active`, each
    skeleton is checked before its quick evaluation with every capacitor at the
    largest value in stock (rating aside: a larger capacitor never raises f_low,
    A1) by :func:`f_low_missed`; those that miss are dropped."""
    keep = np.ones(part.n, dtype=bool)
    if part.n == 0 or opts.capacitor.values.size == 0 or not prescreen_active(request, stats):
        return keep
    c_max = float(np.max(opts.capacitor.values))
    caps = {r: np.full(part.n, c_max) for r in cap_roles(part.topology, part.form)}
    missed = f_low_missed(request, part.batch(caps), part.transistor)
    stats["pruned"]["f_low_largest_caps"] = (stats["pruned"].get("f_low_largest_caps", 0)
                                            + int(missed.sum()))
    return ~missed


def backlog_mask(picks, keep_of) -> np.ndarray:
    """Mask of the queued skeletons ``picks`` ((Skeletons, index) pairs) to keep:
    ``keep_of(part)`` (a mask) on each skeleton set's picks taken together, one call
    per set."""
    keep = np.ones(len(picks), dtype=bool)
    by: dict[int, list[int]] = {}
    for k, (sk, _) in enumerate(picks):
        by.setdefault(id(sk), []).append(k)
    for ks in by.values():
        sk = picks[ks[0]][0]
        keep[ks] = keep_of(sk.take(np.array([picks[k][1] for k in ks])))
    return keep


def prescreen_backlog(request, opts, picks, stats) -> np.ndarray:
    """Mask of the queued skeletons ``picks`` (queued before :func:`f_low_prescreen`
    took effect) to keep."""
    return backlog_mask(picks, lambda part: f_low_prescreen(request, opts, part, stats))


def _top_screen(request, opts, part: Skeletons, croles, need, top_vec, stats):
    """The skeletons worth the rounds of capacitor choice: with f_low_max_hz, those
    whose first-order estimate asks more than the largest capacitor allowed in
    some role are first checked with every capacitor at its largest allowed value
    (:func:`f_low_missed`); by assumption A1 a skeleton that misses f_low_max there
    misses it with every choice, and is dropped without the rounds."""
    k_n = part.n
    if request.f_low_max_hz is None or k_n == 0:
        return np.arange(k_n)
    cv = opts.capacitor.values
    short = np.flatnonzero((need > cv[top_vec] * (1 + 1e-9)).any(axis=1))
    if short.size == 0:
        return np.arange(k_n)
    caps = {r: cv[top_vec[short, k]] for k, r in enumerate(croles)}
    missed = f_low_missed(request, part.take(short).batch(caps), part.transistor)
    drop = set(short[missed].tolist())
    stats["f_low_screened"] = stats.get("f_low_screened", 0) + short.size
    stats["pruned"]["f_low_largest_caps"] = (stats["pruned"].get("f_low_largest_caps", 0)
                                            + len(drop))
    return np.array([a for a in range(k_n) if a not in drop], dtype=int)


def _pool_design(request, opts, sk, i, row, alloc, vec, st, ev_one, croles, t_empty,
                 pool: MissPool) -> None:
    """Offer a rejected skeleton with the capacitors it was evaluated with to ``pool``
    as a stock design: the nearest misses start from what the search itself saw.  Its
    verdict is the caller's to give again (:func:`optimiser.search.suggestions.explain`
    judges it)."""
    rank = miss_rank(request, ev_one, 0)
    if not pool.admits(rank):
        return
    calloc = _alloc_caps(opts, croles, vec, st)
    if calloc is None:
        return
    pool.add(rank, _make_design(request, sk, int(i), row, alloc, calloc, ev_one, None, croles,
                                t_empty))


def pool_quick_rejects(request, opts: StockOptions, sk: Skeletons, li, rows, ev, pool: MissPool
                       ) -> None:
    """Offer the skeletons ``sk[li]`` that failed their quick evaluation ``ev`` (rows of
    the search's figures ``rows``) to ``pool`` as stock designs: the resistors from the
    rows that bear their dissipation, every capacitor the largest in stock that bears
    its voltage.  Those the stock cannot supply so are left out."""
    V = float(request.supply_v)
    croles = cap_roles(sk.topology, sk.form)
    t = sk.transistor
    t_empty = int(t.qty - request.builds <= 0 and (t.id is None or t.id >= 0))
    cv = opts.capacitor.values
    for j, i in enumerate(li):
        rank = miss_rank(request, ev, j)
        if not pool.admits(rank) or not all(np.isfinite(ev.metrics[k][j])
                                            for k in ("vb_v", "ve_v", "vc_v")):
            continue
        st = _stresses(sk, int(i), ev.metrics, j, V, request.unrated_caps)
        alloc = opts.allocate({r: ("resistor", float(getattr(sk, r)[i]), st[r])
                               for r in resistor_roles(sk.topology, sk.form, float(sk.RC[i]))})
        if alloc is None:
            continue
        vec = []
        for c in croles:
            ok = np.flatnonzero(opts.capacitor.best_rating * CAPACITOR_DERATING
                                >= st[c] * (1 - 1e-9))
            if ok.size == 0:
                break
            vec.append(int(ok[-1]))
        if len(vec) != len(croles) or cv.size == 0:
            continue
        calloc = _alloc_caps(opts, croles, np.array(vec), st)
        if calloc is None:
            continue
        row = dict(rows[j])
        row.update({k: float(v[j]) for k, v in ev.metrics.items() if k not in row})
        one = ev.take(np.array([j]))
        pool.add(rank, _make_design(request, sk, int(i), row, alloc, calloc, one, None, croles,
                                    t_empty))


def _eval_vectors(request, opts, part: Skeletons, croles, vecs, large_signal=False):
    cv = opts.capacitor.values
    caps = {r: cv[vecs[:, k]] for k, r in enumerate(croles)}
    volt = {r: opts.capacitor.best_rating[vecs[:, k]] for k, r in enumerate(croles)}
    return _evaluate(request, part.batch(caps), part.transistor,
                     _ratings_best(part, opts, caps_voltage=volt), band_edges=True,
                     large_signal=large_signal)


def _cap_helpable(ev, j, request) -> bool:
    """Could smaller capacitors cure the failure of the largest set? (assumption A1)"""
    keys = set(ev.failed_keys(j))
    if not keys:
        return True          # the engine accepted it; only the stock could not supply it
    win = gain_window(request)
    if "gain" in keys and not (win is not None and float(ev.metrics["gain"][j]) > win[1]):
        return False
    return keys <= {"gain", "zin_ohm"}


def _screen_caps(request, opts, part: Skeletons, pending, croles, allowed, stats):
    """Per pending skeleton, the allowed capacitor indices per role worth combining
    (None: no combination can meet the request).  One engine call for them all.

    * f_low (assumption A1, a larger capacitor never raises f_low): a value whose
      stage misses f_low_max_hz with every other capacitor at its largest allowed
      value misses it in every combination.
    * Z_in (assumption A3, a smaller capacitor never lowers |Z_in|): when the
      smallest values left miss zin_min_ohm, every combination does.
    """
    idx = {a: [np.flatnonzero(x) for x in allowed[a]] for a in pending}
    live = [a for a in pending if all(i.size for i in idx[a])]
    out = {a: None for a in pending}
    if request.f_low_max_hz is not None and live:
        rows, vecs = [], []
        for a in live:
            top = np.array([i[-1] for i in idx[a]])
            for k, ik in enumerate(idx[a]):
                for v in ik:
                    x = top.copy()
                    x[k] = v
                    rows.append(a)
                    vecs.append(x)
        ev = _eval_vectors(request, opts, part.take(np.array(rows)), croles, np.array(vecs))
        stats["full_evaluations"] = stats.get("full_evaluations", 0) + len(rows)
        f_low = np.asarray(ev.metrics["f_low_hz"], dtype=float)
        ok = ~(f_low > request.f_low_max_hz * (1 + 1e-9))      # NaN (no edge found) stays
        at = 0
        for a in live:
            kept = []
            for ik in idx[a]:
                kept.append(ik[ok[at:at + ik.size]])
                at += ik.size
            idx[a] = kept
        live = [a for a in live if all(i.size for i in idx[a])]
    if request.zin_min_ohm is not None and live:
        low = np.array([[i[0] for i in idx[a]] for a in live])
        ev = _eval_vectors(request, opts, part.take(np.array(live)), croles, low)
        stats["full_evaluations"] = stats.get("full_evaluations", 0) + len(live)
        z = np.asarray(ev.metrics["zin_ohm"], dtype=float)
        live = [a for a, zz in zip(live, z, strict=True)
                if zz >= request.zin_min_ohm * (1 - 1e-9)]
    for a in live:
        out[a] = idx[a]
    return out


def _enumerate_caps(request, opts, one: Skeletons, croles, keep, st, stats):
    """The first combination, smallest capacitances first, that meets the request.

    Over CAP_ENUM_LIMIT combinations an even sample is tried first; when none of
    it meets the request the rest are tried too, in blocks of the same size, so
    that "no capacitors meet it" is only said of every combination.
    """
    combos = list(itertools.product(*[list(k) for k in keep]))
    combos = [c for c in combos if _alloc_caps(opts, croles, np.array(c), st) is not None]
    if not combos:
        return None
    if len(combos) > CAP_ENUM_LIMIT:
        stats["cap_enum_truncated"] = stats.get("cap_enum_truncated", 0) + 1
    for block in combination_blocks(len(combos), CAP_ENUM_LIMIT):
        found = _first_meeting(request, opts, one, croles, np.array([combos[j] for j in block]),
                               stats)
        if found is not None:
            v, ev_one = found
            return v, ev_one, _alloc_caps(opts, croles, v, st)
    return None


def combination_blocks(n: int, limit: int) -> list[list[int]]:
    """Indices 0..n-1 in blocks of at most ``limit``: an even sample first, then the
    rest in order; every index in exactly one block."""
    if n <= limit:
        return [list(range(n))]
    step = n / limit
    first = sorted({int(k * step) for k in range(limit)})
    taken = set(first)
    rest = [j for j in range(n) if j not in taken]
    return [first] + [rest[k:k + limit] for k in range(0, len(rest), limit)]


def _first_meeting(request, opts, one: Skeletons, croles, vecs, stats):
    """Of capacitor vectors ``vecs``, the one of least total log-capacitance that meets
    the request, with its evaluation; None when none does."""
    order = np.argsort(np.log(opts.capacitor.values[vecs]).sum(axis=1), kind="stable")
    vecs = vecs[order]
    rep = one.take(np.zeros(len(vecs), dtype=int))
    ev = _eval_vectors(request, opts, rep, croles, vecs)
    stats["full_evaluations"] = stats.get("full_evaluations", 0) + len(vecs)
    ok = np.flatnonzero(np.asarray(ev.meets))
    if ok.size == 0:
        return None
    return vecs[ok[0]], ev.take(np.array([ok[0]]))


def _make_design(request, sk: Skeletons, i: int, row: dict, alloc_r, alloc_c, evc, ev_first,
                 croles, t_empty: int) -> Design:
    t = sk.transistor
    picks = dict(alloc_r.picks)
    picks.update(alloc_c.picks)
    mm = evc.metrics_of(0)
    if ev_first is not None:       # distortion and swing do not depend on the capacitors
        for k in ("thd_pct", "swing_vpk"):
            mm[k] = ev_first.metrics_of(0).get(k)
    emptied = alloc_r.emptied + t_empty
    terms = score_terms(gain_inf_db=row["gain_inf_db"], target_db=score_gain_target(request)[0],
                        tol_db=score_gain_target(request)[1], drift_pct=row["drift_pct"],
                        hd2_pct=row["hd2_pct"], supply_a=row["supply_a"], emptied=emptied,
                        vce_v=row["vce_v"], supply_v=request.supply_v)
    sc = float(sum(float(v) for v in terms.values()))
    for role in croles:
        p = evc.plus.get(role)
        if p is not None and any(x.dielectric and x.dielectric.lower() in
                                 ("electrolytic", "tantalum", "polymer")
                                 for x in picks[role].pieces):
            picks[role] = replace(picks[role], plus=str(np.atleast_1d(p)[0]))
    order = [r for r in ("R1", "R2", "RC", "RE", "RE_BYP", "C_B", "C_BYP", "C_IN", "C_OUT")
             if r in picks]
    warnings = list(evc.warnings(0))
    if ev_first is not None:
        warnings += [w for w in ev_first.warnings(0) if w not in warnings]
    mm["gain_inf_db"] = row["gain_inf_db"]
    mm["supply_a"] = row["supply_a"]
    mm["hd2_pct"] = row["hd2_pct"]
    return Design(
        topology=sk.topology, transistor=t.label, parts={r: picks[r] for r in order},
        metrics=mm, meets_spec=True, violations=[], warnings=warnings, score=sc, form=sk.form,
        extra={"score_terms": {k: float(v) for k, v in terms.items()},
               "transistor_pick": {"id": t.id, "location": t.location, "count": 1}},
    )
