"""Build the packaged demo models from their physical (or invented) ingredients.

The model files next to this module are written by :func:`write_examples`; run

    python -m plantcore.examples._generate [FOLDER]

to regenerate them (FOLDER defaults to this package's folder).  The tests rebuild the models
in memory and check that the packaged files hold the same matrices, so a file that drifts
from its recipe is noticed.

Both scenarios are our own invention; the numbers are chosen to tell a clear story, not
taken from any real machine.

``thermal_process``
    A four-zone curing oven, continuous time, time unit one **minute**, temperatures as
    deviations from the hall temperature.  The model is assembled the way such models
    usually are, from one block per zone (air and wall temperature), plus a sensor block and
    a duct block.  Two slips of the assembly leave redundant states behind:

    * zones 2 and 3 are identical, are coupled identically to their neighbours and share one
      heater command, so the *difference* of their temperatures (air and wall) cannot be
      moved by any input: two uncontrollable states that the zone 2 sensor still sees;
    * the first-order filter of the zone 1 sensor was included twice (once in the zone block,
      once in the sensor block) and the output averages the two copies, so their difference
      can neither be moved nor seen;
    * the exhaust duct temperature downstream of zone 4 is driven by zone 4 but not measured
      and not fed back: controllable, unobservable.

    Intended Kalman part sizes (controllable & observable, controllable & unobservable,
    uncontrollable & observable, uncontrollable & unobservable): ``(7, 1, 2, 1)``.

``motion_axis``
    A linear axis identified from drive data at 1 kHz (discrete time, sample time 1 ms) by a
    subspace method whose order was guessed far too high: 14 states, where the axis itself
    (current loop, rigid-body velocity, one structural resonance) needs 4.  Eight of the
    extra states cancel exactly up to rounding (uncontrollable or unobservable modes, hidden
    by the identification coordinates); the remaining pair is a *near* cancellation: a real,
    lightly damped mode whose residue is about 1e-4 of the axis gain.  A minimal realization
    rightly keeps it (order 6, with wide margins); a balanced truncation to order 4 removes
    it with a tiny error bound.  Intended part sizes: ``(6, 2, 4, 2)``.
"""

from __future__ import annotations

import os
import sys

import numpy as np

from plantcore.core.model import StateSpaceModel

__all__ = ["thermal_process", "motion_axis", "EXAMPLE_BUILDERS", "INTENDED_PART_SIZES",
           "write_examples"]


# =============================================================================================
# Four-zone curing oven
# =============================================================================================

def _zone_block(name: str):
    """Names of the two states of one zone block (air, wall)."""
    return [f"{name}_air_temp_degC", f"{name}_wall_temp_degC"]


