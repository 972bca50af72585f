"""Reference values for `streamsim validate`, computed here independently of streamsim.theory.

Each function evaluates one published formula or root with a general-purpose library (numpy,
scipy) and names its source. Nothing here calls the engine or the project's theory module, so a
fault there cannot move the reference it is compared with.

Normalised units: omega in omega_p (of the species or plasma named), k in omega_p/c, v in c.
"""
from __future__ import annotations

import math

import numpy as np
from scipy import integrate, optimize, special

#: Landau roots omega/omega_p of the Maxwellian electron plasma, widely tabulated (4 decimals,
#: quoted from memory, not looked up in a table here). The validation re-derives each with
#: scipy.special.wofz and compares the two.
PUBLISHED_LANDAU_ROOTS = {0.3: complex(1.1598, -0.0126), 0.4: complex(1.2851, -0.0661),
                          0.5: complex(1.4157, -0.1534)}

#: the weak-beam coefficient sqrt(3)/2^(4/3) of gamma_max = c (n_b/n_p)^(1/3) omega_p / gamma_b
WEAK_BEAM_COEFFICIENT = math.sqrt(3.0) / 2.0 ** (4.0 / 3.0)


def leapfrog_frequency(omega0: float, dt: float) -> float:
    """Frequency of a harmonic oscillator integrated by leapfrog: sin(omega dt/2) = omega0 dt/2.

    Derived from x_{n+1} - 2 x_n + x_{n-1} = -(omega0 dt)^2 x_n with x_n ~ exp(-i omega n dt)
    (Birdsall & Langdon 1991, ch. 4); omega = omega0 (1 + (omega0 dt)^2/24 + O(dt^4)).
    """
    return 2.0 / dt * math.asin(0.5 * omega0 * dt)


def bohm_gross(k_lambda: float) -> float:
    """Bohm-Gross frequency omega/omega_p = sqrt(1 + 3 k^2 lambda_D^2) (Bohm & Gross 1949; e.g.
    Chen, Introduction to Plasma Physics, sec. 4.4), valid for k lambda_D << 1."""
    return math.sqrt(1.0 + 3.0 * k_lambda**2)


def maxwellian_eps(omega: complex, k_lambda: float) -> complex:
    """eps = 1 + [1 + zeta Z(zeta)]/(k lambda_D)^2, zeta = omega/(sqrt2 k v_th), Z = i sqrt(pi) w
    (Fried & Conte 1961; w = Faddeeva function, scipy.special.wofz). omega in omega_p."""
    zeta = omega / (math.sqrt(2.0) * k_lambda)
    return 1.0 + (1.0 + zeta * 1j * math.sqrt(math.pi) * special.wofz(zeta)) / k_lambda**2


def maxwellian_root(k_lambda: float, guess: complex | None = None) -> complex:
    """The least-damped root of :func:`maxwellian_eps` by the secant method (scipy.optimize.newton),
    started from Bohm-Gross with a small damping."""
    if guess is None:
        guess = complex(bohm_gross(k_lambda), -0.01)
    w = optimize.newton(lambda w: maxwellian_eps(w, k_lambda), guess, tol=1e-13, maxiter=200)
    w = complex(w)
    if abs(maxwellian_eps(w, k_lambda)) > 1e-9:
        raise ArithmeticError(f"no Maxwellian root found near {guess} at k lambda_D = {k_lambda}")
    return w


def cold_symmetric_growth(k: float, v0: float, omega_b: float) -> float:
    """Growth rate of two symmetric cold beams (+-v0, each with omega_b^2 = omega_pb^2/gamma0^3):
    omega^2 = k^2 v0^2 + omega_b^2 - omega_b sqrt(omega_b^2 + 4 k^2 v0^2); growth = sqrt(-omega^2)
    where negative, else 0 (textbook, e.g. Birdsall & Langdon 1991, sec. 5-10)."""
    kv2 = (k * v0) ** 2
    w2 = kv2 + omega_b**2 - omega_b * math.sqrt(omega_b**2 + 4.0 * kv2)
    return math.sqrt(-w2) if w2 < 0 else 0.0


def weak_beam_root(k: float, ratio: float, beta_b: float) -> complex:
    """Fastest-growing root of the cold beam-plasma dispersion relation
    1 - 1/omega^2 - (n_b/n_p) / (gamma_b^3 (omega - k v_b)^2) = 0 (plasma at rest, omega in the
    plasma's omega_p; textbook cold-fluid result, relativistic mass gamma_b^3 along the drift),
    as the quartic omega^2 (omega - kv)^2 - (omega - kv)^2 - a omega^2 = 0 solved by numpy.roots."""
    g = 1.0 / math.sqrt(1.0 - beta_b**2)
    a = ratio / g**3
    kv = k * beta_b
    w2 = np.poly1d([1.0, 0.0, 0.0])
    d2 = np.poly1d([1.0, -kv]) ** 2
    roots = np.roots((w2 * d2 - d2 - a * w2).coeffs)
    return complex(roots[np.argmax(roots.imag)])


