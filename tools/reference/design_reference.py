#!/usr/bin/env python3
"""Best known designs of pulse trains for field-free alignment of linear molecules (reference values).

Usage:  python3 tools/reference/design_reference.py [problem ...] [--stage kick|finite|all] [--workers 2]
Problems: n2_300k_1..4, co2_20k_1..4 (default: all).  Writes tests/data/best_designs_linear.json
(one entry per problem, merged into the existing file).  Needs only numpy and scipy; shares no code with
kicktrain.

Design problem.  N pulses, pulse 1 centred at t = 0, pulse k >= 2 centred d_k after pulse k-1
(d_k in [d_min, d_max], d_min >= the minimum separation), peak intensities I_k in [0, I_max], common
FWHM tau.  Score = max of <cos^2 theta>(t) over t in [t_N + w0, t_N + w1], found to 1e-6 or better.

Physics (units: B, D in cm^-1, polarizability volumes in A^3, I in W/cm^2, t in ps; SI 2019 exact h, c,
k_B, hbar = h / 2 pi).
  * Rotor levels E(J) = hc [B J(J+1) - D J^2 (J+1)^2]; thermal ensemble over every |J M> sublevel with
    population g(J) exp(-E_J / kT) / Q, nuclear-spin weights g = (even J, odd J); Q summed until the
    terms underflow (common practice, e.g. G. Herzberg, Spectra of Diatomic Molecules, ch. III).
    Initial levels are kept until the population left out is < 1e-7 in the searches (reported in the
    JSON as left_out_population) and < 1e-12 (kick) / 1e-10 (finite pulses) for the reported scores.
  * H(t) = H0 - hbar u(t) cos^2 theta, u(t) = 2 pi dalpha' I(t) / (c hbar), dalpha' = (a_par - a_perp)
    1e-30 m^3, I in W/m^2 (cycle-averaged induced-dipole interaction: B. Friedrich and D. Herschbach,
    "Alignment and trapping of molecules in intense laser fields", Phys. Rev. Lett. 74, 4623 (1995)).
    Gaussian envelope I(t) = I0 exp(-4 ln2 (t - t0)^2 / tau^2).
  * Kick (impulsive) limit: psi -> exp(i P cos^2 theta) psi at the pulse centre, P = u0 tau
    sqrt(pi / (4 ln 2)) (I. Sh. Averbukh and R. Arvieu, "Angular focusing, squeezing, and rainbow
    formation in a strongly driven quantum rotor", Phys. Rev. Lett. 87, 163601 (2001)).
  * M is conserved and cos^2 couples J to J, J +- 2: independent (|M|, parity of J) blocks; the +M and -M
    blocks are identical, so |M| > 0 blocks carry weight 2 (the explicit M = -J..J sum is checked to
    agree).  <J M|cos^2|J M> = 1/3 + 2/3 [J(J+1) - 3M^2] / [(2J+3)(2J-1)],
    <J+2 M|cos^2|J M> = sqrt[((J+1)^2 - M^2)((J+2)^2 - M^2)] / [(2J+3) sqrt((2J+1)(2J+5))]
    (the square of the direction-cosine matrix, R. N. Zare, Angular Momentum, Wiley 1988, ch. 3);
    checked against Gauss-Legendre quadrature of normalized associated Legendre functions (3.7e-14).
  * After the last pulse <cos^2>(t_N + s) = A0 + Re sum_J a_J exp(-i (E_{J+2} - E_J) s / hbar), exact
    (T. Seideman, "Revival structure of aligned rotational wave packets", Phys. Rev. Lett. 83, 4971
    (1999)).  Its maximum over the window: dense grid, then safeguarded Newton steps on the exact sum
    from the best grid local maxima (8 of them, 1 fs grid for N2 and 2 fs for CO2, for reported scores).

Kick model (exact kicks; each kick = V exp(i P lambda) V^T with the eigenvectors V of the cos^2 blocks,
two real matrix products per block, vectorized over many designs).
  * N = 1: 501-point scan of I (0.2 % steps) + bounded Brent refinement.
  * N = 2: exhaustive grid, delays in 5 fs (N2) / 20 fs (CO2) steps over [d_min, d_max], both intensities
    in 2 % steps (51 x 51).  The window signal is an entire function of (P1, P2) (it contains
    exp(i P (lambda_a - lambda_b)), |lambda_a - lambda_b| <= 1), so it is computed exactly on 14 x 14 (N2) /
    16 x 16 (CO2) Chebyshev-Lobatto nodes and interpolated to the 51 x 51 grid; max over the window by
    the best grid point (4 / 15 fs grid) + parabola vertex.  The JSON records the largest deviation from
    direct, fully refined evaluations at 300 random grid points (~1e-6).  The best distinct grid local
    maxima are then polished with the converged scorer.
  * N = 3, 4: scipy.optimize.differential_evolution (R. Storn and K. Price, J. Global Optim. 11, 341
    (1997)), vectorized population, sobol initialization, popsize 25 (N = 3) / 30 (N = 4) per dimension,
    mutation (0.5, 1), recombination 0.7, tol 1e-9, L-BFGS-B polish; six seeds (more until at least
    three runs agree to 1e-4).  Every run is polished again with the converged scorer.
  * Local polish: bounded Nelder-Mead (J. A. Nelder and R. Mead, Comput. J. 7, 308 (1965); adaptive,
    restarted with smaller simplices) then Powell (M. J. D. Powell, Comput. J. 7, 155 (1964)).
  * Basis: smallest J_max for which the strongest possible train (all pulses at the ceiling, kicks in
    phase one revival apart) and random trains change by < 1e-8 (search) / < 1e-12 (reported scores)
    when J_max grows by 16; the reported scores use J_max + 8 beyond that.

Finite pulses (the real Gaussian envelopes).
  * Time-dependent Schroedinger equation in the interaction picture, c' = i u(t) C_I(t) c with
    C_I(t)_{JJ'} = <J|cos^2|J'> exp(i (E_J - E_J') t / hbar), integrated by DOP853 (E. Hairer,
    S. P. Norsett, G. Wanner, Solving Ordinary Differential Equations I, Springer 1993; scipy solve_ivp)
    with rtol 1e-10, atol 1e-12, over centre +- 3.5 FWHM (area outside < 1e-15).
  * Polish objective: the train factorized into pulse propagators U_c(I) (interaction picture of the
    pulse centre) and exact free evolution between centres; U_c(I) from a bank of DOP853 runs on
    Chebyshev-Lobatto nodes in I (16 for N2, 20 for CO2) with barycentric interpolation (J.-P. Berrut and
    L. N. Trefethen, "Barycentric Lagrange interpolation", SIAM Rev. 46, 501 (2004)); interpolation
    error vs direct runs ~1e-12 (recorded).  Bounded Nelder-Mead + Powell over all delays and
    intensities, from every distinct kick-model optimum kept (up to six).
  * The window starts inside the last pulse (w0 = 1 FWHM < 3.5 FWHM): there <cos^2> is computed with the
    field on, by integrating the last pulse's trailing edge exactly (DOP853 dense output, 0.5 fs grid +
    bounded Brent).  It is skipped only where a rigorous bound excludes it: |<cos^2> - free
    extrapolation| <= 2 P_rem + P_rem^2, P_rem the kick strength still to come (||cos^2|| <= 1).  A start
    whose edge is within 2e-3 of its field-free part (and which is within 5e-3 of the best start) is
    polished on the full score with the edge integrated at every evaluation; the others on the window
    part after the cut, and the result is re-scored (and, if the edge wins, re-polished) exactly.
  * Reported finite score: ONE continuous integration of the whole train (sum of all envelopes, so
    overlapping tails are exact), basis and thermal sum tightened (left-out population < 1e-10), run at
    rtol 1e-10 and 1e-12 and in a basis 16 levels larger; independently, the pulse propagators are
    rebuilt by second-order split-operator steps (M. D. Feit, J. A. Fleck and A. Steiger, "Solution of the
    Schroedinger equation by a spectral method", J. Comput. Phys. 47, 412 (1982)) at 0.5 and 0.25 fs
    with Richardson extrapolation (common practice).  All numbers are in the JSON.

Runtime (as run to produce the JSON, 2 cores shared with other jobs, load average 2-10):
kick stage 77 min (N2 two-pulse grid 9 min; N2 four-pulse DE, 14 runs, 47 min; the rest < 10 min each),
finite-pulse stage 32 min (co2_20k_4, polished with the exact trailing edge at every evaluation, 16 min);
about 1 h 50 min in all, roughly half of that on an idle machine.  Memory < 2 GB.
"""
import os

for _v in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_v, "1")

import argparse
import fcntl
import json
import math
import multiprocessing as mp
import sys
import time

import numpy as np
import scipy
from scipy.integrate import solve_ivp
from scipy.optimize import differential_evolution, minimize, minimize_scalar
from scipy.ndimage import maximum_filter
from scipy.special import erf, lpmv, gammaln

# ----------------------------------------------------------------------------------------------
# Constants: SI 2019 exact values (CODATA).  Internal units: time in ps, energies and rates in rad/ps.
# ----------------------------------------------------------------------------------------------
H = 6.62607015e-34
C = 299792458.0
KB = 1.380649e-23
HBAR = H / (2.0 * math.pi)
CM1 = 2.0 * math.pi * C * 100.0 * 1e-12          # 1 cm^-1 expressed in rad/ps
LN2 = math.log(2.0)
AREA = math.sqrt(math.pi / (4.0 * LN2))          # integral of exp(-4 ln2 x^2) dx
SUPPORT = 3.5                                    # finite pulse integrated over centre +- 3.5 FWHM

