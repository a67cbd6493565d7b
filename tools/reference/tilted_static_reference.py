#!/usr/bin/env python3
"""OCS in a tilted static electric field plus a nonresonant laser pulse: orientation and alignment
along the three lab axes (independent reference values).

Usage:  python3 tools/reference/tilted_static_reference.py
Writes tests/data/reference_tilted_ocs_1k.csv (comment header with parameters and convergence figures,
then rows case,t_ps,cos_X,cos_Y,cos_Z,cos2_X,cos2_Y,cos2_Z).  Needs only numpy and scipy; shares no code
with the Rust crate.  Runtime about 2 minutes on an idle 2-core machine (8 minutes under heavy load);
most of it is the adiabatic-ramp check, a pulse propagation takes ~5-15 s.  Progress and the
sanity checks are printed on stdout.

What is computed.  Ensemble averages <cos th_F> = <n_F> and <cos^2 th_F> = <n_F^2>, F = X, Y, Z, of the
molecular axis n of OCS at T = 1 K, at t = -5 ... 30 ps, for two cases: (A) laser polarized along Z,
(B) laser polarized at 60 deg from Z towards X; a static field is always on at 30 deg from Z towards X.

Physics (units: B, D in cm^-1, polarizability volumes in A^3, mu in D, I in W/cm^2, t in ps; SI 2019
exact h, c, k_B, hbar = h / 2 pi; 1 D = 3.33564095e-30 C m).
  * Lab frame: Z laser reference axis, X across, Y the beam.  n = (sin th cos ph, sin th sin ph, cos th).
  * H(t) = H0 - mu E_s (e_s . n) - hbar u(t) (e_L . n)^2 with e_s = (sin a_s, 0, cos a_s),
    e_L = (sin a_L, 0, cos a_L); H0 |J M> = hc [B J(J+1) - D J^2 (J+1)^2] |J M> (rigid rotor with
    centrifugal distortion, G. Herzberg, Spectra of Diatomic Molecules, ch. III).
    u(t) = 2 pi dalpha' I(t) / (c hbar), dalpha' = (a_par - a_perp) 1e-30 m^3, I in W/m^2: cycle-averaged
    induced-dipole interaction -(E0^2/4)(dalpha cos^2 + alpha_perp) of B. Friedrich and D. Herschbach,
    "Alignment and trapping of molecules in intense laser fields", Phys. Rev. Lett. 74, 4623 (1995), with
    I = c eps0 E0^2 / 2 and dalpha = 4 pi eps0 dalpha' (the alpha_perp term is a global phase).  The
    combination with a static field is the "combined fields" problem of B. Friedrich and D. Herschbach,
    J. Chem. Phys. 111, 6157 (1999) (from memory), here with the two fields not parallel.
    Gaussian envelope I(t) = I0 exp(-4 ln2 t^2 / tau^2).  For |t| > 5 ps, u / u0 < 1e-30 and the laser
    term is dropped.
  * Thermal ensemble: every |J M> with population exp(-E_J / kT) / Q (no nuclear-spin weights); J is kept
    up to J_pop, the smallest J with left-out population < 1e-10 (J_pop = 8, 81 states); the kept
    populations are renormalized.
  * Direction cosines in |J M> (Condon-Shortley phases, E. U. Condon and G. H. Shortley, The Theory of
    Atomic Spectra, 1935): rank-1 tensors C^1_0 = cos th, C^1_{+-1} = -+ sin th e^{+-i ph} / sqrt 2,
      <J' M'| C^1_q |J M> = (-1)^M' sqrt((2J'+1)(2J+1)) (J' 1 J; -M' q M) (J' 1 J; 0 0 0)
    (integral of three spherical harmonics: A. R. Edmonds, Angular Momentum in Quantum Mechanics,
    Princeton 1957, eq. 4.6.3; R. N. Zare, Angular Momentum, Wiley 1988, ch. 3 - equation numbers from
    memory), n_Z = C^1_0, n_X = (C^1_{-1} - C^1_{+1}) / sqrt 2, n_Y = i (C^1_{-1} + C^1_{+1}) / sqrt 2.
    3j symbols from Racah's closed formula (G. Racah, Phys. Rev. 62, 438 (1942); Edmonds eq. 3.7.3 - from
    memory) in exact rational arithmetic.  Quadratic operators ((e_L . n)^2, n_F^2) are products of the
    n_F built on J <= J_max + 2, then truncated to J <= J_max: the exact matrix elements in the basis.
  * Initial state at t = -5 ps (method 1, used for the propagation).  The molecules entered the static
    field adiabatically.  In the field frame (z_f = e_s) H_s = H0 - mu E_s cos th_f conserves M_f; each
    M_f block (J = |M_f| .. J_max) has no further symmetry, so its levels do not cross (J. von Neumann and
    E. Wigner, Phys. Z. 30, 467 (1929)) and the n-th lowest dressed state carries the Boltzmann population
    of the field-free level J = |M_f| + n (adiabatic theorem, M. Born and V. Fock, Z. Phys. 51, 165
    (1928)).  The dressed states are rotated to the lab by U(R) = exp(-i a_s J_y) (block diagonal in J;
    R = rotation about Y by a_s takes Z to e_s, and U(R) cos th U(R)^+ = e_s . n).
    Wigner small-d d^j_{m'm}(b) = <j m'| exp(-i b J_y) |j m> from the eigenvectors of
    J_y = (J_+ - J_-) / 2i; checked against the explicit Wigner sum (E. P. Wigner, Group Theory, Academic
    Press 1959, ch. 15; Edmonds eq. 4.1.23 - from memory; written in the exp(-i b J_y) convention),
    scipy.linalg.expm(-i b J_y), and the rotation law of scipy.special.sph_harm_y,
    Y_jm(R^-1 r) = sum_m' Y_jm'(r) d^j_{m'm}(b).
  * Method 2 (check of the initial state): the field-free thermal density (a multiple of the identity
    on each J manifold, so the lab |J M> are a valid starting basis) is propagated in the lab |J M>
    basis while the tilted static field is switched on as E_s s(t / T_r),
    s(x) = sin^2((pi/2) sin^2(pi x / 2)), whose derivatives up to third order vanish at both ends (the
    plain sin^2 ramp converges only like T_r^-2 and oscillates; smoother switching makes the
    non-adiabatic remainder fall faster with T_r - standard adiabatic-theorem estimate, from memory).
    T_r = 800, 1600, 3200 ps; the six observables at t = T_r are compared with method 1.
  * Propagation: full lab |J M> basis, J <= J_max, every M (no symmetry reduction), 81 initial states.
    For -5 <= t <= 5 ps: interaction picture with respect to the diagonal H0,
      i d psi_I / dt = e^{i H0 (t - t_a)} [V_s + V_L(t)] e^{-i H0 (t - t_a)} psi_I    (hbar = 1, rad/ps),
    sparse V_s, V_L, restarted at every output time t_a, integrated by DOP853 (E. Hairer, S. P. Norsett,
    G. Wanner, Solving Ordinary Differential Equations I, Springer 1993; scipy solve_ivp) with rtol 1e-12,
    atol 1e-14.  For t > 5 ps: exact evolution psi(t) = W exp(-i Lambda (t - 5)) W^T psi(5) with the
    eigen-decomposition H_s = W Lambda W^T of the time-independent H0 - mu E_s e_s . n.
  * Observables: <A> = sum_k p_k <psi_k(t)| A |psi_k(t)>.

Checks (all reported in the CSV header).
  * Closed-form matrix elements of n_X, n_Y, n_Z, n_X^2, n_Y^2, n_Z^2, n_X n_Z vs Gauss-Legendre (cos th)
    x uniform (ph) quadrature of scipy.special.sph_harm_y on J <= J_max (exact rules for these
    polynomial integrands): ~1e-13.
  * Wigner d vs the three independent constructions above.
  * Rotated dressed states are eigenvectors of the lab H_s (residual ~1e-14); <e_s . n> in the lab equals
    <cos th_f> in the field frame.
  * Ramp (method 2) vs correlation (method 1): largest difference over the six observables.
  * J_max convergence: every observable at every output time when J_max grows by 6 (and, for scale,
    from J_max - 6 to J_max); population of the two highest J of the basis; integrator tolerance (rtol 1e-10, atol 1e-12 vs production).
  * sum_F <cos^2 th_F> = 1 at every time; <cos_Y> = 0 (reflection through the XZ plane); with a_s = 0
    and the laser along Z the ensemble stays symmetric about Z (<cos_X> = 0, <cos2_X> = <cos2_Y>).
  * Case B is the image of case A under the rotation by pi about e_s (e_s at 30 deg bisects the laser
    axes at 0 and 60 deg; the initial density is symmetric about e_s): <n>_B = 2 (e_s . <n>_A) e_s - <n>_A
    and <cos2_Y> equal in the two cases at every time.
"""

