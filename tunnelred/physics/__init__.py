"""Stage 2, physics: vectorised formulas (air, free stream, balance, pressure, theory,
wall corrections) and the uncertainty propagation that runs them."""