MOLECULES = {
    "n2_300k": dict(B=1.98958, D=5.76e-6, a_par=2.38, a_perp=1.45, spin=(2.0, 1.0), T=300.0,
                    tau_fs=50.0, i_max=5e13, d_min=0.2, d_max=10.0, min_sep=0.2, window=(0.05, 8.8)),
    "co2_20k": dict(B=0.39021, D=1.333e-7, a_par=4.038, a_perp=1.929, spin=(1.0, 0.0), T=20.0,
                    tau_fs=100.0, i_max=2e13, d_min=0.3, d_max=45.0, min_sep=0.3, window=(0.1, 45.0)),
}


def u0_radps(mol, intensity_wcm2):
    """Peak rate u0 = 2 pi dalpha' I / (c hbar), converted to rad/ps.
    Cycle-averaged induced-dipole interaction -(E0^2/4)(dalpha cos^2 + alpha_perp) of B. Friedrich and
    D. Herschbach, "Alignment and trapping of molecules in intense laser fields", Phys. Rev. Lett. 74,
    4623 (1995), with I = c eps0 E0^2 / 2 and dalpha = 4 pi eps0 dalpha' (the constant alpha_perp term
    only shifts the phase)."""
    dal = (mol["a_par"] - mol["a_perp"]) * 1e-30
    return 2.0 * math.pi * dal * intensity_wcm2 * 1e4 / (C * HBAR) * 1e-12


def kick_strength(mol, intensity_wcm2):
    """P = integral of u dt = u0 tau sqrt(pi / (4 ln 2))."""
    return u0_radps(mol, intensity_wcm2) * mol["tau_fs"] * 1e-3 * AREA


# ----------------------------------------------------------------------------------------------
# cos^2(theta) matrix elements between normalized spherical harmonics |J M>
# ----------------------------------------------------------------------------------------------
def cos2_diag(j, m):
    """<J M|cos^2|J M> = 1/3 + 2/3 [J(J+1) - 3M^2] / [(2J+3)(2J-1)]."""
    j = np.asarray(j, float)
    return 1.0 / 3.0 + (2.0 / 3.0) * (j * (j + 1) - 3.0 * m * m) / ((2 * j + 3) * (2 * j - 1))


def cos2_off(j, m):
    """<J+2 M|cos^2|J M> = sqrt[((J+1)^2 - M^2)((J+2)^2 - M^2)] / [(2J+3) sqrt((2J+1)(2J+5))].
    Both follow from squaring <J+1 M|cos|J M> = sqrt[((J+1)^2 - M^2) / ((2J+1)(2J+3))]
    (R. N. Zare, Angular Momentum (Wiley 1988), direction-cosine matrix elements, ch. 3; equivalently
    the recurrence of the associated Legendre functions, Abramowitz & Stegun 8.5.3)."""
    j = np.asarray(j, float)
    return np.sqrt(((j + 1) ** 2 - m * m) * ((j + 2) ** 2 - m * m)) / (
        (2 * j + 3) * np.sqrt((2 * j + 1) * (2 * j + 5)))


def check_matrix_elements(jmax=24):
    """Closed forms against Gauss-Legendre quadrature of normalized associated Legendre functions,
    and against the square of the cos(theta) matrix (M fixed).  Returns the largest deviation."""
    x, wq = np.polynomial.legendre.leggauss(80)
    worst = 0.0
    for m in range(0, 9):
        js = np.arange(m, jmax + 1)
        # normalized theta parts: sqrt((2J+1)/2 (J-M)!/(J+M)!) P_J^M(x); the phi part integrates to 1
        norm = np.exp(0.5 * (np.log((2 * js + 1) / 2.0) + gammaln(js - m + 1) - gammaln(js + m + 1)))
        f = np.array([norm[i] * lpmv(m, js[i], x) for i in range(len(js))])
        quad = (f * (wq * x * x)) @ f.T
        cf = np.diag(cos2_diag(js, m))
        for i in range(len(js) - 2):
            cf[i, i + 2] = cf[i + 2, i] = cos2_off(js[i], m)
        worst = max(worst, np.abs(quad - cf).max())
        # cos(theta) squared in a larger basis (exact for rows well inside the truncation)
        jb = np.arange(m, jmax + 3)
        cm = np.zeros((len(jb), len(jb)))
        for i in range(len(jb) - 1):
            jj = jb[i]
            cm[i, i + 1] = cm[i + 1, i] = math.sqrt(((jj + 1) ** 2 - m * m) / ((2 * jj + 1) * (2 * jj + 3)))
        sq = (cm @ cm)[: len(js), : len(js)]
        worst = max(worst, np.abs(sq - cf).max())
    return worst


# ----------------------------------------------------------------------------------------------
# Thermal ensemble and (|M|, parity) blocks
# ----------------------------------------------------------------------------------------------
def level_energy_cm1(mol, j):
    j = np.asarray(j, float)
    return mol["B"] * j * (j + 1) - mol["D"] * (j * (j + 1)) ** 2


def thermal(mol, pop_tol):
    """Population of ONE |J M> sublevel, g(J) exp(-E_J / kT) / Q, for J = 0..J_keep, with the partition
    function Q = sum_J g(J)(2J+1) exp(-E_J/kT) summed until the terms underflow relative to Q.
    J_keep is the smallest J with the population of all levels above it < pop_tol.
    Returns (p_sub[0..J_keep], left_out_population, Q)."""
    kt = KB * mol["T"] / (H * C * 100.0)       # cm^-1
    js = np.arange(0, 4000)
    e = level_energy_cm1(mol, js)
    g = np.where(js % 2 == 0, mol["spin"][0], mol["spin"][1])
    # stop before the centrifugal term turns E_J over (far beyond any populated level here)
    turn = int(math.sqrt(mol["B"] / (2 * mol["D"])))
    js, e, g = js[:turn], e[:turn], g[:turn]
    terms = g * (2 * js + 1) * np.exp(-(e - e[0]) / kt)
    assert terms[-1] < 1e-300 or terms[-1] / terms.sum() < 1e-30
    q = terms.sum()
    tail = np.cumsum(terms[::-1])[::-1] / q      # tail[J] = population of levels >= J
    j_keep = int(np.argmax(tail < pop_tol)) - 1  # first J whose tail from J+1 < tol
    j_keep = max(j_keep, 0)
    while tail[j_keep + 1] >= pop_tol:
        j_keep += 1
    p_sub = (g * np.exp(-(e - e[0]) / kt) / q)[: j_keep + 1]
    return p_sub, float(tail[j_keep + 1]), float(q)


class Rotor:
    """Truncated basis J <= jmax split into independent blocks (|M|, parity of J).  +M and -M blocks
    have identical cos^2 matrices and energies, so each |M| > 0 block carries the weight of both
    (the M = -J..J sum is done explicitly in check_explicit_m)."""

    def __init__(self, mol, jmax, pop_tol=1e-7, explicit_m=False):
        self.mol, self.jmax, self.pop_tol = mol, jmax, pop_tol
        p_sub, self.left_out, self.q = thermal(mol, pop_tol)
        self.j_keep = len(p_sub) - 1
        assert self.j_keep + 4 <= jmax, "basis must extend beyond the populated levels"
        jall = np.arange(0, jmax + 3)
        self.e = CM1 * level_energy_cm1(mol, jall)                 # rad/ps
        self.omega = self.e[2:] - self.e[:-2]                        # omega_J = (E_{J+2}-E_J)/hbar, J=0..jmax
        self.blocks = []
        ms = range(-self.j_keep, self.j_keep + 1) if explicit_m else range(0, self.j_keep + 1)
        for m in ms:
            am = abs(m)
            for par in (0, 1):
                j0 = am if am % 2 == par else am + 1
                js = np.arange(j0, jmax + 1, 2)
                init = [i for i, j in enumerate(js) if j <= self.j_keep and p_sub[j] > 0]
                if not init or len(js) < 2:
                    continue
                n = len(js)
                cmat = np.diag(cos2_diag(js, am))
                off = cos2_off(js[:-1], am)
                cmat[np.arange(n - 1), np.arange(1, n)] = off
                cmat[np.arange(1, n), np.arange(n - 1)] = off
                lam, v = np.linalg.eigh(cmat)
                mult = 1.0 if (explicit_m or am == 0) else 2.0
                self.blocks.append(dict(
                    m=am, js=js, n=n, init=np.array(init), k=len(init),
                    w=p_sub[js[init]] * mult, lam=lam, v=np.ascontiguousarray(v),
                    vt=np.ascontiguousarray(v.T),
                    vt_init=np.ascontiguousarray(v.T[:, init] * np.sqrt(p_sub[js[init]] * mult)[None, :]),
                    diag=cos2_diag(js, am), off=off, e=self.e[js]))
        self.wsum = sum(b["w"].sum() for b in self.blocks)

    def sizes(self):
        return dict(jmax=self.jmax, j_keep=self.j_keep, left_out_population=self.left_out,
                    blocks=len(self.blocks), states=int(sum(b["k"] for b in self.blocks)))


def rmatmul(a, z):
    """Real matrix (n, n) times complex array (n, ...) as one real GEMM."""
    zc = np.ascontiguousarray(z)
    shp = zc.shape
    out = a @ zc.reshape(shp[0], -1).view(np.float64)
    return out.view(np.complex128).reshape(shp)


# ----------------------------------------------------------------------------------------------
# Field-free signal after the last pulse:
#   <cos^2>(t_N + s) = A0 + Re sum_J a_J exp(-i omega_J s),
#   A0 = sum w |c_J|^2 C_JJ,  a_J = 2 sum w conj(c_J) c_{J+2} C_{J,J+2}
# (c = state at the centre of the last pulse in the frame of that centre)
# ----------------------------------------------------------------------------------------------
def accumulate_signal(rot, b, psi, a0, acoef):
    """psi: (n, S, k) complex states of block b, each already scaled by sqrt(thermal weight);
    adds to a0 (S,) and acoef (S, jmax+1).  Real batched dot products (fast, exact)."""
    psi = np.ascontiguousarray(psi)
    v = psi.view(np.float64)                                             # (n, S, 2k) interleaved re/im
    dots = (v[:, :, None, :] @ v[:, :, :, None])[..., 0, 0]             # sum_k |c_J|^2
    a0 += b["diag"] @ dots
    cross = (psi[:-1].conj()[:, :, None, :] @ psi[1:, :, :, None])[..., 0, 0]   # sum_k conj(c_J) c_{J+2}
    acoef[:, b["js"][:-1]] += (2.0 * b["off"][:, None] * cross).T


