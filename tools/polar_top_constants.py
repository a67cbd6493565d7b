#!/usr/bin/env python3
"""
Computed constants for the polar asymmetric tops of src/molecule/top_library.rs
(benzonitrile, iodobenzene, 2,6-difluoroiodobenzene) and for two check
molecules with known polarizabilities (benzene, OCS).

Not part of the build or the tests. Needs PySCF, pyscf-properties (analytic
coupled-perturbed polarizability), geomeTRIC (geometry optimizer) and
basis-set-exchange (aug-cc-pVDZ-PP for iodine), e.g.
    python3 -m venv /tmp/qc
    /tmp/qc/bin/pip install pyscf pyscf-properties geometric basis-set-exchange
    /tmp/qc/bin/python tools/polar_top_constants.py [--only NAME ...] [--cache DIR]

What it does, per molecule (see polar_top_constants.md for the discussion):
  1. geometry: B3LYP/def2-SVP optimization (density fitting) (def2 ECP on iodine), planar start
     built from textbook bond lengths below; the start only seeds the optimizer;
  2. rotational constants of that geometry with the most abundant isotopes
     (1H, 12C, 14N, 19F, 127I), A >= B >= C, in MHz and cm^-1;
  3. static electronic polarizability, analytic (coupled-perturbed Kohn-Sham,
     pyscf.prop.polarizability.rks) at CAM-B3LYP/aug-cc-pVDZ, iodine
     aug-cc-pVDZ-PP with its 28-electron pseudopotential; density fitting
     (def2-universal-jkfit) for the Coulomb and exchange integrals; B3LYP as
     well for the molecules named by --b3lyp (default: OCS only, for time);
  4. dipole moment of the CAM-B3LYP density;
  5. everything rotated into the principal inertia frame (a, b, c by increasing
     moment of inertia) and converted: 1 bohr^3 = 0.148184711 A^3,
     1 a.u. of dipole = 2.541746 D (PySCF reports debye directly).
  6. --fd NAME (default OCS): finite-field check of the analytic tensor:
     alpha_ij = d mu_i / d F_j by central differences of the SCF dipole,
     field step h = 0.001 a.u. along each principal axis (6 extra SCF runs).

Results are cached as JSON in --cache (default /tmp/polar_top_cache) so a run
can resume; the printed table is what polar_top_constants.md quotes.
"""
import argparse
import json
import os
import time
import warnings

import numpy as np

warnings.filterwarnings("ignore")

from pyscf import gto, dft, lib  # noqa: E402
from pyscf.data import elements  # noqa: E402
from pyscf.geomopt.geometric_solver import optimize  # noqa: E402
from pyscf.prop.polarizability.rks import Polarizability  # noqa: E402

BOHR3_TO_A3 = 0.148184711
MHZ_PER_CM = 29979.2458
# h / (8 pi^2) in MHz * u * A^2 (CODATA 2018 h and u)
H = 6.62607015e-34
AMU = 1.66053906660e-27
ROT_MHZ = H / (8 * np.pi**2 * AMU * 1e-20) / 1e6


def ring(subst):
    """Planar benzene ring in the xy plane, C1 on +x; subst maps ring position
    (1..6) to a list of (symbol, distance) placed radially outwards (chains
    continue along the same radial line). Unlisted positions carry H."""
    r_cc, r_ch = 1.395, 1.084
    atoms = []
    for k in range(6):
        ang = np.deg2rad(60.0 * k)
        u = np.array([np.cos(ang), np.sin(ang), 0.0])
        atoms.append(("C", r_cc * u))
        chain = subst.get(k + 1, [("H", r_ch)])
        d = r_cc
        for sym, bond in chain:
            d += bond
            atoms.append((sym, d * u))
    return atoms


MOLECULES = {
    "benzene": ring({}),
    "benzonitrile": ring({1: [("C", 1.44), ("N", 1.16)]}),
    "iodobenzene": ring({1: [("I", 2.10)]}),
    "2,6-difluoroiodobenzene": ring({1: [("I", 2.09)], 2: [("F", 1.35)], 6: [("F", 1.35)]}),
    "OCS": [("O", np.array([0.0, 0.0, -1.1578])), ("C", np.zeros(3)), ("S", np.array([0.0, 0.0, 1.5601]))],
}
# Atom whose direction from the centre of mass defines "the substituent end".
HEAD = {"benzonitrile": "N", "iodobenzene": "I", "2,6-difluoroiodobenzene": "I", "OCS": "S"}


