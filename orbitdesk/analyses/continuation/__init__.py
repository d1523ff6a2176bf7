"""Bifurcation analysis by continuation: branches of equilibria, fixed points, cycles and forced
responses in one parameter, with their special points; fold and Hopf loci in two parameters.

One module per job: ``arclength`` (the stepper and the locator of special points), ``functions``
(the model's f, Jacobians, multilinear forms and flows), ``points`` (equilibrium and fixed-point
problems with their test functions), ``hopf`` (Hopf points and the first Lyapunov coefficient),
``branches`` (the one-parameter driver with branch switching), ``results`` (what is returned).
"""

from orbitdesk.analyses.continuation.arclength import StepSettings
from orbitdesk.analyses.continuation.branches import steady_branches
from orbitdesk.analyses.continuation.functions import ContinuationError
from orbitdesk.analyses.continuation.results import (BOGDANOV_TAKENS, BRANCH_POINT, CUSP, CYCLE, CYCLE_FOLD, EQUILIBRIUM, FIXED_POINT, FOLD,
                      GENERALISED_HOPF, HOPF, LABELS, PERIOD_DOUBLING, TORUS, Branch, BranchSet, Locus,
                      ResponseCurve, Special)

__all__ = ["StepSettings", "steady_branches", "ContinuationError", "Branch", "BranchSet", "Locus",
           "ResponseCurve", "Special", "LABELS", "FOLD", "HOPF", "BRANCH_POINT", "CYCLE_FOLD", "PERIOD_DOUBLING",
           "TORUS", "CUSP", "BOGDANOV_TAKENS", "GENERALISED_HOPF", "EQUILIBRIUM", "CYCLE", "FIXED_POINT"]
