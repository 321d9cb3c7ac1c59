"""Shared test fixtures: canonical problems as plain data, and small helpers.

Problems are written as the dictionaries a TOML problem file parses into, so the
same fixture exercises the file reader (``lapsolve.problem_from_dict``) and the
solver. ``COAX_TOML`` and ``SQUARE_TOML`` are file texts for command-line tests.
"""

import math
from pathlib import Path

import lapsolve
from lapsolve.problem import EPSILON_0

REPO = Path(__file__).resolve().parents[1]
EXAMPLES = REPO / "examples"


def rectangle(width, height, x0=0.0, y0=0.0):
    """Counter-clockwise corners; edges 0 bottom, 1 right, 2 top, 3 left."""
    return [[x0, y0], [x0 + width, y0], [x0 + width, y0 + height], [x0, y0 + height]]


def coax(a=1.0, b=2.0, eps_r=2.0, max_size=0.15, volts=1.0):
    """Concentric circles: inner conductor (radius ``a``) at ``volts``, shield grounded."""
    return {
        "title": "coax",
        "physics": "electrostatic",
        "coefficient": eps_r,
        "outer": {"circle": {"center": [0.0, 0.0], "radius": b}},
        "holes": [{"name": "inner", "circle": {"center": [0.0, 0.0], "radius": a}}],
        "boundary": {
            "inner": {"loop": "inner", "type": "dirichlet", "value": volts},
            "shield": {"loop": "outer", "type": "dirichlet", "value": 0.0},
        },
        "mesh": {"max_size": max_size},
    }


def coax_capacitance(a, b, eps_r):
    """C' = 2 pi eps / ln(b/a) (Ramo, Whinnery & Van Duzer, Fields and Waves in
    Communication Electronics, 3rd ed. 1994)."""
    return 2 * math.pi * eps_r * EPSILON_0 / math.log(b / a)


def plates(width=2.0, gap=0.5, eps_r=3.0, max_size=0.2, volts=5.0):
    """Parallel plates: bottom edge grounded, top edge at ``volts``, side walls not listed."""
    return {
        "physics": "electrostatic",
        "coefficient": eps_r,
        "outer": {"polygon": rectangle(width, gap)},
        "boundary": {
            "ground": {"edges": [0], "type": "dirichlet", "value": 0.0},
            "plate": {"edges": [2], "type": "dirichlet", "value": volts},
        },
        "mesh": {"max_size": max_size},
    }


def two_layer(width=2.0, d1=0.3, d2=0.7, eps1=4.0, eps2=1.5, max_size=0.2):
    """Two dielectric layers between plates; the lower layer is a region.

    The outer polygon has vertices at the interface height, so the region shares
    whole edges (its bottom and its two sides) with the outer boundary.
    Outer edges: 0 bottom, 1 lower right, 2 upper right, 3 top, 4 upper left, 5 lower left.
    """
    top = d1 + d2
    return {
        "physics": "electrostatic",
        "coefficient": eps2,
        "outer": {"polygon": [[0.0, 0.0], [width, 0.0], [width, d1], [width, top],
                              [0.0, top], [0.0, d1]]},
        "regions": [{"name": "lower", "polygon": rectangle(width, d1), "coefficient": eps1}],
        "boundary": {
            "ground": {"edges": [0], "type": "dirichlet", "value": 0.0},
            "plate": {"edges": [3], "type": "dirichlet", "value": 1.0},
        },
        "mesh": {"max_size": max_size},
    }


def slab(thickness=0.2, width=1.0, k=0.8, h=12.0, hot=80.0, air=15.0, max_size=0.1):
    """A wall heated on its left face (edge 3) and cooled by convection on its right (edge 1)."""
    return {
        "physics": "thermal",
        "coefficient": k,
        "outer": {"polygon": rectangle(thickness, width)},
        "boundary": {
            "hot": {"edges": [3], "type": "dirichlet", "value": hot},
            "air": {"edges": [1], "type": "robin", "h": h, "u_ref": air},
        },
        "mesh": {"max_size": max_size},
    }


def solved(data, order=1, **kwargs):
    """Build the problem from ``data`` and solve it."""
    return lapsolve.solve(lapsolve.problem_from_dict(data), order=order, **kwargs)


def relative(value, reference):
    return abs(value - reference) / abs(reference)


COAX_TOML = """\
title = "coax"
physics = "electrostatic"
coefficient = 2.0

[outer]
circle = { center = [0.0, 0.0], radius = 2.0 }

[[holes]]
name = "inner"
circle = { center = [0.0, 0.0], radius = 1.0 }

[boundary.inner]
loop = "inner"
type = "dirichlet"
value = 1.0

[boundary.shield]
loop = "outer"
type = "dirichlet"
value = 0.0

[mesh]
max_size = 0.15
"""

#: A small valid problem that bad-input tests spoil one field at a time.
SQUARE_TOML = """\
title = "square"
coefficient = 1.0

[outer]
polygon = [[0.0, 0.0], [1.0, 0.0], [1.0, 1.0], [0.0, 1.0]]

[boundary.left]
edges = [3]
type = "dirichlet"
value = 1.0

[boundary.right]
edges = [1]
type = "dirichlet"
value = 0.0

[mesh]
max_size = 0.25
"""


def write(folder, name, text):
    """Write ``text`` to ``folder/name`` and return the path as a string."""
    path = Path(folder) / name
    path.write_text(text, encoding="utf-8")
    return str(path)
