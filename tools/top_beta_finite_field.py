#!/usr/bin/env python3
"""
Static electronic first hyperpolarizability components beta_zzz, beta_zbb,
beta_zcc of the polar asymmetric tops benzonitrile (C6H5CN) and iodobenzene
(C6H5I) of src/molecule/top_library.rs, by finite differences of the SCF
dipole moment, at the level, geometry and frame of their stored
polarizabilities (tools/polar_top_constants.py). Discussion and results:
tools/top_beta_finite_field.md.

Not part of the build or the tests. Needs the same packages as
tools/polar_top_constants.py, whose geometry, basis and frame code it imports:
    python3 -m venv /tmp/qc
    /tmp/qc/bin/pip install pyscf pyscf-properties geometric basis-set-exchange
    /tmp/qc/bin/python tools/top_beta_finite_field.py --only benzonitrile --no-check
    /tmp/qc/bin/python tools/top_beta_finite_field.py --only iodobenzene --no-check --h 0.001,0.002
    /tmp/qc/bin/python tools/top_beta_finite_field.py --only          # the checks only
  (no option: both molecules with steps 0.001, 0.002, 0.004, then the checks.)
Run time (PySCF 2.14.0, two cores shared with other jobs, so roughly one
core): one CAM-B3LYP SCF of benzonitrile (229 basis functions) takes
1-4 min (25-35 cycles at the convergence below); benzonitrile with three steps
(14 SCF) took about 40 min, iodobenzene with two steps (11 SCF) about
30 min; the checks (water, OCS, N2O) about 12 min. Add about 5 min per
molecule for the B3LYP/def2-SVP geometry when /tmp/polar_top_cache has none.
Energies, dipoles (JSON) and densities (.npy) are cached in --cache (default
/tmp/top_beta_cache), so an interrupted run resumes and a rerun only prints.

Method
  * Geometry: B3LYP/def2-SVP optimum of tools/polar_top_constants.py, read
    from its cache /tmp/polar_top_cache, or re-optimized by its run() (same
    start, optimizer and settings) when the cache is missing. The optimized
    geometry is C2v only to about 1e-4 A (mu_b ~ 1e-4 a.u.), which is why
    the b fields are run with both signs.
  * Electronic structure: CAM-B3LYP, aug-cc-pVDZ on H, C, N and
    aug-cc-pVDZ-PP with its 28-electron pseudopotential on I, density fitting
    with def2-universal-jkfit, PySCF's default DFT grid (level 3): the level
    of the stored polarizabilities. SCF convergence: conv_tol 1e-11 Hartree
    and conv_tol_grad 1e-9 (dipole noise about 1e-9 a.u.).
  * Field: uniform static field F added to the one-electron Hamiltonian as
    h -> h + F . r (electrons have charge -1, so H = H0 - mu_op . F); the
    nuclear term -F . sum_A Z_A R_A is added to the energy (it only enters
    mu). Origin: centre of mass (coordinates are in the principal frame).
    Every field point starts from the zero-field density plus the linear
    response of the nearest cached point on the same axis (speed only).
  * Stencils (field step h along axis j, mu = SCF dipole in a.u., z = a):
        beta_zjj(h)  = [mu_z(+h e_j) - 2 mu_z(0) + mu_z(-h e_j)] / h^2     O(h^2)
        alpha_jj(h)  = [mu_j(+h e_j) - mu_j(-h e_j)] / (2 h)              O(h^2)
        Richardson:  X_R(h) = [4 X(h) - X(2h)] / 3                          O(h^4)
    The value quoted is R at the smallest step; its error estimate is
    |R(h) - R(2h)| when three steps ran, else the Richardson shift
    |R(h) - X(h)|.
    For j = c (normal to the molecular plane, which holds to 1e-14 A) the
    plane's mirror symmetry makes mu_z even and mu_c odd in F_c, so only +F_c
    runs and mu(-F_c) is taken from it.
    Independent stencil from the same runs: beta_zzz from the energies,
        -[E(2h) - 2E(h) + 2E(-h) - E(-2h)] / (2h^3).
  * Frame: principal inertia axes a, b, c of polar_top_constants.py (the
    most abundant isotopes; a the C2 axis, b in plane, c out of plane), with
    +a from the centre of mass towards the substituent head atom (N, I) as
    there. The results are given with +z along the computed dipole mu0, i.e.
    from the negative towards the positive end of the charge distribution:
    beta_zjj = sign(mu_a) * beta_ajj (odd in z, even in b and c). For both
    molecules mu_a < 0: +z points from the head atom (N, I) into the ring.
  * Convention: Taylor series, atomic units,
        mu(F) = mu0 + alpha F + 1/2 beta F F + ...,
        E(F)  = E0 - mu0 F - 1/2 alpha F F - 1/6 beta F F F - ...
    beta_par = (1/5) sum_j (beta_zjj + beta_jzj + beta_jjz)
             = (3/5) (beta_zzz + beta_zbb + beta_zcc) for the static tensor.

Checks (skipped with --no-check; each on water, z along its C2
axis with +z along the dipole, from O towards the H atoms, molecule in the
xz plane; test geometry r(OH) 0.9572 A, HOH 104.52 deg):
  1. RHF/aug-cc-pVDZ (density fitting, the same field code and stencils):
     finite-field mu, alpha, beta_zzz, beta_zxx, beta_zyy against PySCF's
     analytic coupled-perturbed HF values (pyscf.prop.polarizability.rhf),
     and the energy stencil for beta_zzz: stencil, sign and convention check.
  2. CAM-B3LYP/aug-cc-pVDZ, grid level 4: beta_zzz and beta_zxx from the
     dipole stencils against the energy stencils -d3E/dF_z^3 and
     -d3E/dF_z dF_x^2 (the analytic module lacks the XC kernel derivative
     needed for a DFT beta, so there is no analytic DFT value).
  3. CAM-B3LYP water beta on grid levels 3 and 4 (grid sensitivity).
  4. CAM-B3LYP/aug-cc-pVDZ beta of OCS and N2O (geometries and frames of
     tools/beta_finite_field.py) against the project's CCSD(T)/aug-cc-pVDZ
     values quoted in tools/beta_finite_field.md: calibrates the functional.
"""
import argparse
import json
import os
import sys
import time
import warnings