def iodine_pp():
    import basis_set_exchange as bse

    s = bse.get_basis("aug-cc-pvdz-pp", elements=["I"], fmt="nwchem")
    i = s.index("\nECP")
    return gto.basis.parse(s[:i], "I"), gto.basis.parse_ecp(s[i:], "I")


def build(atoms, stage):
    syms = {a for a, _ in atoms}
    if stage == "opt":
        basis, ecp = "def2-svp", ("def2-svp" if "I" in syms else {})
    else:
        basis, ecp = {"default": "aug-cc-pvdz"}, {}
        if "I" in syms:
            b, e = iodine_pp()
            basis["I"], ecp = b, {"I": e}
    return gto.M(
        atom=[(a, tuple(x)) for a, x in atoms], basis=basis, ecp=ecp, unit="Angstrom", verbose=0, max_memory=6000
    )


def principal_frame(mol):
    """Inertia tensor with the most abundant isotopes; returns (moments u*A^2,
    axes as columns ordered a, b, c, centre of mass, masses)."""
    # exact masses of the most abundant isotopes (atom_mass_list(isotope_avg=False) gives mass numbers)
    # (atom_charges() would give the ECP-reduced charge, so go through the element symbol)
    m = np.array([elements.COMMON_ISOTOPE_MASSES[elements.charge(mol.atom_pure_symbol(i))] for i in range(mol.natm)])
    x = mol.atom_coords(unit="Angstrom")
    com = m @ x / m.sum()
    y = x - com
    inertia = np.einsum("i,ij,ik->jk", m, y, y)
    inertia = np.trace(inertia) * np.eye(3) - inertia
    w, v = np.linalg.eigh(inertia)  # ascending: a, b, c
    # fix signs: a axis towards the head atom if any, c = a x b (right-handed)
    return w, v, com, m


def scf(mol, xc, field=None):
    mf = dft.RKS(mol, xc=xc).density_fit(auxbasis="def2-universal-jkfit")
    mf.conv_tol = 1e-10
    if field is not None:
        mol.set_common_orig(np.zeros(3))  # origin: centre of mass (coordinates are shifted there)
        h1 = mf.get_hcore() + np.einsum("x,xij->ij", field, mol.intor("int1e_r"))
        mf.get_hcore = lambda *a: h1
    mf.kernel()
    assert mf.converged
    return mf