import math
import os
import sys
import time
from fractions import Fraction
from functools import lru_cache

import numpy as np
import scipy
import scipy.linalg
import scipy.sparse as sp
from scipy.integrate import solve_ivp
from scipy.special import sph_harm_y, roots_legendre

# ----------------------------------------------------------------------------------------------
# Constants: SI 2019 exact values (CODATA).  Internal units: time in ps, energies and rates in rad/ps.
# ----------------------------------------------------------------------------------------------
H = 6.62607015e-34
C = 299792458.0
KB = 1.380649e-23
HBAR = H / (2.0 * math.pi)
CM1 = 2.0 * math.pi * C * 100.0 * 1e-12          # 1 cm^-1 expressed in rad/ps
LN2 = math.log(2.0)
DEBYE = 3.33564095e-30                            # C m

# OCS
B_CM = 0.20286
D_CM = 4.342e-8
A_PAR = 7.9333                                    # A^3
A_PERP = 3.8333                                   # A^3
DALPHA = (A_PAR - A_PERP) * 1e-30                 # m^3 (polarizability volume anisotropy)
MU_D = 0.71521
T_K = 1.0

# fields
E_STATIC = 2.0e6                                  # V/m (20 kV/cm)
ALPHA_S_DEG = 30.0
I0_WCM2 = 1.0e12
I0 = I0_WCM2 * 1e4                                # W/m^2
TAU_PS = 1.0                                      # intensity FWHM
CASES = (("A", 0.0), ("B", 60.0))                 # laser polarization angle from Z towards X (deg)

T_START = -5.0
T_PULSE_END = 5.0                                 # laser switched off after this (u / u0 < 1e-30)
T_OUT = (-5.0, -2.0, -1.0, 0.0, 0.5, 1.0, 1.5, 2.0, 3.0, 5.0, 8.0, 12.0, 20.0, 30.0)
POP_TOL = 1e-10

RTOL = 1e-10
ATOL = 1e-12

MU_E_RADPS = MU_D * DEBYE * E_STATIC / HBAR * 1e-12          # mu E_s / hbar in rad/ps
U0_RADPS = 2.0 * math.pi * DALPHA * I0 / (C * HBAR) * 1e-12  # u0 in rad/ps


def envelope(t):
    """I(t) / I0 = exp(-4 ln2 t^2 / tau^2)."""
    return math.exp(-4.0 * LN2 * t * t / (TAU_PS * TAU_PS))


def level_energy_radps(j):
    """E_J / hbar in rad/ps, E_J = hc [B J(J+1) - D J^2 (J+1)^2]."""
    x = j * (j + 1.0)
    return CM1 * (B_CM * x - D_CM * x * x)


def level_energy_joule(j):
    x = j * (j + 1.0)
    return H * C * 100.0 * (B_CM * x - D_CM * x * x)


# ----------------------------------------------------------------------------------------------
# Basis |J M>, J = 0..L, M = -J..J, index J^2 + J + M (so the J <= L' < L basis is a leading block)
# ----------------------------------------------------------------------------------------------
def nstates(L):
    return (L + 1) ** 2


