#!/usr/bin/env python3
"""Rigid asymmetric (SO2) and symmetric (CH3F) tops in a tilted static electric field plus a
nonresonant laser pulse: thermal averages of orientation and alignment along the lab axes
(independent reference values, full time-dependent Schroedinger equation in |J K M>).

Usage:  python3 tools/reference/tilted_top_reference.py [--quick] [--out FILE]
Writes tests/data/reference_tilted_tops.json.  Needs numpy and scipy (sympy only for an optional
spot check of the 3j symbols); shares no code with the Rust crate.  Runtime about 5 minutes on 2 cores
(OMP_NUM_THREADS=2; the sparse products are single-threaded; 5.5 minutes on a shared machine), most of
it the SO2 convergence runs.
Progress and every check are printed on stdout and stored in the JSON.

Physics (units: rotational constants in cm^-1, polarizability volumes alpha' in A^3, mu in D, E_s in
kV/cm (x 1e5 V/m), I in W/cm^2 (x 1e4 W/m^2), t in ps; SI 2019 exact h, c, k_B, hbar = h / 2 pi,
1 D = 3.33564095e-30 C m, hc (1 cm^-1) from these).
  * Lab frame X, Y, Z; the laser propagates along Y; static field along e_s = (sin a_s, 0, cos a_s),
    laser polarization e_L = (sin a_L, 0, cos a_L).  Body principal axes a, b, c (A >= B >= C).
  * H(t) = H0 - mu E_s (e_s . d) - hbar u(t) sum_g alpha'_g (e_L . g)^2,  d = dipole axis,
    u(t) = 2 pi I(t) 1e-30 / (c hbar) per A^3, I(t) = I0 exp(-4 ln2 t^2 / tau^2) (tau = FWHM): the
    cycle-averaged induced-dipole term -(E0^2/4) sum_g alpha_g (e_L.g)^2 with I = c eps0 E0^2 / 2 and
    alpha = 4 pi eps0 alpha' (B. Friedrich and D. Herschbach, Phys. Rev. Lett. 74, 4623 (1995), written
    here for a diagonal polarizability tensor - from memory).  sum_g (e_L.g)^2 = 1 holds exactly in the
    truncated basis (checked), so alpha'_min sum_g (e_L.g)^2 is a global phase and is dropped.
  * H0 = A J_a^2 + B J_b^2 + C J_c^2 (rigid rotor; e.g. W. Gordy and R. L. Cook, Microwave Molecular
    Spectra, ch. 7 - from memory), for CH3F (prolate, figure axis a) additionally
    - D_J J^2(J+1)^2 - D_JK J(J+1) K^2 (G. Herzberg, Molecular Spectra and Molecular Structure II - from
    memory); CH3F: B = 25536.11 MHz / 29979.2458, D_J = 59.3 kHz, D_JK = 445 kHz, D_K = 0.
  * Thermal ensemble: every field-free state |level, M> with weight g exp(-E/kT) / Q, Q over J <= 40.
    SO2 spin weights by the parities of (Ka, Kc): ee 1, eo 0, oe 0, oo 1 (zero-weight levels dropped
    exactly); CH3F: 2 if |K| mod 3 = 0 else 1 per primitive |J K M> (K signed).  Levels kept in order of
    energy until the left-out population < 1e-9 (SO2 at 1 K: 25 levels, J <= 6, 97 states,
    left out 4.55e-10; CH3F at 2 K: 20 levels (J,K), J <= 5, |K| <= 2, 130 states, left out 1.25e-10),
    kept populations renormalised.
  * Ka, Kc of SO2: H0 of each J is block-diagonalised by its exact D2 symmetry (C2 about the body axes:
    exp(-i pi J_g), signed permutations K -> -K); the parity of Ka is the C2(a) eigenvalue, that of Kc
    the C2(c) eigenvalue (in the prolate / oblate symmetric-top limit C2 about the figure axis is
    (-1)^K); inside one D2 class the n-th level by energy gets the n-th (Ka, Kc) pair by tau = Ka - Kc
    (levels of one class do not cross between the limits; energy increases with tau - G. W. King,
    R. M. Hainer, P. C. Cross, J. Chem. Phys. 11, 27 (1943), from memory).  Cross-check: the global
    tau order in each J (level i -> Ka = (i+1)//2, Kc = J - i//2) agrees for every pair of neighbours
    not degenerate to 1e-9 cm^-1 (0 mismatches for J <= 40); E(1_01) = B + C, E(1_11) = A + C,
    E(1_10) = A + B reproduced to 1e-15.  C2(b) = (-1)^(Ka+Kc), so all populated SO2 levels have
    C2(b) = +1 (ee, oo) and the C2(b) = -1 half of the basis is never populated (exact).

Conventions and matrix elements (all built here, checked numerically).
  * z-y-z Euler angles (phi, theta, chi), R = R_z(phi) R_y(theta) R_z(chi) takes body to lab axes, and
    the direction cosine F.g = R_Fg.  psi_JKM = sqrt((2J+1)/8pi^2) D^J_MK(phi,theta,chi)^*,
    D^J_MK(a,b,g) = e^{-iMa} d^J_MK(b) e^{-iKg}, d^J(b) = <|exp(-i b J_y)|> with Condon-Shortley
    phases; then J_Z = M and the body component J_z = K.  (Edmonds, Angular Momentum in Quantum
    Mechanics, ch. 4; R. N. Zare, Angular Momentum, ch. 3 - from memory.)
  * Body frame: z = the dipole axis (so C2(d) = (-1)^K); SO2 (x, y, z) = (c, a, b), CH3F (x, y, z) =
    (b, c, a); both right-handed; the dipole points along +z.
  * F.g = sum_pq (e_p)_F (e_q)^*_g D^1_pq, spherical unit vectors e_{+-1} = -+(e_x +- i e_y)/sqrt2,
    e_0 = e_z (checked against the explicit rotation matrix), and
      <J'K'M'| D^1_pq |JKM> = sqrt((2J'+1)(2J+1)) (-1)^(M-K) (J' 1 J; M' p -M)(J' 1 J; K' q -K)
    from the integral of three D functions (Edmonds eq. 4.6.2; Zare eq. 3.118 - from memory) and
    D^J_MK^* = (-1)^(M-K) D^J_-M-K.  3j symbols: Racah's formula (G. Racah, Phys. Rev. 62, 438 (1942);
    Edmonds eq. 3.7.3 - from memory) in exact rational arithmetic (vs sympy.physics.wigner: 6e-17).
    Checked against a direct quadrature over (phi, theta, chi) of psi^* R_Fg psi: every element of
    all nine F.g and of all products (F.g)(F'.g) on J <= 3: 2e-15.
  * Quadratic operators (e_L.g)^2, (F.g)^2 are products formed on J <= J_max + 2 and truncated, so
    sum_F (F.g)^2 = sum_g (F.g)^2 = 1 hold to rounding in the basis (checked: ~1e-15).
  * Body angular momentum J_g = sum_F (F.g) J_F with the standard lab J_F (vector-operator
    commutators [J_F, F'.g] = i eps_FF'F'' F''.g checked: 8e-16; body J_z = K; [J_x, J_y] = -i J_z,
    the anomalous sign); H0 = sum_g B_g J_g^2 equals the closed form in |J K> (diagonal B_z K^2 +
    (B_x+B_y)/2 (J(J+1) - K^2), <J K+2|.|J K> = (B_x-B_y)/4 sqrt(J(J+1)-K(K+1)) sqrt(J(J+1)-(K+1)(K+2)))
    to 3.4e-13 cm^-1 (energies up to ~700 cm^-1) for all J <= J_max.
  * Lab rotation U(b) = exp(-i b J_Y) acts on M with d^J_M'M(b) (eigen-decomposition of J_y; vs the
    explicit Wigner sum 1e-14, vs scipy expm 3e-15); checked on the functions
    psi_JKM(R_y(b)^-1 R) = sum_M' psi_JKM'(R) d^J_M'M(b) (4e-16) and U (Z.d) U^+ = e_s.d (2e-15).

Symmetry (derived here).  The reflection of the lab through the XZ plane (Y -> -Y), which contains
both fields, is combined with the reflection of the body frame x -> -x (which leaves d = z, the
diagonal polarizability and H0 invariant): R -> sigma_Y R sigma_x is a proper rotation; with the Euler
angles it is (phi, theta, chi) -> (-phi, theta, pi - chi), and with d^J_-M-K = (-1)^(M-K) d^J_MK,
    P |J K M> = (-1)^M |J, -K, -M>.
P commutes with H0, the static and laser terms (fields in the XZ plane) and U(b) (checked: 4e-15);
Y.d anticommutes with it, so <cos_Y> = 0.  In the field frame the same operator (reflection through a
plane containing e_s) maps M_f -> -M_f and is an exact symmetry inside the M_f = 0 block, where it
splits it into P = +1 (|J00>, (|JK0> + |J-K0>)/sqrt2) and P = -1 ((|JK0> - |J-K0>)/sqrt2).  Checked:
[P, H_f] = 0 exactly at M_f = 0 and every field-free M = 0 level is a P eigenvector (1e-15).
The propagation uses the four blocks C2(d) = +-1 x P = +-1 (SO2: only C2(b) = +1 is populated,
two P blocks of 2299 and 2280 states at J_max = 18); CH3F is propagated in K blocks (K conserved:
d along the figure axis, alpha_b = alpha_c), K = -2..2.

Initial state (the static field is on for all times; molecules entered it adiabatically).  In the
field frame H_f = H0 - mu E cos(z_f, d) conserves M_f and C2(d) (and K for CH3F).  Ranking classes:
  SO2:  (M_f, C2(b) = +1) for M_f != 0, and (M_f = 0, C2(b) = +1, P = +1 / -1);
  CH3F: (M_f, K) with K signed - K is conserved, and inside one (M_f, K) block H_f is a chain in J with
        non-zero nearest-neighbour couplings (simple spectrum).  At M_f = 0 the blocks K and -K are
        exchanged by P; ranking them separately gives degenerate partners with equal populations,
        the same density as ranking the P = +-1 combinations within |K|.
Within a class the n-th lowest field-free level (H0 diagonalised per J inside the class) goes to the
n-th lowest dressed state (non-crossing rule: J. von Neumann and E. Wigner, Phys. Z. 30, 467 (1929);
adiabatic theorem: M. Born and V. Fock, Z. Phys. 51, 165 (1928)) and carries its population.  Smallest
gap between neighbours used for ranking: SO2 0.0869 cm^-1 field-free (0.0599 cm^-1 dressed),
CH3F 1.70 cm^-1 (1.96 cm^-1 dressed).  Only M_f >= 0 is diagonalised for SO2; the M_f < 0 partner of
a dressed state v is P v (same energy: checked, 1e-13 cm^-1; orthogonal), and the pair is propagated
as (v +- P v)/sqrt2, one in each P block.  Dressed states are rotated to the lab by U(a_s).
Checks: lab eigen-residual |H_s psi - E psi| 1e-13 cm^-1; Frobenius norm of [H_s, rho_0] (lab,
J <= J_max) 9e-16 cm^-1 (SO2), 2e-16 cm^-1 (CH3F); static-only ensemble equals the a_s = 0 ensemble
rotated by a_s (2e-16) and the latter is symmetric about Z (6e-17).

Propagation.  From t0 = -2 ps (f = I/I0 = 5e-20 for SO2, 3e-54 for CH3F; before t0 the state is
stationary) to t_off = 2 ps with the full H(t) = H_s + f(t) V by the fourth-order commutator-free
Magnus integrator with two Gauss nodes (S. Blanes and P. C. Moan, Appl. Numer. Math. 56, 1519 (2006);
M. Thalhammer, SIAM J. Numer. Anal. 44, 851 (2006) - coefficients from memory, order verified: max
errors vs a 2.5 fs run 4.5e-7, 4.4e-8, 3.2e-9 at 40, 20, 10 fs, J_max = 8), each exponential by a
Chebyshev expansion (H. Tal-Ezer and R. Kosloff, J. Chem. Phys. 81, 3967 (1984) - from memory) with
spectral bounds from Lanczos (scipy eigsh) + Weyl + 0.5 % margin.  Steps: the interval is cut at the
output times and at multiples of tau/4; a segment with largest envelope value f_max gets steps
h0 * min(8, f_max^(-1/5)), h0 = 10 fs (10 fs at the peak, at most 80 fs in the far wings; the scheme is
exact for f = 0).
After 2 ps (f < 1e-19) exact evolution with H_s (one Chebyshev expansion per output interval).
Norm conserved to 3e-13.

Convergence (max over all output times, per observable; all < 1e-7):
  so2_tilted        J_max 18 -> 20: 9.1e-11;  10 fs -> 5 fs: 3.0e-9;  population in J >= 17: 1.5e-9
  so2_tilted_laser  J_max 18 -> 20: 7.5e-11;  10 fs -> 5 fs: 2.2e-9;  population in J >= 17: 1.3e-9
  so2_static_only   J_max 18 -> 20: 1.7e-16   (no propagation)
  ch3f_tilted       J_max 12 -> 14: 2.1e-12;  10 fs -> 5 fs: 7.4e-9;  population in J >= 11: 1.2e-10
The reported values are the production runs (SO2 J_max = 18, CH3F J_max = 12, h0 = 10 fs).
Sum rules sum_F <cos^2 th_Fg> = 1, sum_g <cos^2 th_Fg> = 1 at every time: 3e-13 (= norm drift).
<cos th_Yd>: identically 0 in the P blocks for SO2; a run without the P reduction (J_max 10, 20 fs,
K-even block, states v and P v propagated separately) reproduces the reduced run to 3e-15 and gives
|<cos_Y>| <= 1.3e-16, while each of the two groups alone has |<cos_Y>| up to 5.5e-3.  CH3F: the sum
over K blocks gives |<cos_Y>| <= 1e-16, a single K block up to 4.0e-5.

Results (production, so2_tilted at t = 0.25 ps): cos_X 0.146782949123, cos_Z 0.278940611345,
cos2_Za 0.398484889602 (full precision in the JSON).
"""

