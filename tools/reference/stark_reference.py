#!/usr/bin/env python3
"""
Independent second-order Stark shifts of asymmetric-top levels, for the tests of
the oriented-top path (asymmetric tops in a static field along Z).

Usage
    python3 tools/reference/stark_reference.py
Writes tests/data/stark_second_order.csv (relative to the repository root).

What is computed
    For a rigid asymmetric top with the dipole along one principal axis g (a, b
    or c) in a static field E along lab Z, H = H0 - mu E Phi_Zg. To second order
    in mu E, a level |J tau M> (no first-order shift: the levels of one J and M
    of an asymmetric top are not degenerate) moves by

        dE = (mu E)^2 sum_{J' tau'} (J 1 J'; -M 0 M)^2 S_g(J tau; J' tau') / (E_{J tau} - E_{J' tau'})

    with the line strength S_g(J tau; J' tau') = sum over M, M' and lab F of
    |<J tau M|Phi_Fg|J' tau' M'>|^2 (S. Golden and E. B. Wilson, "The Stark
    effect for a polyatomic molecule", J. Chem. Phys. 16, 669 (1948); the
    line-strength form as in C. H. Townes and A. L. Schawlow, "Microwave
    Spectroscopy" (1955), ch. 10; from memory). The sum runs over J' = J - 1,
    J, J + 1 only, so a basis up to J_max + 1 gives the exact coefficient.
    The line strengths are obtained from the Z-component matrix elements by the
    Wigner-Eckart theorem, S = |<J tau M|Phi_Zg|J' tau' M>|^2 / (J 1 J'; -M 0 M)^2,
    and that this ratio is the same for every M is asserted (it checks the
    matrix elements); the 3j symbols come from sympy (a general-purpose library).

Basis and matrix elements (nothing shared with the Rust code)
    |J K M> = sqrt((2J+1)/8pi^2) D^J_{MK}(phi, theta, chi)^*, quantization axis
    z = a (representation I^r: x = b, y = c); H0 as in W. Gordy and R. L. Cook,
    "Microwave Molecular Spectra", ch. 7 (built by rotor_reference.top_h0_cm).
    Direction cosines (R. N. Zare, "Angular Momentum", Table 3.1):
    Phi_Za = cos(theta), Phi_Zb = -sin(theta) cos(chi), Phi_Zc = sin(theta) sin(chi).
    theta integrals by Gauss-Legendre quadrature of Wigner small-d functions
    (rotor_reference.wigner_small_d), phi and chi integrals analytically:
    int e^{i(K-K')chi} cos(chi) dchi = pi for |K - K'| = 1, and
    int e^{i(K-K')chi} sin(chi) dchi = -i pi (K' = K + 1), +i pi (K' = K - 1).

Checks (asserted)
    * a prolate symmetric top (B = C) with the dipole along a: the K = 0
      levels shift by (mu E)^2 [J(J+1) - 3M^2] / (2 B J(J+1)(2J-1)(2J+3)), and
      J = 0 by -(mu E)^2 / (6B), the closed form of a linear rotor (Townes and
      Schawlow, eq. 10-9; from memory);
    * the Wigner-Eckart ratio above is M-independent to 1e-10;
    * the sum over g of Phi_Zg^2 is the identity inside the basis interior.

Output columns
    case, dipole_axis, a_cm, b_cm, c_cm, m, j, energy_cm (field-free level),
    coefficient_per_cm (dE / (mu E)^2 with energies and mu E in cm^-1).
"""

import csv
import math
import os
import sys

import numpy as np
from sympy.physics.wigner import wigner_3j

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from rotor_reference import gauss_legendre, top_h0_cm, wigner_small_d  # noqa: E402

J_LEVEL_MAX = 3
J_BASIS = J_LEVEL_MAX + 1
NQ = 24

CASES = [
    # name, (A, B, C) cm^-1, dipole axis
    ("so2_like_b", (2.0274, 0.3442, 0.2935), "b"),
    ("near_prolate_a", (0.19, 0.052, 0.041), "a"),
    ("oblate_like_c", (0.30, 0.25, 0.14), "c"),
    ("prolate_symmetric_a", (2.5, 0.3, 0.3), "a"),
]


def basis_for(m):
    return [(j, k) for j in range(abs(m), J_BASIS + 1) for k in range(-j, j + 1)]


def direction_cosine(basis, m, axis):
    """<J' K' M|Phi_Zg|J K M> (complex Hermitian) by quadrature."""
    x, w = gauss_legendre(NQ)
    n = len(basis)
    d = np.empty((n, NQ))
    for i, (j, k) in enumerate(basis):
        d[i] = wigner_small_d(j, NQ)[:, m + j, k + j]
    js = np.array([b[0] for b in basis])
    ks = np.array([b[1] for b in basis])
    norm = np.sqrt(np.outer(2 * js + 1, 2 * js + 1))
    # (1/8pi^2) * 2pi from phi; the chi integral below.
    if axis == "a":
        g = (d * (w * x)) @ d.T
        return (norm * g * (ks[:, None] == ks[None, :]) * 2 * math.pi / (4 * math.pi)).astype(complex)
    g = (d * (w * np.sqrt(1.0 - x * x))) @ d.T
    kp = ks[:, None]  # row: K'
    k = ks[None, :]   # column: K
    if axis == "b":
        chi = np.where(np.abs(kp - k) == 1, math.pi, 0.0)
        return -(norm * g * chi / (4 * math.pi)).astype(complex)
    chi = np.where(kp == k + 1, -1j * math.pi, 0.0) + np.where(kp == k - 1, 1j * math.pi, 0.0)
    return norm * g * chi / (4 * math.pi)


