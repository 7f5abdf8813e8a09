"""Stage 2, model: the stack as arrays.

Owns the nonuniform finite-volume mesh (:mod:`selfcon.model.mesh`) and the immutable
``Structure`` (:mod:`selfcon.model.structure`): per-cell material arrays, doping, sheets,
quantum regions and contacts, in internal units (nm, eV, nm^-3, nm^-2).

May import: the foundation modules and ``selfcon.input``.  Never the solver or output.
"""
