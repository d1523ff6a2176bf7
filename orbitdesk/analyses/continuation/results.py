"""Results of continuation: branches with their special points, two-parameter loci, response curves."""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

# the words a person reads (and the JSON contract's type strings)
FOLD, HOPF, BRANCH_POINT = "fold", "hopf", "branch point"
CYCLE_FOLD, PERIOD_DOUBLING, TORUS = "cycle fold", "period doubling", "torus"
CUSP, BOGDANOV_TAKENS, GENERALISED_HOPF = "cusp", "bogdanov-takens", "generalised hopf"
LABELS = {FOLD: "fold", HOPF: "Hopf", BRANCH_POINT: "branch point", CYCLE_FOLD: "cycle fold",
          PERIOD_DOUBLING: "period doubling", TORUS: "torus", CUSP: "cusp",
          BOGDANOV_TAKENS: "Bogdanov-Takens", GENERALISED_HOPF: "generalised Hopf"}

EQUILIBRIUM, CYCLE, FIXED_POINT = "equilibrium", "cycle", "fixed point"


def _words_number(x) -> str:
    """6 significant digits, a true minus sign (as the app writes numbers)."""
    return f"{float(x):.6g}".replace("-", "\u2212")


def _real(v) -> float:
    """A number read back from a project file, where NaN and infinities were written as null."""
    return math.nan if v is None else float(v)


def _complex_list(values):
    return [{"re": float(np.real(v)), "im": float(np.imag(v))} for v in values]


@dataclass
class Special:
    """A located special point of a branch."""

    type: str
    value: float
    state: dict[str, float]
    index: int = 0  # it lies between points index - 1 and index of its branch
    frequency: float | None = None
    first_lyapunov_coefficient: float | None = None
    period: float | None = None
    amplitude: float | None = None  # forced responses: half peak-to-peak of the observed state
    note: str = ""
    internal: dict = field(default_factory=dict, repr=False)  # vectors for switching, not exported

    @property
    def label(self) -> str:
        return LABELS.get(self.type, self.type)

    def describe(self) -> str:
        """One line in words: 'Hopf at r = 24.74 (subcritical: hard onset), frequency 9.62'."""
        text = self.label
        if self.type == HOPF and self.first_lyapunov_coefficient is not None:
            l1 = self.first_lyapunov_coefficient
            if l1 < 0:
                text += " (supercritical: soft onset)"
            elif l1 > 0:
                text += " (subcritical: hard onset)"
        return text

    def meaning(self, response: bool = False) -> str:
        """What the point means for the system, in words (the bifurcation view's table, the report);
        ``response``: a point of a forced response."""
        if response and self.type == FOLD:
            return "the stable and unstable responses meet: a slow sweep jumps here"
        if self.type == HOPF:
            l1 = self.first_lyapunov_coefficient
            onset = ("a small stable oscillation grows gently (soft onset)" if l1 is not None and l1 < 0 else
                     "oscillation starts with a jump (hard onset)" if l1 is not None and l1 > 0 else "")
            freq = f"frequency {_words_number(self.frequency)}, " if self.frequency is not None else ""
            coeff = f" (first Lyapunov coefficient {l1:.4g})" if l1 is not None else ""
            return f"{freq}{onset}{coeff}"
        period = f" (period {_words_number(self.period)})" if self.period else ""
        return {FOLD: "two steady states meet and vanish: a jump happens here",
                BRANCH_POINT: "two branches cross: the other branch is drawn too",
                CYCLE_FOLD: "two cycles meet and vanish" + period,
                PERIOD_DOUBLING: "a multiplier passes -1: the period doubles",
                TORUS: "a pair of multipliers leaves the unit circle: a second frequency appears"}.get(self.type, "")

    def to_dict(self) -> dict:
        data = {"type": self.type, "value": self.value, "state": dict(self.state)}
        for key in ("frequency", "first_lyapunov_coefficient", "period", "amplitude"):
            if getattr(self, key) is not None:
                data[key] = getattr(self, key)
        if self.note:
            data["note"] = self.note
        return data


