"""The two named axes of a result over a grid (basins: two states; period and exponent maps: two
parameters), held once by every such result."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np


@dataclass
class GridAxes:
    x_name: str
    xs: np.ndarray  # (nx,)
    y_name: str
    ys: np.ndarray  # (ny,)

    def axes_dict(self, named: str) -> dict:
        """The axes as JSON data: {"x": {named: name, "values": [...]}, "y": ...}; ``named`` says what
        the names are ("state", "parameter")."""
        return {"x": {named: self.x_name, "values": self.xs.tolist()},
                "y": {named: self.y_name, "values": self.ys.tolist()}}