import numpy as np

warnings.filterwarnings("ignore")

import pyscf  # noqa: E402
from pyscf import dft, gto, lib, scf  # noqa: E402

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import polar_top_constants as ptc  # noqa: E402  (geometry, basis, frame)

HS = (0.001, 0.002, 0.004)
BOHR3_TO_A3 = ptc.BOHR3_TO_A3
AU_TO_DEBYE = 2.541746473
# stored CAM-B3LYP/aug-cc-pVDZ(-PP) values of polar_top_constants.md
STORED = {
    "benzonitrile": {"alpha_A3": (18.18, 12.90, 7.49), "mu_D": 4.765},
    "iodobenzene": {"alpha_A3": (21.78, 15.15, 10.00), "mu_D": 1.736},
}


# ---------------------------------------------------------------- SCF in a field
class FieldSCF:
    """SCF of one molecule in a uniform field; results cached by field key."""

    def __init__(self, mol, xc, cache_path=None, grid_level=3, density_fit=True):
        self.mol = mol
        self.xc = xc
        self.grid_level = grid_level
        self.density_fit = density_fit
        mol.set_common_orig(np.zeros(3))
        self.rints = mol.intor_symmetric("int1e_r", comp=3)
        self.nuc_dip = np.einsum("i,ix->x", mol.atom_charges(), mol.atom_coords())
        self.hcore0 = None
        self.dm0 = None
        self.mf0 = None
        self.cache_path = cache_path
        self.store = {}
        if cache_path and os.path.exists(cache_path):
            self.store = json.load(open(cache_path))

    def make_mf(self, field):
        if self.xc.lower() == "hf":
            mf = scf.RHF(self.mol)
        else:
            mf = dft.RKS(self.mol, xc=self.xc)
            mf.grids.level = self.grid_level
        if self.density_fit:
            mf = mf.density_fit(auxbasis="def2-universal-jkfit")
        if self.hcore0 is None:
            self.hcore0 = mf.get_hcore()
        h1 = self.hcore0 + np.einsum("x,xij->ij", field, self.rints)
        mf.get_hcore = lambda *a, **k: h1
        e_nuc = self.mol.energy_nuc() - float(np.dot(field, self.nuc_dip))
        mf.energy_nuc = lambda *a, **k: e_nuc
        mf.conv_tol = 1e-11  # absolute (Hartree); 1e-14 is below double precision for E ~ -300
        mf.conv_tol_grad = 1e-9
        mf.max_cycle = 200
        mf.verbose = 0
        return mf

    @staticmethod
    def key(field):
        return "%+.6f,%+.6f,%+.6f" % tuple(field)

    def _dm_path(self, k):
        return self.cache_path[:-5] + "_dm_" + k.replace(",", "_") + ".npy" if self.cache_path else None

    def _dm(self, field):
        """A converged density of the cache, or None."""
        k = self.key(field)
        path = self._dm_path(k)
        if k in self.store and path and os.path.exists(path):
            return np.load(path)
        return None

    def guess(self, field):
        """Initial density: the zero-field one plus, for each field component, the
        linear response taken from the nearest cached point along that axis
        (only speeds up convergence; the converged result does not depend on it)."""
        dm = self.dm0.copy()
        for j in range(3):
            if field[j] == 0:
                continue
            best = None
            for k in self.store:
                g = np.array([float(x) for x in k.split(",")])
                if g[j] != 0 and np.count_nonzero(g) == 1 and self._dm_path(k) and os.path.exists(self._dm_path(k)):
                    if best is None or abs(abs(g[j]) - abs(field[j])) < abs(abs(best[j]) - abs(field[j])):
                        best = g
            if best is not None:
                dm += (field[j] / best[j]) * (self._dm(best) - self.dm0)
        return dm

    def point(self, field, keep=False):
        """(energy, dipole a.u.) at field (3-vector, a.u.)."""
        field = np.asarray(field, dtype=float)
        k = self.key(field)
        if k in self.store and not keep:
            r = self.store[k]
            return r["E"], np.array(r["mu"])
        if self.dm0 is None and np.any(field != 0):
            self.dm0 = self._dm(np.zeros(3))
            if self.dm0 is None:
                self.point(np.zeros(3), keep=True)  # zero-field density: the start of every field point
        t = time.time()
        mf = self.make_mf(field)
        mf.kernel(dm0=self.guess(field)) if self.dm0 is not None else mf.kernel()
        if not mf.converged:
            raise RuntimeError("SCF not converged at F = %s" % k)
        dm = mf.make_rdm1()
        if self.dm0 is None:
            self.dm0, self.mf0 = dm, mf
        mu = mf.dip_moment(self.mol, dm, unit="AU", verbose=0)
        self.store[k] = {"E": mf.e_tot, "mu": list(mu), "sec": time.time() - t, "cycles": getattr(mf, "cycles", -1)}
        if self.cache_path:
            np.save(self._dm_path(k), dm)
            json.dump(self.store, open(self.cache_path, "w"), indent=1)
        print("    F = (%s)  E = %.12f  mu = %s  %.0f s, %s cycles"
              % (k, mf.e_tot, np.array2string(mu, precision=8), time.time() - t, getattr(mf, "cycles", "?")), flush=True)
        return mf.e_tot, mu


