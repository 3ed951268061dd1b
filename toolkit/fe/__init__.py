"""(To whoever is building this package now: your full task is in /work/main/TASK-FE.md — read it first.)

Plane-stress finite elements on a structured grid over the panel envelope (pure numerics, no file I/O).

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
- ``boundary.fixed_dofs(grid, supports)`` and ``boundary.check_mechanism(...)``.
- ``loads.load_matrix(grid, panel)`` -> (ndof, ncases) consistent nodal forces, one column per load case.
- ``solve.LinearSolver(K, free)``: factorises K restricted to the free dofs; reuses the symbolic analysis
  when called again with a matrix of the same pattern (``.refactor(K)``); ``.solve(F)`` -> full U.
- ``stress.element_stresses(grid, U, E, nu)`` -> (ne, 3) sx, sy, txy at element centres, and helpers for von
  Mises and principal stresses.
"""
