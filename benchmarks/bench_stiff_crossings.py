"""The stiff method through a relaxation oscillator's jumps with a plane: Van der Pol at mu = 1000
(x'' = mu (1 - x^2) x' - x, x(0) = 2, x'(0) = 0), the stiff method (Radau IIA) at the default tolerances,
t in [0, 2500] with the plane x = 0 crossed downwards (at t = 807.08 and 2421.49: one period apart,
1614.40; the relaxation asymptotics give 1614.407). Ours: the interpolant check on the steps that carry a
crossing only, each covered again by shorter steps, the run going on with the step the method's own error
control chose. Baseline: the step control before, kept here: every step of a run with a plane checked, a
failing step redone at a quarter of its length and that bound kept, doubled after every 10 steps that
pass. Processor time, each side once, alternately (the baseline takes tens of seconds)."""

from __future__ import annotations

import time

import numpy as np
from benchmarks.harness import Row
from orbitdesk.engine import compiled, runs, stiff
from orbitdesk.engine.runs import Event, RunSettings, simulate
from orbitdesk.system.compiled_system import compile_model


class HeldStepper(stiff.StiffStepper):
    """The step control before: every step checked when anything is read, a failing step's shortened
    bound kept for the steps after it (doubled after RELAX steps in a row that pass)."""

    RELAX = 10

    def __init__(self, *args, **kwargs):
        super().__init__(*args, **kwargs)
        self._user_max = self._stack[0].max_step
        self._passed = 0

    def step(self):
        while True:
            solver = self._stack[0]
            t_old, y_old = self.t, self.y
            before = stiff._snapshot(solver)
            message = solver.step()
            self.status = solver.status
            if self.status == "failed":
                return message
            h = solver.t - t_old
            if self._reads is False or self._interpolant_miss(solver, t_old, y_old, h) <= 1.0:
                break
            self.redone += 1
            self._passed = 0
            before.max_step = abs(h) / 4
            self._stack[0] = before
        self.t_old, self.t, self.y, self._last = t_old, solver.t, solver.y.copy(), solver
        self._passed += 1
        if self._passed >= self.RELAX and solver.max_step < self._user_max:
            solver.max_step = min(2 * solver.max_step, self._user_max)
            self._passed = 0
        return message


def run(log=print) -> list[Row]:
    system = compile_model("mu = 1000\nx'' = mu*(1 - x^2)*x' - x\nx(0) = 2\n")
    compiled.engine_for(system, wait=True)
    settings = RunSettings(method="stiff", t_end=2500, samples=2)
    plane = [Event.on_plane(np.array([1.0, 0.0]), 0.0, -1)]
    found = {}

    def side(name, stepper):
        saved = runs.StiffStepper
        runs.StiffStepper = stepper
        try:
            start = time.process_time()
            found[name] = simulate(system, settings, events=plane)
            return time.process_time() - start
        finally:
            runs.StiffStepper = saved

    start = time.process_time()
    plain = simulate(system, settings)
    plain_cpu = time.process_time() - start
    a = side("ours", stiff.StiffStepper)
    b = side("base", HeldStepper)
    ours, base = found["ours"], found["base"]
    gap = float(np.max(np.abs(ours.event_times[0] - base.event_times[0])))
    log(f"without the plane: {plain.steps_taken} steps, {plain_cpu:.2f} s CPU")
    log(f"with the plane: ours {ours.steps_taken} steps {a:.2f} s CPU; before {base.steps_taken} steps {b:.2f} s CPU; "
        f"crossings {ours.event_times[0]} (max difference {gap:.1e}), return time "
        f"{float(np.diff(ours.event_times[0])[0]):.5f}")
    return [Row("Van der Pol mu = 1000, stiff, t in [0, 2500], plane x = 0 downwards (processor time)", a, b,
                f"crossings agree to {gap:.1e}; steps: ours {ours.steps_taken}, before {base.steps_taken}, "
                f"without a plane {plain.steps_taken}", "the step control before (every step checked, bound kept)",
                "a plane costs a few steps per crossing")]


if __name__ == "__main__":
    from benchmarks.harness import print_table

    print_table(run())
