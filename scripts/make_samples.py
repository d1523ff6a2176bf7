"""Writes the sample projects in orbitdesk/samples/ from the data below, so they always load and parse.

Run from the repository root:  .venv/bin/python scripts/make_samples.py
Each sample is a scenario of our own with a teaching walkthrough; published models keep their names.
Every step stores all parameter and initial values, so a reader can jump to any step in any order.
"""

from __future__ import annotations

import math
import sys
from pathlib import Path

from orbitdesk.language.model import parse_model
from orbitdesk.document.project import ParameterSetting, Project, dumps
from orbitdesk.document.results import RESULTS_KEY, results_from_view_settings
from orbitdesk.engine.settings import RunSettings
from orbitdesk.document.view_settings import missing_names, unknown_keys
from orbitdesk.document.walkthrough import apply_step, record_step

OUT = Path(__file__).resolve().parent.parent / "orbitdesk" / "samples"


def sample(file, name, model, solver, views, notes, steps):
    """A Project whose steps are (title, note, overrides) with overrides of the snapshot keys."""
    parsed = parse_model(model)
    if not parsed.ok:
        raise SystemExit(f"{file}: the model has errors: {[d.format() for d in parsed.errors]}")
    params = {n: p.value for n, p in parsed.parameters.items()}
    known = {"series": set(parsed.states) | set(parsed.derived) | {str(parsed.time_symbol)},
             "state": set(parsed.states), "parameter": set(parsed.parameters)}
    for view_id, settings in views.items():
        wrong = unknown_keys(view_id, settings) + [f"{path} = {n}" for path, _k, n in
                                                   missing_names(view_id, settings, known)]
        if wrong:
            raise SystemExit(f"{file}: the {view_id} view does not have {wrong}")
    initial = dict(parsed.initial)
    walkthrough = []
    for title, note, over in steps:
        state = {"parameters": {**params, **over.pop("parameters", {})},
                 "initial": {**initial, **over.pop("initial", {})}, **over}
        step = record_step(title, note, state)
        _, problems = apply_step(step, parsed, {})
        if problems:
            raise SystemExit(f"{file}: step '{title}': {problems}")
        walkthrough.append(step)
    if "bifurcation" in views:   # computed branches are the project's results, not the view's settings
        settings, results = results_from_view_settings(views["bifurcation"], params, model)
        views = {**views, "bifurcation": settings, RESULTS_KEY: results}
    return file, Project(
        name=name, model=model,
        parameters={n: ParameterSetting(p.value, p.lo, p.hi) for n, p in parsed.parameters.items()},
        initial=initial, solver=RunSettings(**solver), views=views, walkthrough=walkthrough, notes=notes)


def bifurcation_view(model, param, lo, hi, follow="steady", measure=None, values=None, locus=None):
    """The bifurcation view's settings with its branches computed now (analyses.continuation), so the sample
    (the project's results, see ``sample``) and its walkthrough steps open with the diagram drawn. ``locus``: (kind, second parameter, lo2, hi2) for the second tab."""
    from orbitdesk.analyses.continuation import steady_branches
    from orbitdesk.analyses.continuation.cycles import cycles_from_hopf_points
    from orbitdesk.analyses.continuation.loci import locus as follow_locus
    from orbitdesk.analyses.continuation.response import response_curve, stepped_sweep
    from orbitdesk.system.compiled_system import compile_model

    system = compile_model(model)
    p = system.param_vector(values or {})
    view = {"follow": follow, "parameter": param, "from": lo, "to": hi, "measure": measure or system.states[0],
            "overlay": False, "stepped": follow == "response", "locus_kind": "fold", "param2": "", "from2": 0.0,
            "to2": 1.0, "tab": 0, "branches": [], "response": {}, "stepped_sweeps": [], "locus": {}}
    if follow == "response":
        view["response"] = response_curve(system, param, lo, hi, p, measure).to_dict()
        view["stepped_sweeps"] = [stepped_sweep(system, param, lo, hi, d, 41, p, measure).to_dict()
                                  for d in ("up", "down")]
    else:
        result = steady_branches(system, param, lo, hi, p)
        if follow == "cycles":
            result = cycles_from_hopf_points(system, result, lo, hi, p)
        view["branches"] = [b.to_saved() for b in result.branches]
    if locus is not None:
        kind, name2, lo2, hi2 = locus
        view.update(locus_kind="fold" if kind == "fold" else "Hopf", param2=name2, from2=lo2, to2=hi2, tab=1)
        view["locus"] = follow_locus(system, kind, param, name2, lo, hi, p, range2=(lo2, hi2)).to_dict()
    return _rounded(view)


def _rounded(value, digits=10):
    """Numbers to ``digits`` significant digits: the stored branches stay exact enough and the file small."""
    if isinstance(value, float):
        return float(f"{value:.{digits}g}")
    if isinstance(value, dict):
        return {k: _rounded(v, digits) for k, v in value.items()}
    if isinstance(value, list):
        return [_rounded(v, digits) for v in value]
    return value


# ---------------------------------------------------------------- a shaken beam with two rest positions

FORCING_PERIOD = 2 * math.pi / 1.2

BEAM_MODEL = """\
# A thin steel strip stands upright in a clamp, between two magnets. It cannot stay straight:
# it leans against one magnet or the other. A shaker moves the clamp from side to side.
# x is the sideways deflection of the tip, scaled so that the two rest positions are x = -1
# and x = +1; x' is the speed of the tip.
# Forced two-well Duffing equation:  x'' + delta x' - x + x^3 = gamma cos(omega t)

delta = 0.3 in [0, 1]        # damping of the strip
gamma = 0.5 in [0, 0.8]      # how hard the shaker moves the clamp
omega = 1.2 in [0.5, 2]      # shaking frequency (the period is 2 pi / omega)

x'' = -delta*x' + x - x^3 + gamma*cos(omega*t)
x(0) = 1
x'(0) = 0

energy = x'^2/2 - x^2/2 + x^4/4     # motion plus magnetic energy: -1/4 at rest on a magnet, 0 on the hump
"""
BEAM_RESPONSE = bifurcation_view(BEAM_MODEL, "omega", 0.8, 1.8, "response", "x",
                                 {"delta": 0.1, "gamma": 0.05, "omega": 1.2})

