"""A catalog of test systems with known answers.

Generated systems are built in the textbook four-block Kalman form with chosen part sizes
and random blocks, then hidden by a random similarity transformation (orthogonal, or with a
chosen moderate condition number).  In that form the part sizes are known by construction
(R. E. Kalman, "Mathematical description of linear dynamical systems", 1963): no numerical
decision is involved in stating them.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

import plantcore as pc

ZERO_BLOCKS_A = [(0, 1), (0, 3), (2, 0), (2, 1), (2, 3), (3, 0), (3, 1)]


@dataclass(frozen=True)
class KnownSystem:
    model: pc.StateSpaceModel
    sizes: tuple          # (co, c-not-o, not-c-o, not-c-not-o)
    similarity: np.ndarray
    tags: tuple

    @property
    def minimal_order(self) -> int:
        return self.sizes[0]

    @property
    def controllable_dimension(self) -> int:
        return self.sizes[0] + self.sizes[1]

    @property
    def observable_dimension(self) -> int:
        return self.sizes[0] + self.sizes[2]


def random_orthogonal(n, rng):
    if n == 0:
        return np.zeros((0, 0))
    q, r = np.linalg.qr(rng.standard_normal((n, n)))
    return q * np.sign(np.diag(r))[None, :]


def similarity(n, rng, condition=1.0):
    """A random similarity with the given 2-norm condition number (1.0: orthogonal)."""
    U, V = random_orthogonal(n, rng), random_orthogonal(n, rng)
    if n == 0 or condition == 1.0:
        return U
    s = np.geomspace(1.0, 1.0 / condition, n) if n > 1 else np.ones(1)
    return (U * s[None, :]) @ V.T


def _stable_block(k, rng, discrete):
    """A random block whose eigenvalues are spread and well separated from each other."""
    if k == 0:
        return np.zeros((0, 0))
    Q = random_orthogonal(k, rng)
    if discrete:
        eig = rng.uniform(-0.9, 0.9, k)
    else:
        eig = -rng.uniform(0.5, 5.0, k)
    T = np.triu(rng.standard_normal((k, k)) * 0.5, 1) + np.diag(eig)
    return Q @ T @ Q.T


def known_structure(sizes, *, inputs=2, outputs=2, seed=0, condition=1.0, discrete=False,
                    feedthrough=False, coupling=1.0):
    """A model with the given Kalman part sizes hidden by a random similarity."""
    rng = np.random.default_rng(seed)
    sizes = tuple(int(x) for x in sizes)
    n = sum(sizes)
    cuts = np.cumsum((0,) + sizes)
    blk = [slice(cuts[i], cuts[i + 1]) for i in range(4)]
    A = coupling * rng.standard_normal((n, n)) / max(1.0, np.sqrt(n))
    for i in range(4):
        A[blk[i], blk[i]] = _stable_block(sizes[i], rng, discrete)
    for i, j in ZERO_BLOCKS_A:
        A[blk[i], blk[j]] = 0.0
    B = rng.standard_normal((n, inputs))
    B[blk[2], :] = 0.0
    B[blk[3], :] = 0.0
    C = rng.standard_normal((outputs, n))
    C[:, blk[1]] = 0.0
    C[:, blk[3]] = 0.0
    D = rng.standard_normal((outputs, inputs)) if feedthrough else None
    T = similarity(n, rng, condition)
    Ti = np.linalg.inv(T) if n else T
    model = pc.StateSpaceModel(T @ A @ Ti, T @ B, C @ Ti, D, dt=0.1 if discrete else None)
    tags = ("discrete" if discrete else "continuous",
            "siso" if inputs == outputs == 1 else "mimo")
    return KnownSystem(model, sizes, T, tags)


def catalog():
    """The standard list of known-structure systems used across the tests."""
    cases = []
    seed = 100
    for sizes in [(2, 1, 1, 1), (3, 2, 2, 1), (0, 2, 2, 1), (4, 0, 0, 0), (0, 0, 3, 2),
                  (2, 2, 0, 0), (1, 1, 1, 1), (5, 3, 4, 6), (1, 0, 0, 3), (3, 0, 3, 0)]:
        for discrete in (False, True):
            for (m, p), cond in [((1, 1), 1.0), ((2, 3), 30.0)]:
                seed += 1
                cases.append(known_structure(sizes, inputs=m, outputs=p, seed=seed,
                                             condition=cond, discrete=discrete,
                                             feedthrough=(seed % 3 == 0)))
    return cases


def random_points(count, seed=7):
    rng = np.random.default_rng(seed)
    return [complex(rng.uniform(-0.3, 0.3), rng.uniform(0.2, 3.0)) for _ in range(count)]