def _neutral_word(text) -> str:
    from orbitdesk.analyses.conservative import NEUTRAL_FLOW, NEUTRAL_MAP

    return text if text in (NEUTRAL_FLOW, NEUTRAL_MAP) else ""


@dataclass
class Branch:
    """One continued branch: the parameter values, the states and what each point's linearisation says."""

    kind: str
    parameter: str
    states: list[str]
    values: np.ndarray  # (N,)
    points: np.ndarray  # (n, N): equilibria, fixed points, or a point on each cycle
    stable: list  # True / False / None per point
    spectra: list  # eigenvalues (flows) or multipliers (maps, cycles) per point
    special: list[Special] = field(default_factory=list)
    reasons: list[str] = field(default_factory=list)
    periods: np.ndarray | None = None  # cycles
    maxima: dict[str, np.ndarray] | None = None  # cycles: max of each state over the orbit
    minima: dict[str, np.ndarray] | None = None
    map_period: int = 1  # maps: the period K of the fixed points of f^K
    neutral: str = ""  # a conservative system's word for its points on the imaginary axis (conservative.py)

    def stability(self, i: int) -> str:
        """Point ``i``'s stability in words: stable, unstable, neutral (conservative) or undecided."""
        return {True: "stable", False: "unstable"}.get(self.stable[i], self.neutral or "undecided")

    @property
    def size(self) -> int:
        return len(self.values)

    @property
    def spectrum_name(self) -> str:
        return "eigenvalues" if self.kind == EQUILIBRIUM else "multipliers"

    def amplitude(self, state: str) -> np.ndarray | None:
        if self.maxima is None:
            return None
        return self.maxima[state] - self.minima[state]

    def state_at(self, i: int) -> dict[str, float]:
        return {s: float(self.points[k, i]) for k, s in enumerate(self.states)}

    def to_dict(self) -> dict:
        points = []
        for i in range(self.size):
            entry = {"value": float(self.values[i]), "state": self.state_at(i), "stable": self.stable[i],
                     "stability": self.stability(i),
                     self.spectrum_name: _complex_list(self.spectra[i])}
            if self.periods is not None:
                entry["period"] = float(self.periods[i])
            if self.maxima is not None:
                entry["amplitude"] = {s: float(self.maxima[s][i] - self.minima[s][i]) for s in self.states}
            points.append(entry)
        data = {"kind": self.kind, "points": points, "special": [s.to_dict() for s in self.special],
                "ended": list(self.reasons)}
        if self.kind == FIXED_POINT:
            data["map_period"] = self.map_period
        if self.neutral:
            data["neutral"] = self.neutral
        return data

    # project storage: plain lists, read back by from_saved
    def to_saved(self) -> dict:
        data = self.to_dict()
        data["parameter"] = self.parameter
        data["states"] = list(self.states)
        if self.maxima is not None:
            data["maxima"] = {s: self.maxima[s].tolist() for s in self.states}
            data["minima"] = {s: self.minima[s].tolist() for s in self.states}
        return data

    @classmethod
    def from_saved(cls, data: dict) -> "Branch":
        states = [str(s) for s in data["states"]]
        pts = data["points"]
        spectrum = "eigenvalues" if data["kind"] == EQUILIBRIUM else "multipliers"
        values = np.array([_real(p["value"]) for p in pts])
        points = np.array([[_real(p["state"][s]) for p in pts] for s in states]).reshape(len(states), len(pts))
        stable = [p.get("stable") if p.get("stable") in (True, False) else None for p in pts]
        spectra = [np.array([complex(_real(e["re"]), _real(e["im"])) for e in p.get(spectrum, [])]) for p in pts]
        periods = np.array([_real(p["period"]) for p in pts]) if pts and "period" in pts[0] else None
        maxima = minima = None
        if "maxima" in data:
            maxima = {s: np.array(data["maxima"][s], dtype=float) for s in states}
            minima = {s: np.array(data["minima"][s], dtype=float) for s in states}
        special = []
        for s in data.get("special", []):
            special.append(Special(str(s["type"]), float(s["value"]),
                                   {k: _real(v) for k, v in s.get("state", {}).items()},
                                   frequency=s.get("frequency"),
                                   first_lyapunov_coefficient=s.get("first_lyapunov_coefficient"),
                                   period=s.get("period"), amplitude=s.get("amplitude"),
                                   note=str(s.get("note", ""))))
        return cls(str(data["kind"]), str(data["parameter"]), states, values, points, stable, spectra, special,
                   [str(r) for r in data.get("ended", [])], periods, maxima, minima,
                   int(data.get("map_period", 1)), _neutral_word(data.get("neutral")))