def unit(j, h):
    f = np.zeros(3)
    f[j] = h
    return f


# ---------------------------------------------------------------- stencils
def rich(x1, x2):
    """Richardson for an O(h^2) stencil: x1 at step h, x2 at 2h."""
    return (4 * x1 - x2) / 3


def axis_derivatives(run, j, hs, z=2, both_signs=True):
    """beta_zjj(h), alpha_jj(h) for each h, field along axis j.
    both_signs False: mu_z even, mu_j odd in F_j (symmetry), so -F is not run."""
    _, mu0 = run.point(np.zeros(3))
    out = {}
    for h in hs:
        _, mp = run.point(unit(j, h))
        if both_signs:
            _, mm = run.point(unit(j, -h))
        else:
            mm = mp.copy()
            mm[j] = -mp[j]  # mu_z even, mu_j odd in F_j (mu0_j = 0 by symmetry)
        out[h] = {
            "beta_zjj": (mp[z] - 2 * mu0[z] + mm[z]) / h**2,
            "alpha_jj": (mp[j] - mm[j]) / (2 * h),
        }
    return out


def energy_beta_zzz(run, hs, z=2):
    out = {}
    for h in hs:
        if 2 * h > max(hs) + 1e-12:
            continue
        e = {k: run.point(unit(z, k * h))[0] for k in (-2, -1, 1, 2)}
        out[h] = -(e[2] - 2 * e[1] + 2 * e[-1] - e[-2]) / (2 * h**3)
    return out