import argparse
import json
import math
import os
import sys
import time

os.environ.setdefault("OMP_NUM_THREADS", "2")
os.environ.setdefault("OPENBLAS_NUM_THREADS", "2")
os.environ.setdefault("MKL_NUM_THREADS", "2")

from fractions import Fraction
from functools import lru_cache

import numpy as np
import scipy
import scipy.linalg
import scipy.sparse as sp
import scipy.sparse.linalg as spla
from scipy.special import jv

# ----------------------------------------------------------------------------------------------
# Constants: SI 2019 exact h, c, k_B; hbar = h / 2 pi; 1 D = 3.33564095e-30 C m.
# Internal units: time in ps, energies as angular frequencies E / hbar in rad/ps; thermal energies
# and reported gaps in cm^-1.
# ----------------------------------------------------------------------------------------------
H_PLANCK = 6.62607015e-34
C_LIGHT = 299792458.0
K_B = 1.380649e-23
HBAR = H_PLANCK / (2.0 * math.pi)
DEBYE = 3.33564095e-30
HC_CM = H_PLANCK * C_LIGHT * 100.0                 # J per cm^-1
CM1 = 2.0 * math.pi * C_LIGHT * 100.0 * 1e-12    # 1 cm^-1 as E / hbar in rad/ps
MHZ_PER_CM = C_LIGHT * 100.0 / 1e6               # 1 cm^-1 = 29979.2458 MHz
LN2 = math.log(2.0)
POP_TOL = 1e-9


def mu_e_cm(mu_debye, e_kv_cm):
    """mu E in cm^-1 (E in kV/cm -> x 1e5 V/m)."""
    return mu_debye * DEBYE * e_kv_cm * 1e5 / HC_CM


def u0_per_a3(i0_w_cm2):
    """u0 = 2 pi I0 1e-30 / (c hbar) in rad/ps per A^3 of polarizability volume (I0 in W/cm^2 -> x 1e4 W/m^2)."""
    return 2.0 * math.pi * i0_w_cm2 * 1e4 * 1e-30 / (C_LIGHT * HBAR) * 1e-12


# ----------------------------------------------------------------------------------------------
# Wigner 3j symbols: Racah's closed formula (G. Racah, Phys. Rev. 62, 438 (1942); A. R. Edmonds,
# Angular Momentum in Quantum Mechanics, Princeton 1957, eq. 3.7.3 - from memory), exact rational
# arithmetic, only the final square root rounded.  Spot-checked against sympy.physics.wigner.
# ----------------------------------------------------------------------------------------------
@lru_cache(maxsize=None)
def threej(j1, j2, j3, m1, m2, m3):
    if m1 + m2 + m3 != 0 or j3 < abs(j1 - j2) or j3 > j1 + j2:
        return 0.0
    if abs(m1) > j1 or abs(m2) > j2 or abs(m3) > j3:
        return 0.0
    f = math.factorial
    tri = Fraction(f(j1 + j2 - j3) * f(j1 - j2 + j3) * f(-j1 + j2 + j3), f(j1 + j2 + j3 + 1))
    pre = f(j1 + m1) * f(j1 - m1) * f(j2 + m2) * f(j2 - m2) * f(j3 + m3) * f(j3 - m3)
    s = Fraction(0)
    for k in range(max(0, j2 - j3 - m1, j1 - j3 + m2), min(j1 + j2 - j3, j1 - m1, j2 + m2) + 1):
        s += Fraction((-1) ** k, f(k) * f(j3 - j2 + k + m1) * f(j3 - j1 + k - m2) * f(j1 + j2 - j3 - k)
                      * f(j1 - k - m1) * f(j2 - k + m2))
    if s == 0:
        return 0.0
    sign = (-1) ** ((j1 - j2 - m3) % 2) * (1 if s > 0 else -1)
    return sign * math.sqrt(float(tri * pre * s * s))


# ----------------------------------------------------------------------------------------------
# Wigner small-d, d^j_{m'm}(b) = <j m'| exp(-i b J_y) |j m> (real).
# Primary: eigen-decomposition of J_y = (J_+ - J_-) / 2i with <j m+1|J_+|j m> = sqrt(j(j+1) - m(m+1))
# (Condon-Shortley).  Check: the explicit Wigner sum (E. P. Wigner, Group Theory, Academic Press 1959,
# ch. 15; J. J. Sakurai, Modern Quantum Mechanics, eq. 3.8.33 - from memory), used also (vectorised
# over b) for the quadrature checks at small j.
# ----------------------------------------------------------------------------------------------
def jy_matrix(j):
    m = np.arange(-j, j + 1)
    jp = np.zeros((2 * j + 1, 2 * j + 1))
    for a in range(2 * j):
        jp[a + 1, a] = math.sqrt(j * (j + 1) - m[a] * (m[a] + 1))
    return (jp - jp.T) / 2j


def wigner_d(j, beta):
    lam, v = np.linalg.eigh(jy_matrix(j))
    d = (v * np.exp(-1j * beta * lam)) @ v.conj().T
    assert float(np.abs(d.imag).max()) < 1e-12
    return d.real


def wigner_d_sum(j, beta):
    """Explicit Wigner sum, vectorised over beta: array (2j+1, 2j+1, len(beta))."""
    beta = np.atleast_1d(np.asarray(beta, dtype=float))
    f = math.factorial
    c, s = np.cos(beta / 2.0), np.sin(beta / 2.0)
    out = np.zeros((2 * j + 1, 2 * j + 1, beta.size))
    for mp in range(-j, j + 1):
        for m in range(-j, j + 1):
            pre = math.sqrt(f(j + m) * f(j - m) * f(j + mp) * f(j - mp))
            for k in range(max(0, m - mp), min(j + m, j - mp) + 1):
                den = f(j + m - k) * f(k) * f(j - k - mp) * f(k - m + mp)
                out[mp + j, m + j] += ((-1) ** ((k - m + mp) % 2) * pre / den
                                       * c ** (2 * j - 2 * k + m - mp) * s ** (2 * k - m + mp))
    return out


# ----------------------------------------------------------------------------------------------
# Basis |J K M>, J = 0..L, K = -J..J (body projection), M = -J..J (lab projection), J-major order,
# so the J <= L' basis is a leading block.  Wavefunctions (z-y-z Euler angles phi, theta, chi of the
# rotation R = R_z(phi) R_y(theta) R_z(chi) taking body axes to lab axes):
#   psi_JKM(phi, theta, chi) = sqrt((2J+1) / 8 pi^2) D^J_{MK}(phi, theta, chi)^*,
#   D^J_{MK}(a, b, g) = <J M| e^{-i a J_Z} e^{-i b J_Y} e^{-i g J_Z} |J K> = e^{-i M a} d^J_{MK}(b) e^{-i K g}
# (Edmonds ch. 4; R. N. Zare, Angular Momentum, Wiley 1988, ch. 3 and eq. 3.51 - from memory).
# Then J_Z psi = M psi, body J_z psi = K psi; checked numerically below (quadrature, commutators).
# ----------------------------------------------------------------------------------------------
def nfull(L):
    return (L + 1) * (2 * L + 1) * (2 * L + 3) // 3


def offs(j):
    return j * (2 * j - 1) * (2 * j + 1) // 3


def idx(j, k, m):
    return offs(j) + (k + j) * (2 * j + 1) + (m + j)


def basis_arrays(L):
    J, K, M = [], [], []
    for j in range(L + 1):
        for k in range(-j, j + 1):
            for m in range(-j, j + 1):
                J.append(j)
                K.append(k)
                M.append(m)
    return np.array(J), np.array(K), np.array(M)


# ----------------------------------------------------------------------------------------------
# Direction cosines Phi_{Fg} = F.g (F lab, g body axis).  With spherical unit vectors
# e_{+1} = -(e_x + i e_y)/sqrt2, e_0 = e_z, e_{-1} = (e_x - i e_y)/sqrt2 and D^1_{pq}(R) = e_p^* . R e_q,
#   Phi_{Fg} = R_{Fg} = sum_{p,q} (e_p)_F (e_q)^*_g D^1_{pq}(phi, theta, chi)       (checked numerically)
# and, from the integral of three D functions
#   int D^{j1}_{m1k1} D^{j2}_{m2k2} D^{j3}_{m3k3} dOmega = 8 pi^2 (j1 j2 j3; m1 m2 m3)(j1 j2 j3; k1 k2 k3)
# (Edmonds eq. 4.6.2; Zare eq. 3.118 - from memory) and D^J_{MK}^* = (-1)^{M-K} D^J_{-M,-K}
# (Edmonds eq. 4.2.7 - from memory):
#   <J'K'M'| D^1_{pq} |J K M> = sqrt((2J'+1)(2J+1)) (-1)^{M-K} (J' 1 J; M' p -M) (J' 1 J; K' q -K).
# Verified against a direct quadrature over (phi, theta, chi) of the wavefunctions (see checks).
# ----------------------------------------------------------------------------------------------
S2 = math.sqrt(0.5)
EVEC = {1: np.array([-S2, -1j * S2, 0.0]), 0: np.array([0.0, 0.0, 1.0]), -1: np.array([S2, -1j * S2, 0.0])}


def d1_elements(L):
    n = nfull(L)
    out = {}
    for p in (-1, 0, 1):
        for q in (-1, 0, 1):
            r, c, v = [], [], []
            for j in range(L + 1):
                for k in range(-j, j + 1):
                    for m in range(-j, j + 1):
                        mp, kp = m - p, k - q
                        for jp in (j - 1, j, j + 1):
                            if jp < 0 or jp > L or abs(mp) > jp or abs(kp) > jp:
                                continue
                            a = threej(jp, 1, j, mp, p, -m)
                            if a == 0.0:
                                continue
                            b = threej(jp, 1, j, kp, q, -k)
                            if b == 0.0:
                                continue
                            r.append(idx(jp, kp, mp))
                            c.append(idx(j, k, m))
                            v.append(math.sqrt((2 * jp + 1) * (2 * j + 1)) * (-1) ** ((m - k) % 2) * a * b)
            out[(p, q)] = sp.csr_matrix((v, (r, c)), shape=(n, n))
    return out