def idx(j, m):
    return j * j + j + m


def basis_jm(L):
    js = np.concatenate([np.full(2 * j + 1, j) for j in range(L + 1)])
    ms = np.concatenate([np.arange(-j, j + 1) for j in range(L + 1)])
    return js, ms


# ----------------------------------------------------------------------------------------------
# Wigner 3j symbols: Racah's closed formula (G. Racah, Phys. Rev. 62, 438 (1942); A. R. Edmonds,
# Angular Momentum in Quantum Mechanics, Princeton 1957, eq. 3.7.3 - equation number from memory),
# evaluated in exact rational arithmetic; only the final square root is rounded.
# ----------------------------------------------------------------------------------------------
@lru_cache(maxsize=None)
def threej(j1, j2, j3, m1, m2, m3):
    if m1 + m2 + m3 != 0 or j3 < abs(j1 - j2) or j3 > j1 + j2:
        return 0.0
    if abs(m1) > j1 or abs(m2) > j2 or abs(m3) > j3:
        return 0.0
    f = math.factorial
    delta = Fraction(f(j1 + j2 - j3) * f(j1 - j2 + j3) * f(-j1 + j2 + j3), f(j1 + j2 + j3 + 1))
    pref = f(j1 + m1) * f(j1 - m1) * f(j2 + m2) * f(j2 - m2) * f(j3 + m3) * f(j3 - m3)
    kmin = max(0, j2 - j3 - m1, j1 - j3 + m2)
    kmax = min(j1 + j2 - j3, j1 - m1, j2 + m2)
    s = Fraction(0)
    for k in range(kmin, kmax + 1):
        den = (f(k) * f(j3 - j2 + k + m1) * f(j3 - j1 + k - m2) * f(j1 + j2 - j3 - k)
               * f(j1 - k - m1) * f(j2 - k + m2))
        s += Fraction((-1) ** k, den)
    if s == 0:
        return 0.0
    sq = delta * pref * s * s
    sign = (-1) ** ((j1 - j2 - m3) % 2) * (1 if s > 0 else -1)
    return sign * math.sqrt(float(sq))


# ----------------------------------------------------------------------------------------------
# Direction cosines n_X = sin th cos ph, n_Y = sin th sin ph, n_Z = cos th in |J M>.
# Rank-1 Racah tensors C^1_0 = cos th, C^1_{+-1} = -+ sin th e^{+-i ph} / sqrt 2, so
#   n_Z = C^1_0,  n_X = (C^1_{-1} - C^1_{+1}) / sqrt 2,  n_Y = i (C^1_{-1} + C^1_{+1}) / sqrt 2,
# and <J' M'| C^k_q |J M> = (-1)^M' sqrt((2J'+1)(2J+1)) (J' k J; -M' q M) (J' k J; 0 0 0)
# (integral of three spherical harmonics, Condon-Shortley phases: Edmonds, Angular Momentum in
# Quantum Mechanics, eq. 4.6.3; R. N. Zare, Angular Momentum, Wiley 1988, ch. 3 - equation numbers
# from memory; checked below against direct quadrature of scipy.special.sph_harm_y).
# ----------------------------------------------------------------------------------------------
def racah_c1(L):
    """Dict q -> sparse (N x N) matrix of C^1_q on J <= L."""
    n = nstates(L)
    out = {}
    for q in (-1, 0, 1):
        rows, cols, vals = [], [], []
        for j in range(L + 1):
            for m in range(-j, j + 1):
                mp = m + q
                for jp in (j - 1, j + 1):
                    if jp < 0 or jp > L or abs(mp) > jp:
                        continue
                    v = ((-1) ** (mp % 2) * math.sqrt((2 * jp + 1) * (2 * j + 1))
                         * threej(jp, 1, j, -mp, q, m) * threej(jp, 1, j, 0, 0, 0))
                    if v != 0.0:
                        rows.append(idx(jp, mp))
                        cols.append(idx(j, m))
                        vals.append(v)
        out[q] = sp.csr_matrix((vals, (rows, cols)), shape=(n, n))
    return out


def direction_cosines(L):
    """(n_X, n_Y, n_Z) as sparse matrices on J <= L (n_X, n_Z real, n_Y purely imaginary)."""
    c = racah_c1(L)
    s2 = math.sqrt(0.5)
    nx = ((c[-1] - c[1]) * s2).tocsr()
    ny = ((c[-1] + c[1]) * (1j * s2)).tocsr()
    nz = c[0].tocsr()
    return nx, ny, nz


class Operators:
    """Every matrix the propagation needs on J <= L.  Products are formed on J <= L + 2 and then
    truncated, so they equal the exact matrix elements of the products (n couples Delta J = +-1)."""

    def __init__(self, L):
        self.L = L
        self.n = nstates(L)
        nx, ny, nz = direction_cosines(L + 2)
        k = self.n
        cut = lambda a: a[:k, :k].tocsr()
        self.nx, self.ny, self.nz = cut(nx), cut(ny), cut(nz)
        self.xx = cut(nx @ nx)
        self.yy = cut(ny @ ny)
        self.zz = cut(nz @ nz)
        self.xz = cut(nx @ nz)
        self.zx = cut(nz @ nx)
        js, ms = basis_jm(L)
        self.js, self.ms = js, ms
        self.w0 = np.array([level_energy_radps(j) for j in js])       # H0 / hbar (diagonal)

    def static(self, alpha_s_deg):
        """-mu E_s (e_s . n) / hbar, e_s = (sin a, 0, cos a)."""
        a = math.radians(alpha_s_deg)
        return (-MU_E_RADPS * (math.sin(a) * self.nx + math.cos(a) * self.nz)).real.tocsr()

    def laser(self, alpha_l_deg):
        """-u0 (e_L . n)^2, e_L = (sin a, 0, cos a) (rad/ps at peak intensity)."""
        a = math.radians(alpha_l_deg)
        s, c = math.sin(a), math.cos(a)
        sq = s * s * self.xx + s * c * (self.xz + self.zx) + c * c * self.zz
        return (-U0_RADPS * sq).real.tocsr()

    def observables(self, psi, p):
        """Ensemble averages (cos_X, cos_Y, cos_Z, cos2_X, cos2_Y, cos2_Z) of sum_k p_k |psi_k><psi_k|."""
        out = []
        for op in (self.nx, self.ny, self.nz, self.xx, self.yy, self.zz):
            ex = np.einsum("ik,ik->k", psi.conj(), op @ psi)
            out.append(float(np.real(ex) @ p))
        return np.array(out)


