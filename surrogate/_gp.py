"""Gaussian-process regression evaluated in numpy from plain arrays.

Kernel: c * Matern_nu(r) + noise * [x = x'], r^2 = sum_j ((x_j - x'_j) / l_j)^2 (anisotropic),
Matern_{3/2}(r) = (1 + sqrt(3) r) e^{-sqrt(3) r}, Matern_{5/2}(r) = (1 + sqrt(5) r + 5 r^2 / 3)
e^{-sqrt(5) r} (Rasmussen & Williams, Gaussian Processes for Machine Learning, MIT Press 2006,
eq. 4.17). Mean: k(x, X) alpha; variance: c + noise - |Linv k(X_s, x)|^2 from the Cholesky
inverse of a subset X_s (conservative), all in float64.
"""

from __future__ import annotations

import numpy as np


class GaussianProcess:
    def __init__(self, arrays: dict):
        self.X = np.asarray(arrays["X"], dtype=np.float64)
        self.alpha = np.asarray(arrays["alpha"], dtype=np.float64)
        self.Xs = np.asarray(arrays["Xs"], dtype=np.float64)
        self.Linv = np.asarray(arrays["Linv"], dtype=np.float64)
        self.ls = np.asarray(arrays["length_scale"], dtype=np.float64)
        c, nu, noise, ymean, ystd = (float(x) for x in arrays["params"])
        self.c, self.nu, self.noise, self.ymean, self.ystd = c, nu, noise, ymean, ystd
        if self.X.shape[0] != self.alpha.size or self.Linv.shape != (self.Xs.shape[0],) * 2:
            raise ValueError("GP arrays: inconsistent shapes")
        if nu not in (1.5, 2.5):
            raise ValueError(f"GP arrays: Matern nu {nu} not supported")

    def _k(self, A, B):
        a, b = A / self.ls, B / self.ls
        d2 = (a * a).sum(1)[:, None] + (b * b).sum(1)[None, :] - 2.0 * a @ b.T
        r = np.sqrt(np.maximum(d2, 0.0))
        if self.nu == 1.5:
            s = np.sqrt(3.0) * r
            return self.c * (1.0 + s) * np.exp(-s)
        s = np.sqrt(5.0) * r
        return self.c * (1.0 + s + s * s / 3.0) * np.exp(-s)

    def predict(self, Z: np.ndarray, chunk: int = 4096):
        """Mean and standard deviation [units of the target] at rows Z (n, d)."""
        n = Z.shape[0]
        mean, std = np.empty(n), np.empty(n)
        for s in range(0, n, chunk):
            z = Z[s:s + chunk]
            mean[s:s + chunk] = self._k(z, self.X) @ self.alpha
            v = self.Linv @ self._k(self.Xs, z)
            var = self.c + self.noise - (v * v).sum(0)
            std[s:s + chunk] = np.sqrt(np.maximum(var, 1e-30))
        return mean * self.ystd + self.ymean, std * self.ystd
