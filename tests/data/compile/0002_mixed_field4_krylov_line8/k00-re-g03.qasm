OPENQASM 3.0;
include "stdgates.inc";
// phasewright circuit k00-re-g03: real part of the Hadamard test at k = 0, t = 0
// bit 0 is the ancilla; see plan.json for what each bit reads
// device line8: physical qubits, native gates cz rz sx x
bit[5] c;
c[0] = measure $0;
sx $2;
rz(1.5707963267948966) $2;
c[1] = measure $2;
rz(3.141592653589793) $1;
sx $1;
rz(3.141592653589793) $1;
c[2] = measure $1;
rz(3.141592653589793) $3;
sx $3;
rz(-1.5707963267948966) $3;
c[3] = measure $3;
c[4] = measure $4;