def levels(a, b, c, m, axis):
    """Field-free levels (J, energy, eigenvector) of block M and Phi_Zg in the full basis."""
    basis = basis_for(m)
    h = top_h0_cm(basis, a, b, c)
    phi = direction_cosine(basis, m, axis)
    assert np.allclose(phi, phi.conj().T, atol=1e-12)
    out = []
    for j in range(abs(m), J_BASIS + 1):
        idx = [i for i, (jj, _) in enumerate(basis) if jj == j]
        e, v = np.linalg.eigh(h[np.ix_(idx, idx)])
        for n in range(len(idx)):
            vec = np.zeros(len(basis))
            vec[idx] = v[:, n]
            out.append((j, e[n], vec))
    return out, phi


def check_sum_rule(m):
    basis = basis_for(m)
    total = sum(direction_cosine(basis, m, g) @ direction_cosine(basis, m, g) for g in "abc")
    inner = [i for i, (j, _) in enumerate(basis) if j < J_BASIS]
    err = np.max(np.abs(total[np.ix_(inner, inner)] - np.eye(len(inner))))
    assert err < 1e-10, f"sum of Phi_Zg^2 differs from 1 by {err}"


def three_j_sq(j, jp, m):
    return float(wigner_3j(j, 1, jp, -m, 0, m)) ** 2


def coefficients(a, b, c, axis):
    """[(M, J, energy, coefficient)] for the levels with J <= J_LEVEL_MAX that are not degenerate within
    their block (degenerate ones, such as +-K of a symmetric top, shift to first order and are left out)."""
    per_m = {m: levels(a, b, c, m, axis) for m in range(0, J_BASIS + 1)}

    def degenerate(lv, n):
        return any(i != n and lv[i][0] == lv[n][0] and abs(lv[i][1] - lv[n][1]) < 1e-9 for i in range(len(lv)))

    # Line strengths from the Z components, summed over each degenerate group of final levels
    # (a sum that does not depend on the basis chosen inside the group); checked to agree across M.
    strengths = {}
    for m, (lv, phi) in per_m.items():
        groups = {}
        for n, (j, e, v) in enumerate(lv):
            if degenerate(lv, n):
                continue
            for (jp, ep, vp) in lv:
                tj = three_j_sq(j, jp, m)
                amp2 = abs(vp.conj() @ phi @ v) ** 2
                if tj == 0.0:
                    assert amp2 < 1e-20, (j, jp, m, amp2)
                    continue
                key = (j, round(e, 9), jp, round(ep, 9))
                groups[key] = (groups.get(key, (0.0, ep))[0] + amp2 / tj, ep)
        for key, (val, ep) in groups.items():
            if key in strengths:
                assert abs(strengths[key][0] - val) < 1e-10 * max(1.0, val), (key, strengths[key], val)
            else:
                strengths[key] = (val, ep)
    out = []
    for m in range(0, J_LEVEL_MAX + 1):
        lv, phi = per_m[m]
        for n, (j, e, v) in enumerate(lv):
            if j > J_LEVEL_MAX or degenerate(lv, n):
                continue
            # The line-strength form, and the plain sum over the states of this M as a check.
            by_strength = sum(three_j_sq(j, jp, m) * sv / (e - ep) for (jj, ee, jp, _), (sv, ep) in strengths.items()
                              if jj == j and ee == round(e, 9) and abs(ep - e) > 1e-9)
            direct = sum(abs(vp.conj() @ phi @ v) ** 2 / (e - ep) for (jp, ep, vp) in lv if abs(ep - e) > 1e-9)
            assert abs(by_strength - direct) < 1e-9 * max(1.0, abs(direct)), (m, j, e, by_strength, direct)
            out.append((m, j, e, by_strength))
    return out


def main():
    for m in range(0, 3):
        check_sum_rule(m)
    rows = []
    for name, (a, b, c), axis in CASES:
        for (m, j, e, coef) in coefficients(a, b, c, axis):
            rows.append((name, axis, a, b, c, m, j, e, coef))
    # Closed-form check: K = 0 levels of the prolate symmetric top (energy B J(J+1)).
    bb = 0.3
    for (name, _, a, b, c, m, j, e, coef) in rows:
        if name != "prolate_symmetric_a" or abs(e - bb * j * (j + 1)) > 1e-9:
            continue
        want = -1.0 / (6 * bb) if j == 0 else (j * (j + 1) - 3 * m * m) / (2 * bb * j * (j + 1) * (2 * j - 1) * (2 * j + 3))
        assert abs(coef - want) < 1e-9, (j, m, coef, want)
    root = os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "..")
    path = os.path.join(root, "tests", "data", "stark_second_order.csv")
    with open(path, "w", newline="") as f:
        f.write("# Second-order Stark coefficients dE/(mu E)^2 (cm^-1 units) of rigid tops, dipole along one axis,\n")
        f.write("# field along Z; written by tools/reference/stark_reference.py (line-strength form, own basis).\n")
        wr = csv.writer(f)
        wr.writerow(["case", "dipole_axis", "a_cm", "b_cm", "c_cm", "m", "j", "energy_cm", "coefficient_per_cm"])
        for r in rows:
            wr.writerow([r[0], r[1], r[2], r[3], r[4], r[5], r[6], f"{r[7]:.12f}", f"{r[8]:.12e}"])
    print(f"wrote {path}: {len(rows)} levels")


if __name__ == "__main__":
    main()