SHAKEN_BEAM = sample(
    "shaken_beam.orbitdesk", "Shaken beam with two rest positions", BEAM_MODEL,
    dict(method="dop853", t_end=400.0, samples=16000, rtol=1e-9, atol=1e-11),
    {"timeseries": {"series": ["x"]}, "phase_plane": {"x": "x", "y": "x'"},
     "sections": {"kind": "strobe", "period": round(FORCING_PERIOD, 6), "count": 600, "transient": 60.0},
     "sweep": {"parameter": "gamma", "from": 0.2, "to": 0.5, "count": 200, "observe": "x", "mode": "strobe",
               "period": round(FORCING_PERIOD, 6), "transient": 300.0, "samples": 64}},
    "A strip of steel between two magnets, shaken at its foot: from a steady wobble to chaos.",
    [
        ("Without shaking, the strip picks a magnet",
         "With the shaker off (`gamma = 0`) the strip swings a few times and comes to rest against a "
         "magnet. In the phase plane the path *spirals in* to the point `x = 1, x' = 0`.\n\n"
         "Watch the **energy** curve in the time series: it only goes down, because damping takes "
         "energy out and nothing puts it back.",
         {"parameters": {"gamma": 0.0}, "initial": {"x": 0.2, "x'": 0.9},
          "open_views": ["timeseries", "phase_plane"],
          "views": {"timeseries": {"series": ["x", "energy"]}, "phase_plane": {"seeds": []}}}),
        ("Three rest positions, two of them stable",
         "Without shaking the strip can rest wherever `x' = 0` and `x - x^3 = 0`: at `x = -1`, `0` and "
         "`+1`. Linearising the equation there tells them apart:\n\n"
         "- against either magnet, `x = ±1`, the eigenvalues are `-0.15 ± 1.41i`: **stable foci**, so "
         "a disturbed strip spirals back;\n"
         "- standing straight up, `x = 0`, they are `0.86` and `-1.16`: a **saddle**. The strip could "
         "balance there in principle, but the smallest push sends it to one side.\n\n"
         "Which magnet wins depends on where the strip starts. Started at `x = -0.4` with speed 0.9 "
         "it swings over the hump and ends on the right (the second path in the phase plane, started "
         "there as a click would); started at `x = -0.6` with speed 0.5 (this step's run) it stays on "
         "the left. The stable curves of the saddle divide the phase plane into the two *basins*, "
         "which wind around each other in bands.",
         {"parameters": {"gamma": 0.0}, "initial": {"x": -0.6, "x'": 0.5},
          "open_views": ["phase_plane", "timeseries"],
          "views": {"phase_plane": {"seeds": [{"u0": [-0.4, 0.9], "both": False}],
                                    "range": [[-1.75, 1.75], [-1.2, 1.2]]}}}),
        ("Gentle shaking: a steady wobble",
         "Now the shaker runs with `gamma = 0.2`. After a short settling time the strip wobbles about "
         "one magnet, once per shaking period `T = 2 pi / omega`, about 5.24.\n\n"
         "The **stroboscopic section** looks at the strip once per period, like a flash photograph. "
         "A motion that repeats every period shows up as a *single dot*.",
         {"parameters": {"gamma": 0.2}, "open_views": ["timeseries", "phase_plane", "sections"],
          "views": {"phase_plane": {"seeds": []}}, "section": {"strobe": round(FORCING_PERIOD, 6)}}),
        ("Harder shaking: period doubling",
         "At `gamma = 0.28` the wobble repeats only every *second* shaking period: the section shows "
         "**two dots**, and the time series has a tall and a short swing taking turns. A little "
         "harder, near `gamma = 0.29`, it needs four periods to repeat.",
         {"parameters": {"gamma": 0.28}, "open_views": ["timeseries", "sections"],
          "section": {"strobe": round(FORCING_PERIOD, 6)}}),
        ("Hard shaking: the strip hops between magnets",
         "At `gamma = 0.5` the strip never settles into a pattern. It hops from one magnet to the "
         "other at irregular times, and two starts that differ in the sixth decimal soon do "
         "completely different things.\n\n"
         "The flash photographs no longer fall on a few dots: they trace out a folded, layered "
         "curve, the *strange attractor* of the stroboscopic map. Run the section longer and the "
         "folds fill in.",
         {"parameters": {"gamma": 0.5}, "open_views": ["timeseries", "sections"],
          "section": {"strobe": round(FORCING_PERIOD, 6)}}),
        ("The whole story in one picture",
         "The sweep runs the strip for 200 shaking strengths from 0.2 to 0.5 and plots the flash "
         "photographs of each one above its `gamma`. Read it from left to right:\n\n"
         "1. one branch: a steady wobble;\n"
         "2. the branch splits in two near `gamma = 0.27` and again near 0.29: **period doubling**;\n"
         "3. a smeared band from about 0.30: chaos, first around one magnet, then across both;\n"
         "4. a clear gap near 0.35 to 0.38 where five dots return: a periodic *window* inside the chaos.",
         {"parameters": {"gamma": 0.5}, "open_views": ["sweep"]}),
        ("Turning the shaking frequency: where the wobble jumps",
         "Back to a gentle shake (`gamma = 0.05`) with less damping (`delta = 0.1`), and now the "
         "*frequency* `omega` moves. The bifurcation diagram shows the **frequency-response curve**: "
         "half the swing of `x` in the steady wobble, for each `omega` from 0.8 to 1.8.\n\n"
         "Near the magnet the strip is a softening spring, so the peak leans to the left: its top is the "
         "**fold** at about `omega = 1.238`, and a second fold sits at about `1.294`. Between them there are "
         "three wobbles: a small and a large one, both stable (solid), and an unstable one between them "
         "(dashed).\n\n"
         "The triangles are what a test rig shows when the frequency is stepped slowly, each value "
         "starting from the last one's motion. Going up (△) the strip keeps the small wobble until the "
         "fold at 1.294 and then *jumps* to the large one; going down (▽) it rides the large wobble up to "
         "the peak at 1.238 and then drops. Between the folds the answer depends on the way you came: "
         "**hysteresis**.",
         {"parameters": {"gamma": 0.05, "delta": 0.1, "omega": 1.2}, "initial": {"x": 1.0, "x'": 0.0},
          "open_views": ["bifurcation", "timeseries"], "views": {"bifurcation": BEAM_RESPONSE}}),
    ])

# ---------------------------------------------------------------- a heated convection loop

CONVECTION_LOOP = sample(
    "convection_loop.orbitdesk", "Heated convection loop",
    """\
# A ring of glass tubing stands upright, full of water, warmed at the bottom and cooled at the top.
# Warm water wants to rise, so the water may start to circulate around the ring, one way or the other.
# x: speed of the water around the ring (positive: clockwise)
# y: temperature difference between the rising and the falling side of the ring
# z: how far the temperature from bottom to top departs from a straight-line profile
# Lorenz equations.

sigma = 10 in [1, 20]      # how quickly the water's motion spreads, compared with heat
r = 28 in [0, 50]          # heating, relative to the heating at which the water first moves
beta = 8/3 in [0.5, 4]     # shape factor of the ring

x' = sigma*(y - x)
y' = x*(r - z) - y
z' = x*y - beta*z

x(0) = 1
y(0) = 1
z(0) = 1
""",
    dict(method="dop853", t_end=100.0, samples=10000),
    {"timeseries": {"series": ["x"]}, "phase_space_3d": {"axes": ["x", "y", "z"]},
     "phase_plane": {"x": "x", "y": "z"}, "equilibria": {},
     "sections": {"kind": "plane", "coordinate": "z", "value": 27.0, "direction": "up", "count": 500},
     "lyapunov": {"flow": {"length": 10000.0, "transient": 20.0}}},
    "Water warmed from below in an upright ring of tubing: still, circulating, or reversing at random.",
    [
        ("Too little heat: the water stays still",
         "With the heating low (`r = 0.5`) any stirring dies away and the water comes to rest. "
         "The only equilibrium is the origin, and it is a **stable node**: all three eigenvalues are "
         "real and negative, so the motion fades without swinging.",
         {"parameters": {"r": 0.5}, "open_views": ["timeseries", "equilibria"]}),
        ("More heat: steady circulation",
         "At `r = 10` the still state has become a **saddle**, and two new equilibria have appeared: "
         "steady circulation clockwise and anticlockwise, at `x = y = ±sqrt(beta (r - 1))`, `z = r - 1`.\n\n"
         "Both are **stable foci**: the water sloshes a little, then settles into turning at a steady "
         "speed. Which way it turns depends on how it was started.",
         {"parameters": {"r": 10.0}, "open_views": ["timeseries", "phase_space_3d", "equilibria"],
          "selected_equilibrium": 2}),
        ("Strong heating: random reversals",
         "At `r = 28` the water turns one way, speeds up, slows down, and now and then reverses, "
         "with no pattern in how long each spell lasts.\n\n"
         "The 3D view looks at the path from the front, across `y`: it winds around two holes, one for "
         "each direction of circulation, and never closes on itself: this is the Lorenz *attractor*. "
         "Drag to turn it and see how thin the two wings are.",
         {"parameters": {"r": 28.0}, "open_views": ["phase_space_3d", "timeseries"],
          "camera": {"azimuth": -90.0, "elevation": 8.0, "distance": 23.0, "center": [0.0, 0.0, 0.0]}}),
        ("Every rest state is unstable",
         "Look at the equilibria at `r = 28`:\n\n"
         "- the origin is a **saddle** with one unstable direction;\n"
         "- the two steady circulations are **saddle-foci**: a complex pair of eigenvalues with "
         "*positive* real part (about 0.094) spirals the path away, while one large negative "
         "eigenvalue pulls it flat onto a sheet.\n\n"
         "With nothing stable to settle on, the path keeps wandering between them.",
         {"parameters": {"r": 28.0}, "open_views": ["equilibria", "phase_space_3d"], "selected_equilibrium": 1}),
        ("A slice through the attractor",
         "The section marks each time the path passes upward through the level `z = 27`, the height "
         "of the two circulation states. The points fall on thin curves rather than filling an area: "
         "the attractor is almost a surface, folded over and over.",
         {"parameters": {"r": 28.0}, "open_views": ["phase_space_3d", "sections"],
          "section": {"plane": "z=27", "direction": "up"}}),
        ("How fast do nearby starts separate?",
         "The Lyapunov spectrum measures the average rate at which tiny differences grow or shrink. "
         "At `r = 28` expect about `+0.91, 0, -14.57` (per unit time):\n\n"
         "- one **positive** exponent: nearby starts separate, so the reversals cannot be forecast "
         "far ahead;\n"
         "- a zero exponent, along the path itself;\n"
         "- a strongly negative one: the flattening onto the sheet.\n\n"
         "A check you can make by hand: the three add up to `-(sigma + 1 + beta)`, about -13.67, "
         "because the flow shrinks every volume at that constant rate.\n\n"
         "With **Until settled** ticked the view keeps averaging until every estimate's standard error "
         "is small against its size (the zero exponent needs the longest: several thousand time units); "
         "the table gives each exponent with that error.",
         {"parameters": {"r": 28.0}, "open_views": ["lyapunov", "timeseries"]}),
    ])

# ---------------------------------------------------------------- a relaxation oscillator