class WindowMax:
    """Max of A0 + Re sum_J a_J exp(-i omega_J s) over s in [s0, s1]: dense grid (step h), the ntop best
    grid local maxima (plus the end points) refined by safeguarded Newton steps on the exact trig sum."""

    def __init__(self, omega, s0, s1, h, ntop=3):
        self.omega = omega
        self.s0, self.s1, self.h, self.ntop = s0, s1, h, ntop
        ns = int(math.ceil((s1 - s0) / h)) + 1
        self.grid = np.linspace(s0, s1, ns)
        self.h = self.grid[1] - self.grid[0]
        ph = np.exp(-1j * np.outer(omega, self.grid))
        self.er = np.ascontiguousarray(ph.real)
        self.ei = np.ascontiguousarray(ph.imag)

    def __call__(self, a0, acoef, return_time=False, ntop=None, iters=10):
        S = acoef.shape[0]
        f = self.curve(a0, acoef)                                            # (S, ns)
        ns = f.shape[1]
        q = min(self.ntop if ntop is None else ntop, ns)
        if q == 1:
            idx = np.argmax(f, axis=1)[:, None]
        else:
            # local maxima on the grid (end points count when they beat their neighbour)
            loc = np.empty_like(f, dtype=bool)
            loc[:, 1:-1] = (f[:, 1:-1] >= f[:, :-2]) & (f[:, 1:-1] >= f[:, 2:])
            loc[:, 0] = f[:, 0] >= f[:, 1]
            loc[:, -1] = f[:, -1] >= f[:, -2]
            fl = np.where(loc, f, -np.inf)
            idx = np.argpartition(-fl, q - 1, axis=1)[:, :q]                # (S, q)
        s = self.grid[idx]
        lo = np.maximum(s - self.h, self.s0)
        hi = np.minimum(s + self.h, self.s1)
        best_s = s.copy()
        best_f = np.take_along_axis(f, idx, axis=1)
        om = self.omega
        for _ in range(iters):
            ph = np.exp(-1j * s[:, :, None] * om[None, None, :])           # (S, q, nJ)
            z = acoef[:, None, :] * ph
            f0 = a0[:, None] + z.real.sum(-1)
            z = z * om
            f1 = z.imag.sum(-1)                                             # d/ds Re(a e^{-i w s})
            f2 = -(z * om).real.sum(-1)
            better = f0 > best_f
            best_f = np.where(better, f0, best_f)
            best_s = np.where(better, s, best_s)
            step = np.where(f2 < 0, -f1 / np.where(f2 < 0, f2, -1.0), np.sign(f1) * 0.25 * self.h)
            s = np.clip(s + step, lo, hi)
        j = np.argmax(best_f, axis=1)
        fb = best_f[np.arange(S), j]
        if return_time:
            return fb, best_s[np.arange(S), j]
        return fb

    def curve(self, a0, acoef):
        return a0[:, None] + acoef.real @ self.er - acoef.imag @ self.ei


def window_of(rot, h, ntop=3):
    s0, s1 = rot.mol["window"]
    return WindowMax(rot.omega, s0, s1, h, ntop)


# ----------------------------------------------------------------------------------------------
# Kick model: psi -> exp(i P cos^2) psi = V exp(i P lambda) V^T psi, free evolution exp(-i E d)
# ----------------------------------------------------------------------------------------------
def kick_coefficients(rot, delays, strengths):
    """delays (S, N-1) ps, strengths P (S, N).  Returns (a0 (S,), acoef (S, jmax+1))."""
    delays = np.atleast_2d(delays)
    strengths = np.atleast_2d(strengths)
    S, N = strengths.shape
    a0 = np.zeros(S)
    acoef = np.zeros((S, rot.jmax + 1), complex)
    for b in rot.blocks:
        lam, n, k = b["lam"], b["n"], b["k"]
        x = np.exp(1j * np.outer(lam, strengths[:, 0]))[:, :, None] * b["vt_init"][:, None, :]
        psi = rmatmul(b["v"], x)
        for p in range(1, N):
            psi *= np.exp(-1j * np.outer(b["e"], delays[:, p - 1]))[:, :, None]
            x = rmatmul(b["vt"], psi)
            x *= np.exp(1j * np.outer(lam, strengths[:, p]))[:, :, None]
            psi = rmatmul(b["v"], x)
        accumulate_signal(rot, b, psi, a0, acoef)
    return a0, acoef


def revival_period(mol):
    return 1.0 / (2.0 * mol["B"] * C * 100.0) * 1e12       # ps


def choose_jmax(mol, npulses, pop_tol, tol=1e-10, start=40, step=8):
    """Smallest basis (ladder start, start+step, ...) for which the score of the strongest possible
    train -- every pulse at the ceiling, all kicks in phase (delays = revival period, or d_max) -- and
    of a few random trains change by < tol when the basis grows by two more steps."""
    pm = kick_strength(mol, mol["i_max"])
    trev = revival_period(mol)
    rng = np.random.default_rng(7)
    n = max(npulses, 2)
    dl = np.vstack([np.full(n - 1, min(trev, mol["d_max"])),
                    rng.uniform(mol["d_min"], mol["d_max"], (4, n - 1))])
    P = np.full((dl.shape[0], n), pm)
    if npulses == 1:
        dl, P = dl[:1, :0], P[:1, :1]
    jk = len(thermal(mol, pop_tol)[0]) - 1
    jmax = max(start, jk + 8)
    hist = []
    while True:
        vals = []
        for jj in (jmax, jmax + 2 * step):
            rot = Rotor(mol, jj, pop_tol)
            wm = window_of(rot, 0.004 if mol["B"] > 1 else 0.01)
            vals.append(wm(*kick_coefficients(rot, dl, P)))
        dev = float(np.abs(vals[0] - vals[1]).max())
        hist.append((jmax, dev))
        if dev < tol:
            return jmax, hist
        jmax += step


# ----------------------------------------------------------------------------------------------
# Problems and scorers
# ----------------------------------------------------------------------------------------------
def problem(name):
    base, n = name.rsplit("_", 1)
    mol = dict(MOLECULES[base])
    return base, mol, int(n)


def unpack(x, npulses, mol):
    """Design vector x = (d_2..d_N in ps, I_1/I_max..I_N/I_max) -> delays, intensities (W/cm^2)."""
    x = np.asarray(x, float)
    return x[: npulses - 1], x[npulses - 1:] * mol["i_max"]


class KickScorer:
    """Kick-model score max_{s in window} <cos^2>(t_N + s), vectorized over designs."""

    def __init__(self, mol, npulses, pop_tol, jmax, h, ntop, iters=10):
        self.mol, self.npulses = mol, npulses
        self.rot = Rotor(mol, jmax, pop_tol)
        self.wm = window_of(self.rot, h, ntop)
        self.pmax = kick_strength(mol, mol["i_max"])
        self.ntop, self.iters = ntop, iters
        self.calls = 0

    def scores(self, X, return_time=False):
        X = np.atleast_2d(X)
        self.calls += X.shape[0]
        n = self.npulses
        a0, ac = kick_coefficients(self.rot, X[:, : n - 1], X[:, n - 1:] * self.pmax)
        return self.wm(a0, ac, return_time=return_time, ntop=self.ntop, iters=self.iters)

    def de_objective(self, x):
        """scipy differential_evolution, vectorized: x has shape (D, S) (or (D,) when polishing)."""
        if x.ndim == 1:
            return -float(self.scores(x[None, :])[0])
        out = np.empty(x.shape[1])
        for c0 in range(0, x.shape[1], 64):
            out[c0:c0 + 64] = -self.scores(x[:, c0:c0 + 64].T)
        return out


def bounds_of(mol, npulses):
    return [(mol["d_min"], mol["d_max"])] * (npulses - 1) + [(0.0, 1.0)] * npulses


def local_polish(fun, x0, bounds, scales, xatol=1e-7, fatol=1e-11, maxfev=4000):
    """Bounded Nelder-Mead (restarted until the simplex stops improving), then Powell."""
    lo = np.array([b[0] for b in bounds])
    hi = np.array([b[1] for b in bounds])
    x = np.clip(np.asarray(x0, float), lo, hi)
    fx = fun(x)
    nfev = 1
    for it in range(4):
        sim = [x]
        for i in range(len(x)):
            y = x.copy()
            y[i] = y[i] + scales[i] if y[i] + scales[i] <= hi[i] else y[i] - scales[i]
            sim.append(np.clip(y, lo, hi))
        r = minimize(fun, x, method="Nelder-Mead", bounds=bounds,
                     options=dict(initial_simplex=np.array(sim), xatol=xatol, fatol=fatol,
                                  maxfev=maxfev, adaptive=True))
        nfev += r.nfev
        improved = r.fun < fx - 1e-12
        if r.fun <= fx:
            x, fx = r.x, r.fun
        if not improved:
            break
        scales = np.asarray(scales) * 0.3
    r = minimize(fun, x, method="Powell", bounds=bounds, options=dict(xtol=1e-8, ftol=1e-12, maxfev=maxfev))
    nfev += r.nfev
    if r.fun <= fx:
        x, fx = r.x, r.fun
    return np.clip(x, lo, hi), float(fx), nfev


