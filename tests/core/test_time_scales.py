"""Windows read from the system, the method chosen for stiff systems, messages that name the option.

References: the Van der Pol oscillator's equilibrium has the eigenvalues (mu +- sqrt(mu^2 - 4))/2
(closed form); its relaxation cycle has the period (3 - 2 ln 2) mu + 7.014 mu^(-1/3) + O(ln mu / mu)
for large mu (asymptotic formula, Grasman 1987 / Strogatz, Nonlinear Dynamics and Chaos, sec. 7.5).
"""

import math

import numpy as np
import pytest

from orbitdesk.analyses.cycles import CycleError, find_cycle
from orbitdesk.analyses.sections import plane_section
from orbitdesk.analyses.time_scales import MIN_WINDOW, choose_method, time_scale
from orbitdesk.engine.runs import RunSettings
from orbitdesk.samples.models import LORENZ
from orbitdesk.system.compiled_system import compile_model


def van_der_pol(mu):
    return compile_model(f"mu = {mu:g}\nx'' = mu*(1 - x^2)*x' - x\nx(0) = 2\n")


def test_time_scale_reads_the_eigenvalues_at_the_nearest_equilibrium():
    mu = 1000.0
    system = van_der_pol(mu)
    scale = time_scale(system, system.param_values, system.initial)
    slow_rate = (mu - math.sqrt(mu * mu - 4)) / 2  # the small eigenvalue at the origin (closed form)
    assert scale.slow == pytest.approx(1 / slow_rate, rel=1e-6)
    assert scale.fast == pytest.approx(2 / (mu + math.sqrt(mu * mu - 4)), rel=1e-6)
    assert "equilibrium" in scale.source
    assert scale.window() == pytest.approx(3 / slow_rate, rel=1e-6)
    # a lightly damped oscillator: its slow scale is the relaxation time 1/(zeta w) (closed form)
    damped = compile_model("x'' = -0.02*x' - x\nx(0) = 1\n")
    s2 = time_scale(damped, damped.param_values, damped.initial)
    assert s2.slow == pytest.approx(1 / 0.01, rel=1e-9)
    assert time_scale(compile_model("x'' = -x\nx(0) = 1\n"), [], [1.0, 0.0]).window() == MIN_WINDOW


def test_the_default_method_stands_unless_the_system_is_stiff():
    stiff = van_der_pol(1000.0)
    choice = choose_method(stiff, stiff.param_values, stiff.initial, 3000.0)
    assert choice.method == "stiff" and "stiff" in choice.note
    mild = van_der_pol(1.0)
    assert choose_method(mild, mild.param_values, mild.initial, 200.0).method == "dop853"
    assert choose_method(stiff, stiff.param_values, stiff.initial, 3000.0, method="rk45").method == "rk45"


def test_a_flow_settling_on_a_stable_focus_is_not_taken_for_stiff():
    # Lorenz (1963) at r = 20 and 21 (below r_H = 24.74, Sparrow 1982) settles on a stable focus whose
    # eigenvalues are all of size 1 to 23: nothing stiff, yet the default method's step near it reached
    # 3 / 23, which the old threshold (1.5) read as stiffness and the stiff method then could not take
    # the sweep's maxima. The default method is stable to about 6 there.
    lorenz = compile_model(LORENZ)
    for r in (20.2, 21.0, 30.0):
        choice = choose_method(lorenz, [10.0, r, 8.0 / 3.0], [1.0, 1.0, 1.0], 5000.0)
        assert choice.method == "dop853", (r, choice.note)


@pytest.mark.slow
def test_van_der_pol_relaxation_cycle_with_the_stiff_method_picked_for_it():
    mu = 1000.0
    cycle = find_cycle(van_der_pol(mu))
    expected = (3 - 2 * math.log(2)) * mu + 7.014 * mu ** (-1 / 3)  # 1614.4 (Grasman / Strogatz)
    assert cycle.period == pytest.approx(expected, rel=1e-3)
    assert any("stiff method" in w for w in cycle.warnings)
    assert np.ptp(cycle.orbit[0]) == pytest.approx(4.0, rel=0.01)  # x swings between about -2 and 2
    assert cycle.stable


