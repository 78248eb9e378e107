"""Names (plantcore/core/names.py) and every place that uses the rule: issue 20, item 6.

Names are compared as written; two names that Unicode NFKC normalization makes equal, or a
name that NFKC turns into a built-in of its context, are refused with both shown and their
code points; control, format (zero-width, bidirectional) and separator characters are
refused in model objects, model files, sweep specifications and audit archives.  The code
points and character names below are from the Unicode Character Database (UnicodeData.txt),
as reported by Python's :mod:`unicodedata`.
"""

from __future__ import annotations

import re
import unicodedata

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

import plantcore as pc
from plantcore import cli
from plantcore.core.names import collision_problem, list_problem, name_problem
from plantcore.sweeps.expressions import ExpressionError, parse_expression
from plantcore.sweeps.spec import load_sweep_spec

MICRO, MU = "\u00b5", "\u03bc"                # MICRO SIGN, GREEK SMALL LETTER MU
FULLWIDTH_PI = "\uff50\uff49"                 # FULLWIDTH LATIN SMALL LETTER P, I
INVISIBLE = {
    "zero width space": "\u200b",
    "zero width joiner": "\u200d",
    "right-to-left override": "\u202e",
    "left-to-right embedding": "\u202a",
    "first strong isolate": "\u2068",
    "byte order mark": "\ufeff",
    "escape": "\x1b",
    "line separator": "\u2028",
}

SPEC = """\
A = [[0, 1], [0, "-stiffness / {mass}"]]
B = [[0], ["1 / {mass}"]]
C = [[1, 0]]
[parameter_grid]
"{declared}" = {{ values = [2.0] }}
stiffness = {{ values = [3.0] }}
"""


def _spec(tmp_path, declared, mass=None):
    path = tmp_path / "spec.toml"
    path.write_text(SPEC.format(declared=declared, mass=mass or declared), encoding="utf-8")
    return path


@pytest.mark.parametrize("label", sorted(INVISIBLE))
def test_invisible_and_steering_characters_are_refused_everywhere(tmp_path, label, capsys):
    ch = INVISIBLE[label]
    name = f"heat{ch}er"
    code = re.escape(f"U+{ord(ch):04X}")
    assert f"U+{ord(ch):04X}" in name_problem(name)
    with pytest.raises(ValueError, match=code):
        pc.StateSpaceModel([[-1.0]], [[1.0]], [[1.0]], states=[name])
    with pytest.raises(ValueError, match=code):
        pc.StateSpaceModel([[-1.0]], [[1.0]], [[1.0]], outputs=[name])
    with pytest.raises(ValueError, match=code):
        pc.StateSpaceModel([[-1.0]], [[1.0]], [[1.0]], name=name)
    model_file = tmp_path / "plant.json"
    escaped = f"\\u{ord(ch):04X}"   # the character as a JSON / TOML escape
    model_file.write_text(f'{{"A": [[-1.0]], "B": [[1.0]], "C": [[1.0]], "inputs": ["{escaped}"]}}',
                          encoding="utf-8")
    with pytest.raises(pc.ModelFileError, match=f"inputs: entry 1 .*{code}"):
        pc.load_model(model_file)
    spec = tmp_path / "spec.toml"
    spec.write_text(SPEC.format(declared="mass", mass="mass")
                    + f'[constants]\n"g{escaped}" = 9.81\n',
                    encoding="utf-8")
    with pytest.raises(pc.ModelFileError, match=code):
        load_sweep_spec(spec)
    spec.write_text(f'states = ["x", "v{escaped}"]\n' + SPEC.format(declared="mass", mass="mass"),
                    encoding="utf-8")
    with pytest.raises(pc.ModelFileError, match=f"states: .*{code}"):
        load_sweep_spec(spec)
    archive = tmp_path / "run.npz"
    np.savez(archive, transition_jacobians=np.repeat(np.eye(2)[None], 2, axis=0),
             measurement_jacobians=np.ones((2, 1, 2)), expected_unobservable=np.zeros((2, 0)),
             state_names=np.array(["east", name]))
    with pytest.raises(pc.ModelFileError, match=f"state_names: .*{code}"):
        pc.audit_from_file(archive)
    with pytest.raises(ValueError, match=code):
        pc.audit_linearized_observability(np.repeat(np.eye(2)[None], 2, axis=0),
                                          np.ones((2, 1, 2)), np.zeros((2, 0)),
                                          state_names=["east", name])
    assert cli.main(["audit", str(archive)]) == 2
    err = capsys.readouterr().err
    assert len(err.strip().splitlines()) == 1 and f"U+{ord(ch):04X}" in err


