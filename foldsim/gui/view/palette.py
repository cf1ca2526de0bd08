"""Colours of the 3D view, as 0-255 RGB triples.

Panel colours are muted blues, greens and sands; nothing but a colliding panel is
red, so a warning is never mistaken for a part. Line colours (intersections, gaps,
the highlight) are drawn unlit, so they reach the screen exactly as written here.
"""

import numpy as np

BACKGROUND = (238, 240, 244)
OUTLINE = (52, 58, 70)
HINGE = (28, 32, 40)
ROOT_MARK = (28, 32, 40)
WARNING = (224, 48, 40)
WARNING_BACK = (176, 36, 30)
INTERSECTION = (255, 214, 0)
GAP = (128, 64, 208)
HIGHLIGHT = (0, 150, 255)
LABEL_TEXT = (30, 30, 40)
LABEL_FILL = (255, 255, 255, 225)
GEAR_BODY = (176, 132, 64)
"""Gear bodies drawn as solids: bronze, apart from every panel colour and the warning."""
INNER = (0.78, 0.78, 0.76)
"""What the inner side of a panel tends to (0-1 RGB): pale board."""

PANELS = (
    (110, 150, 205),  # steel blue
    (142, 186, 128),  # sage
    (222, 200, 128),  # sand
    (96, 178, 176),   # teal
    (162, 150, 214),  # lavender
    (184, 184, 104),  # olive
    (140, 160, 178),  # slate
    (150, 206, 180),  # mint
    (204, 186, 160),  # khaki
    (120, 196, 226),  # sky
)


PART_TYPES = (
    # Paul Tol, "Colour schemes", SRON/EPS/TN/09-002 (issue 3.2, 2021), qualitative
    # scheme "light": made for filled areas under labels and distinct to viewers with
    # the common forms of colour blindness. In Tol's order; pale grey last, as he
    # advises, since it reads as "no type".
    (0x77, 0xAA, 0xDD),  # light blue
    (0xEE, 0x88, 0x66),  # orange
    (0xEE, 0xDD, 0x88),  # light yellow
    (0xFF, 0xAA, 0xBB),  # pink
    (0x99, 0xDD, 0xFF),  # light cyan
    (0x44, 0xBB, 0x99),  # mint
    (0xBB, 0xCC, 0x33),  # pear
    (0xAA, 0xAA, 0x00),  # olive
    (0xDD, 0xDD, 0xDD),  # pale grey
)
"""Colours of part types (View ▸ Colour panels by ▸ Part type), in order of first use.

More types than colours repeat them; the legend then says so.
"""


def unit_rgb(rgb):
    """A 0-255 triple as a (3,) tuple of floats in [0, 1]."""
    return tuple(c / 255.0 for c in rgb[:3])


def back_of(rgb):
    """The colour of a panel's inner side: the outer colour, paler and greyer.

    Parameters
    ----------
    rgb : (..., 3) float
        Outer colours in [0, 1].

    Returns
    -------
    (..., 3) float

    Examples
    --------
    >>> back_of([1.0, 0.0, 0.0]).round(3).tolist()
    [0.879, 0.429, 0.418]
    """
    return 0.45 * np.asarray(rgb, dtype=float) + 0.55 * np.array(INNER)
