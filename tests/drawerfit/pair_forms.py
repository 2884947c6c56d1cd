"""Two-transistor circuits of every form, with stock rows (bins, ratings, dielectrics),
for the build sheet's tests: each chain of two of ce/cb/cc, each emitter variant of a
common-emitter stage, a follower with and without RC, direct ce→cc, the cascode.
Values are invented, chosen to bias each transistor in its active region."""

from __future__ import annotations

from dataclasses import replace
from types import SimpleNamespace

from optimiser.circuit_file import parse_circuit

#: role -> value of each single stage (S1/S2 prefixes are added by the chain)
STAGE = {
    "ce": {"R1": "47k", "R2": "10k", "RC": "4k7", "RE": "220", "RE_BYP": "820",
           "C_BYP": "47u", "C_IN": "1u", "C_OUT": "10u"},
    "cb": {"R1": "22k", "R2": "10k", "RC": "4k7", "RE": "2k2", "C_B": "10u", "C_IN": "10u",
           "C_OUT": "10u"},
    "cc": {"R1": "22k", "R2": "27k", "RE": "2k2", "C_IN": "1u", "C_OUT": "10u"},
}
#: the common-emitter stage's emitter variants: roles left out
CE_FORMS = {"partly bypassed": (), "unbypassed": ("RE_BYP", "C_BYP"), "fully bypassed": ("RE",)}
TRANSISTOR = {"hfe_min": 120, "hfe_max": 300, "vbe": 0.65, "vaf": 90, "ft": "200M",
              "cob": "5p", "vceo": 45, "ic_max": 0.15, "pd": 0.4}


def _stage(kind: str, ce_form: str = "partly bypassed", rc: bool = False) -> dict:
    p = dict(STAGE[kind])
    if kind == "ce":
        for r in CE_FORMS[ce_form]:
            p.pop(r)
        if ce_form == "unbypassed":
            p["RE"] = "1k"
    if rc and kind == "cc":
        p["RC"] = "100"
    return p


def _stocked(c, prefix_bins: bool = True):
    """The circuit with a stock row behind every part: a bin, a rating, a dielectric
    (electrolytic from 1 µF up, film below)."""
    stock, ids = {}, {}
    for n, (role, v) in enumerate(c.values.items(), start=1):
        kind = c.form.kind(role)
        loc = f"{'A' if kind == 'resistor' else 'D'}{n}"
        if kind == "resistor":
            stock[role] = SimpleNamespace(kind="resistor", location=loc, power_w=0.25,
                                          value=v, tolerance=0.05)
        else:
            stock[role] = SimpleNamespace(kind="capacitor", location=loc, voltage_v=25.0,
                                          value=v, tolerance=0.2,
                                          dielectric="electrolytic" if v >= 1e-6 else "film")
        ids[role] = 100 + n
    return replace(c, stock_parts=stock, stock_ids=ids)


def circuit(topology, parts: dict, coupling=None, *, load=True, source=True):
    doc = {"topology": topology, "supply_v": 12.0, "parts": parts, "transistor": TRANSISTOR,
           "temp_c": [0, 50], "input_vpk": 0.005}
    if coupling:
        doc["coupling"] = coupling
    if load:
        doc["load_ohm"] = "10k"
    if source:
        doc["source_ohm"] = "600"
    return _stocked(parse_circuit(doc))


def chain(first: str, second: str, *, f1="partly bypassed", f2="partly bypassed", rc=False,
          **kw):
    parts = {}
    for stage, kind, form in (("S1", first, f1), ("S2", second, f2)):
        for role, v in _stage(kind, form, rc).items():
            if (stage, role) in (("S1", "C_OUT"), ("S2", "C_IN")):
                continue
            parts[f"{stage}.{role}"] = v
    parts["C_COUPLE"] = "1u"
    return circuit([first, second], parts, "capacitor", **kw)


def direct(f1="partly bypassed", rc=False, **kw):
    parts = {f"S1.{r}": v for r, v in _stage("ce", f1).items() if r != "C_OUT"}
    parts.update({"S2.RE": "2k2", "S2.C_OUT": "10u"})
    if rc:
        parts["S2.RC"] = "100"
    return circuit(["ce", "cc"], parts, "direct", **kw)


def cascode(form="partly bypassed", **kw):
    parts = {"R1": "22k", "R2": "15k", "R3": "10k", "C_B": "10u", "RC": "2k2", "RE": "100",
             "RE_BYP": "1k", "C_BYP": "47u", "C_IN": "1u", "C_OUT": "1u"}
    if form == "unbypassed":
        del parts["RE_BYP"], parts["C_BYP"]
        parts["RE"] = "1k"
    elif form == "fully bypassed":
        del parts["RE"]
    return circuit("cascode", parts, **kw)


def circuits():
    """(name, circuit) of every form and variant the sheet draws."""
    out = []
    for a in ("ce", "cb", "cc"):
        for b in ("ce", "cb", "cc"):
            out.append((f"{a}-{b}", chain(a, b)))
    for f in ("unbypassed", "fully bypassed"):
        tag = f.split()[0]
        out.append((f"ce-ce-{tag}", chain("ce", "ce", f1=f, f2=f)))
        out.append((f"ce-cb-{tag}", chain("ce", "cb", f1=f)))
        out.append((f"cb-ce-{tag}", chain("cb", "ce", f2=f)))
    out.append(("ce-cc-rc", chain("ce", "cc", rc=True)))
    out.append(("cc-cc-rc-noload", chain("cc", "cc", rc=True, load=False)))
    out.append(("cb-cb-nosource", chain("cb", "cb", source=False, load=False)))
    for f in CE_FORMS:
        out.append((f"direct-{f.split()[0]}", direct(f)))
    out.append(("direct-rc", direct(rc=True)))
    out.append(("direct-nosource", direct(rc=True, source=False, load=False)))
    for f in CE_FORMS:
        out.append((f"cascode-{f.split()[0]}", cascode(f)))
    out.append(("cascode-nosource", cascode(source=False, load=False)))
    return out
