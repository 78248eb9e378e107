"""Tests of plantcore.structure.removed_modes: the record of a removed mode that is not
stable, its wording, and who receives the warning.

The models are diagonal, so controllability and observability of each mode follow from the
rows of B and the columns of C by the PBH test (M. L. J. Hautus, 1969), by construction.
"""

import warnings

import numpy as np
import pytest

import plantcore as pc
from plantcore.structure.removed_modes import REMOVED_PARTS, RemovedMode, hidden_mode_message


def test_message_names_value_part_and_consequence():
    unstable = RemovedMode(0.5 + 0j, "uncontrollable_observable", True, False)
    boundary = RemovedMode(0j, "controllable_unobservable", False, True)
    one = hidden_mode_message([unstable], "the minimal realization")
    assert one.startswith("the minimal realization removed 1 mode that is not stable: 0.5 "
                          "(unstable, in the uncontrollable part: the inputs cannot move it)")
    assert "can stabilize the plant through an unstable removed mode" in one
    assert "regulate" not in one
    both = hidden_mode_message([unstable, boundary], "the minimal realization")
    assert "2 modes that are not stable" in both
    assert "0 (on the stability boundary, in the unobservable part" in both
    assert "stabilize the plant" in both and "regulate the plant" in both
    assert "\n" not in both
    assert hidden_mode_message((), "the minimal realization") == ""


def test_every_part_has_words_and_a_dictionary():
    for part in REMOVED_PARTS:
        mode = RemovedMode(1.5 - 0.5j, part, True, False)
        assert mode.describe().startswith("1.5 ± 0.5j (unstable, in the ")
        assert mode.to_dict() == {"value": [1.5, -0.5], "part": part, "unstable": True,
                                  "marginal": False}


def test_plantcore_internal_uses_are_not_warned():
    # The equivalence certificate reduces the difference model, whose shared unstable mode
    # 0.5 cancels: an internal use, which must not surface as a warning of the user's call.
    model = pc.StateSpaceModel(np.diag([0.5, -1.0]), [[1.0], [1.0]], [[1.0, 1.0]])
    with warnings.catch_warnings():
        warnings.simplefilter("error", pc.HiddenModeWarning)
        certificate = pc.check_equivalence(model, model)
    assert certificate.equivalent


def test_warning_class_is_public():
    assert issubclass(pc.HiddenModeWarning, UserWarning)
    assert "HiddenModeWarning" in pc.__all__ and "RemovedMode" in pc.__all__
    with pytest.warns(pc.HiddenModeWarning):
        pc.minimal_realization((np.diag([-1.0, 2.0]), [[1.0], [0.0]], [[1.0, 1.0]]))
