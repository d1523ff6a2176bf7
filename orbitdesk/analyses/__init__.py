"""What people ask of a model: equilibria, cycles, sections, Lyapunov exponents, sweeps, continuation, fits."""
