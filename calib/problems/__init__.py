"""Problem containers: the lowest layer of calib, one module per concept.

Every other layer (projectors, solvers, families, reduce, the engine and the analysis) imports from
here; this package imports nothing of calib but :mod:`calib.errors`. Each container validates its
shapes and values once (``validate``), is trusted afterwards, and states how many points the
Johnson–Lindenstrauss bounds count for it (``jl_points``, ``jl_points_for``, ``COUNTING``).

- :mod:`calib.problems.arrays`: the coercions and checks every container applies (dense or sparse
  matrices, the 1e20 infinity, finiteness, symmetry).
- :mod:`calib.problems.lp`: LPs in standard form (A x = b, x >= 0) and general form, the map from
  one to the other, the user's decision columns (:class:`~calib.problems.lp.DecisionMap`).
- :mod:`calib.problems.mps`: MPS files, read (a scan naming the faulty line, then HiGHS) and written.
- :mod:`calib.problems.highs_handle`: the one constructor of a quiet HiGHS handle.
- :mod:`calib.problems.svec`: the symmetric-matrix vectorisation an SDP's constraints are stored in.
- :mod:`calib.problems.sdp`: SDPs in standard form.
- :mod:`calib.problems.qp`: convex QPs with an optional ball.
- :mod:`calib.problems.points`: point sets (and what any problem made of points offers a projection).
- :mod:`calib.problems.clustering`: k-means clustering problems and their cost.
- :mod:`calib.problems.milp`: mixed-integer programs in standard form with singleton slacks.
- :mod:`calib.problems.kinds`: the kinds by name and how each counts n and m.

Names are imported from their own module (``from calib.problems.lp import StandardLP``); this
package module defines none, so every name has one home.
"""