@dataclass
class BranchSet:
    """Every branch of one continuation run, with notes about the run itself."""

    parameter: str
    branches: list[Branch]
    notes: list[str] = field(default_factory=list)

    def to_dict(self) -> dict:
        return {"parameter": self.parameter, "branches": [b.to_dict() for b in self.branches],
                "notes": list(self.notes)}


@dataclass
class Locus:
    """The curve of a fold or Hopf point in two parameters."""

    kind: str  # "fold" or "hopf"
    parameters: tuple[str, str]
    states: list[str]
    values: np.ndarray  # (2, N): first and second parameter
    points: np.ndarray  # (n, N)
    special: list[dict] = field(default_factory=list)  # {"type", "values": {p1, p2}, "state"}
    reasons: list[str] = field(default_factory=list)

    def to_dict(self) -> dict:
        p1, p2 = self.parameters
        curve = [{"values": {p1: float(self.values[0, i]), p2: float(self.values[1, i])},
                  "state": {s: float(self.points[k, i]) for k, s in enumerate(self.states)}}
                 for i in range(self.values.shape[1])]
        return {"kind": self.kind, "parameters": [p1, p2], "states": list(self.states), "curve": curve,
                "special": [dict(s) for s in self.special], "ended": list(self.reasons)}

    # project storage (the live document's result of kind "bifurcation_locus"): the JSON form itself
    def to_saved(self) -> dict:
        return self.to_dict()

    @classmethod
    def from_saved(cls, data: dict) -> "Locus":
        return locus_from_saved(data)


@dataclass
class ResponseCurve:
    """The periodic response of a forced flow against a parameter (continued, or stepped)."""

    parameter: str
    observe: str
    values: np.ndarray
    amplitudes: np.ndarray  # half peak-to-peak of the observed state
    stable: list
    states: list[str]
    points: np.ndarray  # (n, N): the response's state at the forcing phase zero
    special: list[Special] = field(default_factory=list)
    reasons: list[str] = field(default_factory=list)
    stepped: str | None = None  # "up" or "down" for a stepped sweep

    def to_dict(self) -> dict:
        points = [{"value": float(self.values[i]), "amplitude": float(self.amplitudes[i]),
                   "stable": self.stable[i],
                   "state": {s: float(self.points[k, i]) for k, s in enumerate(self.states)}}
                  for i in range(len(self.values))]
        data = {"parameter": self.parameter, "observe": self.observe, "states": list(self.states), "points": points,
                "special": [s.to_dict() for s in self.special]}
        if self.stepped:
            data["stepped"] = self.stepped
        if self.reasons:
            data["ended"] = list(self.reasons)
        return data


def response_from_saved(data: dict) -> ResponseCurve:
    """A ResponseCurve from its ``to_dict`` form (as a project keeps it)."""
    points = data["points"]
    states = [str(s) for s in data["states"]] if "states" in data else sorted(points[0]["state"]) if points else []
    special = [Special(str(s["type"]), float(s["value"]), {k: _real(v) for k, v in s.get("state", {}).items()},
                       amplitude=s.get("amplitude")) for s in data.get("special", [])]
    return ResponseCurve(str(data["parameter"]), str(data["observe"]), np.array([_real(p["value"]) for p in points]),
                         np.array([_real(p["amplitude"]) for p in points]),
                         [p.get("stable") if p.get("stable") in (True, False) else None for p in points], states,
                         np.array([[_real(p["state"][s]) for p in points] for s in states]).reshape(len(states), -1),
                         special, [str(r) for r in data.get("ended", [])], data.get("stepped"))