def summarize(d, key, hs):
    """values per h and Richardson values R(h) for consecutive doubled steps."""
    vals = [d[h][key] for h in hs]
    R = [rich(vals[i], vals[i + 1]) for i in range(len(hs) - 1)]
    return vals, R


# ---------------------------------------------------------------- checks on water
def water(basis="aug-cc-pvdz"):
    r, th = 0.9572, np.deg2rad(104.52)  # test geometry (any would do)
    zH = r * np.cos(th / 2)
    xH = r * np.sin(th / 2)
    atoms = [("O", (0.0, 0.0, 0.0)), ("H", (xH, 0.0, zH)), ("H", (-xH, 0.0, zH))]
    m = np.array([15.99491462, 1.00782503, 1.00782503])
    com = sum(mi * np.array(x) for mi, (_, x) in zip(m, atoms)) / m.sum()
    atoms = [(a, tuple(np.array(x) - com)) for a, x in atoms]
    return gto.M(atom=atoms, basis=basis, unit="Angstrom", verbose=0, max_memory=6000)


def check_hf(cache):
    from pyscf.prop.polarizability.rhf import Polarizability

    print("\n== check 1: water RHF/aug-cc-pVDZ (DF), finite field vs analytic CPHF", flush=True)
    mol = water()
    run = FieldSCF(mol, "hf", os.path.join(cache, "water_hf.json"))
    _, mu0 = run.point(np.zeros(3), keep=True)
    pol = Polarizability(run.mf0)
    pol.conv_tol = 1e-11
    pol.max_cycle_cphf = 100
    a_an = pol.polarizability()
    b_an = pol.hyper_polarizability()
    mu_an = run.mf0.dip_moment(unit="AU", verbose=0)
    ff = {j: axis_derivatives(run, j, HS) for j in range(3)}
    eb = energy_beta_zzz(run, HS)
    h = HS[1]
    mu_e = -(run.point(unit(2, h))[0] - run.point(unit(2, -h))[0]) / (2 * h)
    rows = []
    print("   mu_z: analytic %.7f   -dE/dF_z (h=%.3f) %.7f   (positive: +z from O towards the H atoms)" % (mu_an[2], h, mu_e))
    for j, name in enumerate("xyz"):
        vals, R = summarize(ff[j], "beta_zjj", HS)
        avals, aR = summarize(ff[j], "alpha_jj", HS)
        rows.append((name, b_an[2, j, j], R[0], R[1], a_an[j, j], aR[0]))
        print("   beta_z%s%s analytic %9.4f  FF R(0.001) %9.4f  R(0.002) %9.4f   |   alpha_%s%s analytic %8.4f  FF %8.4f"
              % (name, name, b_an[2, j, j], R[0], R[1], name, name, a_an[j, j], aR[0]))
    print("   beta_zzz from energies: h=0.001 %.4f  h=0.002 %.4f  Richardson %.4f"
          % (eb[0.001], eb[0.002], rich(eb[0.001], eb[0.002])))
    print("   analytic beta_xxz %.4f beta_xzx %.4f (= beta_zxx: permutation symmetry)" % (b_an[0, 0, 2], b_an[0, 2, 0]))
    dev = max(abs(r[1] - r[2]) for r in rows)
    print("   largest |FF R(0.001) - analytic| over beta_zjj: %.1e a.u." % dev)
    return {"rows": rows, "dev": dev, "mu": (mu_an[2], mu_e)}


