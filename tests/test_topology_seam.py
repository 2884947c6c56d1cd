"""The topology seam: every topology module satisfies the protocol of
optimiser/stages/base.py, and no module outside optimiser/stages/ decides by
comparing a topology with a literal name — the search and its bound modules
included: they ask the module's ``SEARCH`` rules, terminals and wiring.
"""

from __future__ import annotations

import ast
import itertools
from pathlib import Path

import numpy as np
import pytest

from optimiser import ac, stages
from optimiser.dc import operating_point
from optimiser.device import device_from_transistor
from optimiser.request import DEFAULT_GAIN_DB, TOPOLOGIES, parse_request
from optimiser.stage import CAPACITOR_ROLES, RESISTOR_ROLES, StageBatch
from optimiser.stages.base import (
    GAIN_LAWS,
    OneOf,
    SearchRules,
    Topology,
    base_held,
    capacitor_sides,
    role_problems,
)

from .reference.random_stages import VARIANTS, random_case

ROOT = Path(__file__).resolve().parents[1]
PACKAGES = ("optimiser", "drawerfit", "inventory")
#: Where a topology may be compared with its name: its own package only.
STAGES_DIR = "optimiser/stages/"

KNOWN_ROLES = set(RESISTOR_ROLES) | set(CAPACITOR_ROLES)
TERMINALS = ("base", "emitter", "collector")


def _name_comparisons(source: str) -> list[int]:
    """Lines where a Compare (or a match case) involves a topology's name as a literal."""
    names = set(stages.NAMES)
    lines = []
    for node in ast.walk(ast.parse(source)):
        if isinstance(node, ast.Compare):
            parts = [node.left, *node.comparators]
        elif isinstance(node, ast.match_case):
            parts = [node.pattern]
        else:
            continue
        if any(isinstance(c, ast.Constant) and c.value in names
               for part in parts for c in ast.walk(part)):
            lines.append(getattr(node, "lineno", None) or node.pattern.lineno)
    return lines


def test_the_scan_finds_a_comparison_with_a_name():
    # the detector itself: each spelling of a branch on the name is found, others not
    assert _name_comparisons('if t == "ce":\n    pass\n') == [1]
    assert _name_comparisons('x = t in ("cb", "cc")\n') == [1]
    assert _name_comparisons('match t:\n    case "cc":\n        pass\n') == [2]
    assert _name_comparisons('y = {"ce": 1}["ce"]\nz = t == "npn"\n') == []


def test_no_module_outside_the_stages_compares_a_topology_with_its_name():
    bad = []
    for pkg in PACKAGES:
        for path in sorted((ROOT / pkg).rglob("*.py")):
            rel = path.relative_to(ROOT).as_posix()
            if rel.startswith(STAGES_DIR):
                continue
            bad += [f"{rel}:{line}" for line in _name_comparisons(path.read_text("utf-8"))]
    assert not bad, "compare with the topology's module instead: " + ", ".join(bad)


# --- conformance ------------------------------------------------------------

@pytest.fixture(params=stages.NAMES)
def mod(request):
    return stages.module(request.param)


def test_registry_and_request_agree():
    assert TOPOLOGIES == stages.NAMES
    assert [m.NAME for m in stages.modules()] == list(stages.NAMES)
    with pytest.raises(ValueError):
        stages.module("xx")


def test_module_satisfies_the_protocol(mod):
    assert isinstance(mod, Topology)
    assert mod.__name__ == f"optimiser.stages.{mod.NAME}"
    assert isinstance(mod.LONG_NAME, str) and mod.LONG_NAME
    assert mod.INPUT in TERMINALS and mod.OUTPUT in TERMINALS and mod.INPUT != mod.OUTPUT


def test_roles_are_known_and_placed(mod):
    names = [r.name for r in mod.ROLES]
    assert len(names) == len(set(names)) and set(names) <= KNOWN_ROLES
    assert mod.ROLE_NAMES == tuple(names)
    assert mod.REQUIRED == tuple(r.name for r in mod.ROLES if r.required)
    placed = {role for role, _, _ in mod.WIRING}
    assert placed <= KNOWN_ROLES and set(names) <= placed      # every role sits somewhere
    for rule in mod.RULES:
        assert set(rule.roles) <= set(names)
    for r in mod.ROLES:
        assert r.kind == ("resistor" if r.name in RESISTOR_ROLES else "capacitor")


