#!/usr/bin/env python3
"""
Finite-field static electronic dipole moment, polarizability and first
hyperpolarizability of linear molecules with PySCF.

Usage
    python beta_finite_field.py MOLECULE BASIS METHOD [--h 0.001,0.002,0.004]
      MOLECULE : CO | HCl | OCS | N2O
      BASIS    : any PySCF basis name, e.g. aug-cc-pvtz, or
                 "xaug-<name>" = <name> plus one even-tempered diffuse shell
                 per angular momentum (d-aug style, see make_basis())
      METHOD   : hf | ccsd(t)   (ccsd(t) also prints HF, MP2 and CCSD values
                                 obtained from the same field points)
    Energies are cached in energies_<MOL>_<BASIS>_<METHOD>.json next to this
    script so that interrupted runs resume.

Convention: Taylor series ("T" convention), atomic units throughout:
    E(F) = E0 - mu_i F_i - 1/2 alpha_ij F_i F_j - 1/6 beta_ijk F_i F_j F_k - ...
    mu_ind = mu0 + alpha F + 1/2 beta F F
so  mu_i = -dE/dF_i,  alpha_ij = -d2E/dF_i dF_j,  beta_ijk = -d3E/dF_i dF_j dF_k.

Field/Hamiltonian:  H(F) = H0 - mu_op . F,  mu_op = sum_A Z_A R_A - sum_i r_i.
    Electronic part: one-electron Hamiltonian h1 -> h1 + F . r  (r = electron
    position integrals, origin at the centre of mass).
    Nuclear part: constant -F . sum_A Z_A R_A added to every total energy
    (needed only for mu; it is linear in F and drops out of alpha and beta).
    Sign check: (E(+F_z) - E(-F_z)) / (2 F_z) ~ -mu_z must match
    mf.dip_moment() (a.u.) at the HF level; this is printed.

Frame: molecule on the z axis, origin at the centre of mass (most abundant
isotopes), +z pointing from the first-listed to the last-listed atom:
    CO : C -> O      HCl: Cl -> H      OCS: O -> S      N2O: N(terminal) -> O

Stencils (field step h; E(a,b) = E(F_x=a, F_z=b); E(a,b) = E(-a,b) by symmetry):
    mu_z    = -[8(E(0,h)-E(0,-h)) - (E(0,2h)-E(0,-2h))] / (12 h)              O(h^4)
    alpha_zz= -[-E(0,2h)+16E(0,h)-30E0+16E(0,-h)-E(0,-2h)] / (12 h^2)          O(h^4)
    alpha_xx= -[E(h,h)+E(h,-h)-E(0,h)-E(0,-h)] / h^2                            O(h^2)
    beta_zzz= -[E(0,2h)-2E(0,h)+2E(0,-h)-E(0,-2h)] / (2 h^3)                   O(h^2)
    beta_zxx= -[(2E(h,h)-2E(0,h)) - (2E(h,-h)-2E(0,-h))] / (2 h^3)             O(h^2)
    (beta_zxx = beta_xxz = beta_xzx by permutational symmetry of the static tensor)
    Richardson for the O(h^2) stencils (beta_zzz, beta_zxx, alpha_xx), steps h, 2h:
        X_R = (4 X(h) - X(2h)) / 3
    Points used: E0, E(0,+-h), E(0,+-2h), E(h,+-h) for every h.
"""
import argparse
import json
import os
import sys
import time

import numpy as np
import pyscf
from pyscf import gto, scf, cc, lib
from pyscf.data import elements

# Linear geometries: list of (symbol, z in Angstrom) in the order of +z.
# Bond lengths r_e (see results.md for sources).
GEOMS = {
    'CO':  [('C', 0.0), ('O', 1.12832)],
    'HCl': [('Cl', 0.0), ('H', 1.27455)],
    'OCS': [('O', 0.0), ('C', 1.1578), ('S', 1.1578 + 1.5601)],
    'N2O': [('N', 0.0), ('N', 1.1273), ('O', 1.1273 + 1.1851)],
}


def make_basis(basis, symbols):
    """Return a PySCF basis spec. 'xaug-NAME': NAME plus, for every angular
    momentum l present, one extra primitive with exponent a1*(a1/a2), where
    a1 < a2 are the two smallest exponents of that l (even-tempered extension,
    the usual d-aug construction)."""
    if not basis.lower().startswith('xaug-'):
        return basis
    base = basis[5:]
    out = {}
    for s in set(symbols):
        shells = gto.basis.load(base, s)
        new = [list(map(lambda x: list(x) if isinstance(x, (list, tuple)) else x, sh))
               for sh in shells]
        for l in sorted({sh[0] for sh in shells}):
            exps = sorted({prim[0] for sh in shells if sh[0] == l for prim in sh[1:]})
            a1, a2 = exps[0], exps[1]
            new.append([l, [a1 * a1 / a2, 1.0]])
        out[s] = new
    return out


