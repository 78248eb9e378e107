"""Models in the textbook four-block Kalman form with exact zeros, hidden by a similarity,
shared by the tests of the certificate and of the reconciliation.

The part sizes are known by construction (R. E. Kalman, "Mathematical description of
linear dynamical systems", J. SIAM Control 1(2), 1963); the generator follows the
project's failure reproducers.
"""

import importlib.util
import math
import pathlib
import sys

import numpy as np

from plantcore.structure.certificate import modal_certificate
from plantcore.structure.kalman import _prepare

ZERO_BLOCKS = [(0, 1), (0, 3), (2, 0), (2, 1), (2, 3), (3, 0), (3, 1)]

ROOT = pathlib.Path(__file__).resolve().parents[1]


def load_known_structure():
    """``benchmarks/known_structure.py`` (the trust study's generator, which does not
    import plantcore), loaded once by path."""
    name = "known_structure"
    if name in sys.modules:
        return sys.modules[name]
    spec = importlib.util.spec_from_file_location(name, ROOT / "benchmarks" / "known_structure.py")
    module = importlib.util.module_from_spec(spec)
    sys.modules[name] = module        # its dataclasses look their module up while defined
    spec.loader.exec_module(module)
    return module


def rand_orth(n, rng):
    q, r = np.linalg.qr(rng.standard_normal((n, n)))
    return q * np.sign(np.diag(r))[None, :]


def cuts(sizes):
    c = np.cumsum((0,) + tuple(sizes))
    return [slice(int(c[i]), int(c[i + 1])) for i in range(4)]


def assemble(diag, sizes, m, p, rng):
    """The four-block Kalman form with exact zeros and random couplings."""
    n = sum(sizes)
    bl = cuts(sizes)
    A = rng.standard_normal((n, n)) / math.sqrt(n)
    for i in range(4):
        A[bl[i], bl[i]] = diag[i]
    for i, j in ZERO_BLOCKS:
        A[bl[i], bl[j]] = 0.0
    B = rng.standard_normal((n, m))
    B[bl[2], :] = 0.0
    B[bl[3], :] = 0.0
    C = rng.standard_normal((p, n))
    C[:, bl[1]] = 0.0
    C[:, bl[3]] = 0.0
    return A, B, C


def diag_block(k, rng, discrete=False):
    """A random stable k x k block (the trust study generator's own)."""
    return load_known_structure()._stable_block(k, rng, discrete)


def hide(Az, Bz, Cz, cond, rng):
    """x = T z with T = U diag(s) V^T, s log-spaced in [1/cond, 1]."""
    n = Az.shape[0]
    U, V = rand_orth(n, rng), rand_orth(n, rng)
    s = np.geomspace(1.0, 1.0 / cond, n) if cond != 1.0 else np.ones(n)
    T = (U * s[None, :]) @ V.T
    Ti = (V / s[None, :]) @ U.T
    return T @ Az @ Ti, T @ Bz, Cz @ Ti


def certificate_of(A, B, C, tol=None):
    """The prepared model and its modal certificate, as the decompositions compute them."""
    p = _prepare((A, B, C), tol)
    return p, modal_certificate(p.A, p.B_dec, p.C_dec, scale=p.scale, tol=p.tol)
