#!/usr/bin/env python3
"""
Timing companion of rotor_reference.py: the thermal trace of its case
n2like_300k_2d, computed the plain way a numpy/scipy user would write it, with
the wall time printed. benches/solver.rs (job 1, KICKTRAIN_BENCH_PEER=1) runs it
to report the speed ratio "our numpy/scipy reference / kicktrain".

Usage
    python3 tools/reference/peer_timing.py [--no-check]

What it does (one process, no parallelism)
    N2-like linear rotor: B = 1.98958 cm^-1, D = 5.76e-6 cm^-1, alpha_par = 1.93,
    alpha_perp = 1.0 A^3, nuclear-spin weights even:odd J = 2:1, 300 K; one
    Gaussian pulse at t = 0, intensity FWHM 50 fs, peak 5e13 W/cm^2, polarized
    along Z; <cos^2 theta> and <cos^2 theta_2D> (detector plane YZ) at
    t = 0.2 + 0.02 i ps, i = 0..589.
    * Thermal ensemble: Boltzmann populations of every |J M> with its spin
      weight, summed directly; levels are kept in order of energy until the
      left-out population is below 1e-9, then renormalized.
    * Basis: for each (M, parity of J), J up to the highest kept J + 20 (the kick
      strength is about 4.9, which reaches about 2 x 4.9 + 8 levels further).
      Matrix elements of cos^2 theta and cos^2 theta_2D come from the quadrature
      functions of rotor_reference.py (its own spherical harmonics and 2D rule).
    * Propagation: one scipy solve_ivp (DOP853, rtol 1e-10, atol 1e-12) per
      initial state |J0 M0> with M0 >= 0 (M0 > 0 counted twice, the -M0 state
      gives the same trace), in the interaction picture over t0 +- 4 FWHM;
      after the pulse the field-free phases are applied exactly, and
      <psi(t)|O|psi(t)> is formed at every sample time.
    * All of it is timed: ensemble, matrices, propagation and traces (the Python
      start-up and the imports are not; the benchmark times the whole process).
    * Check (unless --no-check): the trace must agree with the stored reference
      tests/data/reference_n2like_300k_2d.csv to 1e-5 (exit status 1 otherwise);
      the maximum differences are printed.

This is deliberately not the efficient route of rotor_reference.py (all initial
states of a block propagated together as columns); it is the straightforward
per-state loop, so the timing reflects a plain scipy implementation.

Last runs (2-core AMD EPYC machine shared with other jobs, load average about
2): 2209 initial states (J <= 46), 1128 solve_ivp runs, 13.9 and 15.7 s wall
(plus about 1 s of Python start-up and imports); agreement with the stored
reference 1.6e-10 (cos2) and 1.2e-10 (cos2_2d).
"""

import math
import os
import sys
import time

for _var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))

import numpy as np  # noqa: E402
from scipy.integrate import solve_ivp  # noqa: E402

import rotor_reference as ref  # noqa: E402

B_CM, D_CM = 1.98958, 5.76e-6
ALPHA_PAR, ALPHA_PERP = 1.93, 1.0
SPIN_WEIGHTS = (2.0, 1.0)          # even J, odd J
TEMPERATURE_K = 300.0
T0_PS, FWHM_PS, PEAK_WCM2 = 0.0, 0.050, 5e13
TIMES = 0.2 + 0.02 * np.arange(590)
LEFT_OUT = 1e-9
MARGIN = 20
RTOL, ATOL = 1e-10, 1e-12
CHECK_LIMIT = 1e-5
REFERENCE_CSV = os.path.join(ref.DATA_DIR, "reference_n2like_300k_2d.csv")


def energy_cm(j):
    x = j * (j + 1.0)
    return B_CM * x - D_CM * x * x