def check_dft(cache):
    print("\n== check 2: water CAM-B3LYP/aug-cc-pVDZ (DF, grid 4), dipole vs energy stencils", flush=True)
    mol = water()
    run = FieldSCF(mol, "camb3lyp", os.path.join(cache, "water_camb3lyp_g4.json"), grid_level=4)
    run.point(np.zeros(3))
    hs = (0.002, 0.004)
    ffz = axis_derivatives(run, 2, HS)
    ffx = axis_derivatives(run, 0, hs)
    ebz = energy_beta_zzz(run, HS)
    e = lambda fx, fz: run.point(np.array([fx, 0.0, fz]))[0]  # noqa: E731
    bzxx_e = {}
    for h in hs:
        bzxx_e[h] = -((e(h, h) + e(-h, h) - 2 * e(0, h)) - (e(h, -h) + e(-h, -h) - 2 * e(0, -h))) / (2 * h**3)
    _, Rz = summarize(ffz, "beta_zjj", HS)
    _, Rx = summarize(ffx, "beta_zjj", hs)
    res = {
        "beta_zzz": (Rz[0], Rz[1], rich(ebz[0.001], ebz[0.002])),
        "beta_zxx": (Rx[0], rich(bzxx_e[0.002], bzxx_e[0.004])),
    }
    print("   beta_zzz: dipole R(0.001) %.4f R(0.002) %.4f | energy (h 0.001, 0.002) %.4f %.4f, Richardson %.4f"
          % (Rz[0], Rz[1], ebz[0.001], ebz[0.002], res["beta_zzz"][2]))
    print("   beta_zxx: dipole h=0.002 %.4f h=0.004 %.4f R(0.002) %.4f | energy h=0.002 %.4f h=0.004 %.4f R %.4f"
          % (ffx[0.002]["beta_zjj"], ffx[0.004]["beta_zjj"], Rx[0], bzxx_e[0.002], bzxx_e[0.004], res["beta_zxx"][1]))
    return res


# ---------------------------------------------------------------- the two tops
def top_molecule(name):
    """Molecule in the principal frame of polar_top_constants.py (+a towards the
    head atom, c = a x b), basis and ECP of its property stage."""
    res = ptc.run(name, "/tmp/polar_top_cache", fd=False, functionals=())
    atoms = [(a, np.array(x)) for a, x in res["geometry"]]
    mol = ptc.build(atoms, "prop")
    w, v, com, m = ptc.principal_frame(mol)
    k = [a for a, _ in atoms].index(ptc.HEAD[name])
    if (mol.atom_coord(k, unit="Angstrom") - com) @ v[:, 0] < 0:
        v[:, 0] *= -1
    v[:, 2] = np.cross(v[:, 0], v[:, 1])
    atoms_pf = [(a, (x - com) @ v) for a, x in atoms]
    return ptc.build(atoms_pf, "prop"), res