# ----------------------------------------------------------------------------------------------
# Kick-model searches
# ----------------------------------------------------------------------------------------------
SEARCH_POP_TOL = 1e-7
FINAL_POP_TOL = 1e-12


def search_h(mol):
    return 0.004 if mol["B"] > 1 else 0.010


def final_h(mol):
    return 0.001 if mol["B"] > 1 else 0.002


def make_scorers(mol, npulses):
    js, hs = choose_jmax(mol, npulses, SEARCH_POP_TOL, tol=1e-8)
    jf, hf = choose_jmax(mol, npulses, FINAL_POP_TOL, tol=1e-12)
    jf += 8
    search = KickScorer(mol, npulses, SEARCH_POP_TOL, js, search_h(mol), ntop=1, iters=8)
    final = KickScorer(mol, npulses, FINAL_POP_TOL, jf, final_h(mol), ntop=8, iters=14)
    info = dict(search=dict(search.rot.sizes(), window_grid_fs=search_h(mol) * 1e3,
                            refine="Newton from the best grid point", jmax_ladder=hs),
                final=dict(final.rot.sizes(), window_grid_fs=final_h(mol) * 1e3,
                           refine="Newton from the 8 best grid local maxima", jmax_ladder=hf))
    return search, final, info


def design_dict(mol, npulses, x, score=None, t_peak=None):
    delays, ints = unpack(x, npulses, mol)
    d = dict(delays_ps=[float(v) for v in delays], intensities_wcm2=[float(v) for v in ints],
             intensity_fractions=[float(v) for v in x[npulses - 1:]],
             delays_over_trev=[float(v / revival_period(mol)) for v in delays],
             kick_strengths=[float(kick_strength(mol, i)) for i in ints])
    if score is not None:
        d["score"] = float(score)
    if t_peak is not None:
        d["peak_time_after_last_pulse_ps"] = float(t_peak)
    return d


def polish_kick(final, mol, npulses, x0):
    bnds = bounds_of(mol, npulses)
    scales = [0.01] * (npulses - 1) + [0.02] * npulses
    fun = lambda x: -float(final.scores(x[None, :])[0])
    x, fx, nfev = local_polish(fun, x0, bnds, scales)
    return x, -fx, nfev


def lobatto(nodes):
    j = np.arange(nodes)
    return 0.5 * (1.0 - np.cos(np.pi * j / (nodes - 1)))


def lagrange_matrix(nodes_x, x):
    """Rows: barycentric Lagrange weights of the Chebyshev-Lobatto nodes nodes_x evaluated at x."""
    k = len(nodes_x)
    bw = (-1.0) ** np.arange(k)
    bw[0] *= 0.5
    bw[-1] *= 0.5
    out = np.zeros((len(x), k))
    for i, xi in enumerate(x):
        hit = np.nonzero(np.abs(xi - nodes_x) < 1e-15)[0]
        if hit.size:
            out[i, hit[0]] = 1.0
        else:
            q = bw / (xi - nodes_x)
            out[i] = q / q.sum()
    return out


def grid_two_pulses_cheb(rot, wm, pmax, fr, delays, nodes, chunk=16):
    """Exhaustive kick-model grid for N = 2, scores[i1, i_delay, i2] at intensity fractions fr (both
    pulses) and every delay.  The signal on the window grid, <cos^2>(s; P1, P2), is an entire function of
    the kick strengths (it contains exp(i P (lambda_a - lambda_b)) with |lambda_a - lambda_b| <= 1), so it is
    computed exactly on Chebyshev-Lobatto nodes in P1 and P2 and interpolated to the 51 x 51 intensity
    grid (error checked against direct evaluations).  Max over s: best grid point refined by the vertex
    of the parabola through it and its neighbours (window ends taken as they are)."""
    fn = lobatto(nodes)
    L = lagrange_matrix(fn, fr)                                           # (51, K)
    pn = fn * pmax
    nd, K, nf = len(delays), nodes, len(fr)
    out = np.empty((nf, nd, nf))
    psi1 = [[rmatmul(b["v"], np.exp(1j * b["lam"] * p1)[:, None] * b["vt_init"]) for b in rot.blocks]
            for p1 in pn]
    for c0 in range(0, nd, chunk):
        dch = delays[c0:c0 + chunk]
        m = len(dch)
        A0 = np.zeros((K, K * m))
        AC = np.zeros((K, K * m, rot.jmax + 1), complex)
        for ia in range(K):
            for b, ps in zip(rot.blocks, psi1[ia]):
                psid = np.exp(-1j * np.outer(b["e"], dch))[:, :, None] * ps[:, None, :]
                z = rmatmul(b["vt"], psid)
                x = np.exp(1j * np.outer(b["lam"], pn))[:, :, None, None] * z[:, None, :, :]
                psi2 = rmatmul(b["v"], x).reshape(b["n"], K * m, b["k"])
                accumulate_signal(rot, b, psi2, A0[ia], AC[ia])
        # node curves (K1, K2, m, ns)
        F = (A0.reshape(K, K, m)[..., None]
             + (AC.real @ wm.er - AC.imag @ wm.ei).reshape(K, K, m, -1))
        for j in range(m):
            g = np.tensordot(L, F[:, :, j, :], axes=(1, 0))                  # (51, K2, ns)
            g = np.tensordot(g, L, axes=(1, 1))                              # (51, ns, 51)
            g = np.ascontiguousarray(np.moveaxis(g, 2, 1)).reshape(nf * nf, -1)
            i = np.argmax(g, axis=1)
            r = np.arange(nf * nf)
            f0 = g[r, i]
            inner = (i > 0) & (i < g.shape[1] - 1)
            fm = g[r, np.maximum(i - 1, 0)]
            fp = g[r, np.minimum(i + 1, g.shape[1] - 1)]
            den = 2.0 * f0 - fm - fp
            vert = np.where(inner & (den > 0), (fp - fm) ** 2 / (8.0 * np.where(den > 0, den, 1.0)), 0.0)
            out[:, c0 + j, :] = (f0 + vert).reshape(nf, nf)
    return out


GRID_NODES = {"n2_300k": 14, "co2_20k": 16}
GRID_H = {"n2_300k": 0.004, "co2_20k": 0.015}


def _grid_worker(args):
    mol, jmax, h, pmax, fr, delays, nodes = args
    rot = Rotor(mol, jmax, SEARCH_POP_TOL)
    wm = window_of(rot, h)
    return grid_two_pulses_cheb(rot, wm, pmax, fr, delays, nodes)


def distinct(points, values, key_scale, limit, min_dist=1.0):
    """Greedy selection of the best points that differ by > min_dist in scaled coordinates."""
    order = np.argsort(-values)
    chosen = []
    for i in order:
        p = points[i] / key_scale
        if all(np.max(np.abs(p - points[j] / key_scale)) > min_dist for j in chosen):
            chosen.append(i)
        if len(chosen) >= limit:
            break
    return chosen


