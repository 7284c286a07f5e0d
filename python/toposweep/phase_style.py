"""One fixed colour per phase, the same in every figure, readable with colour-blind vision.

Every distinct set of indices has its own colour: the 16 three-dimensional phases
(ν0; ν1ν2ν3), the two 2D phases (Z2 = 0, 1) and undefined points. Strong phases (ν0 = 1) take
warm and purple hues, weak ones (ν0 = 0, some ν_i = 1) blues and greens, the trivial insulator
pale grey, and undefined points white (no value). A 2D Z2-odd insulator shares the colour of
the strong (1;000) phase, a 2D trivial insulator that of (0;000). A metal whose gapped bands
carry some indices (phase codes 10–13) keeps the colour of those indices and is hatched.

Why these colours. They are taken from published colour-blind-safe schemes — Paul Tol's
"muted", "light", "bright", "vibrant" and "high-contrast" schemes (P. Tol, *Colour Schemes*,
SRON technical note SRON/EPS/TN/09-002) and the Okabe–Ito scheme (M. Okabe & K. Ito, *Color
Universal Design*, 2002/2008); hex values from memory — and, among those, chosen by a
max–min search of the pairwise colour difference in CAM02-UCS under normal vision and under
full protan, deutan and tritan colour blindness (simulated with the Machado, Oliveira &
Fernandes (2009) model of the colorspacious library). Every two of the 17 colours are at
least ΔE ≈ 8.8 apart in all four views (``tests/test_phase_colours.py`` checks ≥ 8), a
difference plainly visible side by side. No palette of 17 colours is unmistakable in
isolation, so maps also print each region's indices in the region itself.

Gap shading keeps the colour exact where the direct gap is at least a quarter of the map's
typical gap and darkens it at most to half its brightness near a closing (hue and saturation
unchanged), so a colour is recognisable everywhere except on the closing lines themselves.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
from numpy.typing import NDArray

__all__ = [
    "METAL_HATCH",
    "PHASE_COLOURS",
    "UNDEFINED_COLOUR",
    "gap_shade",
    "index_key",
    "phase_colour",
    "phase_short_label",
]

#: colour of each set of indices: (ν0, ν1, ν2, ν3) in 3D, (Z2,) in 2D
PHASE_COLOURS: dict[tuple[int, ...], str] = {
    # trivial insulator: Tol's pale grey
    (0, 0, 0, 0): "#DDDDDD",
    # strong topological insulators (ν0 = 1): warm and purple hues
    (1, 0, 0, 0): "#CC3311",  # Tol vibrant red
    (1, 1, 1, 1): "#882255",  # Tol muted wine
    (1, 0, 0, 1): "#EE8866",  # Tol light orange
    (1, 0, 1, 0): "#DDAA33",  # Tol high-contrast yellow
    (1, 1, 0, 0): "#CC6677",  # Tol muted rose
    (1, 0, 1, 1): "#CC79A7",  # Okabe–Ito reddish purple
    (1, 1, 0, 1): "#AA4499",  # Tol muted purple
    (1, 1, 1, 0): "#F0E442",  # Okabe–Ito yellow
    # weak topological insulators (ν0 = 0): blues and greens
    (0, 1, 1, 1): "#0077BB",  # Tol vibrant blue
    (0, 0, 0, 1): "#66CCEE",  # Tol bright cyan
    (0, 0, 1, 0): "#009988",  # Tol vibrant teal
    (0, 1, 0, 0): "#44BB99",  # Tol light mint
    (0, 0, 1, 1): "#117733",  # Tol muted green
    (0, 1, 0, 1): "#999933",  # Tol muted olive
    (0, 1, 1, 0): "#332288",  # Tol muted indigo
}
PHASE_COLOURS[(0,)] = PHASE_COLOURS[(0, 0, 0, 0)]  # 2D trivial insulator
PHASE_COLOURS[(1,)] = PHASE_COLOURS[(1, 0, 0, 0)]  # 2D Z2-odd insulator
#: undefined points: no value, left white
UNDEFINED_COLOUR = "#FFFFFF"
#: hatching of metals (phase codes 10–13) over the colour of their bands' indices
METAL_HATCH = "////"
#: brightness at a closing (gap 0) and the fraction of the typical gap above which none is lost
SHADE_FLOOR = 0.5
SHADE_FROM = 0.25


def index_key(phase: int, nu0: int, nu: Sequence[int] | None) -> tuple[int, ...] | None:
    """The indices that decide a point's colour; None for an undefined point.

    Examples
    --------
    >>> index_key(2, 1, (0, 0, 1)), index_key(12, 1, (0, 0, 0)), index_key(3, 1, None)
    ((1, 0, 0, 1), (1, 0, 0, 0), (1,))
    >>> index_key(-1, -1, (-1, -1, -1)) is None
    True
    """
    if phase < 0 or nu0 < 0 or (nu is not None and min(nu) < 0):
        return None
    return (int(nu0),) if nu is None else (int(nu0), *(int(v) for v in nu))


def is_metal(phase: int) -> bool:
    """Whether a phase code is a metal with gapped bands (10–13).

    Examples
    --------
    >>> is_metal(11), is_metal(1)
    (True, False)
    """
    return 10 <= int(phase) <= 13


def phase_colour(phase: int, nu0: int, nu: Sequence[int] | None) -> str:
    """Fixed colour of a point (a metal's is its bands'; hatch it with :data:`METAL_HATCH`).

    Examples
    --------
    >>> phase_colour(2, 1, (0, 0, 0)), phase_colour(12, 1, (0, 0, 0)), phase_colour(-1, -1, None)
    ('#CC3311', '#CC3311', '#FFFFFF')
    """
    key = index_key(phase, nu0, nu)
    return UNDEFINED_COLOUR if key is None else PHASE_COLOURS[key]


def phase_short_label(phase: int, nu0: int, nu: Sequence[int] | None) -> str:
    """The indices printed inside a map region, e.g. ``'(1;001)'``, ``'metal Z2=1'``.

    Examples
    --------
    >>> phase_short_label(2, 1, (0, 0, 1)), phase_short_label(13, 1, None)
    ('(1;001)', 'metal Z2=1')
    """
    key = index_key(phase, nu0, nu)
    if key is None:
        return "undefined"
    text = f"Z2={key[0]}" if len(key) == 1 else f"({key[0]};{''.join(map(str, key[1:]))})"
    return f"metal {text}" if is_metal(phase) else text


def gap_shade(gap: NDArray[np.float64], scale: float) -> NDArray[np.float64]:
    """Brightness factor per point: 1 where ``gap ≥ SHADE_FROM·scale``, down to SHADE_FLOOR.

    NaN gaps (undefined points) are not shaded.

    Examples
    --------
    >>> gap_shade(np.array([0.0, 0.0625, 0.5, np.nan]), 1.0).tolist()
    [0.5, 0.75, 1.0, 1.0]
    """
    limit = SHADE_FROM * scale if scale > 0 else 1.0
    frac = np.clip(np.nan_to_num(np.asarray(gap, float), nan=limit) / limit, 0.0, 1.0)
    return SHADE_FLOOR + (1.0 - SHADE_FLOOR) * np.sqrt(frac)