def weak_beam_law(ratio: float, beta_b: float) -> float:
    """gamma_max ~ (sqrt3/2^(4/3)) (n_b/n_p)^(1/3) omega_p / gamma_b for n_b << n_p (classic
    cold beam-plasma result, quoted from memory; the 1/gamma_b comes from the gamma_b^3 mass).
    tests/test_validate.py checks it as the small-n_b limit of :func:`weak_beam_root`."""
    g = 1.0 / math.sqrt(1.0 - beta_b**2)
    return WEAK_BEAM_COEFFICIENT * ratio ** (1.0 / 3.0) / g


class JuttnerBeam:
    """One drifting 1D Maxwell-Juttner species, f(u) ∝ exp(-Gamma_d (gamma - beta_d u)/theta)
    in the lab (the invariant phase-space density of the rest-frame Juttner distribution,
    Juttner 1911), normalised to 1 by adaptive quadrature (scipy.integrate.quad)."""

    def __init__(self, wp2: float, drift_u: float, theta: float):
        self.wp2, self.theta = wp2, theta
        self.g_d = math.sqrt(1.0 + drift_u * drift_u)
        self.b_d = drift_u / self.g_d
        self.u_d = drift_u
        # the distribution lives within ~40 thermal widths of the drift (exp(-40) is far below
        # the quadrature tolerance): u' in [-a, a] with gamma' - 1 = 40 theta
        gp = 1.0 + 40.0 * theta + 8.0 * math.sqrt(theta)
        a = math.sqrt(gp * gp - 1.0)
        lo = self.g_d * (-a + self.b_d * gp)
        hi = self.g_d * (a + self.b_d * gp)
        self.lo, self.hi = lo, hi
        self.norm = 1.0
        self.norm = integrate.quad(self.f, lo, hi, points=[drift_u], limit=400,
                                   epsabs=0.0, epsrel=1e-12)[0]

    def f(self, u):
        gamma = math.sqrt(1.0 + u * u)
        arg = (self.g_d * (gamma - self.b_d * u) - 1.0) / self.theta
        return math.exp(-arg) / self.norm

    def df(self, u):
        """df/du = -(Gamma_d/theta) (v - beta_d) f."""
        v = u / math.sqrt(1.0 + u * u)
        return -(self.g_d / self.theta) * (v - self.b_d) * self.f(u)

    def chi_imag_axis(self, k: float, growth: float) -> complex:
        """chi(k, i gamma) = (omega_p^2/k) Int f'(u) / (i gamma - k v(u)) du (the relativistic 1D
        Vlasov susceptibility, e.g. Krall & Trivelpiece 1973 ch. 8), by quadrature: no pole on
        the real u axis for gamma > 0."""
        def re(u):
            v = u / math.sqrt(1.0 + u * u)
            return self.df(u) * (-k * v) / (k * k * v * v + growth * growth)

        def im(u):
            v = u / math.sqrt(1.0 + u * u)
            return self.df(u) * (-growth) / (k * k * v * v + growth * growth)
        kw = dict(points=[self.u_d], limit=400, epsabs=1e-14, epsrel=1e-11)
        r = integrate.quad(re, self.lo, self.hi, **kw)[0]
        i = integrate.quad(im, self.lo, self.hi, **kw)[0]
        return self.wp2 / k * complex(r, i)


def symmetric_juttner_growth(k: float, wp2_each: float, drift_u: float, theta: float,
                             upper: float) -> float | None:
    """Growth rate of two symmetric drifting Juttner beams (+-drift_u, each omega_ps^2 = wp2_each).

    By symmetry the growing root is purely imaginary, omega = i gamma, and eps(k, i gamma) is real
    there; gamma is the root of eps(k, i gamma) = 0 found by scipy.optimize.brentq on (0, upper].
    Returns None when eps does not change sign (no purely growing root).
    """
    beams = [JuttnerBeam(wp2_each, drift_u, theta), JuttnerBeam(wp2_each, -drift_u, theta)]

    def eps(g):
        return 1.0 + sum(b.chi_imag_axis(k, g) for b in beams).real
    grid = np.linspace(upper, 1e-4 * upper, 40)
    vals = [eps(g) for g in grid]
    for (g1, e1), (g2, e2) in zip(zip(grid, vals), zip(grid[1:], vals[1:])):
        if e1 > 0 >= e2 or e1 < 0 <= e2:
            return float(optimize.brentq(eps, g2, g1, xtol=1e-13, rtol=1e-12))
    return None


def cic_density_noise(ppc: float, cells: int) -> float:
    """Expected rms over the grid of delta n/n for independent uniform random positions deposited
    with CIC weights: <(delta n/n)^2> = (2/3 - 1/N_cells) / ppc.

    Derived here: n_i = (N_cells/N) sum_j W(x_i - x_j) with the CIC weight W (Birdsall & Langdon
    1991, ch. 8); for one particle <W> = 1/N_cells and <W^2> = (2/N_cells) Int_0^1 f^2 df =
    2/(3 N_cells), and independent particles add their variances (Poisson/multinomial statistics).
    The rms of the square root of the mean square is this value to O(1/N_cells).
    """
    return math.sqrt((2.0 / 3.0 - 1.0 / cells) / ppc)