def ensemble():
    """{J: population of each |J M>}, normalized over the kept levels."""
    kt = ref.kt_cm(TEMPERATURE_K)
    pop = []
    j = 0
    while True:
        p = SPIN_WEIGHTS[j % 2] * (2 * j + 1) * math.exp(-energy_cm(j) / kt)
        pop.append(p)
        if j > 10 and p < 1e-30 * sum(pop):
            break
        j += 1
    level = np.array(pop) / sum(pop)
    kept, total = {}, 0.0
    for j in np.argsort([energy_cm(j) for j in range(len(level))]):
        kept[int(j)] = level[j]
        total += level[j]
        if 1.0 - total < LEFT_OUT:
            break
    return {j: p / total / (2 * j + 1) for j, p in kept.items()}


def trace():
    per_state = ensemble()
    jkeep = max(per_state)
    tau = FWHM_PS
    f0 = ref.coupling_rad_per_ps_per_a3(PEAK_WCM2) * (ALPHA_PAR - ALPHA_PERP)
    four_ln2 = 4.0 * math.log(2.0)
    ts, te = T0_PS - 4 * tau, T0_PS + 4 * tau
    out = np.zeros((2, len(TIMES)))
    nsolve = 0
    for par in (0, 1):
        for m in range(0, jkeep + 1):
            init = [j for j in sorted(per_state) if j % 2 == par and j >= m]
            if not init:
                continue
            jmin = m + ((m + par) % 2)
            js = list(range(jmin, jkeep + MARGIN + 1, 2))
            nq = ref.n_nodes_for(js[-1])
            cos2 = ref.legendre_cos2_matrix(js, m, nq)
            cos2d = ref.cos2_2d_block_matrix(js, m, nq)
            w = cos2 - np.eye(len(js)) / 3.0          # isotropic part: global phase only
            e = np.array([energy_cm(j) for j in js]) * ref.CM_TO_RAD_PER_PS
            e -= e.min()

            def rhs(t, c):
                ph = np.exp(1j * e * t)
                f = f0 * math.exp(-four_ln2 * (t - T0_PS) ** 2 / tau ** 2)
                return 1j * f * ph * (w @ (ph.conj() * c))

            phases = np.exp(-1j * np.outer(e, TIMES))     # [state, time]
            for j0 in init:
                c0 = np.zeros(len(js), dtype=complex)
                c0[js.index(j0)] = 1.0
                sol = solve_ivp(rhs, (ts, te), c0, method="DOP853", rtol=RTOL, atol=ATOL)
                assert sol.success, sol.message
                nsolve += 1
                # Schroedinger amplitudes exp(-i e te) c_I(te); the field-free
                # evolution after te is exact: psi(t) = exp(-i e t) c_I(te)
                psi = phases * sol.y[:, -1][:, None]
                weight = per_state[j0] * (2 if m > 0 else 1)
                for io, o in enumerate((cos2, cos2d)):
                    out[io] += weight * np.real(np.sum(psi.conj() * (o @ psi), axis=0))
    return out, nsolve, sum((2 * j + 1) for j in per_state), jkeep


def main():
    check = "--no-check" not in sys.argv[1:]
    t_start = time.perf_counter()
    out, nsolve, nstates, jkeep = trace()
    wall = time.perf_counter() - t_start
    print(f"N2-like 300 K, 50 fs at 5e13 W/cm^2, 590 samples: {nstates} initial states (J <= {jkeep}), "
          f"{nsolve} solve_ivp runs")
    print(f"wall_s = {wall:.2f}")
    if check:
        rows = [line for line in open(REFERENCE_CSV) if not line.startswith("#")][1:]
        data = np.array([[float(x) for x in line.split(",")] for line in rows])
        assert np.max(np.abs(data[:, 0] - TIMES)) < 1e-9
        d1 = float(np.max(np.abs(out[0] - data[:, 1])))
        d2 = float(np.max(np.abs(out[1] - data[:, 2])))
        print(f"max |difference| from {os.path.relpath(REFERENCE_CSV, ref.REPO_ROOT)}: "
              f"cos2 {d1:.1e}, cos2_2d {d2:.1e} (limit {CHECK_LIMIT:g})")
        if not (d1 < CHECK_LIMIT and d2 < CHECK_LIMIT):
            sys.exit(1)


if __name__ == "__main__":
    main()