def phi_matrices(L):
    """dict (F, g) -> sparse Phi_{Fg} on J <= L; F, g = 0, 1, 2 for x, y, z (lab X, Y, Z / body x, y, z).
    Phi_{Fg} is real for F, g both in {x, z} or both = y, purely imaginary otherwise."""
    d = d1_elements(L)
    phi = {}
    for F in range(3):
        for g in range(3):
            acc = None
            for (p, q), mat in d.items():
                cf = complex(EVEC[p][F] * np.conj(EVEC[q][g]))
                if cf == 0:
                    continue
                acc = mat * cf if acc is None else acc + mat * cf
            acc = acc.tocsr()
            if np.abs(acc.data.imag).max(initial=0.0) < 1e-15:
                acc = acc.real.tocsr()
            elif np.abs(acc.data.real).max(initial=0.0) < 1e-15:
                acc = (1j * acc.imag).tocsr()
            acc.eliminate_zeros()
            phi[(F, g)] = acc
    return phi


def lab_j(L):
    """Lab-fixed J_X, J_Y, J_Z (standard Condon-Shortley ladder elements in M; K untouched)."""
    J, K, M = basis_arrays(L)
    n = J.size
    r, c, v = [], [], []
    for i in range(n):
        j, k, m = J[i], K[i], M[i]
        if m < j:
            r.append(idx(j, k, m + 1))
            c.append(i)
            v.append(math.sqrt(j * (j + 1) - m * (m + 1)))
    jp = sp.csr_matrix((v, (r, c)), shape=(n, n))
    return [((jp + jp.T) * 0.5).tocsr(), ((jp - jp.T) * (-0.5j)).tocsr(), sp.diags(M.astype(float)).tocsr()]


# ----------------------------------------------------------------------------------------------
# Closed-form body-frame operators in |J K> (one J): with the anomalous sign of body components,
# the derived elements are <J K+1|J_x|J K> = +1/2 s_K, <J K+1|J_y|J K> = +i/2 s_K,
# s_K = sqrt(J(J+1) - K(K+1)) (read off from J_g = sum_F Phi_Fg J_F, see checks), so
#   H_rigid = B_z K^2 + (B_x + B_y)/2 (J(J+1) - K^2) + (B_x - B_y)/2 (J_x^2 - J_y^2),
#   <J K+2|J_x^2 - J_y^2|J K> = 1/2 s_K s_{K+1}
# (e.g. G. W. King, R. M. Hainer, P. C. Cross, J. Chem. Phys. 11, 27 (1943); W. Gordy and R. L. Cook,
# Microwave Molecular Spectra, ch. 7 - from memory).  Used only for the thermal level list (J up to 40);
# equal to the operator built from the direction cosines (J <= J_max) to rounding.
# ----------------------------------------------------------------------------------------------
def body_jxy_closed(j):
    k = np.arange(-j, j + 1)
    x = j * (j + 1)
    R = np.zeros((2 * j + 1, 2 * j + 1))
    for a in range(2 * j):
        R[a + 1, a] = math.sqrt(x - k[a] * (k[a] + 1))
    return (R + R.T) / 2.0, (R - R.T) * 0.5j


def h_rigid_closed(j, bx, by, bz):
    jx, jy = body_jxy_closed(j)
    k = np.arange(-j, j + 1)
    return np.real(bx * jx @ jx + by * jy @ jy) + np.diag(bz * k * k.astype(float))


def c2_body(j):
    """C2 rotations about body x, y (exp(-i pi J_g) on one J; real signed permutations K -> -K) and z."""
    jx, jy = body_jxy_closed(j)
    cx = scipy.linalg.expm(-1j * math.pi * jx)
    cy = scipy.linalg.expm(-1j * math.pi * jy)
    assert np.abs(cx.imag).max() < 1e-9 and np.abs(cy.imag).max() < 1e-9
    assert np.abs(cx.real - np.round(cx.real)).max() < 1e-9 and np.abs(cy.real - np.round(cy.real)).max() < 1e-9
    cz = np.diag((-1.0) ** np.arange(-j, j + 1))
    return np.round(cx.real), np.round(cy.real), cz


# ----------------------------------------------------------------------------------------------
# Molecules.  Body frame: z = the dipole axis d (so that the two-fold rotation C2(d) is (-1)^K);
# SO2 (dipole along b): (x, y, z) = (c, a, b); CH3F (dipole and figure axis a): (x, y, z) = (b, c, a);
# both right-handed.  The dipole points along +z.
# ----------------------------------------------------------------------------------------------
class Molecule:
    def __init__(self, name, consts, axis_of, alpha, mu_debye, temp_k, symmetric=False, dj=0.0, djk=0.0,
                 spin=None):
        self.name = name
        self.consts = consts                  # {'a': A, 'b': B, 'c': C} in cm^-1
        self.axis_of = axis_of                # {'a': body index 0/1/2 (x/y/z), ...}
        self.alpha = alpha                    # {'a': alpha'_a, ...} in A^3
        self.mu = mu_debye
        self.temp = temp_k
        self.symmetric = symmetric
        self.dj = dj                          # cm^-1
        self.djk = djk
        self.spin = spin
        self.label_of = {v: k for k, v in axis_of.items()}
        self.bxyz = [consts[self.label_of[i]] for i in range(3)]
        assert axis_of[self.dipole_axis()] == 2

    def dipole_axis(self):
        return "b" if self.name == "SO2" else "a"


def so2_weight(ka, kc):
    """Nuclear-spin weight of an SO2 level by the parities of (Ka, Kc) (two 16O, I = 0)."""
    return 1 if (ka % 2) == (kc % 2) else 0


def ch3f_weight(k):
    return 2 if abs(k) % 3 == 0 else 1


SO2 = Molecule("SO2", {"a": 2.02736, "b": 0.34417, "c": 0.29354}, {"c": 0, "a": 1, "b": 2},
               {"a": 5.5, "b": 3.5, "c": 2.7}, 1.633, 1.0, spin=so2_weight)
CH3F_B = 25536.11 / MHZ_PER_CM
CH3F = Molecule("CH3F", {"a": 5.182, "b": CH3F_B, "c": CH3F_B}, {"b": 0, "c": 1, "a": 2},
                {"a": 3.24, "b": 2.84, "c": 2.84}, 1.8585, 2.0, symmetric=True,
                dj=0.0593 / MHZ_PER_CM, djk=0.445 / MHZ_PER_CM, spin=ch3f_weight)