def locus_from_saved(data: dict) -> Locus:
    """A Locus from its ``to_dict`` form plus "parameters" and "states" (as a project keeps it)."""
    p1, p2 = (str(n) for n in data["parameters"])
    states = [str(s) for s in data["states"]]
    curve = data["curve"]
    values = np.array([[_real(c["values"][p1]) for c in curve], [_real(c["values"][p2]) for c in curve]])
    points = np.array([[_real(c["state"][s]) for c in curve] for s in states]).reshape(len(states), -1)
    return Locus(str(data["kind"]), (p1, p2), states, values, points, [dict(s) for s in data.get("special", [])],
                 [str(r) for r in data.get("ended", [])])


# ---------------------------------------------------------------- what the live document keeps

FOLLOW_MODES = ("steady", "cycles", "cycle", "response")   # steady states, + their cycles, the run's cycle, forced


@dataclass
class ContinuationResult:
    """One Compute of the bifurcation diagram: what was followed (``follow``: one of FOLLOW_MODES, over
    ``parameter`` from ``lo`` to ``hi``) and what came out: the branches with their special points and the
    run's notes, or for a forced flow the continued response with the stepped sweeps up and down. The live
    document keeps it (document/results.py, kind "bifurcation"); ``to_saved``/``from_saved`` are its plain
    form in the project file (numbers and text only, read back without running anything)."""

    follow: str
    parameter: str
    lo: float
    hi: float
    branches: list[Branch] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)
    response: ResponseCurve | None = None
    stepped: list[ResponseCurve] = field(default_factory=list)

    @property
    def specials(self) -> list[Special]:
        """Every special point: those of the branches, then those of the response."""
        out = [s for b in self.branches for s in b.special]
        return out + (list(self.response.special) if self.response is not None else [])

    def to_saved(self) -> dict:
        return {"follow": self.follow, "parameter": self.parameter, "from": float(self.lo), "to": float(self.hi),
                "branches": [b.to_saved() for b in self.branches], "notes": list(self.notes),
                "response": self.response.to_dict() if self.response is not None else {},
                "stepped_sweeps": [c.to_dict() for c in self.stepped]}

    @classmethod
    def from_saved(cls, data: dict) -> "ContinuationResult":
        """The result from ``to_saved``'s form (also the bifurcation view's settings of earlier versions,
        which held the same keys); KeyError, TypeError, ValueError... when it does not fit."""
        branches = [Branch.from_saved(b) for b in data.get("branches") or []]
        response = data.get("response") or None
        response = response_from_saved(response) if response is not None else None
        stepped = [response_from_saved(c) for c in data.get("stepped_sweeps") or []]
        follow = data.get("follow")
        if follow not in FOLLOW_MODES:
            follow = "response" if response is not None else "steady"
        parameter = (branches[0].parameter if branches else response.parameter if response is not None
                     else data.get("parameter"))
        values = [b.values for b in branches] + ([response.values] if response is not None else [])
        lo, hi = data.get("from"), data.get("to")
        if not isinstance(lo, (int, float)) or not isinstance(hi, (int, float)):
            lo, hi = ((min(float(np.min(v)) for v in values if len(v)), max(float(np.max(v)) for v in values if len(v)))
                      if any(len(v) for v in values) else (0.0, 1.0))
        if not isinstance(parameter, str) or not (branches or response is not None):
            raise ValueError("no branches")
        return cls(follow, parameter, float(lo), float(hi), branches, [str(n) for n in data.get("notes") or []],
                   response, stepped)