def run_top(name, cache, hs):
    print("\n== %s: CAM-B3LYP/aug-cc-pVDZ%s, finite field" % (name, "(-PP on I)" if name == "iodobenzene" else ""),
          flush=True)
    t0 = time.time()
    mol, geo = top_molecule(name)
    print("   nao %d, rotational constants (MHz) %s" % (mol.nao, " ".join("%.1f" % r for r in geo["rot_MHz"])))
    run = FieldSCF(mol, "camb3lyp", os.path.join(cache, name + ".json"))
    A, B, C = 0, 1, 2  # principal axes a, b, c = x, y, z of the built molecule
    # the points, smallest steps first (so an interrupted run already has the h, 2h pair)
    _, mu0 = run.point(np.zeros(3))
    for h in hs:
        run.point(unit(A, h))
        run.point(unit(A, -h))
        run.point(unit(B, h))
        run.point(unit(B, -h))
        run.point(unit(C, h))
    d = {
        "a": axis_derivatives(run, A, hs, z=A, both_signs=True),
        "b": axis_derivatives(run, B, hs, z=A, both_signs=True),
        "c": axis_derivatives(run, C, hs, z=A, both_signs=False),
    }
    out = {"mu0_au": list(mu0), "nao": mol.nao, "hs": hs}
    out["energy_beta_aaa"] = energy_beta_zzz(run, hs, z=A)
    out["t"] = time.time() - t0
    out["sign_mu_a"] = float(np.sign(mu0[A]))
    for lab in "abc":
        vals, R = summarize(d[lab], "beta_zjj", hs)
        avals, aR = summarize(d[lab], "alpha_jj", hs)
        out["beta_a" + lab + lab] = {"h": vals, "R": R}
        out["alpha_" + lab + lab] = {"h": avals, "R": aR}
    return out


def report_top(name, o):
    s = o["sign_mu_a"]
    mu = o["mu0_au"]
    hs = o["hs"]
    print("\n-- %s (nao %d, %.0f s for the points computed in this call)" % (name, o["nao"], o["t"]))
    print("   mu0 (a.u., frame +a towards the head atom): %+.6f %+.1e %+.1e  = %+.4f D along a"
          % (mu[0], mu[1], mu[2], mu[0] * AU_TO_DEBYE))
    print("   -> the dipole vector points %s the head atom: +z below is %s"
          % ("towards" if s > 0 else "away from", "+a" if s > 0 else "-a (from the head atom into the ring)"))
    st = STORED[name]
    al = [o["alpha_" + x + x]["R"][0] for x in "abc"]
    print("   alpha_aa,bb,cc (a.u., Richardson h=%g) %.3f %.3f %.3f = %.3f %.3f %.3f A^3 (stored: %s A^3, %.3f D)"
          % (hs[0], *al, *(x * BOHR3_TO_A3 for x in al), " ".join("%.2f" % x for x in st["alpha_A3"]), st["mu_D"]))
    head = "".join("%10s" % ("h=%g" % h) for h in hs) + "".join("%10s" % ("R(%g)" % h) for h in hs[:-1])
    print("   %-8s%s %9s" % ("", head, "err"))
    best = {}
    for lab in "abc":
        b = o["beta_a" + lab + lab]
        vals = [s * x for x in b["h"]]
        R = [s * x for x in b["R"]]
        # error: spread of the two Richardson values, or the Richardson shift when there is one
        err = abs(R[0] - R[1]) if len(R) > 1 else abs(R[0] - vals[0])
        best[lab] = (R[0], err)
        jj = "zz" if lab == "a" else lab + lab
        print("   beta_z%s%s %9.4f" % (jj, "".join("%10.4f" % x for x in vals + R), err))
    eb = {float(k): v for k, v in o["energy_beta_aaa"].items()}
    ks = sorted(eb)
    line = "  ".join("h=%g %.4f" % (k, s * eb[k]) for k in ks)
    if len(ks) > 1:
        line += "  Richardson %.4f" % (s * rich(eb[ks[0]], eb[ks[1]]))
    print("   beta_zzz from energies: " + line)
    bpar = 0.6 * sum(best[x][0] for x in "abc")
    print("   beta_par = 3/5 (beta_zzz + beta_zbb + beta_zcc) = %.3f a.u." % bpar)
    return best, bpar


