"""Eigenvalues of the asymptotic null distribution of the Anderson-Darling statistic for
normality with the mean and the SD estimated (Stephens's 'case 3').

Under the null, A2 converges in law to sum_j lambda_j Z_j^2 with Z_j independent standard
normal and lambda_j the eigenvalues of the kernel

    K(s, t) = rho(s, t) / sqrt(s (1 - s) t (1 - t)),
    rho(s, t) = min(s, t) - s t - g1(s) g1(t) - g2(s) g2(t),
    g1(s) = phi(z), g2(s) = z phi(z) / sqrt(2), z = Phi^-1(s)

(Durbin 1973, Ann. Statist. 1:279, covariance of the estimated-parameter empirical process;
Stephens 1976, Ann. Statist. 4:357, for the Anderson-Darling weight). This script finds them by
the Nystrom method on Gauss-Legendre nodes at m = 1600 and 3200 and extrapolates (Richardson: the
error falls as 1/m^2, seen from m = 200 to 3200), then prints the constants used by
`auditor/anderson_darling.py`. The test `tests/references/test_anderson_darling_reference.py`
recomputes them on other nodes.

    python tools/anderson_darling_eigenvalues.py
"""

from __future__ import annotations

import numpy as np
from scipy import special

KEPT = 40


def nystrom(m: int) -> np.ndarray:
    """All m Nystrom eigenvalues of K on m Gauss-Legendre nodes, largest first."""
    u, w = np.polynomial.legendre.leggauss(m)
    s, w = (u + 1) / 2, w / 2
    z = special.ndtri(s)
    phi = np.exp(-z * z / 2) / np.sqrt(2 * np.pi)
    g1, g2 = phi, z * phi / np.sqrt(2)
    rho = np.minimum.outer(s, s) - np.outer(s, s) - np.outer(g1, g1) - np.outer(g2, g2)
    scale = np.sqrt(w) / np.sqrt(s * (1 - s))
    return np.linalg.eigvalsh(scale[:, None] * rho * scale[None, :])[::-1]


def main() -> None:
    coarse, fine = nystrom(1600), nystrom(3200)
    kept = (4 * fine[:KEPT] - coarse[:KEPT]) / 3
    trace = (4 * fine.sum() - coarse.sum()) / 3
    print("EIGENVALUES = (")
    for value in kept:
        print(f"    {float(value)!r},")
    print(")")
    print(f"REST = {float(trace - kept.sum())!r}  # trace {float(trace)!r} less the kept eigenvalues")


if __name__ == "__main__":
    main()
