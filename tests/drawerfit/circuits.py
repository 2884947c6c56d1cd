"""Invented test data shared by the command-line tests: a small drawer and the parts of
one partly bypassed common-emitter stage (the demo's kind of preamp)."""

#: A small invented drawer: six resistor values, two capacitors, one transistor type.
SMALL_DRAWER_CSV = """kind,value,qty,location,hfe_min,hfe_max,ft,cob,vceo,ic_max,pd
resistor,1k0,10,A1,,,,,,,
resistor,2k2,10,A2,,,,,,,
resistor,4k7,10,A3,,,,,,,
resistor,10k,10,A4,,,,,,,
resistor,22k,10,A5,,,,,,,
resistor,47k,10,A6,,,,,,,
capacitor,1u,10,B1,,,,,,,
capacitor,10u,10,B2,,,,,,,
npn,GP-N1,5,C1,100,300,250M,4p,40,0.1,0.5
"""

#: The [parts] table of a partly bypassed ce stage on 12 V (circuit file form).
CE_PARTS = """
[parts]
R1 = "47k"
R2 = "10k"
RC = "4k7"
RE = "220"
RE_BYP = "820"
C_BYP = "47u"
C_IN = "1u"
C_OUT = "1u"
"""

#: An inline [transistor] table for the same stage.
CE_TRANSISTOR = """
[transistor]
hfe_min = 100
hfe_max = 300
ft = "250M"
cob = "4p"
"""
