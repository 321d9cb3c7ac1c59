"""Schwarz-Christoffel maps of polygons, in small modules.

``polygon`` checks the input, ``integral`` evaluates the map, ``parameters``
solves for the prevertices, ``inverse`` maps points back, ``map`` ties them into
:class:`SCMap`; ``lines`` and ``picture`` draw the equipotentials and field lines
of a quadrilateral and ``report`` gathers what ``lapsolve modulus`` prints. The
map's public names are re-exported by :mod:`verification.schwarz_christoffel`.
"""