def kick_stage(name, workers, log):
    base, mol, npulses = problem(name)
    t0 = time.time()
    search, final, info = make_scorers(mol, npulses)
    res = dict(basis=info)
    candidates = []
    if npulses == 1:
        f = np.linspace(0.0, 1.0, 501)
        vals = search.scores(f[:, None])
        i = int(np.argmax(vals))
        r = minimize_scalar(lambda v: -float(final.scores(np.array([[v]]))[0]),
                            bounds=(f[max(i - 1, 0)], f[min(i + 1, 500)]), method="bounded",
                            options=dict(xatol=1e-10))
        cands = [np.array([r.x]), np.array([1.0])]
        best = max(cands, key=lambda x: final.scores(x[None, :])[0])
        res["method"] = dict(kind="1-D scan of I_1/I_max on 501 points (step 0.2 %) + bounded Brent refinement",
                             scan_best_fraction=float(f[i]), scan_best_score=float(vals[i]))
        candidates = [best]
    elif npulses == 2:
        step = 0.005 if mol["B"] > 1 else 0.020
        nd = int(round((mol["d_max"] - mol["d_min"]) / step)) + 1
        delays = np.linspace(mol["d_min"], mol["d_max"], nd)
        fr = np.linspace(0.0, 1.0, 51)
        nodes = GRID_NODES[base]
        hg = GRID_H[base]
        parts = np.array_split(np.arange(nd), 4 * workers)
        args = [(mol, search.rot.jmax, hg, search.pmax, fr, delays[p], nodes) for p in parts]
        if workers > 1:
            with mp.get_context("fork").Pool(workers) as pool:
                outs = pool.map(_grid_worker, args)
        else:
            outs = [_grid_worker(a) for a in args]
        grid = np.concatenate(outs, axis=1)
        # check the interpolated grid against direct evaluations at random grid points
        rng = np.random.default_rng(2024)
        ci1, ci2, cid = rng.integers(0, 51, 300), rng.integers(0, 51, 300), rng.integers(0, nd, 300)
        chk = KickScorer(mol, 2, SEARCH_POP_TOL, search.rot.jmax, 0.0005, ntop=12, iters=14)
        direct = chk.scores(np.stack([delays[cid], fr[ci1], fr[ci2]], axis=1))
        grid_check = float(np.abs(grid[ci1, cid, ci2] - direct).max())
        flat = grid.reshape(-1)
        # candidates: local maxima of the grid (3 x 5 x 3 neighbourhood), best first
        locmax = (grid == maximum_filter(grid, size=(3, 5, 3), mode="nearest")).reshape(-1)
        top = np.nonzero(locmax)[0]
        top = top[np.argsort(-flat[top])][:4000]
        i1, idd, i2 = np.unravel_index(top, grid.shape)
        pts = np.stack([delays[idd], fr[i1], fr[i2]], axis=1)
        pick = distinct(pts, flat[top], np.array([0.05, 0.1, 0.1]), 8)
        res["method"] = dict(kind="exhaustive grid then local polish (bounded Nelder-Mead + Powell)",
                             grid_scoring=(f"window grid {hg * 1e3:g} fs + parabolic vertex; signal computed "
                                           f"exactly on {nodes}x{nodes} Chebyshev-Lobatto nodes in (I1, I2) and "
                                           "interpolated to the intensity grid"),
                             grid_max_abs_deviation_from_direct_at_300_random_points=grid_check,
                             delay_step_fs=float((delays[1] - delays[0]) * 1e3), delay_points=nd,
                             intensity_step_fraction=0.02, intensity_points=51,
                             grid_evaluations=int(grid.size),
                             grid_best=dict(score=float(flat[top[0]]), delay_ps=float(pts[0, 0]),
                                            intensity_fractions=[float(pts[0, 1]), float(pts[0, 2])]),
                             grid_candidates=[dict(score=float(flat[top[j]]), delay_ps=float(pts[j, 0]),
                                                   intensity_fractions=[float(pts[j, 1]), float(pts[j, 2])])
                                              for j in pick])
        candidates = [pts[j] for j in pick]
        log(f"{name}: grid done ({grid.size} points, best {flat[top[0]]:.6f}) {time.time() - t0:.0f}s")
    else:
        de = dict(popsize=25 if npulses == 3 else 30, maxiter=1500, tol=1e-9, atol=0.0, mutation=(0.5, 1.0),
                  recombination=0.7, init="sobol", polish=True, vectorized=True, updating="deferred")
        settings = {k: (list(v) if isinstance(v, tuple) else v) for k, v in de.items()}
        res["method"] = dict(kind="scipy.optimize.differential_evolution (vectorized, deferred updating), "
                                  "each run then polished with the converged scorer; seeds 1, 2, ... until at "
                                  "least three runs agree with the best to 1e-4 (at least 6, at most 24 runs)",
                             settings=settings, population_members=de["popsize"] * (2 * npulses - 1))
        # runs with the same settings already in the output file are deterministic repeats: reuse them
        prev = read_json()["problems"].get(name, {}).get("kick_model", {})
        cached = []
        if prev.get("method", {}).get("settings") == settings:
            for k, r in enumerate(prev.get("de_runs", [])):
                if r.get("seed") == k + 1 and "polished_design" in r:
                    cached.append(r)
        runs, polished = [], []

        def add(new_runs, from_cache):
            for r in new_runs:
                if from_cache:
                    pd = r["polished_design"]
                    x = np.array(pd["delays_ps"] + pd["intensity_fractions"])
                    r["reused_from_earlier_invocation"] = True
                else:
                    x, _, _ = polish_kick(final, mol, npulses, np.array(r["x"]))
                    r["polished_design"] = design_dict(mol, npulses, x)
                st, tp = final.scores(x[None, :], return_time=True)
                r["polished_score"] = float(st[0])
                runs.append(r)
                polished.append(dict(x=x, score=float(st[0]), t=float(tp[0])))

        def agreeing():
            sc = np.array([p["score"] for p in polished])
            return int(np.sum(sc >= sc.max() - 1e-4))
        add(cached, True)
        if len(runs) < 6:
            add(run_de(mol, npulses, search.rot.jmax, list(range(len(runs) + 1, 7)), de, workers), False)
        while agreeing() < 3 and len(runs) < 24:
            add(run_de(mol, npulses, search.rot.jmax, [len(runs) + 1 + k for k in range(max(workers, 2))],
                       de, workers), False)
            log(f"{name}: {len(runs)} DE runs, {agreeing()} within 1e-4 of the best")
        res["method"]["runs"] = len(runs)
        res["method"]["runs_within_1e-4_of_best"] = agreeing()
        res["de_runs"] = runs
    if npulses <= 2:
        # polish every candidate with the converged scorer
        polished = []
        for x0 in candidates:
            x, sc, nfev = polish_kick(final, mol, npulses, x0)
            s_chk, tpk = final.scores(x[None, :], return_time=True)
            polished.append(dict(x=x, score=float(s_chk[0]), t=float(tpk[0])))
    order = sorted(range(len(polished)), key=lambda i: -polished[i]["score"])
    pts = np.array([polished[i]["x"] for i in order])
    vals = np.array([polished[i]["score"] for i in order])
    scale = np.array([0.02] * (npulses - 1) + [0.05] * npulses)
    keep = distinct(pts, vals, scale, 6) if len(pts) > 1 else [0]
    res["optima"] = [design_dict(mol, npulses, pts[k], vals[k], polished[order[k]]["t"]) for k in keep]
    best = polished[order[0]]
    res["best_score"] = best["score"]
    res["best_design"] = design_dict(mol, npulses, best["x"], best["score"], best["t"])
    # search-model score of the best design (shows the size of the truncation used while searching)
    res["best_score_search_model"] = float(search.scores(best["x"][None, :])[0])
    res["seconds"] = time.time() - t0
    log(f"{name}: kick best {best['score']:.7f} x={np.round(best['x'], 6).tolist()} ({res['seconds']:.0f}s)")
    return res


def _de_worker(args):
    mol, npulses, jmax, seed, de = args
    sc = KickScorer(mol, npulses, SEARCH_POP_TOL, jmax, search_h(mol), ntop=1, iters=8)
    t0 = time.time()
    r = differential_evolution(sc.de_objective, bounds_of(mol, npulses), seed=seed, **de)
    return dict(seed=seed, score=float(-r.fun), x=[float(v) for v in r.x], generations=int(r.nit),
                evaluations=int(sc.calls), seconds=time.time() - t0, message=str(r.message))


def run_de(mol, npulses, jmax, seeds, de, workers):
    args = [(mol, npulses, jmax, s, de) for s in seeds]
    if workers > 1:
        with mp.get_context("fork").Pool(workers) as pool:
            return pool.map(_de_worker, args)
    return [_de_worker(a) for a in args]


# ----------------------------------------------------------------------------------------------
# Output
# ----------------------------------------------------------------------------------------------
HERE = os.path.dirname(os.path.abspath(__file__))
OUT = os.path.normpath(os.path.join(HERE, "..", "..", "tests", "data", "best_designs_linear.json"))
ALL_PROBLEMS = [f"{m}_{n}" for m in MOLECULES for n in (1, 2, 3, 4)]


def global_checks():
    """Matrix elements (closed form vs quadrature) and the +-M folding vs the explicit M = -J..J sum."""
    out = dict(cos2_closed_form_vs_quadrature_max_deviation=check_matrix_elements())
    for base, mol in MOLECULES.items():
        trev = revival_period(mol)
        x = np.array([[0.5 * trev, 0.9 * trev, 1.0, 0.7, 1.0]])
        a = KickScorer(mol, 3, SEARCH_POP_TOL, 64, search_h(mol), ntop=8)
        b = KickScorer(mol, 3, SEARCH_POP_TOL, 64, search_h(mol), ntop=8)
        b.rot = Rotor(mol, 64, SEARCH_POP_TOL, explicit_m=True)
        out[f"{base}_explicit_M_minus_folded_score"] = float(b.scores(x)[0] - a.scores(x)[0])
        out[f"{base}_explicit_M_check_design"] = dict(delays_ps=x[0, :2].tolist(), intensity_fractions=x[0, 2:].tolist())
    return out


def update_json(name, key, value):
    """Read-modify-write of one problem entry under an exclusive lock (runs may go in parallel)."""
    os.makedirs(os.path.dirname(OUT), exist_ok=True)
    with open(OUT, "a+") as fh:
        fcntl.flock(fh, fcntl.LOCK_EX)
        fh.seek(0)
        txt = fh.read()
        data = json.loads(txt) if txt.strip() else {}
        data.setdefault("problems", {})
        if name is None:
            data[key] = value
        else:
            data["problems"].setdefault(name, {})[key] = value
        data["problems"] = {k: data["problems"][k] for k in sorted(data["problems"], key=_order)}
        data["summary"] = {k: {"kick_model_best_score": v["kick_model"]["best_score"] if "kick_model" in v else None,
                               "finite_pulses_best_score": v["finite_pulses"]["best_score"]
                               if "finite_pulses" in v else None}
                           for k, v in data["problems"].items()}
        data["generated_by"] = "tools/reference/design_reference.py"
        data["notes"] = NOTES
        fh.seek(0)
        fh.truncate()
        json.dump(data, fh, indent=1, default=_jsonable)
        fh.write("\n")
        fcntl.flock(fh, fcntl.LOCK_UN)


def read_json():
    try:
        with open(OUT) as fh:
            return json.load(fh)
    except (OSError, ValueError):
        return {"problems": {}}


def _order(k):
    return ALL_PROBLEMS.index(k) if k in ALL_PROBLEMS else 99


def _jsonable(o):
    if isinstance(o, np.ndarray):
        return o.tolist()
    if isinstance(o, (np.floating,)):
        return float(o)
    if isinstance(o, (np.integer,)):
        return int(o)
    raise TypeError(type(o))


NOTES = ("Scores are max <cos^2 theta>(t) over t in [t_N + w0, t_N + w1] for a thermal ensemble of linear "
         "rotors (all |J M> sublevels). Kick model: every pulse an exact kick exp(i P cos^2) at its centre. "
         "Finite pulses: Gaussian intensity envelopes, time-dependent Schroedinger equation. Designs: "
         "pulse 1 at t = 0, delays_ps[k] = centre of pulse k+2 minus centre of pulse k+1.")


