"""Batched tridiagonal solver (Thomas algorithm), vectorised over the batch axis.

Arrays have shape (N, B): N unknowns per system, B systems. Stable without pivoting for the
diagonally dominant (M-matrix) Jacobians of the Poisson problem (Golub & Van Loan, Matrix
Computations, 4th ed., sec. 4.3.6)."""

from __future__ import annotations

import numpy as np


def solve_tridiagonal(lower, diag, upper, rhs):
    """Solve ``lower[i] x[i-1] + diag[i] x[i] + upper[i] x[i+1] = rhs[i]`` for each column.

    ``lower[0]`` and ``upper[N-1]`` are ignored. All inputs (N, B); returns x (N, B).
    """
    n = diag.shape[0]
    cp = np.empty_like(diag)
    dp = np.empty_like(diag)
    cp[0] = upper[0] / diag[0]
    dp[0] = rhs[0] / diag[0]
    for i in range(1, n):
        m = 1.0 / (diag[i] - lower[i] * cp[i - 1])
        cp[i] = upper[i] * m
        dp[i] = (rhs[i] - lower[i] * dp[i - 1]) * m
    x = np.empty_like(diag)
    x[n - 1] = dp[n - 1]
    for i in range(n - 2, -1, -1):
        x[i] = dp[i] - cp[i] * x[i + 1]
    return x
