"""The finite-element core: geometry (planar straight-line graph), mesh, assembly and the
linear and nonlinear solvers. Each module is one stage of the pipeline."""