def problem_parameters(name):
    base, mol, n = problem(name)
    return dict(molecule=base.split("_")[0].upper(), npulses=n, B_cm1=mol["B"], D_cm1=mol["D"],
                alpha_par_A3=mol["a_par"], alpha_perp_A3=mol["a_perp"],
                spin_weights_even_odd=list(mol["spin"]), temperature_K=mol["T"], fwhm_fs=mol["tau_fs"],
                max_intensity_wcm2=mol["i_max"], delay_bounds_ps=[mol["d_min"], mol["d_max"]],
                min_separation_ps=mol["min_sep"], window_after_last_pulse_ps=list(mol["window"]),
                revival_period_ps=revival_period(mol),
                max_kick_strength=kick_strength(mol, mol["i_max"]))


# ----------------------------------------------------------------------------------------------
# Finite pulses: time-dependent Schroedinger equation in the interaction picture,
#   c_J' = i u(t) sum_J' <J|cos^2|J'> exp(i (E_J - E_J') t / hbar) c_J'      (u(t) = sum of pulses)
# integrated with the explicit Runge-Kutta code DOP853 (E. Hairer, S. P. Norsett, G. Wanner, Solving
# Ordinary Differential Equations I, 2nd ed., Springer 1993; scipy.integrate.solve_ivp) on all blocks at
# once (blocks padded to a common size; padding rows stay zero).
# ----------------------------------------------------------------------------------------------
class IPSystem:
    def __init__(self, rot):
        self.rot = rot
        bl = rot.blocks
        self.nb = len(bl)
        self.nmax = max(b["n"] for b in bl)
        self.kmax = max(b["k"] for b in bl)
        self.diag = np.zeros((self.nb, self.nmax))
        self.off = np.zeros((self.nb, self.nmax - 1))
        self.w = np.zeros((self.nb, self.nmax - 1))
        for i, b in enumerate(bl):
            n = b["n"]
            self.diag[i, :n] = b["diag"]
            self.off[i, : n - 1] = b["off"]
            self.w[i, : n - 1] = rot.omega[b["js"][:-1]]
        self.nrhs = 0

    def identity(self):
        y = np.zeros((self.nb, self.nmax, self.nmax), complex)
        for i, b in enumerate(self.rot.blocks):
            y[i, np.arange(b["n"]), np.arange(b["n"])] = 1.0
        return y

    def thermal_states(self):
        """Columns = initial |J0 M> scaled by sqrt(weight) (kmax columns per block, zero padded)."""
        y = np.zeros((self.nb, self.nmax, self.kmax), complex)
        for i, b in enumerate(self.rot.blocks):
            y[i, b["init"], np.arange(b["k"])] = np.sqrt(b["w"])
        return y

    def rhs_factory(self, shape, ufun):
        diag, off, w = self.diag[..., None], self.off, self.w

        def rhs(t, y):
            self.nrhs += 1
            c = y.reshape(shape)
            cp = (off * np.exp(-1j * w * t))[..., None]
            out = diag * c
            out[:, :-1] += cp * c[:, 1:]
            out[:, 1:] += cp.conj() * c[:, :-1]
            out *= 1j * ufun(t)
            return out.reshape(-1)
        return rhs

    def propagate(self, y0, t0, t1, ufun, rtol, atol, dense=False, max_step=np.inf):
        shape = y0.shape
        sol = solve_ivp(self.rhs_factory(shape, ufun), (t0, t1), y0.reshape(-1), method="DOP853",
                        rtol=rtol, atol=atol, dense_output=dense, max_step=max_step)
        if not sol.success:
            raise RuntimeError(sol.message)
        return sol.y[:, -1].reshape(shape), sol

    def signal(self, c, t):
        """<cos^2>(t) from interaction-picture coefficients c (nb, nmax, ncols) at time t (same frame)."""
        p = (c.real ** 2 + c.imag ** 2).sum(-1)
        cross = np.einsum("bjk,bjk->bj", c[:, :-1].conj(), c[:, 1:])
        return float((self.diag * p).sum() + 2.0 * (self.off * cross * np.exp(-1j * self.w * t)).real.sum())


def signal_many(ips, cs, ts):
    """<cos^2> for a stack of IP coefficient arrays cs (nt, nb, nmax, ncols) at times ts."""
    p = (cs.real ** 2 + cs.imag ** 2).sum(-1)
    cross = np.einsum("tbjk,tbjk->tbj", cs[:, :, :-1].conj(), cs[:, :, 1:])
    ph = np.exp(-1j * ips.w[None] * ts[:, None, None])
    return (ips.diag[None] * p).sum((1, 2)) + 2.0 * (ips.off[None] * cross * ph).real.sum((1, 2))


def gaussian_rate(mol, intensities, centres):
    """u(t) in rad/ps for Gaussian intensity envelopes exp(-4 ln2 (t - t_k)^2 / tau^2)."""
    tau = mol["tau_fs"] * 1e-3
    u0 = np.array([u0_radps(mol, i) for i in intensities])
    tc = np.array(centres, float)
    a = 4.0 * LN2 / tau ** 2

    def u(t):
        return float(np.sum(u0 * np.exp(-a * (t - tc) ** 2)))
    return u


def pulse_unitary(ips, mol, intensity, rtol=1e-10, atol=1e-12):
    """U_c(I): interaction-picture propagator of one isolated pulse centred at t = 0 over
    [-3.5 tau, 3.5 tau] (Gaussian area outside < 1e-15 of the total).  In the kick limit U_c -> exp(i P cos^2)."""
    tau = mol["tau_fs"] * 1e-3
    if intensity == 0.0:
        return ips.identity()
    u = gaussian_rate(mol, [intensity], [0.0])
    y, _ = ips.propagate(ips.identity(), -SUPPORT * tau, SUPPORT * tau, u, rtol, atol)
    return y


class PulseBank:
    """U_c(I) for any I in [0, I_max]: barycentric interpolation on Chebyshev-Lobatto nodes in I
    (U_c is an entire function of I; J.-P. Berrut and L. N. Trefethen, "Barycentric Lagrange
    interpolation", SIAM Rev. 46, 501 (2004), the second-kind formula with Chebyshev points).  Node I_max is exact; the interpolation error is checked against direct runs."""

    def __init__(self, ips, mol, nodes, rtol=1e-10, atol=1e-12):
        self.ips, self.mol, self.rtol, self.atol = ips, mol, rtol, atol
        j = np.arange(nodes)
        self.f = 0.5 * (1.0 - np.cos(np.pi * j / (nodes - 1)))          # fractions of I_max, 0 .. 1
        self.bw = (-1.0) ** j
        self.bw[0] *= 0.5
        self.bw[-1] *= 0.5
        t0 = time.time()
        self.u = np.array([pulse_unitary(ips, mol, fj * mol["i_max"], rtol, atol) for fj in self.f])
        self.seconds = time.time() - t0
        self.cache = {}

    def __call__(self, frac):
        frac = float(frac)
        hit = np.nonzero(self.f == frac)[0]
        if hit.size:
            return self.u[hit[0]]
        if frac in self.cache:
            return self.cache[frac]
        q = self.bw / (frac - self.f)
        u = np.tensordot(q / q.sum(), self.u, axes=(0, 0))
        if len(self.cache) > 64:
            self.cache.clear()
        self.cache[frac] = u
        return u


def finite_state(ips, bank, delays, fracs):
    """Thermal-state columns just before and just after the last pulse, in that pulse's frame
    (factorized train U_c(I_N) F(d_N) ... U_c(I_1): exact when the pulses do not overlap; the full
    continuous solution in full_train_score checks this)."""
    y = ips.thermal_states()
    e = np.zeros((ips.nb, ips.nmax))
    for i, b in enumerate(ips.rot.blocks):
        e[i, : b["n"]] = b["e"]
    before = y
    y = bank(fracs[0]) @ y
    for k in range(1, len(fracs)):
        before = y * np.exp(-1j * e * delays[k - 1])[..., None]
        y = bank(fracs[k]) @ before
    return before, y


def coefficients_from_states(ips, c, t_ref=0.0):
    """a0, acoef (WindowMax convention) of the field-free signal from IP coefficients c at frame time
    t_ref: <cos^2>(t_ref + s) = a0 + Re sum_J acoef_J exp(-i omega_J s)."""
    rot = ips.rot
    p = (c.real ** 2 + c.imag ** 2).sum(-1)
    a0 = float((ips.diag * p).sum())
    cross = np.einsum("bjk,bjk->bj", c[:, :-1].conj(), c[:, 1:]) * np.exp(-1j * ips.w * t_ref)
    acoef = np.zeros(rot.jmax + 1, complex)
    for i, b in enumerate(rot.blocks):
        acoef[b["js"][:-1]] += 2.0 * b["off"] * cross[i, : b["n"] - 1]
    return np.array([a0]), acoef[None, :]


def remaining_area(mol, intensity, s):
    """Kick strength of the part of a Gaussian pulse after s (relative to its centre), up to the
    integration cut."""
    tau = mol["tau_fs"] * 1e-3
    k = 2.0 * math.sqrt(LN2) / tau
    return kick_strength(mol, intensity) * 0.5 * (erf(k * SUPPORT * tau) - erf(k * np.asarray(s)))