def quadrature_check(ops):
    """Largest |closed form - quadrature| over all matrix elements of n_X, n_Y, n_Z, n_X^2, n_Y^2,
    n_Z^2, n_X n_Z on J <= L.  Quadrature: Gauss-Legendre in cos th (exact for the polynomial
    integrands, degree <= 2L + 2) times the uniform rule in ph (exact for e^{i k ph}, |k| < n_ph),
    spherical harmonics from scipy.special.sph_harm_y (Condon-Shortley phase)."""
    L = ops.L
    nth, nph = L + 6, 2 * L + 10
    x, wx = roots_legendre(nth)
    th = np.arccos(x)
    ph = 2.0 * np.pi * np.arange(nph) / nph
    TH, PH = np.meshgrid(th, ph, indexing="ij")
    W = (np.outer(wx, np.full(nph, 2.0 * np.pi / nph))).ravel()
    TH, PH = TH.ravel(), PH.ravel()
    Y = np.empty((ops.n, TH.size), dtype=complex)
    for j in range(L + 1):
        for m in range(-j, j + 1):
            Y[idx(j, m)] = sph_harm_y(j, m, TH, PH)
    nX, nY, nZ = np.sin(TH) * np.cos(PH), np.sin(TH) * np.sin(PH), np.cos(TH)
    funcs = {"n_X": (nX, ops.nx), "n_Y": (nY, ops.ny), "n_Z": (nZ, ops.nz), "n_X^2": (nX * nX, ops.xx),
             "n_Y^2": (nY * nY, ops.yy), "n_Z^2": (nZ * nZ, ops.zz), "n_X n_Z": (nX * nZ, ops.xz)}
    Yc = Y.conj()
    worst = 0.0
    detail = {}
    for name, (f, op) in funcs.items():
        quad = (Yc * (W * f)) @ Y.T                       # <J'M'| f |J M>
        d = float(np.abs(quad - op.toarray()).max())
        detail[name] = d
        worst = max(worst, d)
    ortho = float(np.abs((Yc * W) @ Y.T - np.eye(ops.n)).max())
    return worst, detail, ortho


# ----------------------------------------------------------------------------------------------
# Wigner small-d, d^j_{m'm}(b) = <j m'| exp(-i b J_y) |j m>.
# Primary: diagonalize J_y = (J_+ - J_-) / 2i (standard ladder elements
# <j m+1|J_+|j m> = sqrt(j(j+1) - m(m+1))), d = V exp(-i b Lambda) V^+.
# Checks: (1) the explicit Wigner sum (E. P. Wigner, Group Theory, 1959, ch. 15; Edmonds eq. 4.1.23 -
# equation numbers from memory; written here in the exp(-i b J_y) phase convention, e.g. J. J. Sakurai,
# Modern Quantum Mechanics, sect. 3.8/3.9 - from memory), factorial ratios exact;
# (2) scipy.linalg.expm of -i b J_y; (3) rotation of scipy.special.sph_harm_y:
#   Y_jm(R^-1 r) = sum_m' Y_jm'(r) d^j_{m'm}(b),  R = rotation by b about Y.
# ----------------------------------------------------------------------------------------------
def jy_matrix(j):
    m = np.arange(-j, j + 1)
    jp = np.zeros((2 * j + 1, 2 * j + 1))
    for a in range(2 * j):                                    # |j m> -> |j m+1>
        jp[a + 1, a] = math.sqrt(j * (j + 1) - m[a] * (m[a] + 1))
    return (jp - jp.T) / 2j


def wigner_d_eig(j, beta):
    lam, v = np.linalg.eigh(jy_matrix(j))
    d = (v * np.exp(-1j * beta * lam)) @ v.conj().T
    return d.real, float(np.abs(d.imag).max())


def wigner_d_sum(j, beta):
    f = math.factorial
    c, s = math.cos(beta / 2.0), math.sin(beta / 2.0)
    d = np.zeros((2 * j + 1, 2 * j + 1))
    for mp in range(-j, j + 1):
        for m in range(-j, j + 1):
            num = f(j + mp) * f(j - mp) * f(j + m) * f(j - m)
            tot = 0.0
            for k in range(max(0, m - mp), min(j + m, j - mp) + 1):
                den = f(j + m - k) * f(k) * f(mp - m + k) * f(j - mp - k)
                coef = math.sqrt(float(Fraction(num, den * den)))
                tot += ((-1) ** ((mp - m + k) % 2) * coef * c ** (2 * j + m - mp - 2 * k)
                        * s ** (mp - m + 2 * k))
            d[mp + j, m + j] = tot
    return d