def thermal_process() -> StateSpaceModel:
    """The four-zone curing oven (continuous time, minutes), assembled from blocks."""
    # Per-zone physical rates, 1/min.  Zones 2 and 3 are built from the same numbers.  The
    # walls hold ten times the heat of the air, so each zone has a fast air mode (about
    # half a minute) and a slow wall mode (an hour or more): the reason a third-order model
    # describes the oven well.
    air_to_wall = 2.0        # air relaxes towards its wall
    wall_to_air = 0.2        # the wall follows the air ten times more slowly
    air_loss = 0.01          # air to hall (leaks, conveyor openings)
    wall_loss = 0.004        # wall to hall (insulation)
    neighbour = 0.05         # air-to-air exchange between neighbouring zones
    heater_gain = 0.05       # degC/min per percent of heater command
    sensor_rate = 3.0        # 1 / (20 s sensor filter time constant)
    duct_rate = 0.25         # exhaust duct air follows zone 4 air with a 4 min lag

    zones = ["zone1", "zone2", "zone3", "zone4"]
    # Air-to-air neighbours: zone 1 at the entry, zones 2 and 3 side by side, zone 4 at the exit.
    links = [("zone1", "zone2"), ("zone1", "zone3"), ("zone2", "zone3"),
             ("zone2", "zone4"), ("zone3", "zone4")]
    heater_of = {"zone1": "heater1_cmd_pct", "zone2": "heater23_cmd_pct",
                 "zone3": "heater23_cmd_pct", "zone4": "heater4_cmd_pct"}
    inputs = ["heater1_cmd_pct", "heater23_cmd_pct", "heater4_cmd_pct"]

    states = []
    for z in zones:
        states += _zone_block(z)
    states += ["zone1_sensor_filter_a_degC", "zone1_sensor_filter_b_degC",
               "zone4_exhaust_duct_temp_degC"]
    index = {s: i for i, s in enumerate(states)}
    n = len(states)
    A = np.zeros((n, n))
    B = np.zeros((n, len(inputs)))

    # Zone blocks.
    for z in zones:
        a, w = index[f"{z}_air_temp_degC"], index[f"{z}_wall_temp_degC"]
        A[a, a] += -air_to_wall - air_loss
        A[a, w] += air_to_wall
        A[w, a] += wall_to_air
        A[w, w] += -wall_to_air - wall_loss
        B[a, inputs.index(heater_of[z])] = heater_gain
    # Interconnection: air-to-air exchange between neighbours.
    for z1, z2 in links:
        i, j = index[f"{z1}_air_temp_degC"], index[f"{z2}_air_temp_degC"]
        A[i, i] -= neighbour
        A[i, j] += neighbour
        A[j, j] -= neighbour
        A[j, i] += neighbour
    # Sensor filter of zone 1, included twice (zone block and sensor block).
    t1 = index["zone1_air_temp_degC"]
    for copy in ("a", "b"):
        f = index[f"zone1_sensor_filter_{copy}_degC"]
        A[f, f] = -sensor_rate
        A[f, t1] = sensor_rate
    # Exhaust duct after zone 4 (not measured, no feedback into the oven).
    d, t4 = index["zone4_exhaust_duct_temp_degC"], index["zone4_air_temp_degC"]
    A[d, d] = -duct_rate
    A[d, t4] = duct_rate

    outputs = ["zone1_sensor_temp_degC", "zone2_air_temp_degC", "zone4_air_temp_degC"]
    C = np.zeros((len(outputs), n))
    C[0, index["zone1_sensor_filter_a_degC"]] = 0.5   # the assembly averaged the two copies
    C[0, index["zone1_sensor_filter_b_degC"]] = 0.5
    C[1, index["zone2_air_temp_degC"]] = 1.0
    C[2, index["zone4_air_temp_degC"]] = 1.0
    return StateSpaceModel(A, B, C, states=states, inputs=inputs, outputs=outputs,
                           name="four-zone curing oven (time in minutes)")


# =============================================================================================
# Over-fitted identified motion axis
# =============================================================================================

def _rotation_block(radius: float, angle: float) -> np.ndarray:
    """Real 2 x 2 block with eigenvalues ``radius * exp(+-1j * angle)``."""
    c, s = radius * np.cos(angle), radius * np.sin(angle)
    return np.array([[c, -s], [s, c]])


def _true_axis(dt: float):
    """The 4-state axis: current loop, rigid-body velocity and one resonance, ZOH-sampled."""
    import scipy.signal

    current_bw = 2 * np.pi * 250.0      # rad/s
    friction = 8.0                      # rad/s (viscous friction over inertia)
    resonance = 2 * np.pi * 85.0        # rad/s
    damping = 0.04
    dc_gain = 250.0                     # mm/s per A
    num = [dc_gain * current_bw * friction * resonance ** 2]
    den = np.polymul(np.polymul([1.0, current_bw], [1.0, friction]),
                     [1.0, 2 * damping * resonance, resonance ** 2])
    A, B, C, D = scipy.signal.tf2ss(num, den)
    Ad, Bd, Cd, Dd, _ = scipy.signal.cont2discrete((A, B, C, D), dt, method="zoh")
    # Bring the block to its real modal form so the coupling blocks below are readable, and
    # scale each mode so that its input and output weights have the same size (a realization
    # with a residue of 2e13 split as 1e-3 * 2e16 would make every rank decision hard).
    lam, X = np.linalg.eig(Ad)
    order = np.argsort(-np.abs(lam))
    lam, X = lam[order], X[:, order]
    cols, groups, k = [], [], 0
    while k < len(lam):
        if abs(lam[k].imag) > 0:
            cols += [X[:, k].real, X[:, k].imag]
            groups.append(slice(len(cols) - 2, len(cols)))
            k += 2
        else:
            cols.append(X[:, k].real)
            groups.append(slice(len(cols) - 1, len(cols)))
            k += 1
    T = np.column_stack(cols)
    Ti = np.linalg.inv(T)
    Am, Bm, Cm = Ti @ Ad @ T, Ti @ Bd, Cd @ T
    t = np.ones(len(lam))
    for g in groups:
        t[g] = np.sqrt(np.linalg.norm(Bm[g]) / np.linalg.norm(Cm[:, g]))
    return (Am / t[:, None]) * t[None, :], Bm / t[:, None], Cm * t[None, :]


