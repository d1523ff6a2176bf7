"""Parsed model -> compiled system: ordered states and parameters, the one code generator, Jacobians, kernels."""