# ----------------------------------------------------------------------------------------------
# Field-free levels and the thermal ensemble.
# ----------------------------------------------------------------------------------------------
def asym_levels(mol, jq):
    """All levels J <= jq of the asymmetric top: list of dicts (J, E cm^-1, Ka, Kc, weight, c2z).
    H0(J) is block-diagonalised by the exact D2 symmetry: C2(z) = (-1)^K and C2(x) = exp(-i pi J_x)
    (a signed permutation K -> -K); C2(y) = C2(z) C2(x).  Ka, Kc: the parity of Ka is the eigenvalue
    of C2(a), that of Kc of C2(c) (the prolate / oblate symmetric-top limits: C2 about the symmetry
    axis is exp(-i pi J_a) = (-1)^Ka); within one D2 class of one J the levels cannot cross as the
    asymmetry varies, and the energy increases with tau = Ka - Kc (King, Hainer & Cross 1943 - from
    memory), so the n-th level of a class gets the n-th (Ka, Kc) pair of that class by tau.
    Cross-check: the global order in J (E increasing with tau, i.e. level i -> Ka = (i+1)//2,
    Kc = J - i//2) agrees wherever two neighbours are not degenerate to 1e-9 cm^-1."""
    bx, by, bz = mol.bxyz
    out = []
    mism = 0
    for j in range(jq + 1):
        h = h_rigid_closed(j, bx, by, bz)
        cx, cy, cz = c2_body(j)
        assert np.abs(cz @ cx - cy).max() < 1e-12
        par_of_axis = {}
        lev_j = []
        for sz in (1, -1):
            for sx in (1, -1):
                pr = (np.eye(2 * j + 1) + sz * cz) @ (np.eye(2 * j + 1) + sx * cx) / 4.0
                w, v = np.linalg.eigh(pr)
                b = v[:, w > 0.5]
                if b.shape[1] == 0:
                    continue
                e = np.linalg.eigvalsh(b.T @ h @ b)
                par = {0: sx, 1: sx * sz, 2: sz}          # C2 eigenvalue about body x, y, z
                pa = par[mol.axis_of["a"]]
                pc = par[mol.axis_of["c"]]
                cand = [(ka, kc) for ka in range(j + 1) for kc in range(j + 1)
                        if ka + kc in (j, j + 1) and (-1) ** ka == pa and (-1) ** kc == pc]
                cand.sort(key=lambda t: t[0] - t[1])
                assert len(cand) == e.size
                for ee, (ka, kc) in zip(e, cand):
                    lev_j.append(dict(J=j, E=float(ee), Ka=ka, Kc=kc, weight=mol.spin(ka, kc), c2z=sz))
        lev_j.sort(key=lambda d: d["E"])
        for i, d in enumerate(lev_j):
            lo = lev_j[i - 1]["E"] if i > 0 else -1e300
            hi = lev_j[i + 1]["E"] if i + 1 < len(lev_j) else 1e300
            if d["E"] - lo > 1e-9 and hi - d["E"] > 1e-9:
                if (d["Ka"], d["Kc"]) != ((i + 1) // 2, j - i // 2):
                    mism += 1
        out.extend(lev_j)
    return out, mism


def sym_energy(mol, j, k):
    """Prolate symmetric top with distortion (cm^-1): B J(J+1) + (A - B) K^2 - D_J J^2(J+1)^2 - D_JK J(J+1) K^2
    (G. Herzberg, Molecular Spectra and Molecular Structure II, ch. I; Gordy & Cook ch. 6 - from memory)."""
    a, b = mol.consts["a"], mol.consts["b"]
    x = j * (j + 1.0)
    return b * x + (a - b) * k * k - mol.dj * x * x - mol.djk * x * k * k


def sym_levels(mol, jq):
    out = []
    for j in range(jq + 1):
        for k in range(-j, j + 1):
            out.append(dict(J=j, K=k, E=float(sym_energy(mol, j, k)), weight=mol.spin(k)))
    return out


def thermal(mol, jq=40):
    """Boltzmann populations over the field-free levels with spin weights: per state (one M)
    w exp(-E / kT) / Q.  Levels are kept in order of energy (degenerate groups kept whole) until the
    left-out population is < POP_TOL; the kept populations are renormalised."""
    levels, mism = (sym_levels(mol, jq), 0) if mol.symmetric else asym_levels(mol, jq)
    kt = K_B * mol.temp / HC_CM
    levels.sort(key=lambda d: d["E"])
    e = np.array([d["E"] for d in levels])
    w = np.array([d["weight"] * (2 * d["J"] + 1) for d in levels], dtype=float)
    b = w * np.exp(-(e - e[0]) / kt)
    q = float(b.sum())
    tail = np.concatenate([np.cumsum(b[::-1])[::-1], [0.0]]) / q
    n = 0
    while tail[n] >= POP_TOL or (n > 0 and n < len(e) and e[n] - e[n - 1] < 1e-9):
        n += 1
    e_cut = float(e[n - 1])
    kept = levels[:n]
    qk = float(b[:n].sum())
    for d in levels:
        d["pop"] = d["weight"] * math.exp(-(d["E"] - e[0]) / kt) / qk if d["E"] <= e_cut else 0.0
    n_states = int(sum((2 * d["J"] + 1) for d in kept if d["weight"] > 0))
    return dict(levels=levels, kept=kept, e_cut=e_cut, discarded=float(tail[n]), q=q, kt=kt,
                n_states=n_states, label_mismatch=mism, jmax_pop=max(d["J"] for d in kept if d["weight"] > 0))


# ----------------------------------------------------------------------------------------------
# Operators on J <= jmax (all K, all M).  Direction cosines on J <= jmax + 2; quadratic operators are
# products formed there and then truncated to J <= jmax (exact matrix elements of the products, since
# Phi couples Delta J = 0, +-1 only).  Body angular momentum J_g = sum_F Phi_Fg J_F (the body
# components of J; Phi and J_F commute for equal F) - exact in the truncated basis because J_F is
# diagonal in J; its Delta J != 0 part vanishes to rounding (checked) and is dropped.
#   H0 = sum_g B_g J_g^2 (- D_J J^2(J+1)^2 - D_JK J(J+1) K^2 for CH3F, K = body z projection).
# ----------------------------------------------------------------------------------------------
class Operators:
    def __init__(self, mol, jmax, log=None):
        self.mol, self.jmax = mol, jmax
        L = jmax + 2
        n = nfull(jmax)
        self.n = n
        phl = phi_matrices(L)
        cut = lambda a: a[:n, :n].tocsr()
        self.phi = {k: cut(v) for k, v in phl.items()}
        self.quad = {}
        for g in range(3):
            for F1 in range(3):
                for F2 in range(3):
                    if (F1, F2) in ((0, 0), (1, 1), (2, 2), (0, 2), (2, 0)):
                        prod = cut(phl[(F1, g)] @ phl[(F2, g)])
                        if np.abs(prod.data.imag).max(initial=0.0) < 1e-14:
                            prod = prod.real.tocsr()
                        self.quad[(F1, F2, g)] = prod
        J, K, M = basis_arrays(jmax)
        self.J, self.K, self.M = J, K, M
        jl = lab_j(jmax)
        self.jlab = jl
        jb = []
        offj = 0.0
        for g in range(3):
            a = sum(self.phi[(F, g)] @ jl[F] for F in range(3)).tocoo()
            same = J[a.row] == J[a.col]
            offj = max(offj, float(np.abs(a.data[~same]).max(initial=0.0)))
            jb.append(sp.csr_matrix((a.data[same], (a.row[same], a.col[same])), shape=(n, n)))
        self.jbody = jb
        self.offj = offj
        h = sum(mol.bxyz[g] * (jb[g] @ jb[g]) for g in range(3))
        assert np.abs(h.data.imag).max(initial=0.0) < 1e-10
        h = h.real.tocsr()
        if mol.symmetric:
            x = J * (J + 1.0)
            h = (h + sp.diags(-mol.dj * x * x - mol.djk * x * K * K)).tocsr()
        h.eliminate_zeros()
        self.h0_cm = h

    def static_cm(self, a_s_deg):
        """-mu E (e_s . d) in cm^-1 per unit mu E (d = body z)."""
        a = math.radians(a_s_deg)
        return (-(math.sin(a) * self.phi[(0, 2)] + math.cos(a) * self.phi[(2, 2)])).tocsr()

    def cos2_el(self, a_l_deg, g):
        """(e_L . g)^2 for body axis g (real)."""
        a = math.radians(a_l_deg)
        s, c = math.sin(a), math.cos(a)
        q = self.quad
        return (s * s * q[(0, 0, g)] + s * c * (q[(0, 2, g)] + q[(2, 0, g)]) + c * c * q[(2, 2, g)]).real.tocsr()

    def laser_unit(self, a_l_deg):
        """sum_g (alpha'_g - alpha'_min) (e_L . g)^2 in A^3; the dropped alpha'_min sum_g (e_L.g)^2 =
        alpha'_min (exactly, in this basis) only adds a global phase."""
        amin = min(self.mol.alpha.values())
        tot = None
        for lab, g in self.mol.axis_of.items():
            w = self.mol.alpha[lab] - amin
            if w == 0.0:
                continue
            t = w * self.cos2_el(a_l_deg, g)
            tot = t if tot is None else tot + t
        return tot.tocsr()

    def observables(self):
        """The 12 reported operators: cos_F = Phi_{F d} (d = body z), cos2_Fg = Phi_{F g}^2."""
        out = [("cos_X", self.phi[(0, 2)]), ("cos_Y", self.phi[(1, 2)]), ("cos_Z", self.phi[(2, 2)])]
        for Fi, F in enumerate("XYZ"):
            for lab in "abc":
                out.append((f"cos2_{F}{lab}", self.quad[(Fi, Fi, self.mol.axis_of[lab])]))
        return out

    def rotation(self, beta, sel):
        """U = exp(-i beta J_Y) restricted to the index set sel (closed under M; block diag in J, K)."""
        pos = {int(i): p for p, i in enumerate(sel)}
        rows, cols, vals = [], [], []
        dcache = {}
        for i in sel:
            j, k, m = self.J[i], self.K[i], self.M[i]
            if j not in dcache:
                dcache[j] = wigner_d(j, beta)
            d = dcache[j]
            for mp in range(-j, j + 1):
                rows.append(pos[idx(j, k, mp)])
                cols.append(pos[int(i)])
                vals.append(d[mp + j, m + j])
        ns = len(sel)
        return sp.csr_matrix((vals, (rows, cols)), shape=(ns, ns))


def spmax(a):
    """largest |element| of a sparse or dense matrix"""
    if sp.issparse(a):
        a = a.tocsr()
        return float(np.abs(a.data).max()) if a.nnz else 0.0
    return float(np.abs(a).max()) if a.size else 0.0


def restrict(a, sel):
    return a[sel][:, sel].tocsr()


# ----------------------------------------------------------------------------------------------
# Checks of the matrix elements and conventions (small basis).
# ----------------------------------------------------------------------------------------------
def euler_of(R):
    th = np.arccos(np.clip(R[2, 2], -1.0, 1.0))
    ph = np.arctan2(R[1, 2], R[0, 2])
    ch = np.arctan2(R[2, 1], -R[2, 0])
    return ph, th, ch


def rz(a):
    c, s = np.cos(a), np.sin(a)
    o, z = np.ones_like(c), np.zeros_like(c)
    return np.array([[c, -s, z], [s, c, z], [z, z, o]])


def ry(a):
    c, s = np.cos(a), np.sin(a)
    o, z = np.ones_like(c), np.zeros_like(c)
    return np.array([[c, z, s], [z, o, z], [-s, z, c]])


def psi_values(Lq, ph, th, ch):
    J, K, M = basis_arrays(Lq)
    dc = {j: wigner_d_sum(j, th) for j in range(Lq + 1)}
    out = np.empty((J.size, np.size(ph)), complex)
    for i in range(J.size):
        j, k, m = J[i], K[i], M[i]
        out[i] = math.sqrt((2 * j + 1) / (8 * math.pi ** 2)) * np.exp(1j * m * ph) * dc[j][m + j, k + j] * np.exp(1j * k * ch)
    return out


def convention_checks(log):
    res = {}
    rng = np.random.default_rng(7)
    # 3j vs sympy (if available)
    try:
        from sympy.physics.wigner import wigner_3j
        worst = 0.0
        for _ in range(40):
            j1, j2 = int(rng.integers(0, 9)), int(rng.integers(0, 3))
            j3 = int(rng.integers(abs(j1 - j2), j1 + j2 + 1))
            m1, m2 = int(rng.integers(-j1, j1 + 1)), int(rng.integers(-j2, j2 + 1))
            worst = max(worst, abs(threej(j1, j2, j3, m1, m2, -m1 - m2) - float(wigner_3j(j1, j2, j3, m1, m2, -m1 - m2))))
        res["threej_vs_sympy"] = worst
    except ImportError:
        res["threej_vs_sympy"] = None
    # Wigner d: eigen-decomposition vs explicit sum vs scipy expm
    e1 = e2 = 0.0
    for j in range(0, 13):
        b = 0.83
        d = wigner_d(j, b)
        e1 = max(e1, float(np.abs(d - wigner_d_sum(j, b)[:, :, 0]).max()))
        e2 = max(e2, float(np.abs(d - scipy.linalg.expm(-1j * b * jy_matrix(j))).max()))
    res["wigner_d_vs_sum"], res["wigner_d_vs_expm"] = e1, e2
    # D^1 <-> rotation matrix: R_Fg = sum_pq (e_p)_F (e_q)^*_g D^1_pq
    worst = 0.0
    for _ in range(5):
        a, b, g = rng.uniform(0, 2 * math.pi), rng.uniform(0, math.pi), rng.uniform(0, 2 * math.pi)
        R = rz(a) @ ry(b) @ rz(g)
        d = wigner_d(1, b)
        Rr = np.zeros((3, 3), complex)
        for p in (-1, 0, 1):
            for q in (-1, 0, 1):
                Rr += np.outer(EVEC[p], np.conj(EVEC[q])) * np.exp(-1j * p * a) * d[p + 1, q + 1] * np.exp(-1j * q * g)
        worst = max(worst, float(np.abs(Rr - R).max()))
    res["d1_vs_rotation_matrix"] = worst
    # quadrature over Euler angles (phi, chi uniform, theta Gauss-Legendre): every element of every
    # Phi_Fg and of every product Phi_Fg Phi_F'g on J <= 3
    Lq = 3
    phl = phi_matrices(Lq + 2)
    nq = nfull(Lq)
    nph, nth = 12, 24
    x, wx = np.polynomial.legendre.leggauss(nth)
    th = (x + 1) * math.pi / 2
    wth = wx * math.pi / 2 * np.sin(th)
    ph = 2 * math.pi * np.arange(nph) / nph
    P, T, X = np.meshgrid(ph, th, ph, indexing="ij")
    W = np.einsum("i,j,k->ijk", np.full(nph, 2 * math.pi / nph), wth, np.full(nph, 2 * math.pi / nph)).ravel()
    P, T, X = P.ravel(), T.ravel(), X.ravel()
    psi = psi_values(Lq, P, T, X)
    R = np.einsum("abn,bcn,cdn->adn", rz(P), ry(T), rz(X))
    res["quadrature_orthonormality"] = float(np.abs((psi.conj() * W) @ psi.T - np.eye(nq)).max())
    w1 = w2 = 0.0
    for F in range(3):
        for g in range(3):
            q = (psi.conj() * (W * R[F, g])) @ psi.T
            w1 = max(w1, float(np.abs(q - phl[(F, g)][:nq, :nq].toarray()).max()))
            for F2 in range(3):
                q = (psi.conj() * (W * R[F, g] * R[F2, g])) @ psi.T
                w2 = max(w2, float(np.abs(q - (phl[(F, g)] @ phl[(F2, g)])[:nq, :nq].toarray()).max()))
    res["quadrature_phi"], res["quadrature_phi_products"] = w1, w2
    # lab rotation of the basis functions: psi_JKM(R_y(b)^-1 R) = sum_M' psi_JKM'(R) d^J_M'M(b)
    b = 0.6
    angs = rng.uniform(0, 1, (3, 20)) * np.array([[2 * math.pi], [math.pi], [2 * math.pi]])
    R = np.einsum("abn,bcn,cdn->nad", rz(angs[0]), ry(angs[1]), rz(angs[2]))
    R2 = np.einsum("ab,nbc->nac", ry(b).T, R)
    e2 = np.array([euler_of(r) for r in R2]).T
    p1 = psi_values(Lq, angs[0], angs[1], angs[2])
    p2 = psi_values(Lq, e2[0], e2[1], e2[2])
    Jq, Kq, Mq = basis_arrays(Lq)
    worst = 0.0
    for i in range(Jq.size):
        j, k, m = Jq[i], Kq[i], Mq[i]
        d = wigner_d(j, b)
        rhs = sum(p1[idx(j, k, mp)] * d[mp + j, m + j] for mp in range(-j, j + 1))
        worst = max(worst, float(np.abs(p2[i] - rhs).max()))
    res["rotation_of_basis_functions"] = worst
    # vector-operator commutators [J_F, Phi_F'g] = i eps_FF'F'' Phi_F''g, body J: J_z = K,
    # [J_x, J_y] = -i J_z (anomalous sign), closed-form body J_x, J_y
    Lc = 6
    ph6 = phi_matrices(Lc)
    jl = lab_j(Lc)
    eps = np.zeros((3, 3, 3))
    eps[0, 1, 2] = eps[1, 2, 0] = eps[2, 0, 1] = 1
    eps[0, 2, 1] = eps[2, 1, 0] = eps[1, 0, 2] = -1
    worst = 0.0
    for F in range(3):
        for F2 in range(3):
            for g in range(3):
                c = jl[F] @ ph6[(F2, g)] - ph6[(F2, g)] @ jl[F] - sum(1j * eps[F, F2, F3] * ph6[(F3, g)] for F3 in range(3))
                worst = max(worst, float(np.abs(c).max()))
    res["vector_operator_commutators"] = worst
    jb = [sum(ph6[(F, g)] @ jl[F] for F in range(3)).toarray() for g in range(3)]
    J6, K6, M6 = basis_arrays(Lc)
    same = J6[:, None] == J6[None, :]
    for g in range(3):
        jb[g] = np.where(same, jb[g], 0.0)
    res["body_jz_minus_K"] = float(np.abs(jb[2] - np.diag(K6)).max())
    res["body_anomalous_commutator"] = float(np.abs(jb[0] @ jb[1] - jb[1] @ jb[0] + 1j * jb[2]).max())
    worst = 0.0
    for j in range(Lc + 1):
        sel = [idx(j, k, 0) for k in range(-j, j + 1)]
        cx, cy = body_jxy_closed(j)
        worst = max(worst, float(np.abs(jb[0][np.ix_(sel, sel)] - cx).max()), float(np.abs(jb[1][np.ix_(sel, sel)] - cy).max()))
    res["body_jxy_closed_form"] = worst
    log("convention checks: " + ", ".join(f"{k} {v:.1e}" if isinstance(v, float) else f"{k} {v}" for k, v in res.items()))
    return res


# ----------------------------------------------------------------------------------------------
# Initial state: adiabatic correlation in the static-field frame, then rotation to the lab.
#
# Field frame (z_f = e_s): H_f = H0 - mu E Phi_{z d} conserves
#   * M_f (rotations about the field axis);
#   * C2(d) = exp(-i pi J_z(body)) = (-1)^K: the dipole and the (diagonal) polarizability are
#     invariant under the two-fold rotation about the dipole axis;
#   * for the symmetric top (CH3F) K itself (H0 diagonal in K, Phi_{z d} = D^1_{00} conserves K);
#   * the reflection sigma through a lab plane containing the field axis (here the x_f z_f plane,
#     y_f -> -y_f), which is not a rotation but becomes one when combined with the reflection of the
#     molecule-fixed frame through its x z plane (x -> -x): the rigid rotor's configuration
#     R (body -> lab) goes to sigma_y R sigma_x, which is proper, maps the dipole term, the
#     polarizability term (diagonal in x, y, z) and H0 (sum_g B_g J_g^2) onto themselves.  With
#     R = R_z(phi) R_y(theta) R_z(chi):  sigma_y R sigma_x = R_z(-phi) R_y(theta) R_z(pi - chi), so on
#     psi_JKM ~ e^{i M phi} d^J_{MK}(theta) e^{i K chi}, using d^J_{-M,-K} = (-1)^{M-K} d^J_{MK}:
#         P |J K M> = (-1)^M |J, -K, -M>.
#     P maps M_f -> -M_f, so it is a symmetry inside a class only for M_f = 0, where it splits the
#     block into P = +1 (|J 0 0>, (|J K 0> + |J -K 0>)/sqrt2) and P = -1 ((|J K 0> - |J -K 0>)/sqrt2).
#     (Derived here; checked numerically: P commutes with H0, with the static and laser terms for
#     fields in the XZ plane, and with exp(-i beta J_Y); every field-free M = 0 level is a P
#     eigenvector.)  The same P in the lab (reflection through the XZ plane, which contains both
#     fields) is an exact symmetry of the full H(t) and is used to split the propagation.
# Classes used for the ranking:
#   SO2:  (M_f, C2(b) = +1) for M_f != 0 and (0, C2(b) = +1, P = +-1); the C2(b) = -1 class holds
#         exactly the (Ka, Kc) = (e,o), (o,e) levels (C2(b) = (-1)^(Ka+Kc)) with spin weight 0, so it
#         carries no population and is left out of the basis altogether;
#   CH3F: (M_f, K) with K signed (K is conserved; inside one (M_f, K) block H_f is a chain in J with
#         non-zero nearest-neighbour couplings, so its spectrum is simple).  At M_f = 0 the blocks K
#         and -K are exchanged by P; ranking inside (0, K) and (0, -K) separately gives degenerate
#         partner states with equal populations, i.e. the same density as ranking the P = +-1
#         combinations within |K|.
# Within a class the n-th lowest field-free level (energies from H0 in that class, all J <= J_max)
# goes to the n-th lowest eigenstate of H_f (J. von Neumann and E. Wigner, Phys. Z. 30, 467 (1929);
# adiabatic theorem, M. Born and V. Fock, Z. Phys. 51, 165 (1928)) and carries that level's thermal
# population.  Lab states: U = exp(-i a_s J_Y) (takes Z to e_s: U Phi_{Zd} U^+ = e_s . Phi_{.d},
# checked).  For M_f != 0 the dressed state v of M_f and P v (its partner at -M_f, same energy and
# population) are combined into (v +- P v)/sqrt2, one in each lab P block.
# ----------------------------------------------------------------------------------------------
def p_operator(ops, sel):
    """Lab/field-frame reflection P |J K M> = (-1)^M |J -K -M> on the index set sel (closed under it)."""
    pos = {int(i): p for p, i in enumerate(sel)}
    rows, cols, vals = [], [], []
    for p, i in enumerate(sel):
        j, k, m = ops.J[i], ops.K[i], ops.M[i]
        rows.append(pos[idx(j, -k, -m)])
        cols.append(p)
        vals.append(float((-1) ** (m % 2)))
    n = len(sel)
    return sp.csr_matrix((vals, (rows, cols)), shape=(n, n))


def p_blocks(ops, sel):
    """Orthonormal real bases S_+ and S_- (columns, in sel coordinates) of the P = +-1 subspaces."""
    cp, cm = [], []
    seen = set()
    n = len(sel)
    pos = {int(i): p for p, i in enumerate(sel)}
    for p, i in enumerate(sel):
        if p in seen:
            continue
        j, k, m = ops.J[i], ops.K[i], ops.M[i]
        q = pos[idx(j, -k, -m)]
        s = float((-1) ** (m % 2))
        seen.add(p)
        seen.add(q)
        if q == p:
            (cp if s > 0 else cm).append({p: 1.0})
        else:
            cp.append({p: S2, q: s * S2})
            cm.append({p: S2, q: -s * S2})

    def mat(cols):
        r, c, v = [], [], []
        for a, col in enumerate(cols):
            for row, val in col.items():
                r.append(row)
                c.append(a)
                v.append(val)
        return sp.csr_matrix((v, (r, c)), shape=(n, len(cols)))

    return mat(cp), mat(cm)


def field_frame_classes(mol, ops, jpop, kpop):
    """List of (label, sel (full indices), B (columns = orthonormal class basis in sel coordinates))."""
    J, K, M = ops.J, ops.K, ops.M
    out = []
    if not mol.symmetric:
        for mf in range(0, jpop + 1):
            sel = np.nonzero((K % 2 == 0) & (M == mf))[0]
            if mf == 0:
                sp_, sm_ = p_blocks(ops, sel)
                out.append((("M_f=0", "P=+1"), sel, sp_.toarray()))
                out.append((("M_f=0", "P=-1"), sel, sm_.toarray()))
            else:
                out.append(((f"M_f={mf}", ""), sel, np.eye(sel.size)))
    else:
        for kk in range(-kpop, kpop + 1):
            for mf in range(-jpop, jpop + 1):
                sel = np.nonzero((K == kk) & (M == mf))[0]
                if sel.size:
                    out.append(((f"M_f={mf}", f"K={kk}"), sel, np.eye(sel.size)))
    return out


def level_lookup(mol, th):
    tab = {}
    for d in th["levels"]:
        tab.setdefault((d["J"], d.get("K")), []).append(d)
    return tab


def initial_states(mol, ops, th, mu_e, a_s_deg, log):
    """Dressed thermal states in the lab.  Returns (states, diagnostics); states is a list of
    (full-index vector (dict-free: dense over the working index set), population, energy cm^-1, tag)."""
    jpop = th["jmax_pop"]
    kpop = max(abs(d.get("K", 0)) for d in th["kept"] if d["weight"] > 0) if mol.symmetric else 0
    tab = level_lookup(mol, th)
    h0 = ops.h0_cm
    pz = ops.phi[(2, 2)]
    classes = field_frame_classes(mol, ops, jpop, kpop)
    states = []
    diag = dict(min_gap_free=math.inf, min_gap_dressed=math.inf, classes=[],
                p_eig_err=None if mol.symmetric else 0.0, pf_comm=None if mol.symmetric else 0.0)
    for label, sel, B in classes:
        h0c = B.T @ restrict(h0, sel).toarray() @ B
        hfc = h0c - mu_e * (B.T @ restrict(pz, sel).toarray() @ B)
        jc = np.array([ops.J[sel[np.argmax(np.abs(B[:, a]))]] for a in range(B.shape[1])])
        assert all(np.allclose(ops.J[sel[np.abs(B[:, a]) > 1e-12]], jc[a]) for a in range(B.shape[1]))
        # P_f commutes with H_f at M_f = 0 (check)
        if label[0] == "M_f=0" and not mol.symmetric:
            P = p_operator(ops, sel).toarray()
            hf_full = restrict(h0, sel).toarray() - mu_e * restrict(pz, sel).toarray()
            diag["pf_comm"] = max(diag["pf_comm"], float(np.abs(P @ hf_full - hf_full @ P).max()))
            h0_full = restrict(h0, sel).toarray()
            for j in np.unique(ops.J[sel]):
                ii = np.nonzero(ops.J[sel] == j)[0]
                _, vv = np.linalg.eigh(h0_full[np.ix_(ii, ii)])
                pv = P[np.ix_(ii, ii)] @ vv
                diag["p_eig_err"] = max(diag["p_eig_err"], float(np.abs(np.abs(np.sum(vv * pv, axis=0)) - 1.0).max()))
        # field-free levels of the class (per J: H0 is diagonal in J)
        free = []
        for j in np.unique(jc):
            ii = np.nonzero(jc == j)[0]
            for e in np.linalg.eigvalsh(h0c[np.ix_(ii, ii)]):
                key = (int(j), int(label[1][2:]) if mol.symmetric else None)
                cand = [d for d in tab[key] if abs(d["E"] - e) < 1e-8 and (mol.symmetric or d["c2z"] == 1)]
                assert len(cand) >= 1, (key, e)
                assert len({(c["weight"], c["pop"]) for c in cand}) == 1
                free.append((float(e), cand[0]["pop"], cand[0]["weight"], int(j)))
        free.sort()
        npop = sum(1 for f in free if f[1] > 0)
        if npop == 0:
            continue
        assert all(f[1] > 0 for f in free[:npop]), "kept levels are not the lowest of their class"
        lam, vec = np.linalg.eigh(hfc)
        ef = np.array([f[0] for f in free[:npop + 1]])
        ed = lam[:npop + 1]
        gf = float(np.diff(ef).min()) if ef.size > 1 else math.inf
        gd = float(np.diff(ed).min()) if ed.size > 1 else math.inf
        diag["min_gap_free"] = min(diag["min_gap_free"], gf)
        diag["min_gap_dressed"] = min(diag["min_gap_dressed"], gd)
        diag["classes"].append(dict(cls=" ".join(x for x in label if x), populated=npop, gap_free=gf, gap_dressed=gd))
        for n_ in range(npop):
            v = B @ vec[:, n_]
            v = v * np.sign(v[np.argmax(np.abs(v))])
            states.append(dict(sel=sel, v=v, pop=free[n_][1], e=float(lam[n_]), label=label, mf=int(label[0][4:])))
    return states, diag


def build_case(mol, ops, th, case, log, use_p=True):
    """Lab-frame sectors (index set, basis, operators, initial states, populations) for one case."""
    mu_e = mu_e_cm(mol.mu, case["E_kV_cm"])
    a_s = case["a_s_deg"]
    beta = math.radians(a_s)
    states, diag = initial_states(mol, ops, th, mu_e, a_s, log)
    obs_ops = ops.observables()
    st_cm = ops.static_cm(a_s)
    if case.get("I0_W_cm2"):
        vl = ops.laser_unit(case["a_L_deg"])
        u0 = u0_per_a3(case["I0_W_cm2"])
    else:
        vl, u0 = None, 0.0
    J, K, M = ops.J, ops.K, ops.M
    checks = {}
    if not mol.symmetric:
        spaces = [np.nonzero(K % 2 == 0)[0]]
        # C2(d) = (-1)^K: nothing couples K-even to K-odd (check)
        ev, od = np.nonzero(K % 2 == 0)[0], np.nonzero(K % 2 != 0)[0]
        mats = [ops.h0_cm, st_cm] + ([vl] if vl is not None else []) + [o for _, o in obs_ops]
        checks["k_parity_leak"] = max(spmax(m[ev][:, od]) for m in mats)
    else:
        kset = sorted({int(np.round(K[s["sel"][0]])) for s in states})
        spaces = [np.nonzero(K == kk)[0] for kk in kset]
        mats = [st_cm] + ([vl] if vl is not None else [])
        checks["k_leak"] = max(spmax(m[np.nonzero(K == 1)[0]][:, np.nonzero(K != 1)[0]]) for m in mats)
    sectors = []
    resid = 0.0
    frame = 0.0
    comm2 = 0.0
    lab_vs_field = 0.0
    for space in spaces:
        pos = {int(i): p for p, i in enumerate(space)}
        U = ops.rotation(beta, space)
        h_cm = restrict(ops.h0_cm, space) + mu_e * restrict(st_cm, space)
        # U Phi_Zd U^+ = e_s . Phi_.d  (rotation convention check)
        lhs = U @ restrict(ops.phi[(2, 2)], space) @ U.T
        frame = max(frame, spmax(lhs + restrict(st_cm, space)))
        # lab vectors
        mine = [s for s in states if int(s["sel"][0]) in pos] if not mol.symmetric else \
            [s for s in states if K[s["sel"][0]] == K[space[0]]]
        vecs, pops, ens, mfs = [], [], [], []
        for s in mine:
            w = np.zeros(space.size)
            w[[pos[int(i)] for i in s["sel"]]] = s["v"]
            vecs.append(U @ w)
            pops.append(s["pop"])
            ens.append(s["e"])
            mfs.append(s["mf"])
        psi = np.array(vecs).T
        pops = np.array(pops)
        ens = np.array(ens)
        r = h_cm @ psi - psi * ens
        resid = max(resid, float(np.abs(r).max()))
        if not mol.symmetric:
            P = p_operator(ops, space)
            Sp, Sm = p_blocks(ops, space)
            comm_chk = 0.0
            ops_chk = [restrict(ops.h0_cm, space), restrict(st_cm, space)] + ([restrict(vl, space)] if vl is not None else [])
            for a in ops_chk:
                comm_chk = max(comm_chk, spmax(P @ a - a @ P))
            comm_chk = max(comm_chk, spmax(P @ U - U @ P))
            anti = spmax(P @ restrict(ops.phi[(1, 2)], space) + restrict(ops.phi[(1, 2)], space) @ P)
            checks["P_commutator"] = comm_chk
            checks["P_anticommutator_cosY"] = anti
            blocks = {1: ([], [], []), -1: ([], [], [])}
            leak = 0.0
            partner_err = 0.0
            for a in range(psi.shape[1]):
                v = psi[:, a]
                if mfs[a] == 0:
                    pv = P @ v
                    sgn = 1 if float(v @ pv) > 0 else -1
                    partner_err = max(partner_err, float(np.abs(pv - sgn * v).max()))
                    comb = [(sgn, v)]
                else:
                    pv = P @ v
                    partner_err = max(partner_err, float(abs(v @ pv)),
                                      float(np.abs(h_cm @ pv - ens[a] * pv).max()))
                    comb = [(1, (v + pv) * S2), (-1, (v - pv) * S2)]
                for sgn, w in comb:
                    S, So = (Sp, Sm) if sgn > 0 else (Sm, Sp)
                    leak = max(leak, float(np.abs(So.T @ w).max()))
                    blocks[sgn][0].append(S.T @ w)
                    blocks[sgn][1].append(pops[a])
                    blocks[sgn][2].append(ens[a])
            checks["P_block_leak"] = leak
            checks["P_partner"] = partner_err
            if use_p:
                for sgn, S in ((1, Sp), (-1, Sm)):
                    sectors.append(make_sector(ops, space, S, mu_e, st_cm, vl, u0, obs_ops,
                                               np.array(blocks[sgn][0]).T, np.array(blocks[sgn][1]), f"P={sgn:+d}"))
            else:
                # check run without the P reduction, in the whole K-even space: group 1 = the dressed
                # states v with M_f >= 0, group 2 = their partners P v (M_f > 0); each group alone has
                # <cos_Y> != 0 in general, the sum must vanish
                S = sp.identity(space.size, format="csr")
                g1 = [a for a in range(psi.shape[1])]
                g2 = [a for a in range(psi.shape[1]) if mfs[a] != 0]
                sectors.append(make_sector(ops, space, S, mu_e, st_cm, vl, u0, obs_ops, psi[:, g1],
                                           pops[g1], "K even, no P reduction, v"))
                sectors.append(make_sector(ops, space, S, mu_e, st_cm, vl, u0, obs_ops, P @ psi[:, g2],
                                           pops[g2], "K even, no P reduction, P v"))
        else:
            S = sp.identity(space.size, format="csr")
            sectors.append(make_sector(ops, space, S, mu_e, st_cm, vl, u0, obs_ops, psi, pops, f"K={K[space[0]]}"))
    # [H_s, rho] Frobenius norm (cm^-1): rho = sum_k p_k |psi_k><psi_k| per sector (sectors are
    # invariant subspaces of H_s): with X = (H psi - psi E) diag(p) and Y = psi,
    # [H, rho] = X Y^+ - Y X^+ and ||.||_F^2 = 2 tr(X^+X Y^+Y) - 2 Re tr((X^+Y)^2)
    for s in sectors:
        hs_cm = s["hs"] / CM1
        psi = s["psi0"]
        e = np.einsum("ik,ik->k", psi.conj(), hs_cm @ psi).real
        X = (hs_cm @ psi - psi * e) * s["pop"]
        Y = psi
        xx, yy, xy = X.conj().T @ X, Y.conj().T @ Y, X.conj().T @ Y
        comm2 += float(2 * np.real(np.trace(xx @ yy)) - 2 * np.real(np.trace(xy @ xy)))
    checks["eigen_residual_lab_cm"] = resid
    checks["rotation_convention"] = frame
    checks["commutator_norm_cm"] = math.sqrt(max(comm2, 0.0))
    pop_total = float(sum(s["pop"].sum() for s in sectors))
    checks["population_total"] = pop_total
    checks["n_states"] = int(sum(s["pop"].size for s in sectors))
    return sectors, diag, checks


def make_sector(ops, space, S, mu_e, st_cm, vl, u0, obs_ops, psi, pops, name):
    tr = lambda a: (S.T @ restrict(a, space) @ S).tocsr()
    hs = ((tr(ops.h0_cm) + mu_e * tr(st_cm)) * CM1).tocsr()
    v = (-u0 * tr(vl)).tocsr() if vl is not None else None
    obs = []
    for nm, o in obs_ops:
        m = tr(o)
        if m.dtype.kind == "c" and np.abs(m.data.imag).max(initial=0.0) == 0.0:
            m = m.real.tocsr()
        m.eliminate_zeros()
        obs.append(m)
    jsec = np.array([ops.J[space[S[:, a].nonzero()[0][0]]] for a in range(S.shape[1])])
    return dict(name=name, hs=hs, v=v, obs=obs, psi0=np.ascontiguousarray(psi.astype(complex)), pop=pops,
                jsec=jsec, size=S.shape[1])


# ----------------------------------------------------------------------------------------------
# Propagation.  i d psi / dt = H(t) psi (hbar = 1, rad/ps), H(t) = H_s + f(t) V, f = I(t) / I0.
# Fourth-order commutator-free Magnus step with the two Gauss-Legendre nodes
# c_1,2 = 1/2 -+ sqrt(3)/6, H_i = H(t + c_i h):
#   psi(t + h) = exp(-i h (a1 H_1 + a2 H_2)) exp(-i h (a2 H_1 + a1 H_2)) psi(t),
#   a1 = (3 - 2 sqrt3)/12, a2 = (3 + 2 sqrt3)/12
# (S. Blanes and P. C. Moan, Appl. Numer. Math. 56, 1519 (2006); M. Thalhammer, SIAM J. Numer. Anal. 44,
# 851 (2006) - from memory; the order is verified numerically on a small problem below).  Here
# a1 H_1 + a2 H_2 = (H_s + g V) / 2 with g = 2 (a1 f_1 + a2 f_2).
# Each exponential: Chebyshev expansion (H. Tal-Ezer and R. Kosloff, J. Chem. Phys. 81, 3967 (1984) -
# from memory): exp(-i A tau) = e^{-i c tau} sum_k (2 - delta_k0) (-i)^k J_k(r tau) T_k((A - c)/r),
# spectrum of A inside [c - r, c + r] (extremal eigenvalues of H_s and V by Lanczos (scipy eigsh),
# Weyl's inequality for H_s + g V, plus a 0.5 % margin), truncated where |J_k| < 1e-17.
# Steps: the interval [t0, T_OFF] is cut at every output time and at multiples of tau/4; a segment
# whose largest f is f_max gets steps h0 * min(CAP, max(1, f_max^(-1/5))) (the error of the scheme
# vanishes with f: for f = 0 it is exact).  After T_OFF (f < 1e-19) the evolution is with H_s only,
# one Chebyshev expansion per output interval.
# ----------------------------------------------------------------------------------------------
A1 = (3.0 - 2.0 * math.sqrt(3.0)) / 12.0
A2 = (3.0 + 2.0 * math.sqrt(3.0)) / 12.0
C1 = 0.5 - math.sqrt(3.0) / 6.0
C2 = 0.5 + math.sqrt(3.0) / 6.0
CAP = 8.0


def spectral_bounds(a):
    if a is None:
        return 0.0, 0.0
    if a.shape[0] <= 800:
        w = np.linalg.eigvalsh(a.toarray())
        return float(w[0]), float(w[-1])
    v0 = np.ones(a.shape[0])                      # fixed start vector: reproducible to the last digit
    lo = spla.eigsh(a, k=1, which="SA", tol=1e-10, return_eigenvectors=False, ncv=40, v0=v0)[0]
    hi = spla.eigsh(a, k=1, which="LA", tol=1e-10, return_eigenvectors=False, ncv=40, v0=v0)[0]
    return float(lo), float(hi)


def cheb_expm(a, lo, hi, x, tau):
    """exp(-i a tau) x for real symmetric sparse a with spectrum in [lo, hi]; x complex (N, n)."""
    span = hi - lo
    lo, hi = lo - 0.005 * span - 1e-6, hi + 0.005 * span + 1e-6
    c, r = 0.5 * (hi + lo), 0.5 * (hi - lo)
    theta = r * tau
    kk = np.arange(int(theta + 15.0 * max(theta, 1.0) ** (1.0 / 3.0) + 40))
    jk = jv(kk, theta)
    big = np.nonzero(np.abs(jk) > 1e-17)[0]
    kmax = max(int(big[-1]), int(theta) + 1)
    a2 = ((a - sp.identity(a.shape[0], format="csr") * c) * (2.0 / r)).tocsr()
    n = x.shape[1]
    t0 = np.ascontiguousarray(x).view(np.float64)
    acc = jk[0] * x.astype(complex)
    t1 = 0.5 * (a2 @ t0)
    acc += (-2j * jk[1]) * t1.view(np.complex128)
    phase = (-1j) ** 2
    for k in range(2, kmax + 1):
        t2 = a2 @ t1
        t2 -= t0
        acc += (2.0 * phase * jk[k]) * t2.view(np.complex128)
        phase *= -1j
        t0, t1 = t1, t2
    return np.exp(-1j * c * tau) * acc, kmax


def envelope(t, tau):
    return math.exp(-4.0 * LN2 * t * t / (tau * tau))


def schedule(t0, t_off, outs, h0, tau):
    pts = {t0, t_off}
    pts.update(t for t in outs if t0 < t < t_off)
    k = int(math.ceil(max(abs(t0), abs(t_off)) / (tau / 4.0))) + 1
    pts.update(q * tau / 4.0 for q in range(-k, k + 1) if t0 < q * tau / 4.0 < t_off)
    pts = sorted(pts)
    steps = []
    for a, b in zip(pts[:-1], pts[1:]):
        tm = 0.0 if a < 0.0 < b else (a if abs(a) < abs(b) else b)
        fmax = envelope(tm, tau)
        fac = CAP if fmax <= 0.0 else min(CAP, max(1.0, fmax ** (-0.2)))
        n = int(math.ceil((b - a) / (h0 * fac) - 1e-9))
        h = (b - a) / n
        steps.extend((a + i * h, h) for i in range(n))
    return steps


def propagate_sector(sec, case, h0, outs):
    """sum_k p_k <psi_k(t)| O |psi_k(t)> for the 12 observables at the output times (rows)."""
    psi = sec["psi0"].copy()
    p = sec["pop"]
    hs, v = sec["hs"], sec["v"]
    hlo, hhi = sec.get("hs_bounds") or spectral_bounds(hs)
    vlo, vhi = sec.get("v_bounds") or spectral_bounds(v)
    tau = case.get("tau_ps", 1.0)
    t0 = case["t0_ps"]
    t_off = case["t_off_ps"] if v is not None else t0
    res = {}
    nmv = 0
    edge = 0.0
    top = sec["jsec"] >= sec["jmax"] - 1

    def record(t, ps):
        nonlocal edge
        row = []
        for o in sec["obs"]:
            if o.nnz == 0:
                row.append(0.0)
                continue
            ex = np.einsum("ik,ik->k", ps.conj(), o @ ps)
            row.append(float(np.real(ex) @ p))
        res[t] = np.array(row)
        edge = max(edge, float((np.abs(ps[top]) ** 2).sum(axis=0) @ p))

    t_now = t0
    if v is not None:
        for (ta, h) in schedule(t0, t_off, outs, h0, tau):
            f1, f2 = envelope(ta + C1 * h, tau), envelope(ta + C2 * h, tau)
            for g in (2.0 * (A2 * f1 + A1 * f2), 2.0 * (A1 * f1 + A2 * f2)):
                if abs(g) * max(abs(vlo), abs(vhi)) < 1e-300:
                    mat, lo, hi = hs, hlo, hhi
                else:
                    mat = (hs + g * v).tocsr()
                    lo, hi = hlo + min(g * vlo, g * vhi), hhi + max(g * vlo, g * vhi)
                psi, k = cheb_expm(mat, lo, hi, psi, 0.5 * h)
                nmv += k
            t_now = ta + h
            for t in outs:
                if abs(t - t_now) < 1e-9 and t not in res:
                    record(t, psi)
    for t in outs:
        if t in res:
            continue
        if t > t_now + 1e-12:
            psi, k = cheb_expm(hs, hlo, hhi, psi, t - t_now)
            nmv += k
            t_now = t
        elif t < t_now - 1e-12:
            raise ValueError("output time before the propagation start")
        record(t, psi)
    norm_err = float(np.abs(np.einsum("ik,ik->k", psi.conj(), psi).real - 1.0).max())
    return np.array([res[t] for t in outs]), dict(matvecs=nmv, norm_err=norm_err, edge=edge)


# ----------------------------------------------------------------------------------------------
# Driver
# ----------------------------------------------------------------------------------------------
OBS_NAMES = ["cos_X", "cos_Y", "cos_Z"] + [f"cos2_{F}{g}" for F in "XYZ" for g in "abc"]

CASES = {
    "so2_tilted": dict(mol="SO2", E_kV_cm=50.0, a_s_deg=30.0, a_L_deg=0.0, I0_W_cm2=2e12, tau_ps=0.5,
                       centre_ps=0.0, t0_ps=-2.0, t_off_ps=2.0, times_ps=[-1.0, 0.0, 0.25, 0.5, 1.0, 2.0, 4.0, 8.0]),
    "so2_tilted_laser": dict(mol="SO2", E_kV_cm=50.0, a_s_deg=-40.0, a_L_deg=60.0, I0_W_cm2=2e12, tau_ps=0.5,
                             centre_ps=0.0, t0_ps=-2.0, t_off_ps=2.0,
                             times_ps=[-1.0, 0.0, 0.25, 0.5, 1.0, 2.0, 4.0, 8.0]),
    "so2_static_only": dict(mol="SO2", E_kV_cm=50.0, a_s_deg=30.0, a_L_deg=None, I0_W_cm2=None, times_ps=[0.0]),
    "ch3f_tilted": dict(mol="CH3F", E_kV_cm=30.0, a_s_deg=45.0, a_L_deg=0.0, I0_W_cm2=5e12, tau_ps=0.3,
                        centre_ps=0.0, t0_ps=-2.0, t_off_ps=2.0, times_ps=[-1.0, 0.0, 0.3, 1.0, 2.0, 5.0]),
}
MOLS = {"SO2": SO2, "CH3F": CH3F}
# production basis / step and the two convergence checks (one J_max up, half the step)
SETTINGS = {"SO2": dict(jmax=18, djmax=2, h0=0.01), "CH3F": dict(jmax=12, djmax=2, h0=0.01)}
QUICK = {"SO2": dict(jmax=10, djmax=2, h0=0.02), "CH3F": dict(jmax=8, djmax=2, h0=0.02)}

HERE = os.path.dirname(os.path.abspath(__file__))
OUT = os.path.normpath(os.path.join(HERE, "..", "..", "tests", "data", "reference_tilted_tops.json"))


def h0_checks(mol, ops):
    """Rigid-rotor H0 built from the direction cosines vs the closed forms (all J <= J_max, M = 0 and
    M = min(J, 2)); for SO2 also E(1_01) = B + C, E(1_11) = A + C, E(1_10) = A + B (from memory)."""
    worst = 0.0
    for j in range(ops.jmax + 1):
        for m in sorted({0, min(j, 2)}):
            sel = [idx(j, k, m) for k in range(-j, j + 1)]
            blk = ops.h0_cm[sel][:, sel].toarray()
            if mol.symmetric:
                ref = np.diag([sym_energy(mol, j, k) for k in range(-j, j + 1)])
            else:
                ref = h_rigid_closed(j, *mol.bxyz)
            worst = max(worst, float(np.abs(blk - ref).max()))
    out = dict(h0_vs_closed_form_cm=worst)
    if not mol.symmetric:
        sel = [idx(1, k, 0) for k in (-1, 0, 1)]
        e = np.linalg.eigvalsh(ops.h0_cm[sel][:, sel].toarray())
        A, B, C = mol.consts["a"], mol.consts["b"], mol.consts["c"]
        out["j1_levels_vs_textbook_cm"] = float(np.abs(e - np.array(sorted([B + C, A + C, A + B]))).max())
    # sum_g (F.g)^2 = 1 exactly in the truncated basis (so the isotropic alpha' part is a global phase)
    eye = sp.identity(ops.n, format="csr")
    out["sum_g_cos2_identity"] = max(spmax(sum(ops.quad[(F, F, g)] for g in range(3)) - eye) for F in range(3))
    out["sum_F_cos2_identity"] = max(spmax(sum(ops.quad[(F, F, g)] for F in range(3)) - eye) for g in range(3))
    out["body_j_offdiagonal_in_J"] = ops.offj
    return out


def run(sectors, case, h0, jmax):
    tot = 0.0
    info = dict(matvecs=0, norm_err=0.0, edge=0.0, cos_y_block=0.0)
    for s in sectors:
        s["jmax"] = jmax
        if "hs_bounds" not in s:
            s["hs_bounds"] = spectral_bounds(s["hs"])
            s["v_bounds"] = spectral_bounds(s["v"])
        o, d = propagate_sector(s, case, h0, case["times_ps"])
        tot = tot + o
        info["cos_y_block"] = max(info["cos_y_block"], float(np.abs(o[:, 1]).max()))
        info["matvecs"] += d["matvecs"]
        info["norm_err"] = max(info["norm_err"], d["norm_err"])
        info["edge"] += d["edge"]
    return tot, info


def static_obs(sectors):
    tot = 0.0
    for s in sectors:
        row = []
        for o in s["obs"]:
            ex = np.einsum("ik,ik->k", s["psi0"].conj(), o @ s["psi0"]) if o.nnz else np.zeros(s["pop"].size)
            row.append(float(np.real(ex) @ s["pop"]))
        tot = tot + np.array(row)
    return tot[None, :]


def sum_rule_error(obs):
    o = {n: obs[:, i] for i, n in enumerate(OBS_NAMES)}
    err = 0.0
    for g in "abc":
        err = max(err, float(np.abs(sum(o[f"cos2_{F}{g}"] for F in "XYZ") - 1.0).max()))
    for F in "XYZ":
        err = max(err, float(np.abs(sum(o[f"cos2_{F}{g}"] for g in "abc") - 1.0).max()))
    return err


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--quick", action="store_true", help="small basis, coarse step (testing only)")
    ap.add_argument("--out", default=OUT)
    args = ap.parse_args()
    t_start = time.time()
    log = lambda *a: print(f"[{time.time() - t_start:7.1f} s]", *a, flush=True)
    settings = QUICK if args.quick else SETTINGS

    conv = convention_checks(log)
    thermals = {}
    for name, mol in MOLS.items():
        th = thermal(mol)
        thermals[name] = th
        log(f"{name}: T = {mol.temp} K, kT = {th['kt']:.6f} cm^-1, Q = {th['q']:.12g}, kept {len(th['kept'])} levels "
            f"(E <= {th['e_cut']:.6f} cm^-1, J <= {th['jmax_pop']}), {th['n_states']} states with non-zero weight, "
            f"left out {th['discarded']:.3e}, Ka/Kc order mismatches {th['label_mismatch']}")

    # CFM4 order check (small SO2 problem, J_max = 8, case so2_tilted): errors vs a 2.5 fs reference
    mol = SO2
    ops8 = Operators(mol, 8)
    c0 = CASES["so2_tilted"]
    sec8, _, _ = build_case(mol, ops8, thermals["SO2"], c0, log)
    ref8, _ = run(sec8, c0, 0.0025, 8)
    order = {}
    for h in (0.04, 0.02, 0.01):
        o, _ = run(sec8, c0, h, 8)
        order[f"{h * 1e3:g}_fs"] = float(np.abs(o - ref8).max())
    log(f"CFM4 order check (J_max 8): max |error| vs 2.5 fs: {order}")

    result = dict(source="tools/reference/tilted_top_reference.py",
                  generated_with=f"python {sys.version.split()[0]}, numpy {np.__version__}, scipy {scipy.__version__}",
                  constants=dict(h_J_s=H_PLANCK, c_m_s=C_LIGHT, k_B_J_K=K_B, hbar_J_s=HBAR, debye_C_m=DEBYE,
                                 hc_J_per_cm1=HC_CM, cm1_in_rad_per_ps=CM1, MHz_per_cm1=MHZ_PER_CM),
                  conventions=CONVENTIONS, convention_checks=conv,
                  cfm4_order_check=dict(j_max=8, case="so2_tilted", reference_step_fs=2.5, max_abs_error=order),
                  cases={})
    ops_cache = {}

    def get_ops(mname, jmax):
        key = (mname, jmax)
        if key not in ops_cache:
            t = time.time()
            ops_cache[key] = Operators(MOLS[mname], jmax)
            log(f"{mname}: operators on J <= {jmax} ({ops_cache[key].n} states, products on J <= {jmax + 2}) "
                f"in {time.time() - t:.1f} s")
        return ops_cache[key]

    for cname, case in CASES.items():
        mname = case["mol"]
        mol = MOLS[mname]
        th = thermals[mname]
        st = settings[mname]
        jmax, dj, h0 = st["jmax"], st["djmax"], st["h0"]
        ops = get_ops(mname, jmax)
        hchk = h0_checks(mol, ops)
        secs, diag, checks = build_case(mol, ops, th, case, log)
        log(f"{cname}: {checks['n_states']} initial states in {len(secs)} blocks "
            f"({', '.join(str(s['name']) + ': ' + str(s['size']) + ' x ' + str(s['pop'].size) for s in secs)}); checks {checks}; "
            f"min ranking gap field-free {diag['min_gap_free']:.6g} cm^-1, dressed {diag['min_gap_dressed']:.6g} cm^-1")
        ops_b = get_ops(mname, jmax + dj)
        secs_b, diag_b, _ = build_case(mol, ops_b, th, case, log)
        static = case["I0_W_cm2"] is None
        if static:
            obs = static_obs(secs)
            obs_b = static_obs(secs_b)
            obs_h = obs
            info = info_b = info_h = dict(matvecs=0, norm_err=0.0, edge=float(sum(
                (np.abs(s["psi0"][s["jsec"] >= jmax - 1]) ** 2).sum(axis=0) @ s["pop"] for s in secs)))
        else:
            t = time.time()
            obs, info = run(secs, case, h0, jmax)
            log(f"{cname}: production J_max {jmax}, step {h0 * 1e3:g} fs: {time.time() - t:.1f} s, {info}")
            t = time.time()
            obs_b, info_b = run(secs_b, case, h0, jmax + dj)
            log(f"{cname}: J_max {jmax + dj}, step {h0 * 1e3:g} fs: {time.time() - t:.1f} s, {info_b}")
            t = time.time()
            obs_h, info_h = run(secs, case, 0.5 * h0, jmax)
            log(f"{cname}: J_max {jmax}, step {0.5 * h0 * 1e3:g} fs: {time.time() - t:.1f} s, {info_h}")
        dj_diff = np.abs(obs_b - obs).max(axis=0)
        dh_diff = np.abs(obs_h - obs).max(axis=0)
        sr = max(sum_rule_error(obs), sum_rule_error(obs_b), sum_rule_error(obs_h))
        cosy = float(np.abs(obs[:, 1]).max())
        log(f"{cname}: max |change| J_max {jmax}->{jmax + dj}: {dj_diff.max():.2e}; step halved: {dh_diff.max():.2e}; "
            f"sum rules {sr:.1e}; max |cos_Y| {cosy:.1e}")
        extra = {}
        if mname == "SO2" and not static:
            # the P reduction checked against a run without it (K-even block, every state separately)
            jq = settings["SO2"]["jmax"] - 8 if not args.quick else 8
            opsq = get_ops("SO2", jq)
            sq, _, _ = build_case(mol, opsq, th, case, log)
            sn, _, _ = build_case(mol, opsq, th, case, log, use_p=False)
            oq, _ = run(sq, case, 2 * h0, jq)
            on, info_n = run(sn, case, 2 * h0, jq)
            extra["no_P_reduction_check"] = dict(j_max=jq, step_fs=2e3 * h0,
                                                 max_abs_difference=float(np.abs(oq - on).max()),
                                                 max_abs_cos_Y_without_reduction=float(np.abs(on[:, 1]).max()),
                                                 max_abs_cos_Y_one_group=info_n["cos_y_block"],
                                                 sum_rule_max_error=sum_rule_error(on))
            log(f"{cname}: P-reduction check (J_max {jq}, {2e3 * h0:g} fs): {extra['no_P_reduction_check']}")
        if static:
            # rotation check: the same ensemble with the field along Z (a_s = 0, symmetric about Z:
            # <cos_X> = 0, <cos2_Xg> = <cos2_Yg>) rotated by a_s about Y must give the tilted values:
            # <X.d> = sin a <Z.d>_0, <Z.d> = cos a <Z.d>_0, <(X.g)^2> = cos^2 a <(X.g)^2>_0 + sin^2 a <(Z.g)^2>_0,
            # <(Z.g)^2> = sin^2 a <(X.g)^2>_0 + cos^2 a <(Z.g)^2>_0, <(Y.g)^2> = <(Y.g)^2>_0
            s0, _, _ = build_case(mol, ops, th, dict(case, a_s_deg=0.0), log)
            o0 = dict(zip(OBS_NAMES, static_obs(s0)[0]))
            a = math.radians(case["a_s_deg"])
            ca, sa = math.cos(a), math.sin(a)
            pred = {"cos_X": sa * o0["cos_Z"], "cos_Y": 0.0, "cos_Z": ca * o0["cos_Z"]}
            for g in "abc":
                pred[f"cos2_X{g}"] = ca * ca * o0[f"cos2_X{g}"] + sa * sa * o0[f"cos2_Z{g}"]
                pred[f"cos2_Y{g}"] = o0[f"cos2_Y{g}"]
                pred[f"cos2_Z{g}"] = sa * sa * o0[f"cos2_X{g}"] + ca * ca * o0[f"cos2_Z{g}"]
            sym0 = max(abs(o0["cos_X"]), abs(o0["cos_Y"]), *(abs(o0[f"cos2_X{g}"] - o0[f"cos2_Y{g}"]) for g in "abc"))
            extra["rotation_check_vs_field_along_Z"] = dict(
                max_abs_difference=float(max(abs(pred[n] - obs[0, i]) for i, n in enumerate(OBS_NAMES))),
                symmetry_about_Z_at_a_s_0=float(sym0))
            log(f"{cname}: rotation check vs a_s = 0: {extra['rotation_check_vs_field_along_Z']}")
        if mname == "CH3F" and not static:
            # each K block alone has <cos_Y> != 0; the K and -K blocks (P images) cancel
            extra["max_abs_cos_Y_single_K_block"] = info["cos_y_block"]
        times = case["times_ps"]
        entry = dict(parameters=case_parameters(mol, case, th),
                     j_max=jmax, step_fs=(None if static else h0 * 1e3),
                     convergence=dict(
                         j_max_check=jmax + dj,
                         max_abs_change_j_max=dict(zip(OBS_NAMES, map(float, dj_diff))),
                         step_check_fs=(None if static else 0.5 * h0 * 1e3),
                         max_abs_change_step=(None if static else dict(zip(OBS_NAMES, map(float, dh_diff)))),
                         population_in_two_highest_J=info["edge"],
                         population_in_two_highest_J_check_basis=info_b["edge"],
                         norm_error=max(info["norm_err"], info_b["norm_err"], info_h["norm_err"]),
                         chebyshev_matvecs=info["matvecs"],
                         values_reported="production run (j_max, step_fs); the two checks differ by the figures above"),
                     times_ps=times)
        for i, n in enumerate(OBS_NAMES):
            entry[n] = [float(x) for x in obs[:, i]]
        entry.update(thermal_states=th["n_states"], discarded_population=th["discarded"],
                     sum_rule_max_error=sr, commutator_norm=checks["commutator_norm_cm"],
                     commutator_norm_units="cm^-1 (Frobenius norm of [H_static, rho_0], lab frame, J <= j_max)",
                     smallest_ranking_gap_cm=diag["min_gap_free"],
                     smallest_ranking_gap_dressed_cm=diag["min_gap_dressed"],
                     ranking_classes=diag["classes"],
                     checks=dict(checks, **hchk, P_f_commutator_M0=diag["pf_comm"],
                                 field_free_M0_levels_P_eigen_error=diag["p_eig_err"],
                                 max_abs_cos_Y=cosy, **extra))
        result["cases"][cname] = entry
    result["runtime_s"] = time.time() - t_start
    with open(args.out, "w") as fh:
        json.dump(result, fh, indent=1)
    log(f"wrote {args.out}")


def case_parameters(mol, case, th):
    A, B, C = mol.consts["a"], mol.consts["b"], mol.consts["c"]
    par = dict(molecule=mol.name, A_cm=A, B_cm=B, C_cm=C,
               alpha_a_A3=mol.alpha["a"], alpha_b_A3=mol.alpha["b"], alpha_c_A3=mol.alpha["c"],
               mu_D=mol.mu, dipole_axis=mol.dipole_axis(), temperature_K=mol.temp,
               body_frame="x, y, z = " + ", ".join(mol.label_of[i] for i in range(3)),
               E_static_kV_cm=case["E_kV_cm"], static_angle_deg=case["a_s_deg"],
               mu_E_cm=mu_e_cm(mol.mu, case["E_kV_cm"]),
               kT_cm=th["kt"], partition_function=th["q"], kept_levels=len(th["kept"]),
               kept_levels_max_energy_cm=th["e_cut"], kept_levels_max_J=th["jmax_pop"])
    if mol.symmetric:
        par.update(B_MHz=B * MHZ_PER_CM, D_J_cm=mol.dj, D_JK_cm=mol.djk, D_J_kHz=mol.dj * MHZ_PER_CM * 1e3,
                   D_JK_kHz=mol.djk * MHZ_PER_CM * 1e3, D_K_cm=0.0,
                   spin_weights="per primitive |J K M> (K signed): 2 if |K| mod 3 = 0, else 1")
    else:
        par.update(spin_weights="(Ka, Kc) parities: ee 1, eo 0, oe 0, oo 1")
    if case.get("I0_W_cm2"):
        u0 = u0_per_a3(case["I0_W_cm2"])
        par.update(laser_angle_deg=case["a_L_deg"], I0_W_cm2=case["I0_W_cm2"], fwhm_ps=case["tau_ps"],
                   pulse_centre_ps=case["centre_ps"], envelope="I0 exp(-4 ln2 t^2 / fwhm^2)",
                   t0_ps=case["t0_ps"], laser_neglected_after_ps=case["t_off_ps"],
                   u0_rad_per_ps_per_A3=u0, hbar_u0_cm_per_A3=u0 / CM1)
    else:
        par.update(laser="none")
    return par


CONVENTIONS = dict(
    lab_frame="X, Y, Z; laser propagates along Y; e_s = (sin a_s, 0, cos a_s), e_L = (sin a_L, 0, cos a_L)",
    euler_angles="z-y-z (phi, theta, chi), R = R_z(phi) R_y(theta) R_z(chi) takes body axes to lab axes, "
                 "direction cosine F.g = R_Fg",
    wavefunctions="psi_JKM = sqrt((2J+1)/8pi^2) D^J_MK(phi,theta,chi)^*, D^J_MK = e^{-iM phi} d^J_MK(theta) e^{-iK chi}, "
                  "d^J(b) = exp(-i b J_y) (Condon-Shortley); J_Z = M, body J_z = K",
    body_frame="z = dipole axis; SO2 (x,y,z) = (c,a,b), CH3F (x,y,z) = (b,c,a)",
    direction_cosines="F.g = sum_pq (e_p)_F (e_q)^*_g D^1_pq, <J'K'M'|D^1_pq|JKM> = sqrt((2J'+1)(2J+1)) (-1)^(M-K) "
                      "(J' 1 J; M' p -M)(J' 1 J; K' q -K)",
    quadratic_operators="products of direction cosines formed on J <= j_max + 2, truncated to J <= j_max",
    H0="sum_g B_g J_g^2 with J_g = sum_F (F.g) J_F; CH3F: - D_J J^2(J+1)^2 - D_JK J(J+1)K^2",
    laser_term="-hbar u(t) sum_g (alpha'_g - alpha'_min)(e_L.g)^2 (the alpha'_min part is a global phase)",
    KaKc="parities of Ka, Kc = eigenvalues of C2(a), C2(c) (exp(-i pi J_g)); values by tau order within each "
         "D2 class of a J; cross-checked against the global tau order",
    reflection="P|J K M> = (-1)^M |J,-K,-M>: lab reflection Y -> -Y combined with the body reflection x -> -x",
    initial_state="n-th lowest field-free level of a field-frame class -> n-th lowest eigenstate of H0 - mu E cos(z_f,d); "
                  "classes SO2: (M_f, C2(b)=+1) and (0, C2(b)=+1, P=+-1); CH3F: (M_f, K signed); "
                  "rotated to the lab by exp(-i a_s J_Y)",
    propagation="4th-order commutator-free Magnus (2 Gauss nodes) with Chebyshev exponentials, from t0; "
                "H_s only after t_off (laser < 1e-19 I0)",
)


if __name__ == "__main__":
    main()