def build_mol(name, basis, verbose=0):
    geom = GEOMS[name]
    symbols = [s for s, _ in geom]
    # centre of mass with most-abundant-isotope masses
    masses = np.array([elements.COMMON_ISOTOPE_MASSES[elements.charge(s)]
                       for s in symbols])
    z = np.array([zz for _, zz in geom])
    z = z - np.dot(masses, z) / masses.sum()
    mol = gto.Mole()
    mol.atom = [(s, (0.0, 0.0, zz)) for s, zz in zip(symbols, z)]
    mol.unit = 'Angstrom'
    mol.basis = make_basis(basis, symbols)
    mol.cart = False
    mol.symmetry = False
    mol.verbose = verbose
    mol.max_memory = 16000
    mol.build()
    return mol


def field_points(hs):
    """All (Fx, Fz) points needed for the stencils with steps hs."""
    pts = {(0.0, 0.0)}
    for h in hs:
        for k in (1, 2):
            pts |= {(0.0, k * h), (0.0, -k * h)}
        pts |= {(h, h), (h, -h)}
    return sorted(pts)


class FFRunner:
    def __init__(self, mol, method):
        self.mol = mol
        self.method = method
        self.hcore0 = scf.hf.get_hcore(mol)
        self.rints = mol.intor_symmetric('int1e_r', comp=3)   # origin = (0,0,0) = COM
        self.nuc_dip = np.einsum('i,ix->x', mol.atom_charges(), mol.atom_coords())
        self.eri = mol.intor('int2e', aosym='s8')
        self.ncore = elements.chemcore(mol)
        self.dm0 = None
        self.mf0 = None

    def make_mf(self, F):
        F = np.asarray(F, dtype=float)
        mf = scf.RHF(self.mol)
        h1 = self.hcore0 + np.einsum('x,xij->ij', F, self.rints)
        mf.get_hcore = lambda *args: h1
        e_nuc_field = -np.dot(F, self.nuc_dip)
        e_nuc = self.mol.energy_nuc() + e_nuc_field
        mf.energy_nuc = lambda *args: e_nuc
        mf._eri = self.eri
        mf.conv_tol = 1e-13
        mf.conv_tol_grad = 1e-8
        mf.max_cycle = 200
        mf.verbose = 0
        return mf

    def energy(self, Fx, Fz):
        F = (Fx, 0.0, Fz)
        mf = self.make_mf(F)
        if self.dm0 is None:
            mf.kernel()
        else:
            mf.kernel(dm0=self.dm0)       # start from the zero-field density
        if not mf.converged:
            raise RuntimeError('SCF not converged at F=%s' % (F,))
        if self.dm0 is None:
            self.dm0 = mf.make_rdm1()
            self.mf0 = mf
        res = {'hf': mf.e_tot}
        if self.method == 'ccsd(t)':
            mycc = cc.CCSD(mf, frozen=self.ncore)
            mycc.conv_tol = 1e-11
            mycc.conv_tol_normt = 1e-8
            mycc.max_cycle = 200
            mycc.verbose = 0
            mycc.kernel()
            if not mycc.converged:
                raise RuntimeError('CCSD not converged at F=%s' % (F,))
            et = mycc.ccsd_t()
            res['mp2'] = mf.e_tot + mycc.emp2
            res['ccsd'] = mycc.e_tot
            res['ccsd(t)'] = mycc.e_tot + et
        return res