RELAXATION_CIRCUIT = sample(
    "relaxation_circuit.orbitdesk", "Relaxation oscillator in a buoy lamp",
    """\
# The blinker of a harbour buoy: a capacitor and a coil joined to an amplifying element that
# pushes small voltages up and holds large ones back. Whatever the start, the lamp settles into
# one rhythm of its own.
# x: the capacitor voltage (scaled), x': its rate of change.
# Van der Pol equation:  x'' - mu (1 - x^2) x' + x = 0

mu = 1 in [0, 10]     # strength of the amplifying element, compared with the coil and capacitor

x'' = mu*(1 - x^2)*x' - x
x(0) = 0.1
x'(0) = 0
""",
    dict(method="dop853", t_end=80.0, samples=8000),
    {"timeseries": {"series": ["x"]}, "phase_plane": {"x": "x", "y": "x'"}, "equilibria": {}},
    "A blinker circuit that finds its own rhythm: a limit cycle, its period, and the slow-fast shape.",
    [
        ("A weak amplifier: almost a pure tone",
         "With `mu = 0.1` the voltage swings like a plain coil-and-capacitor circuit, a near sine wave "
         "with period close to `2 pi`, about 6.28. The amplifier only slowly pumps the swing up, over "
         "many periods, until it reaches a size of about 2.",
         {"parameters": {"mu": 0.1}, "open_views": ["timeseries", "phase_plane"]}),
        ("A small start grows",
         "At `mu = 1`, start the circuit almost at rest. The path in the phase plane spirals *outward* "
         "and then runs around one closed curve for ever: a **limit cycle**.\n\n"
         "The rest state at the origin is an **unstable focus**: eigenvalues `0.5 ± 0.87i`, with a "
         "positive real part.",
         {"parameters": {"mu": 1.0}, "initial": {"x": 0.1, "x'": 0.0},
          "open_views": ["phase_plane", "equilibria"]}),
        ("A big start shrinks to the same cycle",
         "Now start far out, at `x = 4`. The path spirals *inward*, onto the very same closed curve. "
         "The cycle attracts from both sides: that is what makes it a stable limit cycle, and why "
         "the lamp blinks the same way however it is switched on.",
         {"parameters": {"mu": 1.0}, "initial": {"x": 4.0, "x'": 0.0}, "open_views": ["phase_plane"]}),
        ("The period of the cycle",
         "The **limit cycle** view looks for the cycle from the end of the run (or press *Find cycle* "
         "after clicking a start in the phase plane): it finds the orbit exactly by shooting, draws it "
         "bold in the phase plane and reports its **period**, about 6.663 at `mu = 1`, a little longer "
         "than the `2 pi` of the weak amplifier. Its swing in `x` goes from about -2 to +2.\n\n"
         "The Floquet multipliers tell how a disturbed swing returns: one is always 1 (a shift along "
         "the cycle), the other is about 0.0009, far inside the unit circle, so the cycle is strongly "
         "**stable**.",
         {"parameters": {"mu": 1.0}, "initial": {"x": 0.1, "x'": 0.0}, "open_views": ["phase_plane", "cycles"]}),
        ("A strong amplifier: relaxation",
         "At `mu = 5` the wave changes shape: long slow stretches where the capacitor creeps, broken "
         "by sudden jumps where it flips its voltage. This slow-fast shape is a **relaxation "
         "oscillation**. The period has grown to about 11.6.\n\n"
         "In the phase plane the cycle has sharp corners; the origin is now an **unstable node** "
         "(two real positive eigenvalues).",
         {"parameters": {"mu": 5.0}, "open_views": ["timeseries", "phase_plane"]}),
    ])

# ---------------------------------------------------------------- a chemical clock

CLOCK_MODEL = """\
# A stirred beaker is fed steadily with two reagents and the used liquid drains away. Two short-lived
# substances form inside; an indicator shows their balance as a colour. The beaker may settle to one
# steady colour, or flash back and forth like a clock.
# x, y: concentrations of the two short-lived substances (scaled).
# Brusselator:  x' = a - (b + 1) x + x^2 y,   y' = b x - x^2 y

a = 1 in [0.2, 3]      # feed of the first reagent
b = 1.5 in [0, 5]      # feed of the second reagent

x' = a - (b + 1)*x + x^2*y
y' = b*x - x^2*y

x(0) = 1.5
y(0) = 1
"""
CLOCK_BRANCHES = bifurcation_view(CLOCK_MODEL, "b", 0.5, 3.5, "cycles", "x", {"a": 1.0})

CLOCK_REACTION = sample(
    "clock_reaction.orbitdesk", "Chemical clock in a stirred beaker", CLOCK_MODEL,
    dict(method="dop853", t_end=60.0, samples=6000),
    {"timeseries": {"series": ["x", "y"]}, "phase_plane": {"x": "x", "y": "y"}, "equilibria": {},
     "sweep": {"parameter": "b", "from": 1.0, "to": 3.0, "count": 121, "observe": "x", "mode": "maxima",
               "transient": 200.0}},
    "A reaction that settles or ticks: the Hopf bifurcation of the Brusselator at b = 1 + a^2.",
    [
        ("A slow feed: the colour settles",
         "With `b = 1.5` the two substances swing a few times and settle to a steady mixture: the "
         "colour stops changing. The steady state is at `x = a`, `y = b / a`.",
         {"parameters": {"b": 1.5}, "open_views": ["timeseries", "phase_plane"]}),
        ("Why it settles",
         "The equilibria view classifies the steady state as a **stable focus**: eigenvalues "
         "`-0.25 ± 0.97i`. The imaginary part makes it swing, the negative real part makes the "
         "swings die out.",
         {"parameters": {"b": 1.5}, "open_views": ["equilibria", "phase_plane"], "selected_equilibrium": 0}),
        ("A faster feed: the clock ticks",
         "Raise the feed to `b = 2.5`. Now the swings do not die out: they grow until the mixture "
         "runs around a closed loop, flashing from one colour to the other every 6.6 time units or "
         "so. The steady state still exists, but it is an **unstable focus** (`0.25 ± 0.97i`), and "
         "the path runs away from it onto a **limit cycle**.",
         {"parameters": {"b": 2.5}, "open_views": ["timeseries", "phase_plane", "equilibria"]}),
        ("Where the change happens",
         "The real part of the eigenvalues is `(b - 1 - a^2) / 2`. It crosses zero at "
         "`b = 1 + a^2`, which is 2 for `a = 1`. There the steady state loses its stability and a "
         "small cycle is born around it: a **Hopf bifurcation**.\n\n"
         "The sweep plots the peaks of `x` for feeds from 1 to 3, after a long settling time. Left of "
         "`b = 2` the swings have died out: any peaks left sit at the steady value `x = a = 1`. Right "
         "of it the peaks rise away from that value as the cycle grows.",
         {"parameters": {"b": 2.5}, "open_views": ["sweep"]}),
        ("Move the threshold",
         "With more of the first reagent, `a = 1.5`, the threshold moves up to `1 + 1.5^2 = 3.25`. "
         "The same feed `b = 2.5` that ticked before now settles to a steady colour again.",
         {"parameters": {"a": 1.5, "b": 2.5}, "open_views": ["timeseries", "equilibria"]}),
        ("The Hopf point, located",
         "The bifurcation diagram follows the steady state as the feed `b` goes from 0.5 to 3.5 "
         "(`a = 1`), and the cycle born where it loses stability. The table lists one **Hopf** point, "
         "at `b = 2` exactly, with frequency 1 (period `2 pi`): both as the formulas say.\n\n"
         "Its *first Lyapunov coefficient* is negative, so the onset is **soft**: just past `b = 2` the "
         "cycle is tiny and grows steadily with the feed (the two violet curves are the lowest and "
         "highest `x` on the cycle). No jump, and no hysteresis: turning the feed back down shrinks the "
         "ticking smoothly to nothing.\n\n"
         "Click a branch to set the feed there and see the run.",
         {"parameters": {"a": 1.0, "b": 2.5}, "open_views": ["bifurcation", "timeseries"],
          "views": {"bifurcation": CLOCK_BRANCHES}}),
    ])

# ---------------------------------------------------------------- predators and prey in a pond

POND_PLANE = {"phase_plane": {"range": [[-0.5, 10.5], [-0.7, 2.0]]}}  # both axes, every rest state

