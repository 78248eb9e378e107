r"""Demo: a survey boat that maps buoys while locating itself (planar EKF-SLAM).

A small survey boat leaves its mooring and circles a harbour basin in which four buoys float
at unknown positions.  Where it starts is known to about 0.3 m, but its heading only from a
hand-bearing compass, to about 5 degrees.  Its own motion comes from a speed log and a rate
gyro, disturbed by currents and waves; a range-and-bearing sensor on the mast sees every
buoy at every step.  The boat estimates its pose and the buoy positions together with an
extended Kalman filter.  This is the planar simultaneous localization and mapping problem, in
which the real system cannot see three directions (a common shift of everything in x, in y,
and a common rotation about the origin): however long the boat surveys, ranges and bearings
to buoys at unknown positions never tell it its absolute heading better than the compass
did.  The standard filter's linearization, taken at estimates that jump at every update, sees
only two of the three directions, so the filter believes it learns the absolute heading: its
heading standard deviation shrinks well below the compass's 5 degrees while the actual error
stays.  The observability-constrained filter corrects its Jacobians with
:func:`plantcore.estimation.constrain_observability` so that all three stay unobservable.  :func:`run_demo` compares the two in a small seeded Monte
Carlo: audits of the Jacobians each used, the normalized estimation error squared (NEES) of
the boat pose against its chi-square bounds, and heading errors against each filter's own
three-sigma bound.

State ``x = [px, py, heading, b1x, b1y, ..., bMx, bMy]`` (metres, radians), inputs
``u = [speed, turn_rate]`` (m/s, rad/s), one step of ``dt`` seconds:

.. math::

    p_{k+1} = p_k + dt\, v_k [\cos\psi_k, \sin\psi_k]^T, \qquad
    \psi_{k+1} = \psi_k + dt\, \omega_k,

and for buoy ``i`` the range ``|b_i - p|`` and bearing ``atan2(b_iy - p_y, b_ix - p_x) - psi``
(relative to the bow).  The scenario (harbour, buoys, noise levels) is our own invention.

References
----------
G. P. Huang, A. I. Mourikis and S. I. Roumeliotis, "Observability-based rules for designing
consistent EKF SLAM estimators", International Journal of Robotics Research 29(5), 502-528,
2010.  Y. Bar-Shalom, X. R. Li and T. Kirubarajan, "Estimation with Applications to Tracking
and Navigation", Wiley, 2001 (chapter 5: filter consistency, the NEES test).

The example is a package: :mod:`~plantcore.examples.survey_boat.model` (scenario, motion,
measurements, Jacobians, the symbolic model), :mod:`~plantcore.examples.survey_boat.simulation`
(simulation, the two filters and the Monte Carlo comparison) and
:mod:`~plantcore.examples.survey_boat.plots`; every name is available from here.
"""

from plantcore.examples.survey_boat.model import (DEFAULT_SCENARIO, SurveyScenario,
                                                  SymbolicSurveyModel, jacobians_along,
                                                  measurement_jacobian, motion, noise_jacobian,
                                                  range_bearing, state_names, symbolic_model,
                                                  transition_jacobian, unobservable_basis)
from plantcore.examples.survey_boat.plots import plot_heading_error, plot_nees
from plantcore.examples.survey_boat.simulation import (FilterRun, SurveyBoatDemo, SurveyRun,
                                                       nees_bounds, run_demo, run_filter,
                                                       simulate)

__all__ = ["DEFAULT_SCENARIO", "FilterRun", "SurveyBoatDemo", "SurveyRun", "SurveyScenario",
           "SymbolicSurveyModel", "jacobians_along", "measurement_jacobian", "motion",
           "nees_bounds", "noise_jacobian", "plot_heading_error", "plot_nees", "range_bearing",
           "run_demo", "run_filter", "simulate", "state_names", "symbolic_model",
           "transition_jacobian", "unobservable_basis"]
