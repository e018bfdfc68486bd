OPENQASM 3.0;
include "stdgates.inc";
// phasewright circuit k00-re-g00: real part of the Hadamard test at k = 0, t = 0
// bit 0 is the ancilla; see plan.json for what each bit reads
qubit[4] q;
bit[4] c;
h q[0];
h q[1];
h q[2];
c[0] = measure q[3];
c[1] = measure q[0];
c[2] = measure q[1];
c[3] = measure q[2];