POND_PREDATORS = sample(
    "pond_predators.orbitdesk", "Water fleas and fish in a garden pond",
    """\
# A garden pond holds water fleas, which graze on algae, and small fish, which eat the fleas.
# Counts in hundreds. Without fish the fleas grow until the algae cannot feed more of them.
# Lotka-Volterra equations with logistic growth of the prey.

growth = 1 in [0, 3]          # growth rate of the fleas when they are few
capacity = 8 in [1, 30]       # the most fleas the pond can feed
attack = 0.5 in [0, 2]        # how fast one fish finds and eats fleas
efficiency = 0.4 in [0, 1]    # new fish per flea eaten
death = 0.6 in [0, 3]         # death rate of the fish

fleas' = growth*fleas*(1 - fleas/capacity) - attack*fleas*fish
fish' = efficiency*attack*fleas*fish - death*fish

fleas(0) = 4
fish(0) = 1
""",
    dict(method="dop853", t_end=120.0, samples=6000),
    {"timeseries": {"series": ["fleas", "fish"]},
     "phase_plane": {"x": "fleas", "y": "fish", "nullclines": True, "arrows": True}, "equilibria": {}},
    "Fleas and the fish that eat them: nullclines, kinds of equilibria, and what enrichment does.",
    [
        ("Fleas alone",
         "With no fish (`fish(0) = 0`) the fleas grow quickly at first, then more slowly as food runs "
         "short, and level off at the pond's **capacity**, 8 hundred.",
         {"initial": {"fleas": 0.5, "fish": 0.0}, "open_views": ["timeseries"]}),
        ("Add a few fish",
         "Put in twenty fish (`fish(0) = 0.2`). They feast, multiply, eat the fleas down, then starve "
         "back. The booms and busts come round again and again, each a little smaller, until both "
         "counts settle.",
         {"initial": {"fleas": 8.0, "fish": 0.2}, "open_views": ["timeseries", "phase_plane"],
          "views": POND_PLANE}),
        ("Nullclines: where a count stands still",
         "The phase plane draws the **nullclines**, the curves where one count is momentarily "
         "not changing:\n\n"
         "- fleas stand still on the axis `fleas = 0` and on the falling line "
         "`fish = (growth / attack) (1 - fleas / capacity)`;\n"
         "- fish stand still on the axis `fish = 0` and on the upright line "
         "`fleas = death / (efficiency attack)`, here 3.\n\n"
         "Where a fleas-nullcline meets a fish-nullcline, nothing changes: an equilibrium. Between "
         "them the arrows show the turning, counter-clockwise motion of the booms and busts.",
         {"initial": {"fleas": 8.0, "fish": 0.2}, "open_views": ["phase_plane"], "views": POND_PLANE}),
        ("Three kinds of rest",
         "The equilibria view finds three rest states:\n\n"
         "- the empty pond `(0, 0)`: a **saddle**, since fleas put in alone grow away from it;\n"
         "- fleas only `(8, 0)`: also a **saddle**, since a few fish added to it multiply;\n"
         "- both together `(3, 1.25)`: a **stable focus**, eigenvalues `-0.19 ± 0.58i`. The complex "
         "pair is the boom-and-bust swing; the negative real part damps it.",
         {"initial": {"fleas": 8.0, "fish": 0.2}, "open_views": ["equilibria", "phase_plane"],
          "views": POND_PLANE, "selected_equilibrium": 1}),
        ("A richer pond",
         "Feed the algae so the pond can hold 20 hundred fleas. Surprisingly, the fleas at the shared "
         "rest state stay at 3: more food only means **more fish** (1.7 instead of 1.25). The swings "
         "now die out much more slowly (real part -0.075): enriching the pond makes it *less* steady.",
         {"parameters": {"capacity": 20.0}, "initial": {"fleas": 8.0, "fish": 0.2},
          "open_views": ["timeseries", "equilibria"]}),
        ("Fish that die too fast",
         "Raise the fish death rate to 2. Fish now need 10 hundred fleas to break even, more than "
         "the pond can hold, and they die out. The state with fleas only, `(8, 0)`, has turned into a "
         "**stable node**; the shared state has moved to a negative number of fish, `(10, -0.5)`, "
         "below the axis, outside the meaningful part of the plane.",
         {"parameters": {"death": 2.0}, "initial": {"fleas": 4.0, "fish": 1.0},
          "open_views": ["timeseries", "phase_plane", "equilibria"], "views": POND_PLANE}),
    ])

# ---------------------------------------------------------------- insect generations

INSECT_GENERATIONS = sample(
    "insect_generations.orbitdesk", "Moths counted year by year",
    """\
# Moths in an orchard breed once a year and the adults die before the next summer. x is this year's
# count as a fraction of the most the orchard could ever hold. Crowded larvae go hungry, so a big year
# is followed by fewer offspring per moth.
# Logistic map:  x[n+1] = r x[n] (1 - x[n])

r = 2.8 in [2.5, 4]     # offspring per moth that survive to breed, when moths are few

x[n+1] = r*x*(1 - x)
x[0] = 0.1
""",
    dict(steps=300),
    {"timeseries": {"series": ["x"]}, "equilibria": {},
     "sweep": {"parameter": "r", "from": 2.5, "to": 4.0, "count": 600, "observe": "x", "transient": 500,
               "samples": 200},
     "lyapunov": {"map": {"steps": 50000, "transient": 500}}},
    "A yearly count that settles, alternates, doubles its period and turns chaotic: the logistic map.",
    [
        ("A steady population",
         "With `r = 2.8` the count overshoots and undershoots for a few years and then settles at "
         "`1 - 1/r`, about 0.643. That value is a **stable fixed point** of the map: its multiplier "
         "`2 - r = -0.8` is inside the unit circle, and being negative it makes the approach zig-zag.",
         {"parameters": {"r": 2.8}, "open_views": ["timeseries", "equilibria"], "selected_equilibrium": 1}),
        ("Boom and bust",
         "At `r = 3.2` the count no longer settles. Good and bad years take turns for ever: a cycle "
         "of **period 2**. The fixed point is still there, but its multiplier `2 - r` has passed -1, "
         "so it repels; the change happened at `r = 3`.",
         {"parameters": {"r": 3.2}, "open_views": ["timeseries", "equilibria"], "selected_equilibrium": 1}),
        ("Period four",
         "At `r = 3.5` the pattern repeats only every four years. Each doubling comes sooner than the "
         "last, the gaps shrinking by a nearly constant factor.",
         {"parameters": {"r": 3.5}, "open_views": ["timeseries"]}),
        ("The orbit diagram",
         "The sweep runs 600 values of `r` from 2.5 to 4, drops the first 500 years of each, and "
         "plots the next 200 counts above their `r`. Read it from left to right:\n\n"
         "1. one branch: a steady count;\n"
         "2. splits into 2, 4, 8, ...: the **period-doubling cascade**, ending near `r = 3.57`;\n"
         "3. bands of scattered dots: chaos;\n"
         "4. clear gaps, the largest starting at `r = 1 + sqrt(8)`, about 3.83: **windows** of "
         "periodic behaviour inside the chaos.",
         {"parameters": {"r": 3.5}, "open_views": ["sweep"]}),
        ("A window of period three",
         "At `r = 3.83`, in the middle of the chaotic range, the count settles into a cycle of "
         "**period 3**: low, middle, high, and again.",
         {"parameters": {"r": 3.83}, "open_views": ["timeseries", "sweep"]}),
        ("Chaos, measured",
         "At `r = 3.9` the counts never repeat, and two orchards whose counts differ by one moth in "
         "a million drift apart within a few dozen years.\n\n"
         "The **Lyapunov exponent** gives the average rate of that drift per year: positive here "
         "(about 0.5), negative in the steady and periodic ranges. At `r = 4` it is exactly "
         "`ln 2`, about 0.693: the gap doubles every year on average.",
         {"parameters": {"r": 3.9}, "open_views": ["timeseries", "lyapunov"]}),
    ])

# ---------------------------------------------------------------- a swinging pendulum

