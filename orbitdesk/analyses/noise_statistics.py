"""What the realisations of a model with noise show besides their mean: the distribution of a state
at one time (across realisations) or over the stationary part (pooled over the times from a start on)."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

AT_TIME, STATIONARY = "time", "stationary"


@dataclass
class Histogram:
    state: str
    mode: str  # AT_TIME or STATIONARY
    time: float  # the time (AT_TIME) or where the stationary part starts
    edges: np.ndarray  # (bins + 1,)
    density: np.ndarray  # (bins,): integrates to 1
    count: int  # values used
    mean: float
    std: float
    realisations: int

    def describe(self) -> str:
        where = (f"at t = {self.time:.4g}" if self.mode == AT_TIME
                 else f"over t >= {self.time:.4g} (every sample of every realisation)")
        return (f"{self.state} {where}: {self.count} values from {self.realisations} realisations, "
                f"mean {self.mean:.4g}, standard deviation {self.std:.4g}")

    def to_dict(self) -> dict:
        return {"state": self.state, "mode": self.mode, "time": self.time, "edges": self.edges.tolist(),
                "density": self.density.tolist(), "count": self.count, "mean": self.mean, "std": self.std}


def histogram(result, state: str, mode: str = STATIONARY, time: float | None = None,
              bins: int | None = None) -> Histogram | None:
    """The histogram (a density) of ``state`` over the realisations ``result`` (engine.stochastic.Realisations).

    ``AT_TIME``: the values at the sample nearest ``time`` (default: the end), one per realisation.
    ``STATIONARY``: every sample from ``time`` on (default: the second half of the run), pooled.
    ``bins``: default about the square root of the values used, between 10 and 80. None when no
    finite value is left."""
    t = result.time
    x = result.series(state)
    if mode == AT_TIME:
        k = int(np.argmin(np.abs(t - (t[-1] if time is None else time))))
        values, at = x[:, k], float(t[k])
    else:
        at = float(t[0] + (t[-1] - t[0]) / 2 if time is None else time)
        values = x[:, t >= at].ravel()
    values = values[np.isfinite(values)]
    if values.size == 0:
        return None
    bins = bins or int(np.clip(np.sqrt(values.size), 10, 80))
    lo, hi = float(values.min()), float(values.max())
    if hi <= lo:
        lo, hi = lo - 0.5, hi + 0.5
    density, edges = np.histogram(values, bins=bins, range=(lo, hi), density=True)
    return Histogram(state, mode, at, edges, density, int(values.size), float(values.mean()),
                     float(values.std(ddof=1)) if values.size > 1 else 0.0, result.count)


__all__ = ["Histogram", "histogram", "AT_TIME", "STATIONARY"]
