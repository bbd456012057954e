"""Rules text shared by the tests: the schema's worked example (thresholds of the design notes, not of
the bundled set, which are tuned to its surface)."""

SCHEMA_EXAMPLE = """\
name = "ringfork"
reactant = "reactant"
dwell_fs = 20.0

[monitors]
r_a = [1, 6]
r_b = [2, 9]
r_c = [4, 9]

[basins.reactant]
r_a = { above = 2.6 }
[basins.alpha]
r_a = { below = 1.75 }
r_b = { below = 1.75 }
r_c = { above = 2.3 }
[basins.beta]
r_a = { below = 1.75 }
r_c = { below = 1.75 }
r_b = { above = 2.3 }

[flags]
late_commit_fs = 150.0
max_energy_drift = 1.0
energy_unit = "kcal/mol"
min_length_fs = 100.0

[time_gap]
bonds = ["r_a", "r_b"]
form_below = 1.75
concerted_fs = 60.0
"""


def two_bond_rules(name: str, reactant: str, dwell_fs: float) -> str:
    """Rules for a three-atom toy: atom 1 bonds either to atom 2 (alpha) or to atom 3 (beta)."""
    return f"""
name = "{name}"
reactant = "{reactant}"
dwell_fs = {dwell_fs}

[monitors]
r_a = [1, 2]
r_b = [1, 3]

[basins.{reactant}]
r_a = {{ above = 2.6 }}
r_b = {{ above = 2.6 }}
[basins.alpha]
r_a = {{ below = 1.75 }}
r_b = {{ above = 2.3 }}
[basins.beta]
r_b = {{ below = 1.75 }}
r_a = {{ above = 2.3 }}
"""