G = 9.81
PENDULUM = sample(
    "pendulum.orbitdesk", "A swinging pendulum",
    """\
# A weight on a light, stiff rod swings from a pivot. Typed as one second-order equation;
# OrbitDesk reduces it to first order with the states theta and theta'.
# theta: angle from hanging straight down (radians); theta': angular speed (radians per second).

g = 9.81 in [1, 20]     # gravity (m/s^2)
L = 1 in [0.1, 5]       # length of the rod (m)
c = 0 in [0, 2]         # friction at the pivot (1/s)

theta'' = -(g/L)*sin(theta) - c*theta'
angle theta             # shown wrapped to (-pi, pi]: one turn of the rod is one strip of the phase plane
theta(0) = 0.3
theta'(0) = 0

energy = theta'^2/2 + (g/L)*(1 - cos(theta))    # per unit of mass times L^2; 0 hanging still
""",
    dict(method="dop853", t_end=20.0, samples=4000),
    {"timeseries": {"series": ["theta"]}, "phase_plane": {"x": "theta", "y": "theta'", "arrows": True},
     "equilibria": {}},
    "A pendulum typed as theta'' = ..., with its energy as a derived quantity and the separatrix.",
    [
        ("Small swings",
         "Released from 0.3 radians (about 17 degrees) the pendulum swings with a period close to "
         "`2 pi sqrt(L / g)`, about 2.006 s for a one-metre rod. In the phase plane the motion is a "
         "small closed oval around the resting point.",
         {"initial": {"theta": 0.3, "theta'": 0.0}, "open_views": ["timeseries", "phase_plane"],
          "views": {"phase_plane": {"seeds": []}}}),
        ("Wide swings take longer",
         "Released from 2.5 radians (143 degrees) the pendulum lingers near the top of each swing, and "
         "the period grows to about 3.30 s. The oval in the phase plane has become lemon-shaped.",
         {"initial": {"theta": 2.5, "theta'": 0.0}, "open_views": ["timeseries", "phase_plane"],
          "views": {"phase_plane": {"seeds": []}}}),
        ("Energy is kept",
         "Plot the derived quantity **energy** next to the angle. Without friction it is a flat line: "
         "the swing trades motion for height and back, and nothing is lost. A flat energy curve is "
         "also a handy check that the solver's tolerances are tight enough.",
         {"initial": {"theta": 2.5, "theta'": 0.0}, "open_views": ["timeseries"],
          "views": {"timeseries": {"series": ["theta", "energy"]}}}),
        ("Over the top",
         "Give the hanging pendulum a hard push, `theta'(0) = 6.5`. It goes right over the top and keeps "
         "turning in circles: the angle grows without end in the time series. The model declares "
         "`angle theta`, so the phase plane shows the angle wrapped to (-pi, pi]: each turn crosses the "
         "strip once as a wavy line, leaving at `theta = pi` and coming back in at `-pi`, the same "
         "upright position.",
         {"initial": {"theta": 0.0, "theta'": 6.5}, "open_views": ["phase_plane", "timeseries"],
          "views": {"phase_plane": {"seeds": []}}}),
        ("The separatrix",
         "Between swinging and turning lies a single borderline motion with energy exactly `2 g / L`: "
         "a push of `theta'(0) = 2 sqrt(g / L)`, about 6.264, sends the pendulum creeping up towards "
         "the top for ever, never quite arriving. In the phase plane this curve, the **separatrix**, "
         "joins the upside-down positions.\n\n"
         "The phase plane shows the two sides and the border: the run, a push of 6.2, swings back just "
         "short of the top; a push of 6.3 (started as a second trajectory, as a click in the plane "
         "does) goes over it; and the separatrix itself, started at 6.264 forwards and backwards in "
         "time and at -6.264 too, closes the eye between the two upright positions.\n\n"
         "The equilibria view shows why: hanging down is a **centre** (the linearisation alone "
         "cannot settle this; the kept energy does), and standing on end, `theta = pi`, is a "
         "**saddle**, listed once because `theta` is an angle (`-pi` is the same position).",
         {"initial": {"theta": 0.0, "theta'": 6.2}, "open_views": ["phase_plane", "equilibria"],
          "views": {"phase_plane": {"range": [[-3.4, 3.4], [-7.2, 7.2]], "seeds": [
              {"u0": [0.0, 6.3], "both": False},
              {"u0": [0.0, _rounded(2 * math.sqrt(G))], "both": True},
              {"u0": [0.0, -_rounded(2 * math.sqrt(G))], "both": True}]}}}),
        ("Friction",
         "Add friction, `c = 0.3`. Each swing is a little smaller than the one before, the energy "
         "curve steps down, and the phase-plane path spirals into the resting point, which has "
         "become a **stable focus**.",
         {"parameters": {"c": 0.3}, "initial": {"theta": 2.5, "theta'": 0.0},
          "open_views": ["timeseries", "phase_plane"],
          "views": {"timeseries": {"series": ["theta", "energy"]}, "phase_plane": {"seeds": []}}}),
    ])

# ---------------------------------------------------------------- a tank that ignites and goes out

TANK_MODEL = """\
# An insulated, stirred tank is fed with a dilute solution of a compound that breaks down and gives
# off heat; the warmer the liquid, the faster it breaks down. A pump sets how long the liquid stays.
# c: share of the compound broken down in the tank (0 to 1); T: how much warmer the tank is than the feed (scaled)
# stay: time the liquid stays in the tank, in units of the break-down time at feed temperature
# heat: the temperature rise if all of it broke down
# Exothermic stirred-tank reactor (Uppal, Ray and Poore 1974), large activation energy, no cooling

stay = 0.05 in [0, 0.15]
heat = 6 in [2, 10]

c' = -c + stay*(1 - c)*exp(T)
T' = -T + heat*stay*(1 - c)*exp(T)

c(0) = 0
T(0) = 0
"""
TANK_BRANCHES = bifurcation_view(TANK_MODEL, "stay", 0.0, 0.15, "steady", "T", {"stay": 0.05})
TANK_LOCUS = bifurcation_view(TANK_MODEL, "stay", 0.0, 0.15, "steady", "T", {"stay": 0.05},
                              locus=("fold", "heat", 2.0, 10.0))

STIRRED_TANK = sample(
    "stirred_tank.orbitdesk", "A stirred tank that ignites and goes out", TANK_MODEL,
    dict(method="dop853", t_end=30.0, samples=3000),
    {"timeseries": {"series": ["T"]}, "phase_plane": {"x": "c", "y": "T"}, "equilibria": {},
     "bifurcation": TANK_BRANCHES},
    "Two steady states and hysteresis: the tank lights up at one pump setting and goes out at another.",
    [
        ("A fast feed: the tank stays cool",
         "The liquid stays only `stay = 0.03` (in units of the break-down time at feed temperature). "
         "Little of the compound breaks down before it is pumped out, little heat is given off, and the "
         "tank settles a bit above the feed temperature: `T` about 0.2.",
         {"parameters": {"stay": 0.03}, "initial": {"c": 0.0, "T": 0.0},
          "open_views": ["timeseries", "phase_plane"], "views": {"phase_plane": {"seeds": []}}}),
        ("A slower feed: it lights up",
         "Slow the pump so that the liquid stays `0.08`. At first the tank warms a little, as before; "
         "then the warmth speeds up the break-down, which gives more heat, and `T` shoots up to about 5.8: "
         "the tank has **ignited**. Nearly all the compound now breaks down (`c` near 1).",
         {"parameters": {"stay": 0.08}, "initial": {"c": 0.0, "T": 0.0},
          "open_views": ["timeseries", "phase_plane"], "views": {"phase_plane": {"seeds": []}}}),
        ("Back to a faster feed: it stays hot",
         "Now speed the pump up again to `stay = 0.05`, starting from the hot tank. It does *not* go back "
         "to the cool state: it stays hot. Start the same setting from a cold tank (step 1's start, the "
         "second path in the phase plane) and it stays cool. At `stay = 0.05` the tank has **two stable "
         "steady states**; where it ends up depends on its history. The equilibria view lists three: cool "
         "and hot are stable nodes, the one between is a saddle, the watershed between them.",
         {"parameters": {"stay": 0.05}, "initial": {"c": 0.8, "T": 4.8},
          "open_views": ["timeseries", "phase_plane", "equilibria"],
          "views": {"phase_plane": {"seeds": [{"u0": [0.0, 0.0], "both": False}],
                                    "range": [[-0.05, 1.05], [-0.3, 6.3]]}}}),
        ("The S-shaped curve",
         "The bifurcation diagram follows the steady temperature as `stay` goes from 0 to 0.15. It is an "
         "S: solid where the state is stable, dashed in the middle where it is not. The two **fold** "
         "points are where a stable state meets the unstable one and vanishes:\n\n"
         "- at `stay = 0.0754` the cool state ends: a tank fed more slowly than this **ignites**;\n"
         "- at `stay = 0.0329` the hot state ends: a hot tank fed faster than this **goes out**.\n\n"
         "Between the folds the tank remembers where it came from: **hysteresis**. For this model the folds "
         "sit where `T^2 - heat T + heat = 0`, at `T = 3 ± sqrt(3)` for `heat = 6`. Click the diagram to "
         "set `stay` and the state there.",
         {"parameters": {"stay": 0.05}, "initial": {"c": 0.8, "T": 4.8},
          "open_views": ["bifurcation", "timeseries"], "views": {"bifurcation": TANK_BRANCHES}}),
        ("When is there hysteresis at all?",
         "The second tab follows the two folds as the heat of break-down changes too. They trace two curves "
         "in the (`stay`, `heat`) plane that meet in a **cusp** at `heat = 4`. Inside the wedge the tank has "
         "two stable steady states and can ignite and go out at different feeds; below `heat = 4` there is "
         "one steady state for every feed, and the temperature rises smoothly as the pump slows.",
         {"parameters": {"stay": 0.05}, "initial": {"c": 0.8, "T": 4.8},
          "open_views": ["bifurcation"], "views": {"bifurcation": TANK_LOCUS}}),
    ])

# ---------------------------------------------------------------- a train of wagons (a family of states)

