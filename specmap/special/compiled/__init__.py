"""Compiled inner loops of the special-set atlas (numba): the loops whose work grows with the output.

- :mod:`.contours`: contours evaluated at single lines (flat form), tie residuals, ITP root finding;
- :mod:`.sweep`: the output-sensitive edge sweep of crossing detection;
- :mod:`.curves`: marching squares per tie, neighbour lists, the chain walk;
- :mod:`.components`: union-find components of tie curves on the lattice;
- :mod:`.lattice`: the lattice's edge and cell numbering, shared by the others.

Each is tested against the array formulas or a closed form in ``tests/test_kernels.py``.
"""