def wigner_checks(L, beta, jsum_max=None):
    """Largest differences of the primary d^j(beta), j <= L, from the three checks."""
    rng = np.random.default_rng(1)
    th = np.arccos(rng.uniform(-1, 1, 40))
    ph = rng.uniform(0, 2 * np.pi, 40)
    r = np.stack([np.sin(th) * np.cos(ph), np.sin(th) * np.sin(ph), np.cos(th)])
    cb, sb = math.cos(beta), math.sin(beta)
    rinv = np.array([[cb, 0.0, -sb], [0.0, 1.0, 0.0], [sb, 0.0, cb]])   # R_y(beta)^-1
    r2 = rinv @ r
    th2 = np.arccos(np.clip(r2[2], -1, 1))
    ph2 = np.arctan2(r2[1], r2[0])
    e_sum = e_expm = e_rot = e_imag = 0.0
    jsum_max = L if jsum_max is None else jsum_max
    for j in range(L + 1):
        d, im = wigner_d_eig(j, beta)
        e_imag = max(e_imag, im)
        if j <= jsum_max:
            e_sum = max(e_sum, float(np.abs(d - wigner_d_sum(j, beta)).max()))
        e_expm = max(e_expm, float(np.abs(d - scipy.linalg.expm(-1j * beta * jy_matrix(j))).max()))
        ms = np.arange(-j, j + 1)
        y = np.array([sph_harm_y(j, m, th, ph) for m in ms])          # (m', point)
        y2 = np.array([sph_harm_y(j, m, th2, ph2) for m in ms])       # Y_jm(R^-1 r)
        e_rot = max(e_rot, float(np.abs(y2 - d.T @ y).max()))
    return dict(explicit_sum=e_sum, expm=e_expm, sph_harm_rotation=e_rot, imag=e_imag, jsum_max=jsum_max)


def rotation_matrix(L, beta):
    """Block-diagonal exp(-i beta J_y) on J <= L (real)."""
    blocks = [wigner_d_eig(j, beta)[0] for j in range(L + 1)]
    return sp.block_diag(blocks, format="csr")


# ----------------------------------------------------------------------------------------------
# Thermal populations (Boltzmann, every |J M> counted, all J equally weighted)
# ----------------------------------------------------------------------------------------------
def thermal():
    """Returns (J_pop, p_J per sublevel for J <= J_pop renormalized, left-out population, Q)."""
    kt = KB * T_K
    js = np.arange(0, 400)
    e = np.array([level_energy_joule(j) for j in js])
    w = (2 * js + 1) * np.exp(-e / kt)
    q = float(w.sum())
    tail = np.cumsum(w[::-1])[::-1] / q                    # tail[j] = population of J >= j
    jpop = int(np.argmax(tail < POP_TOL)) - 1              # smallest J_pop with tail[J_pop + 1] < tol
    left = float(tail[jpop + 1])
    psub = np.exp(-e[:jpop + 1] / kt) / q
    psub = psub / float(((2 * js[:jpop + 1] + 1) * psub).sum())
    return jpop, psub, left, q


# ----------------------------------------------------------------------------------------------
# Method 1: adiabatic correlation in the static-field frame, then rotation to the lab frame.
# ----------------------------------------------------------------------------------------------
def correlated_states(ops, alpha_s_deg, jpop, psub):
    """Columns of psi (N x K, real) = lab-frame dressed states U(R) |phi_n M_f>, weights p (K).
    In the field frame H_s = H0 - mu E_s cos th_f conserves M_f; the n-th lowest eigenvector of block
    M_f (basis J = |M_f|..L) is the adiabatic continuation of |J = |M_f| + n, M_f> (non-crossing rule
    within a symmetry block: J. von Neumann and E. Wigner, Phys. Z. 30, 467 (1929)) and carries its
    Boltzmann population.  U(R) = exp(-i alpha_s J_y) takes Z to e_s."""
    L = ops.L
    cos_f = ops.nz.toarray().real                          # cos th in the field frame
    cols, pops = [], []
    for mf in range(-jpop, jpop + 1):
        jj = np.arange(abs(mf), L + 1)
        ii = np.array([idx(j, mf) for j in jj])
        hb = np.diag(ops.w0[ii]) - MU_E_RADPS * cos_f[np.ix_(ii, ii)]
        lam, v = np.linalg.eigh(hb)
        for n in range(jpop - abs(mf) + 1):
            vec = np.zeros(ops.n)
            vec[ii] = v[:, n] * np.sign(v[n, n])           # sign fixed for reproducibility only
            cols.append(vec)
            pops.append(psub[abs(mf) + n])
    psi_f = np.array(cols).T
    rot = rotation_matrix(L, math.radians(alpha_s_deg))
    return rot @ psi_f, np.array(pops)


def hs_dense(ops, alpha_s_deg):
    return np.diag(ops.w0) + ops.static(alpha_s_deg).toarray()


# ----------------------------------------------------------------------------------------------
# Propagation.  During the pulse (|t| <= 5 ps): interaction picture with respect to the diagonal H0,
#   i d/dt psi_I = e^{i H0 (t - t_a)} [V_s + u(t)/u0 V_L] e^{-i H0 (t - t_a)} psi_I   (hbar = 1, rad/ps),
# restarted at each output time t_a, DOP853 (E. Hairer, S. P. Norsett, G. Wanner, Solving Ordinary
# Differential Equations I, Springer 1993; scipy solve_ivp).  After the pulse: exact evolution with the
# eigen-decomposition of the time-independent H_s = H0 - mu E_s e_s . n.
# ----------------------------------------------------------------------------------------------
def propagate(ops, psi0, p, alpha_s_deg, alpha_l_deg, times=T_OUT, rtol=RTOL, atol=ATOL, t_switch=T_PULSE_END):
    n, k = psi0.shape
    vs = ops.static(alpha_s_deg)
    vl = ops.laser(alpha_l_deg)
    w0 = ops.w0
    psi = psi0.astype(complex)
    t_now = times[0]
    res = {}
    nfev = 0
    res[t_now] = ops.observables(psi, p)
    edge = edge_population(ops, psi, p)
    inside = [t for t in times[1:] if t <= t_switch]
    for tb in inside:
        ta = t_now

        def rhs(t, y):
            x = y.reshape(n, k)
            ph = np.exp(1j * w0 * (t - ta))[:, None]
            z = ph.conj() * x
            hz = vs @ z
            f = envelope(t)
            if f > 1e-40:
                hz = hz + f * (vl @ z)
            return (-1j * ph * hz).ravel()

        sol = solve_ivp(rhs, (ta, tb), psi.ravel(), method="DOP853", rtol=rtol, atol=atol)
        if not sol.success:
            raise RuntimeError(sol.message)
        nfev += sol.nfev
        psi = np.exp(-1j * w0 * (tb - ta))[:, None] * sol.y[:, -1].reshape(n, k)
        t_now = tb
        res[tb] = ops.observables(psi, p)
        edge = max(edge, edge_population(ops, psi, p))
    later = [t for t in times if t > t_now]
    if later:
        lam, v = np.linalg.eigh(hs_dense(ops, alpha_s_deg))
        c = v.T @ psi
        for tb in later:
            psi_t = v @ (np.exp(-1j * lam * (tb - t_now))[:, None] * c)
            res[tb] = ops.observables(psi_t, p)
            edge = max(edge, edge_population(ops, psi_t, p))
    return np.array([res[t] for t in times]), nfev, edge