WAGON_TRAIN = sample(
    "wagon_train.orbitdesk", "A freight train starting off",
    """\
# A freight train of N wagons joined by sprung couplings, standing still. At t = 0 the locomotive
# starts to pull the front wagon, the pull building up over 'ramp' seconds.
# x_{i}: how far wagon i has moved (m), wagon 1 at the front; x_{i}': its speed (m/s).
N = 12 in [2, 30]            # wagons (changing it rewrites the model)
m = 1 in [0.2, 5]            # mass of a wagon (in units of 10 tonnes)
k = 4 in [0.5, 20]           # stiffness of a coupling
c = 0.05 in [0, 5]           # damping in a coupling
F = 1 in [0, 5]              # full pull of the locomotive
ramp = 2 in [0.1, 10]        # seconds for the pull to build up

pull(s) = F*if(s < ramp, s/ramp, 1)
coupling(stretch, rate) = k*stretch + c*rate      # force in a stretched coupling

x_{1}'' = (pull(t) - coupling(x_{1} - x_{2}, x_{1}' - x_{2}'))/m
x_{i}'' = (coupling(x_{i-1} - x_{i}, x_{i-1}' - x_{i}') - coupling(x_{i} - x_{i+1}, x_{i}' - x_{i+1}'))/m   for i in 2..N-1
x_{N}'' = coupling(x_{N-1} - x_{N}, x_{N-1}' - x_{N}')/m
x_{i}(0) = 0    for i in 1..N    # standing still, couplings slack
x_{i}'(0) = 0   for i in 1..N

front_coupling = x_{1} - x_{2}       # stretch of the first coupling (m)
last_coupling = x_{N-1} - x_{N}      # stretch of the last coupling (m)
train_centre = sum(x_{j}, j in 1..N)/N
""",
    dict(method="dop853", t_end=40.0, samples=4000),
    {"timeseries": {"series": ["front_coupling", "last_coupling"]},
     "phase_plane": {"x": "x_1", "y": "x_1'", "arrows": False}},
    "Twelve wagons typed as one family of equations: a stretch wave runs down the train when it starts.",
    [
        ("The pull runs down the train",
         "The locomotive's pull builds up over two seconds. The **first coupling** stretches at once; the "
         "**last coupling** feels nothing for about five seconds, until a wave of stretch has run down "
         "the train. In a chain of masses `m` joined by springs `k` long waves travel at `sqrt(k/m)` "
         "wagons per second: 2 here, so twelve wagons take about six seconds. When it arrives the last "
         "coupling, which in steady pulling carries only one wagon's share (`F/(N k)`, 0.021 m), is "
         "snatched to about six times that.\n\n"
         "The model is written once for a general wagon, `x_{i}'' = ... for i in 2..N-1`, with two lines "
         "for the ends; the read-back shows all twelve written out.",
         {"open_views": ["timeseries"]}),
        ("Stiffer couplings",
         "Four times stiffer couplings, `k = 16`: the wave runs twice as fast (`sqrt(16) = 4` wagons per "
         "second, three seconds to the end) and every coupling stretches a quarter as far for the same "
         "force.",
         {"parameters": {"k": 16.0}, "open_views": ["timeseries"]}),
        ("Heavier wagons",
         "Loaded wagons, `m = 4`, with the original couplings (`k = 4`): the wave slows to one wagon "
         "per second, and "
         "the rear of the train only starts to move after about twelve seconds.",
         {"parameters": {"m": 4.0}, "open_views": ["timeseries"]}),
        ("A snatch start",
         "Let the pull build up in a tenth of a second, `ramp = 0.1`. The first coupling overshoots its "
         "steady stretch by a third and the last one is snatched to about eight times its share, and the "
         "train keeps surging, because the couplings hardly damp anything (`c = 0.05`). This is why "
         "drivers take up the slack gently: with `ramp = 10` the last coupling peaks at 1.4 times.",
         {"parameters": {"ramp": 0.1}, "open_views": ["timeseries", "phase_plane"]}),
        ("Damped couplings",
         "With dampers in the couplings, `c = 4`, the snatch start is tamed: the last coupling peaks at "
         "under twice its share, the surging dies out within a few passes, and the train settles to a "
         "steady pull in which each coupling carries the force that accelerates the wagons behind it.",
         {"parameters": {"ramp": 0.1, "c": 4.0}, "open_views": ["timeseries", "phase_plane"]}),
        ("A longer train",
         "Move the **N** slider to 24: OrbitDesk writes the new value into the model's first line and "
         "reads it again, so the train now has 48 states and the wave needs twice as long to reach the "
         "end. Undo returns to twelve wagons.",
         {"open_views": ["timeseries"]}),
    ])


# ---------------------------------------------------------------- a flap rattling against a stop (events)

FLAP_MODEL = """\
# A thin sprung steel flap guards the outlet of a vibrating parts feeder. The feeder shakes it; when the
# swing is large enough, the flap's tip hits a rubber-faced stop a small gap away and bounces back.
# x: tip deflection towards the stop (mm); x': its speed. Time is counted so that the flap, left alone,
# swings at 1 radian per unit of time (a full swing takes 2 pi = 6.28).
k = 1                      # spring stiffness per unit mass
c = 0.05 in [0, 0.5]       # damping
A = 0.3 in [0, 1]          # shaking force of the feeder (per unit mass)
w = 0.8 in [0.2, 4]        # shaking frequency (radians per unit time)
gap = 1 in [0, 1.5]        # from the flap at rest to the stop (mm)
r = 0.7 in [0, 1]          # restitution of the stop: the share of the speed the tip keeps at a hit

x'' = -c*x' - k*x + A*cos(w*t)
x(0) = 0
x'(0) = 0

when x > gap then x' = -r*x'       # a hit: located exactly, the speed reversed and reduced
"""
FLAP_PERIOD = round(2 * math.pi / 0.8, 6)
FLAP_FAST = round(2 * math.pi / 2.8, 6)

RATTLING_FLAP = sample(
    "rattling_flap.orbitdesk", "A flap rattling against its stop", FLAP_MODEL,
    dict(method="dop853", t_end=300.0, samples=12000),
    {"timeseries": {"series": ["x"]}, "phase_plane": {"x": "x", "y": "x'", "arrows": False},
     "sections": {"kind": "strobe", "period": FLAP_PERIOD, "count": 200, "transient": 300.0,
                  "axes": ["x", "x'"]}},
    "Impacts as events: a shaken flap that swings freely, rattles once or twice per shake, or rattles chaotically.",
    [
        ("Shaken, but not touching",
         "The feeder shakes the flap at `w = 0.8`, below its own swing rate 1. Once the start-up has died "
         "away the flap swings with the amplitude of a shaken spring, `A/sqrt((k - w^2)^2 + (c w)^2)` = "
         "0.83 mm, which stays short of the stop at `gap = 1`: the last line of the model, "
         "`when x > gap then x' = -r*x'`, is an **event**. During the start-up the swing overshoots and the "
         "tip touches the stop once: the time series marks it with a ring (the values just before the "
         "hit) and a dot (just after), and the read-back lists the event under **Events**.",
         {"open_views": ["timeseries", "phase_plane"]}),
        ("Closer to the stop: a hit every other shake",
         "Move the stop to `gap = 0.6`. Now the tip reaches it on every swing towards it, but the hits "
         "take turns: a harder one, then a softer one. Each hit is found where `x` crosses `gap` to the "
         "integrator's tolerance, the speed is reversed and multiplied by `r = 0.7`, and the run goes on "
         "from there. In the phase plane each hit is a jump straight down at `x = gap`.\n\n"
         "The **stroboscopic section** photographs the flap once per shake: two dots, because the motion "
         "repeats only every second shake.",
         {"parameters": {"gap": 0.6}, "open_views": ["timeseries", "phase_plane", "sections"],
          "section": {"strobe": FLAP_PERIOD}}),
        ("Closer still: one hit per shake",
         "At `gap = 0.3` the pattern locks to one hit per shake and the section shows a single dot. "
         "`orbitdesk run rattling_flap.orbitdesk --set gap=0.3 --json` lists every hit with its time, the "
         "model line and the values before and after it.",
         {"parameters": {"gap": 0.3}, "open_views": ["timeseries", "phase_plane", "sections"],
          "section": {"strobe": FLAP_PERIOD}}),
        ("Fast, hard shaking: a chaotic rattle",
         "Shake harder and faster, `A = 0.6`, `w = 2.8`, with the stop touching the flap at rest "
         "(`gap = 0`) and a livelier stop, `r = 0.8`. The hits no longer repeat: the flash photographs, "
         "now once per shake `2 pi/2.8`, spread over a folded curve, the mark of chaos in an impact "
         "oscillator.",
         {"parameters": {"A": 0.6, "w": 2.8, "gap": 0.0, "r": 0.8},
          "open_views": ["timeseries", "sections"], "section": {"strobe": FLAP_FAST}}),
        ("A dead stop: hits pile up",
         "A dead stop that keeps only 5 % of the speed, `r = 0.05`, and a slow, strong push, `w = 0.3`, "
         "`A = 0.6`: the push holds the flap against the stop, each rebound is a twentieth of the one "
         "before, and the rebounds crowd together like a ball coming to rest, infinitely many of them "
         "before a finite time. OrbitDesk does not step forever: the run ends at t = 1.26 with the status "
         "*chattering* and says where and why in the status bar (hover over it for the whole message). "
         "The limit is `orbitdesk run --event-rate R` (10,000 events per unit time by default).\n\n"
         "What the analyses assume with events: equilibria are those of the equation between hits (you get "
         "a note); Lyapunov exponents and limit cycles are refused with the reason (a perturbation jumps "
         "at each hit by the saltation matrix, which they do not apply); sections follow the hits.",
         {"parameters": {"gap": 0.3, "r": 0.05, "w": 0.3, "A": 0.6}, "open_views": ["timeseries", "phase_plane"]}),
    ])


# ---------------------------------------------------------------- a plucked bracket, fitted to an invented record

