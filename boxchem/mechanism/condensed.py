"""Names of the condensed-phase species a mechanism may declare (docs/heterogeneous.md).

They take part in no reaction: ``environment/condensation.py`` moves
molecules between them and their gas-phase partners to keep the phase
equilibrium with NAT/STS/ice, so validation does not warn about them.
"""

#: HNO3 held in NAT or STS particles (declare it with formula=HNO3)
CONDENSED_HNO3 = "HNO3_PSC"
#: water held in ice particles (declare it with formula=H2O)
CONDENSED_H2O = "H2O_ICE"
#: condensed species -> gas-phase partner
CONDENSED_PHASE_SPECIES = {CONDENSED_HNO3: "HNO3", CONDENSED_H2O: "H2O"}
