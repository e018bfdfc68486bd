"""Writes tests/data/lih_sto3g_r1.6.fcidump for benches/fewer_gates.rs: LiH, STO-3G, bond length
1.6 angstrom, restricted Hartree-Fock orbitals, all 6 spatial orbitals (12 spin orbitals), by
PySCF (Sun et al., WIREs Comput. Mol. Sci. 8, e1340 (2018)). Run from the repository root:
python3 tests/data/make_lih.py
"""
from pyscf import gto, scf
from pyscf.tools import fcidump

mol = gto.M(atom="Li 0 0 0; H 0 0 1.6", basis="sto-3g", verbose=0)
mf = scf.RHF(mol).run()
fcidump.from_scf(mf, "tests/data/lih_sto3g_r1.6.fcidump", tol=1e-12)
print(f"RHF energy {mf.e_tot:.10f} hartree")