BRACKET_MODEL = """\
# A small aluminium bracket holds a sensor box on a test rig. The box is pulled aside by a thread and
# let go; a laser gauge records how the tip swings back and forth and dies away ("pluck test").
# x: deflection of the tip (mm); x': its speed (mm/s); t in seconds.
# Oscillator with a stiffening spring:  x'' + c x' + k x + k3 x^3 = 0

c = 1 in [0, 5]          # damping (1/s)
k = 120 in [50, 300]     # stiffness per unit of mass (1/s^2): sqrt(k)/(2 pi) is the frequency in Hz
k3 = 0 in [0, 100]       # stiffening of the spring at large swings (1/(mm^2 s^2))

x'' = -c*x' - k*x - k3*x^3
x(0) = 2
x'(0) = 0
"""
BRACKET_TRUTH = {"c": 0.9, "k": 158.0, "k3": 22.0}   # what the invented records were made with
BRACKET_PLUCKS = (("small pluck", "bracket_pluck_small.csv", 0.5, 1), ("large pluck", "bracket_pluck_large.csv", 2.0, 2))
BRACKET_FIT = {"parameters": ["c", "k", "k3"], "local": [], "initial": ["x"], "segments": 1}


def bracket_records():
    """Write the two invented records (CSV) from the model with BRACKET_TRUTH plus gauge noise; read them back."""
    import numpy as np
    from scipy.integrate import solve_ivp

    from orbitdesk.document.datasets import read_data_file

    c, k, k3 = BRACKET_TRUTH["c"], BRACKET_TRUTH["k"], BRACKET_TRUTH["k3"]
    t = np.round(np.arange(0, 301) * 0.01, 2)
    (OUT / "data").mkdir(parents=True, exist_ok=True)
    sets = []
    for name, file, x0, seed in BRACKET_PLUCKS:
        sol = solve_ivp(lambda _t, u: [u[1], -c * u[1] - k * u[0] - k3 * u[0] ** 3], (0, 3), [x0, 0.0],
                        t_eval=t, method="DOP853", rtol=1e-11, atol=1e-12)
        x = sol.y[0] + 0.01 * np.random.default_rng(seed).standard_normal(t.size)
        lines = ["# INVENTED RECORD, not a measurement: made by OrbitDesk's scripts/make_samples.py from the",
                 f"# model with c = {c}, k = {k}, k3 = {k3}, a pluck of {x0} mm, plus gauge noise of 0.01 mm.",
                 "t [s], x [mm]"] + [f"{a:.2f}, {b:.5f}" for a, b in zip(t, x)]
        (OUT / "data" / file).write_text("\n".join(lines) + "\n", encoding="utf-8")
        ds = read_data_file(OUT / "data" / file, name=name)
        ds.initial = {"x": x0}
        sets.append(ds)
    return sets


def bracket_fits(sets):
    from orbitdesk.analyses.fitting import FitSettings, fit
    from orbitdesk.system.compiled_system import compile_model

    system = compile_model(BRACKET_MODEL)
    both = fit(system, sets, FitSettings(parameters=["c", "k", "k3"], initial=["x"]))
    small = fit(system, sets[:1], FitSettings(parameters=["c", "k", "k3"], initial=["x"]))
    return both, small


def _pm(e):
    """``name = value ± stderr`` with the value rounded where its standard error has its second digit."""
    decimals = max(0, 1 - math.floor(math.log10(e.stderr)))
    return f"`{e.target} = {e.value:.{decimals}f} ± {e.stderr:.2g}`"


def bracket_sample():
    sets = bracket_records()
    both, small = bracket_fits(sets)
    est = {e.name: e for e in both.estimates}
    fitted = both.shared_values()
    c, k, k3 = est["c"], est["k"], est["k3"]
    corr = both.correlation
    names = [e.name for e in both.estimates]
    r_k_k3 = corr[names.index("k"), names.index("k3")]
    small_k3 = {e.name: e for e in small.estimates}["k3"]
    rms = both.residual_rms["x"]
    file, project = sample(
        "bracket_pluck.orbitdesk", "A plucked bracket, fitted to a record",
        BRACKET_MODEL,
        dict(method="dop853", t_end=3.0, samples=3000, rtol=1e-9, atol=1e-11),
        {"timeseries": {"series": ["x"]}, "phase_plane": {"x": "x", "y": "x'"}, "fit": dict(BRACKET_FIT)},
        "Estimating damping and stiffness of a bracket from two pluck records (invented), with their uncertainty.",
        [
            ("Two plucks of the bracket (an invented record)",
             "The project holds two records of the bracket's tip: a **small pluck** of 0.5 mm and a "
             "**large pluck** of 2 mm, sampled every 10 ms for 3 s. They are *invented*: made up for this "
             "sample from the same equation plus gauge noise, not measured on a real bracket.\n\n"
             "The points are drawn over the model's run (started at the large pluck). With the first "
             "guesses `c = 1`, `k = 120`, `k3 = 0` the model swings too slowly: it falls behind the points "
             "within a second.",
             {"open_views": ["timeseries", "fit"],
              "views": {"timeseries": {"series": ["x"]}, "fit": {"page": "set up"}}}),
            ("Loading a record",
             "A record is a CSV file: a header line, the time first, then columns named after the model's "
             "states, units in brackets (`t [s], x [mm]`). These two are in `orbitdesk/samples/data/`; "
             "**File > Import Data...** reads one into the project and keeps the values, the file name and "
             "a checksum, so the project still opens where the file is gone. A column named differently "
             "is matched to a state in a dialog; a bad cell is refused with its line and column.\n\n"
             "The Fit panel lists the data sets. Each keeps its own starting deflection.",
             {"open_views": ["fit", "timeseries"], "views": {"fit": {"page": "set up"}}}),
            ("Fitting both plucks at once",
             "In the Fit panel `c`, `k`, `k3` and the starting deflection `x(0)` are ticked; the bounds are "
             "the slider ranges. Press **Fit**: both records are fitted together, sharing the bracket's "
             "parameters, each with its own `x(0)`. The sensitivity equations give the derivatives, so "
             f"the fit needs only a few model runs ({both.evaluations} from these first guesses).",
             {"open_views": ["fit", "timeseries"], "views": {"fit": {"page": "set up"}}}),
            ("The fitted bracket",
             "This step has run the fit (the Result page of the Fit panel), started from the fitted values "
             "it puts in, so it confirms them in a handful of model runs. "
             f"It gives {_pm(c)} per second, {_pm(k)} and {_pm(k3)} (estimate ± standard "
             f"error). The records were made with `c = {BRACKET_TRUTH['c']}`, `k = {BRACKET_TRUTH['k']:g}`, "
             f"`k3 = {BRACKET_TRUTH['k3']:g}`: each estimate is within a few standard errors of it.\n\n"
             f"The model now runs through the points; the residual RMS is {rms:.3f} mm, the size of the "
             "gauge noise. Tick **Show residuals** to see the misfit at each point. **Apply to model** "
             "puts these values into the model (Edit > Undo takes them back); **Keep as set** stores "
             "them under a name instead.",
             {"parameters": fitted, "open_views": ["timeseries", "fit"], "views": {"fit": {"page": "result"}}}),
            ("Reading the uncertainty",
             f"The Result page lists each estimate with its 95 % interval: that of `k3` runs from {k3.interval[0]:.3g} to {k3.interval[1]:.3g}: a range "
             "the data cannot narrow further. The correlation table shows how estimates lean on each "
             f"other: `k` and `k3` have correlation {r_k_k3:+.2f}, because a stiffer spring can partly "
             "stand in for a stronger stiffening.\n\n"
             "The large pluck is what shows the stiffening (its frequency drops as the swing decays). "
             f"Fitted alone, the small pluck gives `k3 = {small_k3.value:.3g} ± {small_k3.stderr:.2g}`: "
             "far less certain. When the panel warns of strongly correlated or nearly undetermined "
             "estimates, fix one of them or add a record that separates them.",
             {"parameters": fitted, "open_views": ["fit", "timeseries"], "views": {"fit": {"page": "result"}}}),
        ])
    project.datasets = sets
    return file, project


# ---------------------------------------------------------------- a shower with a long pipe

SHOWER_MODEL = """\
# Standing under a shower fed through a long pipe: the water at the head left the tap tau seconds ago.
# You turn the tap by how wrong the water feels, and the tap answers no faster than your hand turns it.
# u: temperature of the water leaving the tap (degrees C); felt: the water at the head, u a time tau ago
# want: the temperature you want; k: how hard you turn for each degree wrong (1/s)
# tau: time the water takes down the pipe (s); rate: fastest change of the tap temperature (degrees C/s)

want = 38 in [30, 45]
k = 0.5 in [0, 2]
tau = 2 in [0.2, 5]
rate = 4 in [0.5, 10]

u' = -rate*tanh(k*(u(t - tau) - want)/rate)
u(t) = 20 for t <= 0    # the tap stood at cold before you stepped in

felt = u(t - tau)
"""