def edge_population(ops, psi, p):
    """Ensemble population in the two highest J levels of the basis."""
    top = ops.js >= ops.L - 1
    return float((np.abs(psi[top]) ** 2).sum(axis=0) @ p)


# ----------------------------------------------------------------------------------------------
# Method 2 (check): adiabatic switch-on of the tilted static field in the lab |J M> basis.
# ----------------------------------------------------------------------------------------------
def ramp_shape(x, kind):
    if kind == "sin2":
        return math.sin(0.5 * math.pi * x) ** 2
    if kind == "sin2sin2":                                  # all derivatives to 3rd order vanish at the ends
        return math.sin(0.5 * math.pi * math.sin(0.5 * math.pi * x) ** 2) ** 2
    raise ValueError(kind)


def ramp(ops, alpha_s_deg, jpop, psub, t_ramp, kind="sin2", rtol=RTOL, atol=ATOL):
    """Field-free thermal density (identity on each J manifold, any M basis) -> static field switched on
    as E_s s(t / t_ramp); returns the six observables at t = t_ramp."""
    cols, pops = [], []
    for j in range(jpop + 1):
        for m in range(-j, j + 1):
            v = np.zeros(ops.n, dtype=complex)
            v[idx(j, m)] = 1.0
            cols.append(v)
            pops.append(psub[j])
    psi = np.array(cols).T
    p = np.array(pops)
    n, k = psi.shape
    vs = ops.static(alpha_s_deg)
    w0 = ops.w0

    def rhs(t, y):
        x = y.reshape(n, k)
        ph = np.exp(1j * w0 * t)[:, None]
        return (-1j * ramp_shape(t / t_ramp, kind) * ph * (vs @ (ph.conj() * x))).ravel()

    sol = solve_ivp(rhs, (0.0, t_ramp), psi.ravel(), method="DOP853", rtol=rtol, atol=atol)
    if not sol.success:
        raise RuntimeError(sol.message)
    psi = np.exp(-1j * w0 * t_ramp)[:, None] * sol.y[:, -1].reshape(n, k)
    return ops.observables(psi, p), sol.nfev


# ----------------------------------------------------------------------------------------------
# Driver
# ----------------------------------------------------------------------------------------------
JMAX = 30                     # production basis J <= JMAX
DJ = 6                        # convergence check: J <= JMAX + DJ
PROD_RTOL, PROD_ATOL = 1e-12, 1e-14
L_RAMP = 20                   # basis of the ramp check
RAMP_KIND = "sin2sin2"
RAMP_TIMES = (800.0, 1600.0, 3200.0)
RAMP_RTOL, RAMP_ATOL = 1e-10, 1e-12
NAMES = ("cos_X", "cos_Y", "cos_Z", "cos2_X", "cos2_Y", "cos2_Z")

HERE = os.path.dirname(os.path.abspath(__file__))
OUT = os.path.normpath(os.path.join(HERE, "..", "..", "tests", "data", "reference_tilted_ocs_1k.csv"))


def fmt(x):
    return f"{x:.3e}"


