"""Reference energies from PySCF for tests/fermion_pyscf.rs.

Writes an FCIDUMP file for LiH (STO-3G, bond length 1.6 angstrom, restricted Hartree-Fock
orbitals) into the folder given as the first argument and prints one JSON line with the
Hartree-Fock, full-CI and frozen-core CASCI (orbitals 2-6, 2 electrons) total energies in
hartree. Also writes an FCIDUMP for H2 (STO-3G, 0.74 angstrom) with its Hartree-Fock and
full-CI energies (keys h2_*), for the end-to-end rehearsal test. Exits with status 3 when PySCF
is not importable.
"""
import json
import os
import sys

try:
    from pyscf import gto, scf, fci, mcscf
    from pyscf.tools import fcidump
except ImportError as exc:  # pragma: no cover - depends on the machine
    print(f"pyscf not importable: {exc}", file=sys.stderr)
    sys.exit(3)


def main() -> None:
    out_dir = sys.argv[1]
    mol = gto.M(atom="Li 0 0 0; H 0 0 1.6", unit="Angstrom", basis="sto-3g", verbose=0)
    mf = scf.RHF(mol)
    mf.conv_tol = 1e-12
    mf.kernel()
    path = os.path.join(out_dir, "lih_sto3g.fcidump")
    fcidump.from_scf(mf, path, tol=0.0)
    cis = fci.FCI(mf)
    cis.conv_tol = 1e-12
    e_fci = cis.kernel()[0]
    cas = mcscf.CASCI(mf, 5, 2)
    cas.fcisolver.conv_tol = 1e-12
    e_cas = cas.kernel()[0]
    h2 = gto.M(atom="H 0 0 0; H 0 0 0.74", unit="Angstrom", basis="sto-3g", verbose=0)
    mf2 = scf.RHF(h2)
    mf2.conv_tol = 1e-12
    mf2.kernel()
    h2_path = os.path.join(out_dir, "h2_sto3g.fcidump")
    fcidump.from_scf(mf2, h2_path, tol=0.0)
    cis2 = fci.FCI(mf2)
    cis2.conv_tol = 1e-12
    e2_fci = cis2.kernel()[0]
    print(json.dumps({
        "h2_fcidump": h2_path,
        "h2_e_hf": float(mf2.e_tot),
        "h2_e_fci": float(e2_fci),
        "fcidump": path,
        "norb": int(mol.nao_nr()),
        "nelec": int(mol.nelectron),
        "e_hf": float(mf.e_tot),
        "e_fci": float(e_fci),
        "e_casci_2_6": float(e_cas),
    }))


if __name__ == "__main__":
    main()