def test_every_capacitor_has_sides_and_words(mod):
    caps = [r.name for r in mod.ROLES if r.kind == "capacitor"]
    sides = capacitor_sides(mod)
    assert sorted(sides) == sorted(caps)
    for a, b in sides.values():
        assert a != b
        assert mod.NODE_WORDS[a] and mod.NODE_WORDS[b]     # where + goes, in words


def _valid_role_sets(mod):
    optional = [r.name for r in mod.ROLES if not r.required]
    for k in range(len(optional) + 1):
        for extra in itertools.combinations(optional, k):
            present = set(mod.REQUIRED) | set(extra)
            if not role_problems(mod, present):
                yield present


def test_forms_cover_every_valid_role_set(mod):
    seen = set()
    count = 0
    for present in _valid_role_sets(mod):
        form = mod.form_of(dict.fromkeys(present, 1.0))
        assert form in mod.FORMS, (present, form)
        seen.add(form)
        count += 1
    assert count >= 1
    assert seen == set(mod.FORMS)            # and every form is some valid role set


def test_rules_refuse_what_they_name(mod):
    # a rule broken on purpose is reported: drop each role of a OneOf, or one of a Together
    full = set(mod.ROLE_NAMES)
    assert not role_problems(mod, full)
    for rule in mod.RULES:
        broken = full - set(rule.roles) if isinstance(rule, OneOf) else full - {rule.roles[0]}
        assert role_problems(mod, broken), rule


def test_search_rules_match_the_roles(mod):
    # what the search is told of each form agrees with the roles a stage of that
    # form has: its emitter options fill the form's emitter roles, its capacitors
    # are exactly the form's capacitor roles
    rules = mod.SEARCH
    assert isinstance(rules, SearchRules) and rules.gain_law in GAIN_LAWS
    assert set(rules.emitter) == set(mod.FORMS) == set(rules.capacitors)
    caps = {r.name for r in mod.ROLES if r.kind == "capacitor"}
    for present in _valid_role_sets(mod):
        form = mod.form_of(dict.fromkeys(present, 1.0))
        emitter = {"RE", "RE_BYP"} & present
        if set(rules.emitter[form]) == emitter:
            assert set(rules.capacitors[form]) == caps & present, (form, present)
    for form in mod.FORMS:
        em = rules.emitter[form]
        assert em in (("RE",), ("RE_BYP",), ("RE", "RE_BYP")) and set(em) <= set(mod.ROLE_NAMES)
        values = dict.fromkeys(("R1", "R2", "RC") + em + rules.capacitors[form], 1.0)
        assert mod.form_of(values) == form and not role_problems(mod, set(values))


def test_search_rules_agree_with_the_textbook_stages(mod):
    # the gain law a topology declares against the three basic stages as the textbooks
    # give them (from memory, Sedra & Smith, "Microelectronic Circuits", the three basic
    # BJT stages): the follower's output is its emitter, the common-base stage is driven
    # at its emitter with the base at AC ground, the common emitter at its base with the
    # output at its collector
    law = mod.SEARCH.gain_law
    assert (law == "follower") == (mod.OUTPUT == "emitter")
    assert (law == "emitter-driven") == (mod.INPUT == "emitter" and base_held(mod))
    assert (law == "degenerated") == (mod.INPUT == "base" and mod.OUTPUT == "collector")