def test_micro_sign_and_greek_mu_are_two_names_shown_with_code_points(tmp_path, capsys):
    problem = collision_problem([MICRO, MU])
    assert "U+00B5 MICRO SIGN" in problem and "U+03BC GREEK SMALL LETTER MU" in problem
    with pytest.raises(ValueError, match=r"U\+00B5 MICRO SIGN.*U\+03BC GREEK SMALL LETTER MU"):
        pc.StateSpaceModel(-np.eye(2), np.ones((2, 1)), np.ones((1, 2)),
                           states=[f"{MICRO}_strain", f"{MU}_strain"])
    # Declared with one, used with the other: compared as written, refused, both shown.
    path = _spec(tmp_path, declared=MU, mass=MICRO)
    with pytest.raises(pc.ModelFileError) as info:
        load_sweep_spec(path)
    message = str(info.value)
    assert info.value.field == "A[2][2]"
    assert "unknown name 'µ' (U+00B5 MICRO SIGN)" in message
    assert "not the declared 'μ' (U+03BC GREEK SMALL LETTER MU)" in message
    assert cli.main(["sweep", str(path), "-o", str(tmp_path / "out")]) == 2
    assert len(capsys.readouterr().err.strip().splitlines()) == 1
    # Declared and used with the same character: accepted, and the value is the declared one.
    spec = load_sweep_spec(_spec(tmp_path, declared=MICRO))
    assert spec.parameters == (MICRO, "stiffness")
    assert spec.build(spec.points[0]).A[1, 1] == pytest.approx(-1.5, rel=1e-15)


def test_fullwidth_pi_is_refused_not_silently_the_constant(tmp_path, capsys):
    path = _spec(tmp_path, declared=FULLWIDTH_PI)
    with pytest.raises(pc.ModelFileError) as info:
        load_sweep_spec(path)
    message = str(info.value)
    assert info.value.field == f"parameter_grid.{FULLWIDTH_PI}"
    assert "is read as 'pi', a built-in constant" in message
    assert "U+FF50 FULLWIDTH LATIN SMALL LETTER P" in message
    assert cli.main(["sweep", str(path), "-o", str(tmp_path / "out")]) == 2
    err = capsys.readouterr().err
    assert len(err.strip().splitlines()) == 1 and "built-in constant" in err
    # Written in an expression without being declared, it is not pi either.
    with pytest.raises(ExpressionError, match="unknown name 'ｐｉ'.*not the declared 'pi'"):
        parse_expression(f"2 * {FULLWIDTH_PI}", ["mass"])
    with pytest.raises(ExpressionError, match="unknown function 'ｓｉｎ'"):
        parse_expression("\uff53\uff49\uff4e(mass)", ["mass"])


@pytest.mark.parametrize("declared, reserved", [
    ("\uff53\uff49\uff4e", "a built-in function"),        # fullwidth sin
    ("\uff49\uff46", "a Python keyword"),                 # fullwidth if
    ("\uff45\uff52\uff52\uff4f\uff52", "a column of the result table"),   # fullwidth error
])
def test_names_that_normalize_to_reserved_words(tmp_path, declared, reserved):
    with pytest.raises(pc.ModelFileError, match=reserved):
        load_sweep_spec(_spec(tmp_path, declared=declared))


def test_two_declared_names_that_normalize_alike(tmp_path):
    path = tmp_path / "spec.toml"
    path.write_text(SPEC.format(declared="mass", mass="mass")
                    + '[constants]\n"\uff4d\uff41\uff53\uff53" = 1.0\n', encoding="utf-8")
    with pytest.raises(pc.ModelFileError, match=r"constants: 'mass' and 'ｍａｓｓ' .* are "
                                                r"different names that Unicode treats as the same"):
        load_sweep_spec(path)


_printable = st.text(alphabet=st.characters(blacklist_categories=("Cc", "Cf", "Cs", "Zl", "Zp")),
                     min_size=1, max_size=8)


@given(names=st.lists(_printable, min_size=1, max_size=5, unique=True))
def test_list_rule_agrees_with_its_definition(names):
    """Accepted exactly when no two names share an NFKC form (the characters are printable)."""
    forms = [unicodedata.normalize("NFKC", name) for name in names]
    assert (list_problem(names) is None) == (len(set(forms)) == len(forms))
    if list_problem(names) is None:
        model = pc.StateSpaceModel(-np.eye(len(names)), np.ones((len(names), 1)),
                                   np.ones((1, len(names))), states=names)
        assert model.states == tuple(names)
