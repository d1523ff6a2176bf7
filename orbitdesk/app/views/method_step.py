"""How a view that integrates for itself (the sweep, the Lyapunov exponents, the basins) integrates: one control pair
for both, the method off the one registry (engine/methods.py) and the fixed step beside it, shown only
when the fixed-step method is chosen. Saved as ``{"method": NAME or "automatic", "dt": STEP}``."""

from __future__ import annotations

from PySide6.QtWidgets import QComboBox, QLabel

from orbitdesk.app.plots.plot_style import NumberBox
from orbitdesk.app.views.common import combo_box, is_number, quiet, set_quietly

AUTOMATIC = "automatic"  # the method choice that takes the default, or the stiff method for a stiff system
FIXED = "rk4"            # the fixed-step method: the step box shows with it


def method_combo(tip: str, fixed_step: bool = False, slot=None, stiff: bool = True) -> QComboBox:
    """The integration method, from the one registry (engine/methods.py): "Automatic" first (the default
    method, or the stiff one when a probe run shows stiffness), then every adaptive method by its label;
    with ``fixed_step`` the fixed-step ones too; without ``stiff`` no stiff method (work that runs many
    orbits together in the explicit member loops: basins). Each entry's data is the method's name."""
    from orbitdesk.engine.methods import METHODS

    combo = combo_box(tip)
    combo.addItem("Automatic", AUTOMATIC)
    for name, info in METHODS.items():
        if (info.adaptive or fixed_step) and (stiff or not info.stiff):
            combo.addItem(info.label, name)
    if slot is not None:
        combo.currentIndexChanged.connect(slot)
    return combo


def chosen_method(combo: QComboBox) -> str | None:
    """The method name of a ``method_combo`` (None: automatic)."""
    name = combo.currentData()
    return None if name in (None, AUTOMATIC) else str(name)


def choose_method_quietly(combo: QComboBox, name) -> bool:
    """Select the entry of method ``name`` ("automatic" or None: Automatic) without signals; False when
    the combo box has no such entry."""
    i = combo.findData(AUTOMATIC if name is None else name)
    if i >= 0:
        with quiet(combo):
            combo.setCurrentIndex(i)
    return i >= 0


class MethodStep:
    """The method combo box ("by ...") and the fixed step ("step ...") of a view, as four widgets for its
    control row (``widgets()``). ``changed`` (optional) is called when either changes."""

    def __init__(self, tip: str, step_tip: str, changed=None, step: float = 0.01, stiff: bool = True):
        self.method_label, self.dt_label = QLabel("by"), QLabel("step")
        self.method = method_combo(tip, fixed_step=True, slot=self._on_method, stiff=stiff)
        choose_method_quietly(self.method, None)
        self.dt = NumberBox(step, 1e-7, 10.0, ratio=2.0)
        self.dt.setToolTip(step_tip)
        self._changed = changed
        self._hidden = False
        if changed is not None:
            self.dt.valueChanged.connect(lambda _v: changed())
        self._show_step()

    def widgets(self) -> tuple:
        return self.method_label, self.method, self.dt_label, self.dt

    # ---------------------------------------------------------------- reading
    def fixed(self) -> bool:
        return chosen_method(self.method) == FIXED

    def method_name(self) -> str | None:
        """The adaptive (or stiff) method chosen, None for Automatic and for the fixed step."""
        name = chosen_method(self.method)
        return None if name == FIXED else name

    def step(self) -> float | None:
        """The fixed step, None unless the fixed-step method is chosen."""
        return float(self.dt.value()) if self.fixed() else None

    def settings(self) -> dict:
        return {"method": chosen_method(self.method) or AUTOMATIC, "dt": float(self.dt.value())}

    # ---------------------------------------------------------------- writing
    def apply(self, d: dict) -> None:
        """Take ``method`` and ``dt`` from saved settings without signals. Settings saved before the
        method choice (a step alone) ran the fixed step."""
        if is_number(d.get("dt")) and d["dt"] > 0:
            set_quietly(self.dt, float(d["dt"]))
        name = d.get("method", FIXED if is_number(d.get("dt")) else AUTOMATIC)
        if not choose_method_quietly(self.method, name):
            choose_method_quietly(self.method, AUTOMATIC)
        self._show_step()

    def set_hidden(self, hidden: bool) -> None:
        """Hide the pair (a map has no step; a delay model's step follows the tolerances)."""
        self._hidden = hidden
        self.method.setVisible(not hidden)
        self.method_label.setVisible(not hidden)
        self._show_step()

    def _show_step(self) -> None:
        shown = self.fixed() and not self._hidden
        self.dt.setVisible(shown)
        self.dt_label.setVisible(shown)

    def _on_method(self, _index) -> None:
        self._show_step()
        if self._changed is not None:
            self._changed()