def test_search_roles_of_each_form_make_a_stage_of_that_form(mod):
    # the search's emitter options and roles (optimiser/search/skeletons.py) build,
    # for every form, stages the topology accepts and reads back as that form
    from optimiser.search.skeletons import _emitter_options, cap_roles, resistor_roles

    rv = np.array([100.0, 1e3, 10e3])
    for form in mod.FORMS:
        re_a, byp_a = _emitter_options(mod.NAME, form, rv)
        em = mod.SEARCH.emitter[form]
        assert re_a.size == rv.size ** len(em)
        for re_, byp in zip(re_a, byp_a, strict=True):
            for rc in ((0.0, 4.7e3) if "RC" not in mod.REQUIRED else (4.7e3,)):
                values = {"R1": 47e3, "R2": 10e3, "RC": rc, "RE": re_, "RE_BYP": byp}
                roles = resistor_roles(mod.NAME, form, rc) + cap_roles(mod.NAME, form)
                used = {r: values.get(r, 1e-6) for r in roles}
                assert all(v > 0 for v in used.values()), (form, used)
                assert not role_problems(mod, set(used)) and mod.form_of(used) == form


def test_search_rules_refuse_an_unknown_law():
    with pytest.raises(ValueError):
        SearchRules(emitter={None: ("RE",)}, capacitors={None: ()}, gain_law="xx")


def test_score_and_default_gain(mod):
    target = mod.score_gain_target()
    assert target is None or (np.isfinite(target[0]) and target[1] > 0)
    req = parse_request({"topology": mod.NAME, "supply_v": 12.0})
    if mod.DEFAULT_GAIN_DB is None:
        assert mod.NAME not in DEFAULT_GAIN_DB and req.gain_db is None
    else:
        assert DEFAULT_GAIN_DB[mod.NAME] == mod.DEFAULT_GAIN_DB
        assert req.gain_db == pytest.approx(mod.DEFAULT_GAIN_DB)
    re = np.array([0.0, 100.0, 1e3, 1e4])
    rdeg = np.asarray(mod.degeneration(re, 600.0, 1e4), dtype=float)
    assert rdeg.shape == re.shape and np.all(np.isfinite(rdeg)) and np.all(rdeg >= 0)


@pytest.mark.parametrize("variant", VARIANTS)
def test_netlist_solves_for_random_values(variant):
    # the topology's netlist, with the engine, on seeded random stages
    # (tests/reference/random_stages.py): finite gain and impedances, the
    # network's input and output at the terminals the module names, and each
    # stage's sign of gain as the textbooks give it (from memory, Sedra & Smith,
    # "Microelectronic Circuits", the three basic BJT stages: the common emitter
    # inverts, the common base and the follower do not, and a follower's gain is
    # below one)
    req, batch, t = random_case(variant, seed=11, count=16)
    mod = stages.module(batch.topology)
    net = mod.network(batch)
    assert getattr(net, mod.INPUT) == net.input
    assert getattr(net, mod.OUTPUT) == net.output
    model = device_from_transistor(t)
    op = operating_point(batch.topology, req.supply_v, batch, model)
    ok = op.converged & ~op.cutoff & (op.vce > 1.0)
    assert ok.sum() >= 4
    b = batch.take(ok)
    op = operating_point(b.topology, req.supply_v, b, model)
    mid = ac.midband(req, b, model, op, ac.small_signal(op, model))
    h = np.asarray(mid["h"])
    assert np.all(np.isfinite(h)) and np.all(np.abs(h) > 0)
    assert np.all(np.isfinite(np.abs(mid["zin"]))) and np.all(np.abs(mid["zin"]) > 0)
    if mod.OUTPUT == "collector" and mod.INPUT == "base":
        assert np.all(h.real < 0)
    else:
        assert np.all(h.real > 0)
    if mod.OUTPUT == "emitter":
        assert np.all(np.abs(h) < 1.0)
    # and every capacitor's DC voltage is given, with the names of its sides
    caps = mod.capacitors(b, op)
    assert sorted(caps) == sorted(r.name for r in mod.ROLES if r.kind == "capacitor")
    for v, hi, lo in caps.values():
        assert np.asarray(v).shape == (b.n,) and hi != lo


def test_every_topology_has_a_drawing():
    from drawerfit.sheet.schematic import DRAWINGS

    assert set(stages.NAMES) <= set(DRAWINGS)


def test_stage_batch_roles_come_from_the_module(mod):
    values = {r: 1.0 for r in mod.ROLE_NAMES}
    b = StageBatch.from_values(mod.NAME, **values)
    assert tuple(b.one(0)) == mod.ROLE_NAMES