class FiniteScorer:
    """Finite-pulse score of a design from the factorized train.  Window part after the last pulse's
    integration cut: exact field-free trig sum (dense grid + Newton).  Part of the window inside the
    last pulse's trailing edge (w0 < 3.5 tau): bounded first by |<cos^2>_exact - <cos^2>_free| <= 2 P_rem
    + P_rem^2 (P_rem = kick strength still to come, ||cos^2|| <= 1); where the bound cannot exclude it,
    the trailing edge is integrated exactly (DOP853 dense output)."""

    def __init__(self, mol, npulses, bank, h, rtol=1e-10, atol=1e-12):
        self.mol, self.npulses, self.bank, self.ips = mol, npulses, bank, bank.ips
        self.rtol, self.atol = rtol, atol
        tau = mol["tau_fs"] * 1e-3
        self.cut = SUPPORT * tau
        w0, w1 = mol["window"]
        self.free = WindowMax(self.ips.rot.omega, max(w0, self.cut), w1, h, ntop=8)
        self.tail = WindowMax(self.ips.rot.omega, w0, self.cut, 0.0005, ntop=1) if w0 < self.cut else None
        self.calls = 0
        self.exact_tails = 0

    def evaluate(self, x, force_exact_tail=False, parts=False):
        """Score of design x; with parts=True also the field-free part and the trailing-edge maximum
        (None when the bound excluded the edge)."""
        self.calls += 1
        n = self.npulses
        x = np.asarray(x, float)
        delays, fr = x[: n - 1], x[n - 1:]
        before, c = finite_state(self.ips, self.bank, delays, fr)
        a0, ac = coefficients_from_states(self.ips, c)
        f_free, s_free = self.free(a0, ac, return_time=True)
        best, where, how = float(f_free[0]), float(s_free[0]), "field-free"
        edge = None
        if self.tail is not None and fr[-1] > 0:
            ft = self.tail.curve(a0, ac)[0]
            prem = remaining_area(self.mol, fr[-1] * self.mol["i_max"], self.tail.grid)
            bound = ft + 2.0 * prem + prem ** 2
            if force_exact_tail or bound.max() >= best:
                ftail, stail = self.exact_tail(before, fr[-1])
                edge = ftail
                if ftail > best:
                    best, where, how = ftail, stail, "trailing edge (exact)"
                how += "; trailing edge integrated"
            else:
                how += "; trailing edge excluded by bound"
        if parts:
            return best, where, how, float(f_free[0]), edge
        return best, where, how

    def exact_tail(self, before, frac):
        self.exact_tails += 1
        ips, mol = self.ips, self.mol
        u = gaussian_rate(mol, [frac * mol["i_max"]], [0.0])
        w0 = mol["window"][0]
        _, sol = ips.propagate(before, -self.cut, self.cut, u, self.rtol, self.atol, dense=True)
        shape = before.shape

        def f(s):
            return ips.signal(sol.sol(s).reshape(shape), s)
        grid = np.arange(w0, self.cut + 1e-12, 0.0005)
        vals = np.concatenate([signal_many(ips, sol.sol(g).T.reshape((len(g),) + shape), g)
                               for g in np.array_split(grid, max(1, len(grid) // 50))])
        i = int(np.argmax(vals))
        lo, hi = grid[max(i - 1, 0)], grid[min(i + 1, len(grid) - 1)]
        if i in (0,) and vals[0] >= vals[1]:
            return float(vals[0]), float(grid[0])
        r = minimize_scalar(lambda s: -f(s), bounds=(lo, hi), method="bounded", options=dict(xatol=1e-9))
        if -r.fun > vals[i]:
            return float(-r.fun), float(r.x)
        return float(vals[i]), float(grid[i])


def full_train_score(rot, mol, delays, intensities, h, rtol=1e-10, atol=1e-12):
    """Independent check of a finite-pulse design: ONE continuous integration of the whole train
    (sum of all Gaussian envelopes, global interaction picture, so overlapping tails are exact), with
    the field-free gaps (all envelopes < 2e-15 of their peak) skipped exactly.  The window part inside
    the last pulse's trailing edge is read from the dense output; the rest is the exact field-free sum."""
    ips = IPSystem(rot)
    tau = mol["tau_fs"] * 1e-3
    cut = SUPPORT * tau
    centres = np.concatenate([[0.0], np.cumsum(delays)])
    u = gaussian_rate(mol, intensities, centres)
    live = [k for k in range(len(centres)) if intensities[k] > 0]
    spans = []
    for k in live:
        a, b = centres[k] - cut, centres[k] + cut
        if spans and a <= spans[-1][1]:
            spans[-1][1] = max(spans[-1][1], b)
        else:
            spans.append([a, b])
    y = ips.thermal_states()
    tN = centres[-1]
    w0, w1 = mol["window"]
    tail_best = (-np.inf, None)
    t0 = time.time()
    nrhs0 = ips.nrhs
    for a, b in spans:
        last = b >= tN + cut - 1e-12
        y, sol = ips.propagate(y, a, b, u, rtol, atol, dense=last)
        if last and w0 < cut:
            grid = np.arange(tN + w0, b + 1e-12, 0.0005)
            shape = y.shape
            f = lambda t: ips.signal(sol.sol(t).reshape(shape), t)
            vals = np.array([f(t) for t in grid])
            i = int(np.argmax(vals))
            r = minimize_scalar(lambda t: -f(t), bounds=(grid[max(i - 1, 0)], grid[min(i + 1, len(grid) - 1)]),
                                method="bounded", options=dict(xatol=1e-9))
            tail_best = max((vals[i], grid[i] - tN), (-r.fun, r.x - tN))
    a0, ac = coefficients_from_states(ips, y, t_ref=tN)
    wm = WindowMax(rot.omega, max(w0, cut), w1, h, ntop=8)
    ff, sf = wm(a0, ac, return_time=True)
    best = max((float(ff[0]), float(sf[0])), (float(tail_best[0]), tail_best[1]))
    return dict(score=best[0], peak_time_after_last_pulse_ps=best[1],
                field_free_part_max=float(ff[0]), trailing_edge_max=float(tail_best[0]),
                rhs_evaluations=ips.nrhs - nrhs0, seconds=time.time() - t0)


def split_operator_unitary(rot, mol, intensity, h):
    """Independent pulse propagator: Strang splitting exp(-i H0 h/2) exp(i P_step cos^2) exp(-i H0 h/2)
    with the exact area P_step of each step (erf), kicks through the eigenvectors of the cos^2 blocks
    (Feit, Fleck & Steiger, J. Comput. Phys. 47, 412 (1982); second order, so step halving shows
    convergence).  Returns U_c in the frame of the pulse centre, blocks padded like IPSystem."""
    ips = IPSystem(rot)
    tau = mol["tau_fs"] * 1e-3
    cut = SUPPORT * tau
    nsteps = int(round(2 * cut / h))
    h = 2 * cut / nsteps
    pk = kick_strength(mol, intensity)
    k = 2.0 * math.sqrt(LN2) / tau
    edges = -cut + h * np.arange(nsteps + 1)
    areas = pk * 0.5 * np.diff(erf(k * edges))
    nb, nm = ips.nb, ips.nmax
    v = np.zeros((nb, nm, nm))
    lam = np.zeros((nb, nm))
    e = np.zeros((nb, nm))
    for i, b in enumerate(rot.blocks):
        n = b["n"]
        v[i, :n, :n] = b["v"]
        lam[i, :n] = b["lam"]
        e[i, :n] = b["e"]
    vt = np.ascontiguousarray(np.transpose(v, (0, 2, 1)))
    half = np.exp(-0.5j * e * h)[..., None]
    y = ips.identity() * np.exp(-1j * e * (-cut))[..., None]      # Schroedinger picture start: e^{+iH0 cut}

    def rmm(a, z):
        z = np.ascontiguousarray(z)
        return (a @ z.view(np.float64)).view(np.complex128)
    for p in areas:
        y = half * y
        y = rmm(v, np.exp(1j * p * lam)[..., None] * rmm(vt, y))
        y = half * y
    return np.exp(1j * e * cut)[..., None] * y


class FixedBank:
    """Pulse operators given explicitly for a few intensity fractions (used for the split-operator check)."""

    def __init__(self, ips, table):
        self.ips, self.table = ips, table

    def __call__(self, frac):
        return self.table[float(frac)]


# ----------------------------------------------------------------------------------------------
# Finite-pulse stage
# ----------------------------------------------------------------------------------------------
BANK_NODES = {"n2_300k": 16, "co2_20k": 20}
_BANKS = {}


def finite_basis(mol, base):
    """Basis of the finite-pulse polish: the kick-search basis of the 4-pulse problem (a kick spreads
    J at least as far as the same finite pulse)."""
    jmax, _ = choose_jmax(mol, 4, SEARCH_POP_TOL, tol=1e-8)
    return Rotor(mol, jmax, SEARCH_POP_TOL)


def get_bank(base, mol, log):
    if base not in _BANKS:
        rot = finite_basis(mol, base)
        ips = IPSystem(rot)
        bank = PulseBank(ips, mol, BANK_NODES[base])
        # interpolation check against direct integrations at two intensities between nodes
        errs = {}
        for fr in (0.37, 0.93):
            direct = pulse_unitary(ips, mol, fr * mol["i_max"])
            errs[str(fr)] = float(np.abs(bank(fr) - direct).max())
        bank.check = dict(nodes=BANK_NODES[base], node_kind="Chebyshev-Lobatto in I on [0, I_max]",
                          max_abs_element_error_vs_direct=errs, build_seconds=bank.seconds,
                          integrator="DOP853 rtol 1e-10 atol 1e-12, interaction picture, "
                                     f"support +-{SUPPORT} FWHM", basis=rot.sizes())
        log(f"{base}: pulse bank built ({bank.seconds:.0f}s), interpolation errors {errs}")
        _BANKS[base] = bank
    return _BANKS[base]


def _finite_polish_worker(args):
    name, x0, h, exact_edge = args
    base, mol, n = problem(name)
    bank = _BANKS[base]
    fs = FiniteScorer(mol, n, bank, h)
    if exact_edge:
        # the trailing edge of the last pulse competes: full score, edge integrated whenever the bound
        # cannot exclude it
        fun = lambda x: -fs.evaluate(x)[0]
        maxfev = 800
    else:
        # window part after the last pulse's integration cut (the edge is checked exactly afterwards)
        fun = lambda x: -float(fs.free(*coefficients_from_states(
            bank.ips, finite_state(bank.ips, bank, x[: n - 1], x[n - 1:])[1]))[0])
        maxfev = 4000
    t0 = time.time()
    if n == 1:
        r = minimize_scalar(lambda v: fun(np.array([v])), bounds=(max(x0[0] - 0.2, 0.0), 1.0), method="bounded",
                            options=dict(xatol=1e-9))
        cands = [np.array([r.x]), np.array([1.0])]
        x = max(cands, key=lambda c: -fun(c))
        fx, nfev = fun(x), r.nfev + 2
    else:
        scales = [0.005] * (n - 1) + [0.02] * n
        x, fx, nfev = local_polish(fun, np.asarray(x0, float), bounds_of(mol, n), scales, xatol=1e-7, fatol=1e-11,
                                   maxfev=maxfev)
    return dict(start=[float(v) for v in x0], x=[float(v) for v in x], score=-float(fx), evaluations=int(nfev),
                objective="full score with exact trailing edge" if exact_edge else "window part after the cut",
                seconds=time.time() - t0)


def finite_stage(name, workers, log):
    base, mol, n = problem(name)
    t0 = time.time()
    data = read_json()["problems"].get(name, {})
    if "kick_model" not in data:
        update_json(name, "kick_model", kick_stage(name, workers, log))
        data = read_json()["problems"][name]
    kick = data["kick_model"]
    bank = get_bank(base, mol, log)
    h = final_h(mol)
    starts = [np.array(o["delays_ps"] + o["intensity_fractions"]) for o in kick["optima"][:6]]
    fs = FiniteScorer(mol, n, bank, h)
    start_parts = []
    for x0 in starts:
        sc, _, _, ff, edge = fs.evaluate(x0, force_exact_tail=True, parts=True)
        start_parts.append(dict(start=x0.tolist(), score=sc, field_free_part=ff, trailing_edge_max=edge))
    # a start is polished on the full score (edge integrated) when its edge competes with its field-free
    # part and the start is within 5e-3 of the best start; otherwise on the field-free part
    top = max(p["score"] for p in start_parts)
    flags = [p["trailing_edge_max"] is not None and p["trailing_edge_max"] > p["field_free_part"] - 2e-3
             and p["score"] >= top - 5e-3 for p in start_parts]
    for p, fl in zip(start_parts, flags):
        p["polished_with_exact_edge"] = bool(fl)
    exact_edge = any(flags)
    args = [(name, x0, h, fl) for x0, fl in zip(starts, flags)]
    if workers > 1 and len(args) > 1:
        with mp.get_context("fork").Pool(workers) as pool:
            runs = pool.map(_finite_polish_worker, args)
    else:
        runs = [_finite_polish_worker(a) for a in args]
    runs.sort(key=lambda r: -r["score"])
    best = np.array(runs[0]["x"])
    s_fact, t_fact, how = fs.evaluate(best, force_exact_tail=True)
    if not exact_edge and "trailing edge (exact)" in how:
        # the edge wins after all: polish again with the full score from every start
        args = [(name, np.array(r["x"]), h, True) for r in runs]
        if workers > 1 and len(args) > 1:
            with mp.get_context("fork").Pool(workers) as pool:
                runs2 = pool.map(_finite_polish_worker, args)
        else:
            runs2 = [_finite_polish_worker(a) for a in args]
        runs = sorted(runs + runs2, key=lambda r: -r["score"])
        best = np.array(runs[0]["x"])
        s_fact, t_fact, how = fs.evaluate(best, force_exact_tail=True)
        exact_edge = True
    ksc = KickScorer(mol, n, SEARCH_POP_TOL, bank.ips.rot.jmax, h, 8)
    for r in runs:
        r["start_kick_score"] = float(ksc.scores(np.array(r["start"])[None, :])[0])
    log(f"{name}: finite polish best {runs[0]['score']:.7f}, with exact trailing edge {s_fact:.7f} ({how})")
    res = dict(polish_method="bounded Nelder-Mead (adaptive, restarted) then Powell on the finite-pulse score "
                             "(factorized train, pulse operators from the DOP853 bank), started from the best "
                             "distinct kick-model optima",
               polish_runs=runs, pulse_bank=bank.check,
               polish_basis_score=s_fact, polish_basis_peak_time_ps=t_fact, polish_basis_window_part=how)
    res["start_evaluations"] = start_parts
    res["polish_objective"] = ("per start (see start_evaluations): the full score with the last pulse's "
                               "trailing edge integrated exactly at every evaluation where the bound cannot exclude "
                               "it, when the edge is within 2e-3 of the field-free part and the start within 5e-3 "
                               "of the best start; otherwise the window part after the last pulse's integration "
                               "cut. The best result is always re-scored with the exact edge.")
    # verification: one continuous integration of the whole train, converged basis and thermal sum
    delays, ints = unpack(best, n, mol)
    jmax_v, _ = choose_jmax(mol, max(n, 2), 1e-10, tol=1e-12)
    rot_v = Rotor(mol, jmax_v + 8, 1e-10)
    ver = {}
    for rtol in (1e-10, 1e-12):
        ver[f"rtol_{rtol:g}"] = full_train_score(rot_v, mol, delays, ints, h, rtol=rtol, atol=rtol * 1e-2)
    rot_b = Rotor(mol, jmax_v + 24, 1e-10)
    ver["bigger_basis_rtol_1e-10"] = full_train_score(rot_b, mol, delays, ints, h)
    ver["bigger_basis_rtol_1e-10"]["basis"] = rot_b.sizes()
    ver["basis"] = rot_v.sizes()
    # split-operator cross-check of the pulse propagators (factorized train, step halving)
    ipv = IPSystem(rot_v)
    so = {}
    for hs in (0.0005, 0.00025):
        table = {float(f): split_operator_unitary(rot_v, mol, f * mol["i_max"], hs) for f in set(best[n - 1:])}
        fsv = FiniteScorer(mol, n, FixedBank(ipv, table), h)
        cs = finite_state(ipv, fsv.bank, best[: n - 1], best[n - 1:])[1]
        so[f"step_{hs * 1e3:g}_fs"] = float(fsv.free(*coefficients_from_states(ipv, cs))[0])
    a, b = so["step_0.5_fs"], so["step_0.25_fs"]
    so["richardson"] = b + (b - a) / 3.0
    so["note"] = ("second-order Strang splitting; the field-free window part only (compare "
                  "field_free_part_max of the continuous runs)")
    ver["split_operator"] = so
    final = ver["rtol_1e-12"]
    res.update(best_score=final["score"], best_design=design_dict(mol, n, best, final["score"],
                                                                   final["peak_time_after_last_pulse_ps"]),
               kick_model_score_of_this_design=float(KickScorer(mol, n, FINAL_POP_TOL, jmax_v + 8, h, 8).scores(
                   best[None, :])[0]),
               verification=ver, seconds=time.time() - t0)
    log(f"{name}: finite best {final['score']:.7f} x={np.round(best, 6).tolist()} ({res['seconds']:.0f}s)")
    return res


def score_candidate(name, x, found_by):
    """Score a design found elsewhere (e.g. by the designer under test) with this script's own finite-pulse
    scorer (trailing edge integrated exactly); when it beats the script's own finite-pulse optimum, record
    it as the problem's best_known with its provenance. The score is computed here, so a best_known value
    never rests on the code under test, only the design does."""
    base, mol, n = problem(name)
    if len(x) != 2 * n - 1:
        sys.exit(f"{name}: expected {n - 1} delays and {n} intensity fractions, got {len(x)} numbers")
    bank = get_bank(base, mol, print)
    fs = FiniteScorer(mol, n, bank, final_h(mol))
    score, t_peak, how = fs.evaluate(x, force_exact_tail=True)
    print(f"{name}: finite-pulse score {score:.10f} at {t_peak:.5f} ps after the last pulse ({how})")
    data = read_json()["problems"][name]
    own = data["finite_pulses"]["best_score"]
    best = dict(score=own, source="this script's finite-pulse optimum (finite_pulses)")
    if score > own:
        best = dict(score=float(score), peak_time_after_last_pulse_ps=float(t_peak),
                    delays_ps=[float(v) for v in x[: n - 1]], intensity_fractions=[float(v) for v in x[n - 1:]],
                    source=f"design found by {found_by or 'another search'}, scored by this script's FiniteScorer "
                           f"(trailing edge exact): it beats this script's own optimum {own:.7f}")
    update_json(name, "best_known", best)


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("problems", nargs="*", help="problem names (default: all): " + " ".join(ALL_PROBLEMS))
    ap.add_argument("--stage", choices=["kick", "finite", "all"], default="all")
    ap.add_argument("--workers", type=int, default=2)
    ap.add_argument("--score", nargs="+", type=float, metavar="X",
                    help="score one design of the (single) named problem with the finite-pulse scorer and record it "
                         "as a candidate for best_known: delays (ps) then intensity fractions")
    ap.add_argument("--found-by", default="", help="with --score: where the design came from")
    args = ap.parse_args()
    if args.score:
        if len(args.problems) != 1:
            sys.exit("--score needs exactly one problem name")
        score_candidate(args.problems[0], np.array(args.score), args.found_by)
        return
    names = args.problems or ALL_PROBLEMS
    for nm in names:
        if nm not in ALL_PROBLEMS:
            sys.exit(f"unknown problem {nm}")
    t_start = time.time()

    def log(msg):
        print(f"[{time.time() - t_start:7.0f}s] {msg}", flush=True)

    checks = global_checks()
    log(f"numpy {np.__version__}, scipy {scipy.__version__}; checks {checks}")
    update_json(None, "checks", checks)
    for nm in names:
        update_json(nm, "parameters", problem_parameters(nm))
        if args.stage in ("kick", "all"):
            update_json(nm, "kick_model", kick_stage(nm, args.workers, log))
        if args.stage in ("finite", "all"):
            update_json(nm, "finite_pulses", finite_stage(nm, args.workers, log))
    log("done")


if __name__ == "__main__":
    main()
