"""The numerical engine's package: the method registry, run settings, the status vocabulary, the
steppers (one module per method family) and the compiled loops built on the per-model kernels.

Importing the package is cheap: only the registry, settings and statuses load here; the steppers
and compiled loops load when a run needs them.
"""

from orbitdesk.engine.methods import METHODS, NAMES, Method, method
from orbitdesk.engine.settings import RunSettings, SettingsError
from orbitdesk.engine.status import CANCELLED, DIVERGED, OK, STEP_FAILED, UNDEFINED

__all__ = ["METHODS", "NAMES", "Method", "method", "RunSettings", "SettingsError",
           "OK", "DIVERGED", "UNDEFINED", "STEP_FAILED", "CANCELLED"]
