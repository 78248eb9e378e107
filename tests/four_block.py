"""Models in the textbook four-block Kalman form with exact zeros, hidden by a similarity,
shared by the tests of the certificate and of the reconciliation.

The part sizes are known by construction (R. E. Kalman, "Mathematical description of
linear dynamical systems", J. SIAM Control 1(2), 1963); the generator follows the
project's failure reproducers.
"""

import math

import numpy as np

from plantcore.structure.certificate import modal_certificate
from plantcore.structure.kalman import _prepare

ZERO_BLOCKS = [(0, 1), (0, 3), (2, 0), (2, 1), (2, 3), (3, 0), (3, 1)]


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
    if k == 0:
        return np.zeros((0, 0))
    G = rng.standard_normal((k, k)) / math.sqrt(k)
    if discrete:
        M = 0.6 * G
        rho = max(abs(np.linalg.eigvals(M)))
        if rho > 0.95:
            M *= 0.9 / rho
        return M
    M = G - (1.0 + rng.uniform(0.0, 1.0)) * np.eye(k)
    ev = np.linalg.eigvals(M)
    if max(ev.real) > -0.05:
        M -= (max(ev.real) + 0.2) * np.eye(k)
    return M


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
