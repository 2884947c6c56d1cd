"""Every chain a tiny drawer can build (capacitor-coupled, or direct-coupled ce→cc: the
ce stage's roles, the follower's S2.RE and S2.C_OUT; or every cascode), evaluated by the
pair engine and scored: the plain enumeration the chain search is compared with."""

from __future__ import annotations

import itertools
from collections import Counter

import numpy as np

from optimiser.pair_evaluate import evaluate_pair
from optimiser.search.chain_score import chain_score_terms
from optimiser.stage import PartRatings
from optimiser.stages import pair_form
from optimiser.stages.pair import PairBatch

#: Each stage kind's resistor roles per form (RE_BYP with C_BYP, C_B for cb), written out
#: here rather than read from the search.
STAGE_FORMS = {
    "ce": [("RC", "RE"), ("RC", "RE_BYP"), ("RC", "RE", "RE_BYP")],
    "cb": [("RC", "RE")],
    "cc": [("RE",)],
}
CAPS = {"ce": ("C_IN",), "cb": ("C_IN", "C_B"), "cc": ("C_OUT",)}


def _stage_rows(kind, rvals, cvals, prefix):
    for form in STAGE_FORMS[kind]:
        roles = ("R1", "R2") + form
        caps = CAPS[kind] + (("C_BYP",) if "RE_BYP" in form else ())
        for rv in itertools.product(rvals, repeat=len(roles)):
            for cv in itertools.product(cvals, repeat=len(caps)):
                yield {f"{prefix}.{r}": v for r, v in zip(roles + caps, rv + cv, strict=True)}


#: The cascode's roles (docs/requests.md), written out here rather than read from the
#: search: the divider, RC, the lower emitter's three forms, the capacitors.
CASCODE_RESISTORS = ("R1", "R2", "R3", "RC")
CASCODE_CAPS = ("C_IN", "C_B", "C_OUT")


def _cascode_rows(rvals, cvals):
    for form in STAGE_FORMS["ce"]:
        emitter = form[1:]
        roles = CASCODE_RESISTORS + emitter
        caps = CASCODE_CAPS + (("C_BYP",) if "RE_BYP" in emitter else ())
        for rv in itertools.product(rvals, repeat=len(roles)):
            for cv in itertools.product(cvals, repeat=len(caps)):
                yield dict(zip(roles + caps, rv + cv, strict=True))


def enumerate_chains(req, snap, chunk=4000, best_row=None, keep=None):
    """(best score, number meeting) over every buildable chain of ``req.topology``
    from ``snap`` (one transistor type, one row per value); best None if none meets.
    A dict ``best_row`` receives the best chain's role values; ``keep(row)``, when
    given, says which chains (role values) to count."""
    coupling = req.coupling or "capacitor"
    cascode = req.topology == "cascode"
    form = pair_form("cascode") if cascode else pair_form(tuple(req.topology), coupling)
    k1, k2 = ("ce", "cb") if cascode else req.topology
    rq = {r.value: r for r in snap.resistors}
    cq = {c.value: c for c in snap.capacitors}
    t = snap.transistors[0]
    if 2 * req.builds > t.qty:
        return None, 0
    rows = []
    if cascode:
        rows = [row for row in _cascode_rows(sorted(rq), sorted(cq))
                if keep is None or keep(row)]
    for s1 in ([] if cascode else _stage_rows(k1, sorted(rq), sorted(cq), "S1")):
        if coupling == "direct":
            # the follower: its emitter resistor and output capacitor only
            for re in sorted(rq):
                for c in sorted(cq):
                    row = {**s1, "S2.RE": re, "S2.C_OUT": c}
                    if keep is None or keep(row):
                        rows.append(row)
            continue
        for s2 in _stage_rows(k2, sorted(rq), sorted(cq), "S2"):
            for cc in sorted(cq):
                row = {**s1, **s2, "C_COUPLE": cc}
                if keep is None or keep(row):
                    rows.append(row)
    best, meeting = None, 0
    for start in range(0, len(rows), chunk):
        part = rows[start:start + chunk]
        ok, emptied = [], []
        for row in part:
            use = Counter(("c" if r.split(".")[-1].startswith("C_") else "r", v)
                          for r, v in row.items())
            fits = all(n * req.builds <= (rq[v].qty if k == "r" else cq[v].qty)
                       for (k, v), n in use.items())
            ok.append(fits)
            e = sum(1 for (k, v), n in use.items() if k == "r" and n * req.builds >= rq[v].qty)
            e += 1 if 2 * req.builds >= t.qty else 0
            emptied.append(e)
        idx = [i for i, f in enumerate(ok) if f]
        if not idx:
            continue
        values = {r: np.array([part[i].get(r, 0.0) for i in idx]) for r in form.role_names}
        batch = PairBatch.from_values(form, **values)
        ratings = _ratings(form, part, idx, rq, cq)
        ev = evaluate_pair(req, batch, (t, t), ratings)
        terms = chain_score_terms(ev, np.array([emptied[i] for i in idx], float))
        total = sum(terms.values())
        m = ev.meets
        meeting += int(m.sum())
        if m.any():
            j = int(np.argmin(np.where(m, total, np.inf)))
            if best is None or total[j] < best:
                best = float(total[j])
                if best_row is not None:
                    best_row.clear()
                    best_row.update(batch.one(j))
    return best, meeting


def _ratings(form, part, idx, rq, cq):
    r = PartRatings()
    for role in form.role_names:
        vals = [part[i].get(role, 0.0) for i in idx]
        if form.kind(role) == "resistor":
            r.power_w[role] = np.array([rq[v].power_w if v else 0.25 for v in vals])
        else:
            r.voltage_v[role] = np.array([cq[v].voltage_v if v else 50.0 for v in vals])
            r.polarised[role] = np.array([bool(v) and cq[v].polarised for v in vals])
    return r


def assert_fits_stock(designs, snap) -> None:
    """Every design's pieces of every role and both transistors, counted together from
    the snapshot's rows, are in stock (a check apart from the search's own counting)."""
    qty = {("resistor", r.id): r.qty for r in snap.resistors}
    qty.update({("capacitor", c.id): c.qty for c in snap.capacitors})
    for d in designs:
        use = Counter()
        for pick in d.parts.values():
            for p in pick.pieces:
                use[(p.kind, p.id)] += p.count
        for key, n in use.items():
            assert n <= qty[key], (d.rank, key)
        for label, n in Counter(d.transistors).items():
            assert n <= snap.transistor(label).qty, (d.rank, label)
