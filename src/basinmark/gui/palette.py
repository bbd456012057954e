"""Element colours and drawing radii for the molecule view.

Colours are basinmark's own choice, following the trade's usual conventions
(carbon dark grey, hydrogen white, oxygen red, nitrogen blue, sulfur yellow,
halogens green to brown); every other element gets one neutral default.
Radii come from ``ase.data.covalent_radii`` (Cordero et al. 2008).
"""

from __future__ import annotations

from ase.data import covalent_radii

# RGB triplets, 0-255.  Our own values.
_COLOURS: dict[int, tuple[int, int, int]] = {
    1: (236, 238, 240),   # H  white (slightly cool so it reads on light backgrounds)
    5: (232, 170, 150),   # B  salmon
    6: (86, 90, 96),      # C  dark grey
    7: (52, 92, 214),     # N  blue
    8: (214, 40, 36),     # O  red
    9: (120, 206, 90),    # F  light green
    14: (200, 178, 140),  # Si sand
    15: (240, 136, 30),   # P  orange
    16: (236, 206, 46),   # S  yellow
    17: (46, 172, 64),    # Cl green
    35: (150, 62, 30),    # Br brown
    53: (126, 40, 150),   # I  violet
    3: (186, 110, 230), 11: (160, 90, 220), 19: (140, 70, 200),   # alkali metals: purples
    12: (120, 200, 40), 20: (90, 180, 60),                         # alkaline earths: greens
    26: (210, 110, 50), 29: (200, 128, 80), 30: (130, 130, 170),   # Fe, Cu, Zn
    79: (228, 190, 60), 78: (200, 200, 210), 46: (180, 190, 200),  # Au, Pt, Pd
}
DEFAULT_COLOUR: tuple[int, int, int] = (226, 110, 200)  # pink: clearly "some other element"

#: ball radius = this fraction of the covalent radius (ball-and-stick, not space filling)
BALL_SCALE = 0.45
#: smallest ball radius in Å so hydrogens stay clickable
MIN_BALL_RADIUS = 0.16


def element_colour(z: int) -> tuple[int, int, int]:
    """RGB colour of element ``z`` (our palette, default for elements not listed)."""
    return _COLOURS.get(int(z), DEFAULT_COLOUR)


def ball_radius(z: int) -> float:
    """Drawing radius in Å: a fraction of ase's covalent radius, never below MIN_BALL_RADIUS."""
    z = int(z)
    r = float(covalent_radii[z]) if 0 < z < len(covalent_radii) else 0.75
    return max(MIN_BALL_RADIUS, BALL_SCALE * r)