SHOWER = sample(
    "long_shower.orbitdesk", "A shower with a long pipe", SHOWER_MODEL,
    dict(method="dop853", t_end=120.0, samples=2400),
    {"timeseries": {"series": ["u", "felt"]}, "phase_plane": {"x": "felt", "y": "u"}, "equilibria": {},
     "sweep": {"parameter": "k", "from": 0.2, "to": 1.5, "count": 53, "observe": "u", "mode": "maxima",
               "transient": 150.0, "duration": 40.0, "samples": 4}},
    "A tap answered by the water a pipe's length later: a delay equation that settles or keeps swinging.",
    [
        ("The water you feel left the tap two seconds ago",
         "You step in, the tap at cold (20 degrees), and start turning it towards the 38 you want. The "
         "model's `u(t - tau)` is the water at the head: the tap's temperature **tau = 2** seconds ago. "
         "The time series shows both: **felt** is the tap's curve moved right by two seconds, and "
         "before the start it follows the history line `u(t) = 20 for t <= 0` (the run bar names the "
         "history a run uses).\n\n"
         "Turning gently (`k = 0.5` per second for each degree wrong) you overshoot to about 41 "
         "degrees, come back, and settle at 38 in a few slow, shrinking swings.",
         {"parameters": {"k": 0.5}, "open_views": ["timeseries", "phase_plane"]}),
        ("Why it settles: the characteristic roots",
         "At rest the tap stands at `want`, whatever the delay; whether it *stays* there depends on the "
         "delay. Near rest the equation is `u' = -k (u(t - tau) - want)`, whose solutions grow like "
         "`exp(lambda t)` with `lambda = -k exp(-lambda tau)`. This has infinitely many roots; the "
         "Equilibria view lists the rightmost ones. At `k = 0.5` they are `-0.159 ± 0.669i`: negative "
         "real part, so the swings die out, at the pace `exp(-0.159 t)`, with a period near "
         "`2 pi / 0.669`, about 9.4 seconds (the time series agrees).",
         {"parameters": {"k": 0.5}, "open_views": ["equilibria", "timeseries"]}),
        ("Impatient hands: swings that never stop",
         "Turn twice as hard, `k = 1`. Now the rightmost pair is `0.086 ± 0.837i`, to the right of the "
         "imaginary axis: rest at 38 is **unstable**. The swings grow until the tap turns as fast as "
         "it can (`rate`), and then keep going for ever between about 33.6 and 42.4 degrees, every 8 "
         "seconds: a stable oscillation born from the delay alone.\n\n"
         "The phase plane plots the tap against the water felt: the path winds onto a closed loop.",
         {"parameters": {"k": 1.0}, "open_views": ["timeseries", "phase_plane", "equilibria"]}),
        ("Where the swinging starts: k tau = pi/2",
         "For `u' = -k u(t - tau)` the roots cross the imaginary axis exactly when `k tau = pi / 2`, "
         "at `lambda = ± i pi / (2 tau)`: the first undying swing has the period `4 tau`, here 8 "
         "seconds. With `tau = 2` that is at `k = 0.785`.\n\n"
         "The sweep runs the shower for 53 values of `k` from 0.2 to 1.5 and plots the highest tap "
         "temperature of each late swing. The gentlest hands, `k` below about 0.4, leave no late swing "
         "at all: the tap has crept to 38 and stays there, so there is no peak to plot (the line under "
         "the plot counts these values). From there to 0.785 the peaks that remain sit at 38; then a "
         "branch opens smoothly, the larger the hand's gain the wider the swing. Close to 0.785 the "
         "swings die out or grow only slowly, so there the points still spread after the settling time.",
         {"parameters": {"k": 1.0}, "open_views": ["sweep"]}),
        ("A shorter pipe",
         "Keep the impatient `k = 1` and shorten the pipe to `tau = 1` second. Now `k tau = 1` is below "
         "`pi / 2` again: the swings die out. The same hand is fine with a short pipe and hopeless with "
         "a long one, which is why showers at the end of long runs of pipe are hard to set.",
         {"parameters": {"k": 1.0, "tau": 1.0}, "open_views": ["timeseries", "equilibria"]}),
    ])

BRACKET = bracket_sample()

# ---------------------------------------------------------------- a buoy rocked by choppy water

BUOY = sample(
    "rocking_buoy.orbitdesk", "A buoy rocked by choppy water",
    """\
# A small marker buoy in a harbour leans over when a wave slaps it and rights itself again. Its tilt x
# (radians) obeys a damped spring law; the slaps of the chop come at random, modelled as white noise
# (an invented scenario: the numbers are not measured on a real buoy).

k = 4 in [0.5, 10]        # righting stiffness per unit of inertia (1/s^2): rocks at sqrt(k) rad/s
c = 0.2 in [0, 2]         # damping by the water (1/s)
a = 0.3 in [0, 1]         # strength of the chop
x'' = -k*x - c*x' + a*noise
x(0) = 0.5                # pushed over by a passing boat, then let go
x'(0) = 0
""",
    dict(method="dop853", t_end=60.0, samples=3001, dt=0.01, realisations=40, seed=1),
    {"timeseries": {"series": ["x"]}, "phase_plane": {"x": "x", "y": "x'"},
     "noise_statistics": {"state": "x", "mode": "stationary", "time": 30.0}, "equilibria": {}},
    "A damped buoy shaken by random chop: realisations, their spread, the histogram and the averaged spectrum.",
    [
        ("Random slaps",
         "The model says `x'' = -k*x - c*x' + a*noise`: `noise` is white noise, a random slap at every "
         "instant. One run is now **40 realisations**, each with its own chop. The time series draws a "
         "dozen of them faintly, their **mean** bold and a dashed band of **one standard deviation** "
         "either side. The mean rings down like the buoy in calm water; the band widens until the chop "
         "feeds in as much as the damping takes out.",
         {"open_views": ["timeseries", "phase_plane"], "views": {"timeseries": {"series": ["x"]}}}),
        ("How far it leans",
         "Once the push from the boat is forgotten, the tilt settles into a steady spread. The Noise "
         "statistics view pools every sample after `t = 30`: a bell curve. For this linear model the "
         "spread is known exactly, a standard deviation of `a / sqrt(2 c k)` = 0.237 radians. The "
         "histogram's own standard deviation comes close, but not closer than chance allows: this "
         "lightly damped buoy forgets slowly, so 40 realisations of 30 seconds hold only about a hundred "
         "independent looks, and the estimate wanders by ten per cent or so from seed to seed.",
         {"open_views": ["noise_statistics", "timeseries"],
          "views": {"noise_statistics": {"state": "x", "mode": "stationary", "time": 30.0}}}),
        ("The note it rocks at",
         "Tick **Spectrum** in the time series: the power spectra of the realisations, averaged. "
         "A single realisation's spectrum is ragged; the average shows a clear peak near "
         "`sqrt(k) / (2 pi)` = 0.32 rocks per second: the chop hits every frequency alike, and the "
         "buoy answers most at its own.",
         {"open_views": ["timeseries"], "views": {"timeseries": {"series": ["x"], "spectrum": True}}}),
        ("More damping",
         "A skirt under the buoy raises the damping to `c = 0.8`. The band is half as wide "
         "(`a / sqrt(2 c k)` = 0.119), and with **Spectrum** ticked the peak is lower and broader: "
         "the buoy no longer rings at its own note for long.",
         {"parameters": {"c": 0.8}, "open_views": ["timeseries", "noise_statistics"],
          "views": {"timeseries": {"series": ["x"], "spectrum": False}}}),
        ("The calm-water picture",
         "Equilibria assume a model without chance, so they use the **noise-free part**, the "
         "equations with the noise term left out (the Equilibria view says so above its table). Upright, `x = 0`, is "
         "a **stable focus**: in calm water the buoy rings down to it. The chop keeps it from ever "
         "resting there.",
         {"open_views": ["equilibria", "phase_plane"]}),
        ("Same seed, same chop",
         "Every run starts from the **seed** on the run bar: the same seed gives the same "
         "realisations, here, on the command line (`orbitdesk run rocking_buoy.orbitdesk --seed 1 "
         "--realisations 40 --json`) and in the exported script. Seed 2 is another, equally likely, "
         "afternoon of chop: the realisations differ, their mean and spread hardly.",
         {"solver": {"seed": 2}, "open_views": ["timeseries"], "views": {"timeseries": {"series": ["x"]}}}),
    ])

SAMPLES = [SHAKEN_BEAM, CONVECTION_LOOP, RELAXATION_CIRCUIT, CLOCK_REACTION, POND_PREDATORS,
           INSECT_GENERATIONS, PENDULUM, STIRRED_TANK, WAGON_TRAIN, RATTLING_FLAP, BRACKET, SHOWER, BUOY]


def main(argv=None) -> int:
    OUT.mkdir(exist_ok=True)
    for file, project in SAMPLES:
        (OUT / file).write_text(dumps(project), encoding="utf-8")
        print(f"wrote {OUT.name}/{file}: {len(project.walkthrough)} steps")
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv))
