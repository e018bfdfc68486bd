OPENQASM 3.0;
include "stdgates.inc";
// phasewright circuit k00-re-g03: real part of the Hadamard test at k = 0, t = 0
// bit 0 is the ancilla; see plan.json for what each bit reads
// device line8: physical qubits, native gates cz rz sx x
bit[5] c;
c[0] = measure $6;
sx $5;
rz(1.5707963267948966) $5;
c[1] = measure $5;
rz(3.141592653589793) $3;
sx $3;
rz(3.141592653589793) $3;
c[2] = measure $3;
rz(3.141592653589793) $4;
sx $4;
rz(-1.5707963267948966) $4;
c[3] = measure $4;
c[4] = measure $2;