def test_a_cycle_search_too_short_says_which_option_lengthens_it():
    # mu = 10: period 19.08 (Strogatz sec. 7.5 / the same formula: 3 - 2 ln 2 = 1.614 per unit mu, plus
    # 7.014 mu^(-1/3)); a window of 5 time units cannot see a return
    with pytest.raises(CycleError) as err:
        find_cycle(van_der_pol(10.0), guess=[2.0, 0.0], transient=5.0)
    assert "--transient" in str(err.value) and "5 time units" in str(err.value)


def test_section_search_window_and_duration():
    # x'' = -x never reaches x = 2: the message says what was searched and what lengthens it
    system = compile_model("x'' = -x\nx(0) = 1\n")
    none = plane_section(system, coordinate="x", value=2.0, count=3, settings=RunSettings(t_end=10))
    assert none.times.size == 0 and "--duration" in none.message and "200" in none.message
    # a duration: crossings of x = 0 upward come every 2 pi (closed form: x = cos t crosses 0 rising at 3 pi/2)
    some = plane_section(system, coordinate="x", value=0.0, count=100, settings=RunSettings(t_end=10),
                         t_max=20.0)
    assert some.times == pytest.approx([1.5 * math.pi, 3.5 * math.pi, 5.5 * math.pi], abs=1e-6)
    assert "3 of 100" in some.message and "--duration" in some.message


def test_conservative_cycle_is_neutral_and_not_at_a_bifurcation():
    # x'' = -x - x^3 conserves H = v^2/2 + x^2/2 + x^4/4; from x = A at rest the period is
    # 4 K(m) / sqrt(1 + A^2), m = A^2 / (2 (1 + A^2)) (closed form; scipy's ellipk takes m)
    from scipy.special import ellipk

    from orbitdesk.analyses.conservative import divergence_free

    system = compile_model("x'' = -x - x^3\nx(0) = 1\n")
    assert divergence_free(system) and not divergence_free(van_der_pol(1.0))
    cycle = find_cycle(system, guess=[1.0, 0.0])
    assert cycle.period == pytest.approx(4 * ellipk(0.25) / math.sqrt(2), rel=1e-8)
    assert cycle.stability.startswith("neutral") and not cycle.stable
    assert not any("bifurcation" in w and "nothing" not in w for w in cycle.warnings)
    assert np.abs(cycle.multipliers) == pytest.approx([1.0, 1.0], abs=1e-6)


def test_round_off_multipliers_are_reported_below_resolution():
    # Van der Pol mu = 10: the nontrivial multiplier is exp(integral of mu (1 - x^2) dt over the cycle),
    # far below 1e-10 (Strogatz sec. 7.5: the relaxation cycle is strongly attracting)
    cycle = find_cycle(van_der_pol(10.0))
    j = 1 - cycle.trivial_index
    assert abs(cycle.multipliers[j]) < cycle.resolution
    data = cycle.to_dict()
    assert data["multipliers"][j]["below_resolution"] and not data["multipliers"][cycle.trivial_index]["below_resolution"]
    assert any("below the integrator's resolution" in w for w in cycle.warnings)
    assert cycle.stability == "stable"


def test_section_window_of_a_slowly_forced_flow_follows_the_forcing_period():
    # x' = -x + sin(w t), x(0) = 1, w = 2 pi / 10^4: x(t) = (sin wt - w cos wt)/(1 + w^2) + (1 + w/(1 + w^2)) e^-t
    # (closed form). x = 0.5 is crossed upwards once per forcing period, the first time near t = 834: a
    # window read from the eigenvalue -1 alone (200 time units without a crossing) gave up before it
    from scipy.optimize import brentq

    w = 2 * math.pi / 1e4
    system = compile_model(f"w = {w!r}\nx' = -x + sin(w*t)\nx(0) = 1\n")
    scale = time_scale(system, system.param_values, system.initial)
    assert scale.slow == pytest.approx(1e4) and "forcing period" in scale.source

    def exact(t):
        return (math.sin(w * t) - w * math.cos(w * t)) / (1 + w * w) + (1 + w / (1 + w * w)) * math.exp(-t) - 0.5

    expected = [brentq(exact, 1e4 * k + 10, 1e4 * k + 3000, xtol=1e-12) for k in range(3)]
    section = plane_section(system, coordinate="x", value=0.5, direction="up", count=3)
    assert section.status == "ok" and section.times == pytest.approx(expected, abs=1e-6)
