"""evaluate(): metrics present, validity rules and targets in plain words with numbers."""

from __future__ import annotations

import numpy as np

from inventory.parts import Transistor
from optimiser.evaluate import DERATING, METRIC_KEYS, design_of, evaluate
from optimiser.request import Request
from optimiser.stage import PartRatings, StageBatch

T = Transistor("GP-N1", hfe_min=100, hfe_max=300, vaf=100, ft=250e6, cob=4e-12, vceo=40,
               ic_max=0.1, pd=0.5)
CE = dict(R1=47e3, R2=10e3, RC=4.7e3, RE=220, RE_BYP=820, C_BYP=47e-6, C_IN=1e-6, C_OUT=1e-6)


def _ev(req=None, t=T, ratings=None, **vals):
    req = req or Request("ce", 12.0, load_ohm=10e3, source_ohm=600, temp_c=(0, 50))
    return evaluate(req, StageBatch.from_values(req.topology, **(vals or CE)), t, ratings)


def test_every_metric_key_is_there():
    ev = _ev()
    assert set(METRIC_KEYS) <= set(ev.metrics)
    for k in METRIC_KEYS:
        assert ev.metrics[k].shape == (1,)
        assert np.isfinite(ev.metrics[k]).all(), k
    assert ev.valid[0] and ev.meets[0]
    assert ev.corners["ic_a"].shape == (1, 4)
    assert ev.plus["C_IN"][0] == "base" and ev.plus["C_OUT"][0] == "collector"
    d = design_of(ev, 0).to_json()
    assert d["parts"]["C_BYP"]["plus"] == "emitter" and d["form"] == "partly bypassed"


def test_targets_reported_with_numbers():
    req = Request("ce", 12.0, load_ohm=10e3, source_ohm=600, gain=100.0, f_low_max_hz=10,
                  zin_min_ohm=1e6, ic_drift_max_pct=1.0, thd_max_pct=0.001, input_vpk=0.05,
                  temp_c=(0, 50))
    ev = _ev(req)
    v = ev.violations(0)
    assert ev.valid[0] and not ev.meets[0]
    assert "gain_db 21.7 outside 40 ± 1" in v, v
    assert any(s.startswith("f_low_hz ") and s.endswith(" > 10") for s in v), v
    assert any(s.startswith("zin_ohm ") for s in v)
    assert any(s.startswith("ic_drift_pct ") for s in v)
    assert any(s.startswith("thd_pct ") for s in v)


def test_f_high_target_without_ft_is_a_violation():
    t = Transistor("NOFT", hfe_min=100, hfe_max=300)
    req = Request("ce", 12.0, load_ohm=10e3, f_high_min_hz=20e3)
    ev = _ev(req, t)
    assert np.isnan(ev.metrics["f_high_hz"][0])
    assert "transistor lacks ft/cob" in ev.violations(0)[0]
    assert not ev.meets[0]


def test_resistor_derating_applies_the_declared_factor():
    """A resistor piece may dissipate DERATING['resistor_power'] (50 %, common practice)
    of its rating: RC = 100 Ω carrying about 35 mA dissipates ≈ 0.12 W."""
    vals = dict(R1=4.7e3, R2=1e3, RC=100.0, RE=56.0, C_IN=1e-6, C_OUT=1e-6)
    req = Request("ce", 12.0, load_ohm=10e3)
    ev = _ev(req, **vals)
    p = float(ev.rules[[r.key for r in ev.rules].index("power_RC")].data["power_w"][0])
    assert 0.05 < p < 0.25
    lo = PartRatings(power_w={"RC": np.array([p / DERATING["resistor_power"] * 0.99])})
    hi = PartRatings(power_w={"RC": np.array([p / DERATING["resistor_power"] * 1.01])})
    bad = _ev(req, ratings=lo, **vals)
    good = _ev(req, ratings=hi, **vals)
    assert not bad.valid[0] and "power_RC" in bad.failed_keys(0)
    assert "power_RC" not in good.failed_keys(0)
    msg = [s for s in bad.violations(0) if s.startswith("R_C dissipates")][0]
    assert "over 50 % of its" in msg and " W rating" in msg


def test_capacitor_voltage_derating():
    """|DC voltage| ≤ 80 % of the rating (common practice): C_OUT sits at V_C."""
    ev = _ev()
    vc = float(ev.metrics["vc_v"][0])
    bad = _ev(ratings=PartRatings(voltage_v={"C_OUT": np.array([vc / 0.8 * 0.99])}))
    good = _ev(ratings=PartRatings(voltage_v={"C_OUT": np.array([vc / 0.8 * 1.01])}))
    assert "voltage_C_OUT" in bad.failed_keys(0)
    assert "voltage_C_OUT" not in good.failed_keys(0)


def test_saturated_design_is_invalid_with_the_numbers():
    vals = dict(CE, RC=47e3)
    ev = _ev(**vals)
    assert not ev.valid[0]
    assert any("below vce_sat 0.2" in s and "saturated" in s for s in ev.violations(0))


def test_shelf_from_a_small_bypass_capacitor_breaks_the_flat_passband():
    """A bypass capacitor whose corner sits above mid_hz leaves a shelf: the gain keeps
    rising above its mid_hz value by far more than 1 dB."""
    vals = dict(CE, RE=0.0, RE_BYP=1e3, C_BYP=100e-9)
    ev = _ev(**vals)
    assert "flat_passband" in ev.failed_keys(0)
    assert any("rises" in s for s in ev.violations(0))


def test_transistor_limits():
    t = Transistor("SMALL", hfe_min=100, hfe_max=300, vceo=10, ic_max=1e-3, pd=1e-3)
    ev = _ev(t=t)
    keys = ev.failed_keys(0)
    assert {"vceo", "ic_max", "pd"} <= set(keys)


def test_take_keeps_figures_and_messages():
    vals = {k: np.array([v, v]) for k, v in CE.items()}
    vals["RC"] = np.array([4.7e3, 47e3])
    ev = _ev(**vals)
    sub = ev.take([1])
    assert sub.n == 1
    assert sub.violations(0) == ev.violations(1)
    assert sub.metrics["ic_a"][0] == ev.metrics["ic_a"][1]


def test_divider_rule_warning_names_the_factor():
    """The 10:1 rule R_TH ≤ 0.1·β·R_E [BN Ch. 4, from memory; MB call 10:1 "firm", W-CDH]."""
    vals = dict(R1=470e3, R2=100e3, RC=4.7e3, RE=1e3, C_IN=1e-6, C_OUT=1e-6)
    ev = _ev(**vals)
    assert any("10:1 rule" in w for w in ev.warnings(0))
    ok = _ev()
    assert not any("10:1 rule" in w for w in ok.warnings(0))


def test_thd_alone_is_the_same_thd_without_the_swing():
    """large_signal="thd" (what the search's confirmation asks) gives the THD of the
    full large-signal pass exactly, and leaves the swing, a figure never a target, out."""
    req = Request("ce", 12.0, load_ohm=10e3, source_ohm=600, thd_max_pct=1.0, input_vpk=0.05)
    batch = StageBatch.from_values("ce", **CE)
    full = evaluate(req, batch, T, large_signal=True)
    thd = evaluate(req, batch, T, large_signal="thd")
    assert np.isfinite(full.metrics["swing_vpk"]).all()
    np.testing.assert_array_equal(thd.metrics["thd_pct"], full.metrics["thd_pct"])
    assert np.isnan(thd.metrics["swing_vpk"]).all()
    assert list(thd.meets) == list(full.meets)
