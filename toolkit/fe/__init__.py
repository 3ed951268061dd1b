"""Plane-stress finite elements on a structured grid over the panel envelope (pure numerics, no file I/O).

The pieces, each a small function or value over numpy arrays (local frame: mm, N, MPa):

- ``grid.Grid`` / ``grid.make_grid(width_mm, height_mm, element_size_mm=None, target_elements=20000)``:
  nx x ny rectangular elements of dx x dy. Element e = iy * nx + ix (x fastest, row 0 at the bottom), so a
  density vector reshapes to an image with ``.reshape(ny, nx)``. Node n = j * (nx + 1) + i; dofs 2n (x) and
  2n + 1 (y). ``grid.edof`` (ne, 8) lists each element's dofs counter-clockwise from its lower-left node.
- ``element.q4_stiffness(dx, dy, E, nu, thickness)`` -> (8, 8); ``element.plane_stress_D(E, nu)`` -> (3, 3);
  ``element.q4_B(dx, dy, xi, eta)`` -> (3, 8) strain-displacement matrix.
- ``assembly.Assembler(grid)``: the sparsity pattern built once; ``.matrix(ke, scale)`` returns the global
  stiffness (CSC) for per-element factors ``scale`` (ne,) with the same pattern every call.
- ``fractions.solid_fractions(grid, solid_polygon)`` -> (ne,) area fraction of each element inside the solid,
  cut exactly with shapely.
- ``boundary.fixed_dofs(grid, supports, solid=None, active_nodes=None, frame=None)`` -> (ndof,) bool, and
  ``boundary.check_mechanism(grid, fixed, active_elements=None, frame=None)``: raises LacunaError in words
  when the supports leave a part of the panel free to slide or rotate.
- ``loads.load_matrix(grid, panel, fractions=None, solid=None)`` -> (ndof, ncases) consistent nodal forces,
  one column per load case in ``panel.cases`` order.
- ``solve.LinearSolver(K, free, grid=None)``: factorises K restricted to the free dofs (with ``grid``, in the
  grid's nested-dissection order); ``.refactor(K)`` for a new matrix of the same pattern reuses the ordering
  and the restriction map; ``.solve(F)`` -> full U, one column per column of F.
- ``trimesh.graded_mesh(region, size, tag=...)`` -> ``TriMesh`` of six-node triangles following a region's
  edges (graded points, Delaunay, checked boundary recovery) and ``tri6`` (stiffness, loads, stresses of the
  quadratic triangle): the local models at voids (``toolkit.edge_stress``, docs/edge-stress.md).
- ``stress.element_stresses(grid, U, E, nu)`` -> (ne, 3) sx, sy, txy at element centres ((ncases, ne, 3) for
  a U with one column per case); ``stress.von_mises`` and ``stress.principal_stresses``.

Empty elements: give them a zero (or tiny) factor and leave the dofs of nodes that touch no element with
material out of ``free`` (``grid.active_dofs(scale > 0)``); then K restricted to the free dofs is
non-singular whenever ``check_mechanism`` passes. ``toolkit.analysis.analyze`` does exactly this.
"""
