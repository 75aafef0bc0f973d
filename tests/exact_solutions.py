"""Published analytic solutions of the heat equation used by the validation tests.

Every function names its source; formulas quoted "from memory" are checked
inside the tests against printed table values or limits where possible.
All arguments in SI units; ``alpha = k / (rho c)`` [m2/s].
"""

from __future__ import annotations

import numpy as np
from scipy.optimize import brentq
from scipy.special import erfc


def semi_infinite_step(x, t, alpha, t_init, t_surface):
    """Semi-infinite solid, surface suddenly held at ``t_surface``.

    T = Ts + (Ti - Ts) erf(x / (2 sqrt(alpha t))); Carslaw & Jaeger,
    Conduction of Heat in Solids, 2nd ed., §2.4 (from memory).
    """
    return t_init + (t_surface - t_init) * erfc(x / (2.0 * np.sqrt(alpha * t)))


def i2erfc(z):
    """Second repeated integral of erfc: 1/4 [(1 + 2 z^2) erfc z - (2/sqrt(pi)) z exp(-z^2)].

    Carslaw & Jaeger, Appendix II (from memory); i^2erfc(0) = 1/4.
    """
    z = np.asarray(z, dtype=float)
    return 0.25 * ((1.0 + 2.0 * z * z) * erfc(z) - 2.0 / np.sqrt(np.pi) * z * np.exp(-z * z))


def semi_infinite_ramp(x, t, alpha, rate):
    """Rise above the initial temperature when the surface rises as ``rate * t``.

    T - Ti = C t 4 i^2erfc(x / (2 sqrt(alpha t))); Carslaw & Jaeger §2.5
    (from memory). Zero for t <= 0.
    """
    t = np.asarray(t, dtype=float)
    tt = np.maximum(t, 1e-300)
    return np.where(t > 0, rate * tt * 4.0 * i2erfc(x / (2.0 * np.sqrt(alpha * tt))), 0.0)


def semi_infinite_table(x, t, alpha, times, values):
    """Surface temperature piecewise linear through (times, values), starting at values[0].

    Duhamel's theorem (Carslaw & Jaeger §2.5, from memory): the history is a
    sum of ramps starting at each corner with the change of slope there.
    """
    times, values = np.asarray(times, float), np.asarray(values, float)
    slopes = np.concatenate([[0.0], np.diff(values) / np.diff(times), [0.0]])
    kinks = np.diff(slopes)
    out = values[0] + 0.0 * np.asarray(x, dtype=float)
    for dc, tk in zip(kinks, times):
        out = out + semi_infinite_ramp(x, t - tk, alpha, dc)
    return out


def semi_infinite_flux(x, t, alpha, k, q):
    """Rise above the initial temperature under a constant heat flux ``q`` into the surface.

    T - Ti = (2q/k) sqrt(alpha t/pi) exp(-x^2/(4 alpha t)) - (q x/k) erfc(x/(2 sqrt(alpha t)));
    Carslaw & Jaeger §2.9 (from memory).
    """
    s = np.sqrt(alpha * t)
    return 2.0 * q / k * s / np.sqrt(np.pi) * np.exp(-x * x / (4.0 * s * s)) - q * x / k * erfc(x / (2.0 * s))


def sphere_centre(fo, terms: int = 60):
    """(T - Ts)/(Ti - Ts) at the centre of a sphere whose surface is suddenly held at Ts.

    2 sum_n (-1)^(n+1) exp(-n^2 pi^2 Fo), Fo = alpha t / R^2; Carslaw & Jaeger
    §9.3 (from memory).
    """
    n = np.arange(1, terms + 1)
    return 2.0 * np.sum((-1.0) ** (n + 1) * np.exp(-(n**2) * np.pi**2 * fo))


def wall_eigenvalues(biot: float, terms: int = 40) -> np.ndarray:
    """Roots zeta_n of zeta tan(zeta) = Bi, one in each ((n-1) pi, (n-1/2) pi).

    Incropera et al., Fundamentals of Heat and Mass Transfer, §5.5 (from memory).
    """
    f = lambda z: z * np.sin(z) - biot * np.cos(z)
    return np.array([brentq(f, (n - 1) * np.pi + 1e-12, (n - 0.5) * np.pi) for n in range(1, terms + 1)])


def wall_coefficients(zeta: np.ndarray) -> np.ndarray:
    """C_n = 4 sin(zeta_n) / (2 zeta_n + sin(2 zeta_n)); Incropera et al. eq. 5.39b (from memory)."""
    return 4.0 * np.sin(zeta) / (2.0 * zeta + np.sin(2.0 * zeta))


def wall_convection(xi, fo, biot: float, terms: int = 40):
    """(T - Tinf)/(Ti - Tinf) in a plane wall -L < x < L cooled by convection on both faces.

    sum C_n exp(-zeta_n^2 Fo) cos(zeta_n x/L), ``xi = x / L``, Fo = alpha t / L^2;
    Incropera et al. §5.5 (from memory).
    """
    z = wall_eigenvalues(biot, terms)
    c = wall_coefficients(z)
    xi = np.asarray(xi, dtype=float)
    return np.sum(c * np.exp(-(z**2) * fo) * np.cos(np.multiply.outer(xi, z)), axis=-1)


def slab_dirichlet(x, t, alpha, width, terms: int = 80):
    """(T - Ts)/(Ti - Ts) in a slab 0 < x < width with both faces suddenly held at Ts.

    sum over odd n of (4 / (n pi)) sin(n pi x / a) exp(-n^2 pi^2 alpha t / a^2);
    Carslaw & Jaeger §3.3 (from memory). The box solution is the product of
    three of these (Carslaw & Jaeger §6.3, from memory).
    """
    n = 2 * np.arange(terms) + 1
    arg = np.multiply.outer(np.asarray(x, dtype=float), n) * np.pi / width
    return np.sum(4.0 / (n * np.pi) * np.sin(arg) * np.exp(-(n**2) * np.pi**2 * alpha * t / width**2), axis=-1)