def motion_axis() -> StateSpaceModel:
    """The over-fitted identified axis (discrete time, 1 ms, 14 states)."""
    dt = 0.001
    rng = np.random.default_rng(20240611)
    A_true, B_true, C_true = _true_axis(dt)

    # Part 1: the axis plus the near-cancelling pair (residue ~1e-4 of the axis).
    near = _rotation_block(0.97, 2 * np.pi * 230.0 * dt)
    b_near = 1e-2 * np.linalg.norm(B_true) * np.array([[0.6], [0.8]])
    c_near = 1e-2 * np.linalg.norm(C_true) * np.array([[0.8, -0.6]])
    A1 = np.block([[A_true, np.zeros((4, 2))], [np.zeros((2, 4)), near]])
    B1 = np.vstack([B_true, b_near])
    C1 = np.hstack([C_true, c_near])
    # Part 2: controllable, unobservable; part 3: uncontrollable, observable;
    # part 4: uncontrollable, unobservable.  All stable, as an identified model of a stable
    # axis would be.
    A2 = _rotation_block(0.78, 0.9)
    A3 = np.block([[_rotation_block(0.6, 2.2), np.zeros((2, 2))],
                   [np.zeros((2, 2)), np.diag([0.85, -0.55])]])
    A4 = np.diag([0.4, 0.12])
    sizes = (6, 2, 4, 2)
    n = sum(sizes)
    cuts = np.cumsum((0,) + sizes)
    blk = [slice(cuts[i], cuts[i + 1]) for i in range(4)]
    A = np.zeros((n, n))
    for i, Ai in enumerate((A1, A2, A3, A4)):
        A[blk[i], blk[i]] = Ai
    # The coupling blocks allowed by the Kalman form (A13, A21, A23, A24, A43).
    for i, j in [(0, 2), (1, 0), (1, 2), (1, 3), (3, 2)]:
        A[blk[i], blk[j]] = 0.05 * rng.standard_normal((sizes[i], sizes[j]))
    B = np.zeros((n, 1))
    B[blk[0]] = B1
    B[blk[1]] = np.linalg.norm(B_true) * rng.standard_normal((2, 1))
    C = np.zeros((1, n))
    C[:, blk[0]] = C1
    C[:, blk[2]] = 0.3 * np.linalg.norm(C_true) * rng.standard_normal((1, 4))
    # Hide the structure in "identification coordinates": a similarity with condition ~30.
    U, _ = np.linalg.qr(rng.standard_normal((n, n)))
    V, _ = np.linalg.qr(rng.standard_normal((n, n)))
    S = (U * np.geomspace(1.0, 1.0 / 30.0, n)[None, :]) @ V.T
    Si = np.linalg.inv(S)
    states = [f"identified_state_{k + 1:02d}" for k in range(n)]
    return StateSpaceModel(S @ A @ Si, S @ B, C @ Si, dt=dt, states=states,
                           inputs=["motor_current_cmd_A"], outputs=["axis_velocity_mm_per_s"],
                           name="motion axis, identified at 1 kHz (order guessed too high)")


#: Builder of each packaged example, by file stem.
EXAMPLE_BUILDERS = {"thermal_process": thermal_process, "motion_axis": motion_axis}

#: Kalman part sizes each example is built to have (default tolerance).
INTENDED_PART_SIZES = {"thermal_process": (7, 1, 2, 1), "motion_axis": (6, 2, 4, 2)}


def write_examples(folder=None) -> list:
    """Write every example as ``<stem>.toml`` into ``folder`` (default: this package)."""
    from plantcore.files import save_model

    folder = folder or os.path.dirname(os.path.abspath(__file__))
    return [save_model(build(), os.path.join(folder, f"{stem}.toml"))
            for stem, build in EXAMPLE_BUILDERS.items()]


if __name__ == "__main__":  # pragma: no cover
    for path in write_examples(sys.argv[1] if len(sys.argv) > 1 else None):
        print(path)
