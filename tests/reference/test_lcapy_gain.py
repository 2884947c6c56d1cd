"""The engine's nodal analysis against lcapy's symbolic MNA [LCAPY].

lcapy (PyPI, symbolic modified nodal analysis) derives the hybrid-π gain expressions;
they are evaluated at random positive element values and compared with the engine's
numeric MNA (r_o infinite, no device capacitances, coupling capacitors of 1 kF so
that their impedance is negligible at 1 kHz).  This checks the algebra of the stamps,
not the model.  lcapy's controlled-source sign differs from SPICE's (see [LCAPY] in SOURCES.md):
``G E C B E gm`` puts the collector current in.
"""

from __future__ import annotations

import os

import numpy as np
import pytest

from optimiser import ac
from optimiser.stage import StageBatch

pytestmark = [pytest.mark.reference, pytest.mark.slow]

if os.environ.get("CI") == "true":
    import lcapy  # noqa: F401   (under CI a missing lcapy is a failure)
else:
    lcapy = pytest.importorskip("lcapy")

BIG_C = 1e3


def _engine_gain(topology, rs, rpi, gm, rc, re, out):
    """Engine MNA with R1, R2 open (inf), no load, the given hybrid-π values."""
    if topology == "ce":
        b = StageBatch.from_values("ce", R1=np.inf, R2=np.inf, RC=rc, RE=re, C_IN=BIG_C,
                                   C_OUT=BIG_C)
    else:
        b = StageBatch.from_values("cc", R1=np.inf, R2=np.inf, RC=0.0, RE=re, C_IN=BIG_C,
                                   C_OUT=BIG_C)
    n = b.n
    z = np.zeros(n)
    ss = ac.SmallSignal(gm=np.full(n, gm), gx=z, gpi=np.full(n, 1 / rpi), gmu_dc=z, go=z,
                        cpi=z, ctx=z, cmu=z, rpi=np.full(n, rpi), ro=np.full(n, np.inf))
    net = ac.network_of(topology, b)
    nodes = ac.solve_network(net, ss, [1e3], source_ohm=rs, load_ohm=None, mode="transfer")
    return complex(nodes[out][0, 0])


@pytest.fixture(scope="module")
def expressions():
    import sympy as sp
    from lcapy import Circuit

    ce = Circuit("""
Vs 1 0 step 1
Rs 1 2 Rs
Rpi 2 4 rpi
G1 4 3 2 4 gm
RC 3 0 RC
RE 4 0 RE
""")
    cc = Circuit("""
Vs 1 0 step 1
Rs 1 2 Rs
Rpi 2 4 rpi
G1 4 0 2 4 gm
RE 4 0 RE
""")
    h_ce = sp.simplify(ce.transfer(1, 0, 3, 0).sympy)
    h_cc = sp.simplify(cc.transfer(1, 0, 4, 0).sympy)
    return h_ce, h_cc


def _subs(expr, **vals):
    import sympy as sp

    return float(expr.subs({sp.Symbol(k, positive=True): v for k, v in vals.items()})
                 .subs({sp.Symbol(k): v for k, v in vals.items()}))


def test_ce_and_follower_gain_against_lcapy(expressions):
    h_ce, h_cc = expressions
    rng = np.random.default_rng(7)
    for _ in range(8):
        rs, rpi, rc, re = 10 ** rng.uniform(1, 4, 4)
        gm = 10 ** rng.uniform(-3, -0.5)
        vals = dict(Rs=rs, rpi=rpi, gm=gm, RC=rc, RE=re)
        ours = _engine_gain("ce", rs, rpi, gm, rc, re, "c")
        assert ours.real == pytest.approx(_subs(h_ce, **vals), rel=1e-7)
        ours = _engine_gain("cc", rs, rpi, gm, rc, re, "e")
        assert ours.real == pytest.approx(_subs(h_cc, **vals), rel=1e-7)


def test_bn_unbypassed_example_numbers(expressions):
    """[BN Ch. 5, unbypassed emitter-bias example] with g_m = αI_E/26 mV: −3.85489 in
    lcapy [LCAPY, recomputed]."""
    h_ce, _ = expressions
    ie, beta = 4.3426e-3, 120
    gm = beta / (beta + 1) * ie / 0.026
    rpi = beta / gm
    vals = dict(Rs=0.0, rpi=rpi, gm=gm, RC=2.2e3, RE=560.0)
    assert _subs(h_ce, **vals) == pytest.approx(-3.85489, rel=1e-5)
    assert _engine_gain("ce", 0.0, rpi, gm, 2.2e3, 560.0, "c").real == pytest.approx(
        -3.85489, rel=1e-5)