def run(name, cache, fd=False, functionals=("camb3lyp",)):
    path = os.path.join(cache, name.replace(",", "_") + ".json")
    res = json.load(open(path)) if os.path.exists(path) else {}
    t0 = time.time()
    if "geometry" not in res:
        mol = build(MOLECULES[name], "opt")
        if name == "OCS":  # linear: keep the library's r0 geometry (from memory), no optimization
            eq = mol
        else:
            mf = dft.RKS(mol, xc="b3lyp").density_fit()
            mf.conv_tol = 1e-10
            eq = optimize(mf, maxsteps=60)
        res["geometry"] = [(eq.atom_symbol(i), list(eq.atom_coord(i, unit="Angstrom"))) for i in range(eq.natm)]
        json.dump(res, open(path, "w"), indent=1)
        print(f"[{name}] geometry done {time.time() - t0:.0f} s", flush=True)
    atoms = [(a, np.array(x)) for a, x in res["geometry"]]
    mol = build(atoms, "prop")
    w, v, com, m = principal_frame(mol)
    if name in HEAD:
        k = [a for a, _ in atoms].index(HEAD[name])
        if (mol.atom_coord(k, unit="Angstrom") - com) @ v[:, 0] < 0:
            v[:, 0] *= -1
    v[:, 2] = np.cross(v[:, 0], v[:, 1])
    # move to the principal frame (so the dipole origin is the centre of mass)
    atoms_pf = [(a, (x - com) @ v) for a, x in atoms]
    mol = build(atoms_pf, "prop")
    with np.errstate(divide="ignore"):
        rot = np.where(w > 1e-6, ROT_MHZ / np.maximum(w, 1e-12), np.inf)
    res["moments_uA2"] = list(w)
    res["rot_MHz"] = [float(r) for r in rot]
    for xc in functionals:
        if xc in res:
            continue
        t1 = time.time()
        mf = scf(mol, xc)
        dip = mf.dip_moment(unit="Debye", verbose=0)
        alpha = Polarizability(mf).polarizability()
        res[xc] = {"energy": mf.e_tot, "dipole_D": list(dip), "alpha_au": alpha.tolist()}
        json.dump(res, open(path, "w"), indent=1)
        print(f"[{name}] {xc} done {time.time() - t1:.0f} s", flush=True)
    if fd and "fd_camb3lyp" not in res:
        hstep = 1e-3
        cols = []
        for j in range(3):
            dips = []
            for sgn in (1, -1):
                f = np.zeros(3)
                f[j] = sgn * hstep
                # H = H0 + F.r for electrons (charge -1): field F along +j lowers the energy of
                # electrons at -j, so the induced dipole is +alpha F with this sign convention.
                dips.append(scf(mol, "camb3lyp", field=f).dip_moment(unit="AU", verbose=0))
            cols.append((dips[0] - dips[1]) / (2 * hstep))
        res["fd_camb3lyp"] = {"h_au": hstep, "alpha_au": np.array(cols).T.tolist()}
        json.dump(res, open(path, "w"), indent=1)
        print(f"[{name}] finite field done", flush=True)
    return res


def report(name, res):
    print(f"\n== {name}")
    for a, x in res["geometry"]:
        print(f"   {a:2s} {x[0]:11.6f} {x[1]:11.6f} {x[2]:11.6f}")
    rot = res["rot_MHz"]
    print("   rotational constants A B C (MHz): " + "  ".join(f"{r:.2f}" for r in rot))
    print("   rotational constants A B C (cm-1): " + "  ".join(f"{r / MHZ_PER_CM:.6f}" for r in rot))
    for xc in ("camb3lyp", "b3lyp"):
        if xc not in res:
            continue
        r = res[xc]
        al = np.array(r["alpha_au"])
        d = np.diag(al) * BOHR3_TO_A3
        off = np.abs(al - np.diag(np.diag(al))).max()
        print(
            f"   {xc:9s} alpha_aa,bb,cc (A^3): {d[0]:.3f} {d[1]:.3f} {d[2]:.3f}  mean {d.mean():.3f}"
            f"  (largest off-diagonal {off:.1e} a.u.)"
        )
        print(f"   {xc:9s} dipole (D) along a,b,c: " + " ".join(f"{x:+.3f}" for x in r["dipole_D"]))
    if "fd_camb3lyp" in res:
        al = np.array(res["fd_camb3lyp"]["alpha_au"])
        an = np.array(res["camb3lyp"]["alpha_au"])
        print("   finite-field CAM-B3LYP diag (A^3): " + " ".join(f"{x * BOHR3_TO_A3:.3f}" for x in np.diag(al)))
        print(f"   max |finite field - analytic| = {np.abs(al - an).max():.2e} a.u.")


def main():
    p = argparse.ArgumentParser()
    p.add_argument("--only", nargs="*", default=list(MOLECULES))
    p.add_argument("--fd", nargs="*", default=["OCS"])
    p.add_argument("--b3lyp", nargs="*", default=["OCS"], help="molecules that also get B3LYP")
    p.add_argument("--cache", default="/tmp/polar_top_cache")
    p.add_argument("--threads", type=int, default=0)
    a = p.parse_args()
    if a.threads:
        lib.num_threads(a.threads)
    os.makedirs(a.cache, exist_ok=True)
    for name in a.only:
        xcs = ("camb3lyp", "b3lyp") if name in a.b3lyp else ("camb3lyp",)
        report(name, run(name, a.cache, fd=name in a.fd, functionals=xcs))


if __name__ == "__main__":
    main()
