"""An arbitrage-free SSVI surface for tests (Gatheral & Jacquier 2014, section 4 [V per REFERENCE.md s.6]).

w(k, theta_t) = theta_t / 2 * (1 + rho phi k + sqrt((phi k + rho)^2 + 1 - rho^2)), phi(theta) = eta / sqrt(theta).
Theorem 4.2 (no butterfly arbitrage): theta phi (1 + |rho|) < 4 and theta phi^2 (1 + |rho|) <= 4, i.e.
eta sqrt(theta) (1 + |rho|) < 4 and eta^2 (1 + |rho|) <= 4. No calendar arbitrage (Theorem 4.1 [M]):
theta_t increasing, theta phi(theta) = eta sqrt(theta) increasing and phi non-increasing in theta.
Each slice is a raw SVI slice (G&J Lemma 3.2 [M]): a = theta (1 - rho^2) / 2, b = theta phi / 2,
m = -rho / phi, sigma = sqrt(1 - rho^2) / phi, same rho.
"""

from __future__ import annotations

import numpy as np

from chaintriage.core.svi import SviParams, SviSlices


def ssvi_total_variance(k, theta: float, rho: float, eta: float):
    """SSVI total variance at log-moneyness k for ATM total variance theta."""
    phi = eta / np.sqrt(theta)
    k = np.asarray(k, float)
    return 0.5 * theta * (1 + rho * phi * k + np.sqrt((phi * k + rho) ** 2 + 1 - rho * rho))


def ssvi_slice(theta: float, rho: float, eta: float) -> SviSlices:
    """The SSVI slice as a raw SVI slice (one row of SviSlices)."""
    phi = eta / np.sqrt(theta)
    return SviSlices(SviParams(a=0.5 * theta * (1 - rho * rho), b=0.5 * theta * phi, rho=rho, m=-rho / phi,
                               sigma=np.sqrt(1 - rho * rho) / phi))


def theorem_4_2_holds(theta: float, rho: float, eta: float) -> bool:
    """G&J Theorem 4.2 conditions for phi = eta / sqrt(theta)."""
    phi = eta / np.sqrt(theta)
    return theta * phi * (1 + abs(rho)) < 4 and theta * phi * phi * (1 + abs(rho)) <= 4


#: A skewed equity-like surface: ATM variance 0.04/yr plus a short-dated bump, strong put skew.
SKEW_RHO = -0.6
SKEW_ETA = 0.8


def skew_theta(t):
    """ATM total variance of the skewed test surface at t years (increasing)."""
    t = np.asarray(t, float)
    return 0.04 * t + 0.002 * np.sqrt(t)