def props(E, h):
    """Finite-field properties from energy dict E[(Fx,Fz)] for step h."""
    e = lambda a, b: E[(round(a, 10), round(b, 10))]
    E0 = e(0, 0)
    mu = -(8 * (e(0, h) - e(0, -h)) - (e(0, 2*h) - e(0, -2*h))) / (12 * h)
    mu3 = -(e(0, h) - e(0, -h)) / (2 * h)
    azz = -(-e(0, 2*h) + 16*e(0, h) - 30*E0 + 16*e(0, -h) - e(0, -2*h)) / (12 * h**2)
    axx = -(e(h, h) + e(h, -h) - e(0, h) - e(0, -h)) / h**2
    bzzz = -(e(0, 2*h) - 2*e(0, h) + 2*e(0, -h) - e(0, -2*h)) / (2 * h**3)
    bzxx = -((2*e(h, h) - 2*e(0, h)) - (2*e(h, -h) - 2*e(0, -h))) / (2 * h**3)
    return dict(mu_z=mu, mu_z_2pt=mu3, alpha_zz=azz, alpha_xx=axx,
                beta_zzz=bzzz, beta_zxx=bzxx)


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument('molecule', choices=sorted(GEOMS))
    ap.add_argument('basis')
    ap.add_argument('method', choices=['hf', 'ccsd(t)'])
    ap.add_argument('--h', default='0.001,0.002,0.004',
                    help='comma-separated field steps (a.u.)')
    args = ap.parse_args()
    lib.num_threads(int(os.environ.get('OMP_NUM_THREADS', '2')))
    hs = [float(x) for x in args.h.split(',')]
    t0 = time.time()

    mol = build_mol(args.molecule, args.basis)
    print('PySCF %s   molecule %s   basis %s   method %s' %
          (pyscf.__version__, args.molecule, args.basis, args.method))
    print('nao = %d   nelec = %s' % (mol.nao, mol.nelec))
    for i in range(mol.natm):
        print('  %-2s  z = %12.8f bohr' % (mol.atom_symbol(i), mol.atom_coord(i)[2]))
    runner = FFRunner(mol, args.method)
    if args.method == 'ccsd(t)':
        print('frozen core orbitals: %d' % runner.ncore)

    here = os.path.dirname(os.path.abspath(__file__))
    cache = os.path.join(here, 'energies_%s_%s_%s.json' %
                         (args.molecule, args.basis, args.method.replace('(', '').replace(')', '')))
    store = {}
    if os.path.exists(cache):
        store = json.load(open(cache))
    pts = field_points(hs)
    # zero field first (defines the reference density)
    pts.remove((0.0, 0.0))
    pts = [(0.0, 0.0)] + pts
    for (fx, fz) in pts:
        key = '%.10f,%.10f' % (fx, fz)
        if key in store and not (fx == 0 and fz == 0):
            continue
        t1 = time.time()
        res = runner.energy(fx, fz)
        store[key] = res
        json.dump(store, open(cache, 'w'), indent=1)
        print('  F=(%+.4f, %+.4f)  E=%s  %.1fs' %
              (fx, fz, '  '.join('%s:%.12f' % kv for kv in res.items()), time.time() - t1),
              flush=True)

    # HF analytic reference values at zero field
    mf0 = runner.mf0
    dip = mf0.dip_moment(unit='AU', verbose=0)
    print('\nHF analytic dipole (mf.dip_moment, a.u.): %s' % np.array2string(dip, precision=6))
    try:
        from pyscf.prop.polarizability.rhf import Polarizability
        pol = Polarizability(mf0)
        pol.conv_tol = 1e-10
        a = pol.polarizability()
        b = pol.hyper_polarizability()
        print('HF analytic (pyscf.prop CPHF): alpha_zz %.5f alpha_xx %.5f '
              'beta_zzz %.5f beta_zxx %.5f beta_xxz %.5f'
              % (a[2, 2], a[0, 0], b[2, 2, 2], b[2, 0, 0], b[0, 0, 2]))
    except ImportError:
        print('pyscf.prop not installed: no analytic HF reference')

    levels = ['hf'] if args.method == 'hf' else ['hf', 'mp2', 'ccsd', 'ccsd(t)']
    for lev in levels:
        E = {}
        for key, res in store.items():
            fx, fz = map(float, key.split(','))
            E[(round(fx, 10), round(fz, 10))] = res[lev]
        print('\n=== %s  (Taylor convention, a.u., frame: %s) ===' %
              (lev.upper(), ' -> '.join(s for s, _ in GEOMS[args.molecule])))
        print('%8s %10s %10s %10s %10s %11s %11s' %
              ('h', 'mu_z', 'mu_z(2pt)', 'alpha_zz', 'alpha_xx', 'beta_zzz', 'beta_zxx'))
        P = {}
        for h in hs:
            P[h] = props(E, h)
            p = P[h]
            print('%8.4f %10.6f %10.6f %10.4f %10.4f %11.4f %11.4f' %
                  (h, p['mu_z'], p['mu_z_2pt'], p['alpha_zz'], p['alpha_xx'],
                   p['beta_zzz'], p['beta_zxx']))
        for h1, h2 in zip(hs[:-1], hs[1:]):
            if abs(h2 - 2 * h1) > 1e-12:
                continue
            r = {k: (4 * P[h1][k] - P[h2][k]) / 3 for k in ('alpha_xx', 'beta_zzz', 'beta_zxx')}
            bbar = 0.6 * (r['beta_zzz'] + 2 * r['beta_zxx'])
            print('Richardson(h=%.4f,%.4f): alpha_xx %.4f  beta_zzz %.4f  beta_zxx %.4f  '
                  'beta_bar=3/5(bzzz+2bzxx) %.4f' % (h1, h2, r['alpha_xx'], r['beta_zzz'],
                                                     r['beta_zxx'], bbar))
    print('\nwall time %.1f s' % (time.time() - t0))


if __name__ == '__main__':
    main()