def check_grid(cache):
    """Water CAM-B3LYP: beta from the h = 0.002 dipole stencils on grid levels 3 and 4."""
    print("\n== check 3: water CAM-B3LYP/aug-cc-pVDZ, DFT grid level 3 (production) vs 4", flush=True)
    mol = water()
    vals = {}
    for lev in (3, 4):
        run = FieldSCF(mol, "camb3lyp", os.path.join(cache, "water_camb3lyp_g%d.json" % lev), grid_level=lev)
        vals[lev] = (axis_derivatives(run, 2, (0.002,))[0.002]["beta_zjj"],
                     axis_derivatives(run, 0, (0.002,))[0.002]["beta_zjj"])
        print("   grid %d: beta_zzz %.4f  beta_zxx %.4f (h = 0.002, O(h^2))" % (lev, *vals[lev]))
    return vals



# CCSD(T)/aug-cc-pVDZ values of tools/beta_finite_field.md (Taylor, a.u., frames of beta_finite_field.py)
CCSDT_AVDZ = {"OCS": (-40.38, -44.04), "N2O": (59.79, 6.47)}


def check_functional(cache):
    """CAM-B3LYP/aug-cc-pVDZ beta of OCS and N2O (same code, steps 0.002 and
    0.004, Richardson) against the project's CCSD(T)/aug-cc-pVDZ values: a
    calibration of the functional for beta."""
    import beta_finite_field as bff

    print("\n== check 4: CAM-B3LYP/aug-cc-pVDZ against CCSD(T)/aug-cc-pVDZ (tools/beta_finite_field.md)", flush=True)
    out = {}
    for name, (czzz, czxx) in CCSDT_AVDZ.items():
        mol = bff.build_mol(name, "aug-cc-pvdz")
        mol.max_memory = 6000
        run = FieldSCF(mol, "camb3lyp", os.path.join(cache, "calib_%s.json" % name))
        hs = (0.002, 0.004)
        dz = axis_derivatives(run, 2, hs)
        dx = axis_derivatives(run, 0, hs, both_signs=False)  # linear molecule: mu_z even, mu_x odd in F_x
        bzzz = rich(dz[0.002]["beta_zjj"], dz[0.004]["beta_zjj"])
        bzxx = rich(dx[0.002]["beta_zjj"], dx[0.004]["beta_zjj"])
        mu = run.point(np.zeros(3))[1][2]
        out[name] = (mu, bzzz, bzxx)
        print("   %-4s mu_z %+.4f  beta_zzz %8.3f (CCSD(T) %7.2f, ratio %.2f)  beta_zxx %8.3f (CCSD(T) %7.2f, ratio %.2f)"
              % (name, mu, bzzz, czzz, bzzz / czzz, bzxx, czxx, bzxx / czxx))
    return out

def main():
    p = argparse.ArgumentParser()
    p.add_argument("--only", nargs="*", default=["benzonitrile", "iodobenzene"])
    p.add_argument("--h", default="0.001,0.002,0.004", help="field steps (a.u.), each twice the previous")
    p.add_argument("--no-check", action="store_true")
    p.add_argument("--cache", default="/tmp/top_beta_cache")
    p.add_argument("--threads", type=int, default=0)
    a = p.parse_args()
    if a.threads:
        lib.num_threads(a.threads)
    hs = tuple(float(x) for x in a.h.split(","))
    os.makedirs(a.cache, exist_ok=True)
    print("PySCF %s, %d threads" % (pyscf.__version__, lib.num_threads()))
    for name in a.only:
        o = run_top(name, a.cache, hs)
        report_top(name, o)
    if not a.no_check:
        check_hf(a.cache)
        check_dft(a.cache)
        check_grid(a.cache)
        check_functional(a.cache)


if __name__ == "__main__":
    main()