def main():
    t0 = time.time()
    log = lambda *a: print(f"[{time.time() - t0:7.1f} s]", *a, flush=True)
    hdr = []
    jpop, psub, left, q = thermal()
    k_states = (jpop + 1) ** 2
    log(f"thermal: J_pop = {jpop}, left out {left:.3e}, Q = {q:.10g}")

    ops = Operators(JMAX)
    qd, qdet, qortho = quadrature_check(ops)
    log(f"quadrature check on J <= {JMAX}: max |closed form - quadrature| = {qd:.2e} {qdet}")
    wc = wigner_checks(JMAX, math.radians(ALPHA_S_DEG))
    log(f"Wigner d checks (j <= {JMAX}, beta = {ALPHA_S_DEG} deg): {wc}")

    # ---- method 1: initial state
    psi0, p = correlated_states(ops, ALPHA_S_DEG, jpop, psub)
    hs = hs_dense(ops, ALPHA_S_DEG)
    e_k = np.einsum("ik,ik->k", psi0, hs @ psi0)
    resid = float(np.abs(hs @ psi0 - psi0 * e_k).max())
    obs0 = ops.observables(psi0, p)
    log(f"method 1 initial observables {obs0}; eigen-residual in lab H_s {resid:.2e}")
    # field-frame check: <e_s . n> of the rotated ensemble equals <cos th_f> of the unrotated one
    psi_f, _ = correlated_states(ops, 0.0, jpop, psub)
    a = math.radians(ALPHA_S_DEG)
    frame_chk = abs(math.sin(a) * obs0[0] + math.cos(a) * obs0[2] - ops.observables(psi_f, p)[2])

    # ---- method 2: ramp
    ops_r = Operators(L_RAMP)
    psi0_r, p_r = correlated_states(ops_r, ALPHA_S_DEG, jpop, psub)
    obs0_r = ops_r.observables(psi0_r, p_r)
    trunc_r = float(np.abs(obs0_r - obs0).max())
    ramp_diffs = []
    for tr in RAMP_TIMES:
        o, nf = ramp(ops_r, ALPHA_S_DEG, jpop, psub, tr, RAMP_KIND, RAMP_RTOL, RAMP_ATOL)
        d = np.abs(o - obs0_r)
        ramp_diffs.append((tr, float(d.max()), d, nf))
        log(f"ramp {tr:g} ps ({RAMP_KIND}): max |ramp - method 1| = {d.max():.3e} per observable {d}")

    # ---- propagation
    results = {}
    conv = {}
    for name, al in CASES:
        obs, nf, edge = propagate(ops, psi0, p, ALPHA_S_DEG, al, rtol=PROD_RTOL, atol=PROD_ATOL)
        results[name] = obs
        log(f"case {name}: production run done ({nf} rhs evaluations, edge population {edge:.2e})")
        ops_b = Operators(JMAX + DJ)
        psi0_b, p_b = correlated_states(ops_b, ALPHA_S_DEG, jpop, psub)
        obs_b, _, _ = propagate(ops_b, psi0_b, p_b, ALPHA_S_DEG, al, rtol=PROD_RTOL, atol=PROD_ATOL)
        ops_c = Operators(JMAX - DJ)
        psi0_c, p_c = correlated_states(ops_c, ALPHA_S_DEG, jpop, psub)
        obs_c, _, _ = propagate(ops_c, psi0_c, p_c, ALPHA_S_DEG, al, rtol=PROD_RTOL, atol=PROD_ATOL)
        obs_t, nf_t, _ = propagate(ops, psi0, p, ALPHA_S_DEG, al, rtol=RTOL, atol=ATOL)
        dj = np.abs(obs_b - obs).max(axis=0)
        djm = float(np.abs(obs_c - obs).max())
        dt = np.abs(obs_t - obs).max(axis=0)
        sumsq = float(np.abs(obs[:, 3:].sum(axis=1) - 1.0).max())
        conv[name] = dict(nfev=nf, edge=edge, dj=dj, djm=djm, dt=dt, sumsq=sumsq, nf_t=nf_t,
                          cosy=float(np.abs(obs[:, 1]).max()))
        log(f"case {name}: |change J_max {JMAX}->{JMAX + DJ}| per observable {dj}; rtol 1e-10 vs 1e-12 {dt}; "
            f"max |sum cos2 - 1| = {sumsq:.2e}; max |<cos_Y>| = {conv[name]['cosy']:.2e}")

    # ---- geometric check between the cases: e_s bisects e_L(A) = Z and e_L(B) (60 deg), so the rotation
    # by pi about e_s, v -> 2 (e_s . v) e_s - v, maps H_A onto H_B and leaves the initial density
    # (symmetric about e_s) unchanged: <n>_B = C2 <n>_A and <n_Y^2>_B = <n_Y^2>_A at every time.
    c2_chk = None
    if dict(CASES).get("A") == 0.0 and abs(dict(CASES).get("B") - 2.0 * ALPHA_S_DEG) < 1e-12:
        es = np.array([math.sin(a), 0.0, math.cos(a)])
        va, vb = results["A"][:, :3], results["B"][:, :3]
        img = 2.0 * (va @ es)[:, None] * es[None, :] - va
        c2_chk = (float(np.abs(vb - img).max()), float(np.abs(results["B"][:, 4] - results["A"][:, 4]).max()))
        log(f"C2(e_s) check A -> B: max |<n>_B - C2 <n>_A| = {c2_chk[0]:.2e}, "
            f"max |cos2_Y(B) - cos2_Y(A)| = {c2_chk[1]:.2e}")

    # ---- symmetry check: static field along Z, laser along Z
    psi_s, p_s = correlated_states(ops, 0.0, jpop, psub)
    obs_s, _, _ = propagate(ops, psi_s, p_s, 0.0, 0.0, rtol=PROD_RTOL, atol=PROD_ATOL)
    sym_x = float(np.abs(obs_s[:, 0]).max())
    sym_y = float(np.abs(obs_s[:, 1]).max())
    sym_xy = float(np.abs(obs_s[:, 3] - obs_s[:, 4]).max())
    log(f"symmetry check (alpha_s = alpha_L = 0): max |<cos_X>| = {sym_x:.2e}, max |<cos_Y>| = {sym_y:.2e}, "
        f"max |<cos2_X> - <cos2_Y>| = {sym_xy:.2e}")

    # ---- write
    dj_all = max(float(c["dj"].max()) for c in conv.values())
    dt_all = max(float(c["dt"].max()) for c in conv.values())
    ramp_best = ramp_diffs[-1]
    kick = U0_RADPS * TAU_PS * math.sqrt(math.pi / (4.0 * LN2))
    b_radps = CM1 * B_CM
    h = hdr.append
    h("reference_tilted_ocs_1k: independent reference for OCS in a tilted static field plus a nonresonant laser pulse "
      "(tools/reference/tilted_static_reference.py; numpy " + np.__version__ + ", scipy " + scipy.__version__ + ")")
    h("constants: h = 6.62607015e-34 J s, c = 299792458 m/s, k_B = 1.380649e-23 J/K, hbar = h/2pi, 1 D = 3.33564095e-30 C m")
    h(f"molecule: OCS linear rotor, B = {B_CM} cm^-1, D = {D_CM} cm^-1, E(J) = hc[B J(J+1) - D J^2(J+1)^2], "
      f"alpha_par = {A_PAR} A^3, alpha_perp = {A_PERP} A^3 (dalpha' = {A_PAR - A_PERP:.4g} A^3), mu = {MU_D} D, "
      "all J equally weighted")
    h("lab frame: Z laser reference axis, X across, Y beam; n = molecular axis, cos_F = <n_F>, cos2_F = <n_F^2>, "
      "n_X = sin th cos ph, n_Y = sin th sin ph, n_Z = cos th")
    h("hamiltonian: H(t) = H0 - mu E_s (e_s . n) - hbar u(t) (e_L . n)^2, u(t) = 2 pi dalpha' I(t) / (c hbar) "
      "(Friedrich & Herschbach, PRL 74, 4623 (1995))")
    h(f"static field: E_s = 20 kV/cm along e_s = (sin a_s, 0, cos a_s), a_s = {ALPHA_S_DEG:g} deg, always on; "
      f"mu E_s = {MU_E_RADPS / CM1:.10g} cm^-1 = {MU_E_RADPS / b_radps:.10g} B")
    h(f"laser: gaussian intensity envelope I0 exp(-4 ln2 t^2/tau^2), I0 = {I0_WCM2:g} W/cm^2, tau = {TAU_PS:g} ps FWHM, "
      f"centre t = 0; u0 = {U0_RADPS:.10g} rad/ps (hbar u0 = {U0_RADPS / CM1:.10g} cm^-1 = {U0_RADPS / b_radps:.10g} B), "
      f"kick strength P = u0 tau sqrt(pi/4ln2) = {kick:.10g}; e_L = (sin a_L, 0, cos a_L)")
    h("cases: A a_L = 0 deg (laser along Z); B a_L = 60 deg")
    h(f"temperature_k = {T_K:g}; thermal ensemble: every |J M>, population exp(-E_J/kT)/Q, Q = {q:.12g}; "
      f"kept J <= {jpop} ({k_states} states), left-out population {left:.3e} (< {POP_TOL:g}; kept populations renormalized)")
    h("initial state (t = -5 ps, laser u/u0 = 8e-31 there, neglected for t outside [-5, 5] ps): method 1 = adiabatic "
      "correlation in the field frame (M_f conserved; n-th field-free level J = |M_f| + n of each M_f block -> n-th "
      "dressed state, non-crossing rule), rotated to the lab by exp(-i a_s J_y)")
    h(f"  lab eigen-residual |H_s psi_k - E_k psi_k| of the rotated dressed states: {resid:.2e}; "
      f"|<e_s.n>_lab - <cos th_f>_field frame| = {frame_chk:.2e}")
    h(f"  method 2 check: field-free thermal density (lab |J M>), tilted static field switched on as E_s s(t/T_r), "
      f"s(x) = sin^2(pi/2 sin^2(pi x/2)), basis J <= {L_RAMP}, DOP853 rtol {RAMP_RTOL:g} atol {RAMP_ATOL:g}; "
      "max |ramp - method 1| over the six observables: "
      + ", ".join(f"T_r = {tr:g} ps: {fmt(dm)}" for tr, dm, _, _ in ramp_diffs))
    h(f"  ramp-vs-correlation difference (T_r = {ramp_best[0]:g} ps): {fmt(ramp_best[1])} "
      f"(per observable {' '.join(fmt(x) for x in ramp_best[2])}); method 1 at J <= {L_RAMP} vs J <= {JMAX}: {fmt(trunc_r)}")
    h(f"matrix elements: direction cosines from 3j symbols (closed form), products built on J <= J_max + 2 then truncated; "
      f"vs Gauss-Legendre x uniform-phi quadrature of scipy.special.sph_harm_y on J <= {JMAX}: max |difference| = {qd:.2e} "
      f"(orthonormality of the quadrature {qortho:.1e})")
    h(f"wigner small-d (eigenvectors of J_y, j <= {JMAX}, beta = {ALPHA_S_DEG:g} deg): vs explicit Wigner sum {wc['explicit_sum']:.1e}, "
      f"vs scipy.linalg.expm {wc['expm']:.1e}, vs rotated scipy sph_harm_y {wc['sph_harm_rotation']:.1e}")
    h(f"propagation: full lab |J M> basis J <= {JMAX} ({nstates(JMAX)} states, every M), {k_states} initial states; "
      f"|t| <= 5 ps: interaction picture w.r.t. H0, scipy solve_ivp DOP853 rtol {PROD_RTOL:g} atol {PROD_ATOL:g}, "
      "restarted at each output time; t > 5 ps: exact evolution with the eigenvectors of H0 - mu E_s e_s.n")
    for name, _ in CASES:
        c = conv[name]
        h(f"convergence case {name}: |change| when J_max {JMAX} -> {JMAX + DJ} per observable "
          f"{' '.join(fmt(x) for x in c['dj'])}; with rtol 1e-10 atol 1e-12: {' '.join(fmt(x) for x in c['dt'])}; "
          f"max population in J >= {JMAX - 1}: {c['edge']:.1e}; {c['nfev']} rhs evaluations; "
          f"(for scale: max |change| J_max {JMAX - DJ} -> {JMAX}: {c['djm']:.1e})")
    h(f"convergence summary: J_max = {JMAX}, max |change| (J_max + {DJ}) = {dj_all:.2e}; "
      f"max |change| (rtol 1e-10) = {dt_all:.2e}")
    h("checks: max |cos2_X + cos2_Y + cos2_Z - 1| = "
      + ", ".join(f"case {n}: {conv[n]['sumsq']:.1e}" for n, _ in CASES)
      + "; max |cos_Y| = " + ", ".join(f"case {n}: {conv[n]['cosy']:.1e}" for n, _ in CASES))
    h(f"check: a_s = a_L = 0 (symmetric about Z): max |cos_X| = {sym_x:.1e}, max |cos_Y| = {sym_y:.1e}, "
      f"max |cos2_X - cos2_Y| = {sym_xy:.1e}")
    if c2_chk is not None:
        h(f"check: case B is the image of case A under the rotation by pi about e_s (e_s bisects the two laser "
          f"axes): max |<n>_B - C2 <n>_A| = {c2_chk[0]:.1e}, max |cos2_Y(B) - cos2_Y(A)| = {c2_chk[1]:.1e}")
    h(f"runtime: {time.time() - t0:.0f} s")
    lines = ["# " + x for x in hdr]
    lines.append("case,t_ps," + ",".join(NAMES))
    for name, _ in CASES:
        for t, row in zip(T_OUT, results[name]):
            lines.append(f"{name},{t:g}," + ",".join(f"{x:.12g}" for x in row))
    with open(OUT, "w") as fh:
        fh.write("\n".join(lines) + "\n")
    log(f"wrote {OUT}")


if __name__ == "__main__":
    main()
