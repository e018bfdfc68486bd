//! The type of a circuit a device can run: physical qubits, native gates, coupled pairs.
//!
//! In: a [`Circuit`] over a device's sites (`$k` in OpenQASM 3) and the [`Device`]. Out: a
//! [`DeviceCircuit`]. Invariant: a `DeviceCircuit` passes `verify_ir` with the device's rules
//! (every two-qubit gate on a coupled pair, only native gate names) and has no more qubits than
//! the device. Its one constructor, [`DeviceCircuit::checked`], runs that check; the routing
//! passes ([`super::to_device`], [`super::DeviceCampaign`]) call it on the lowered circuit, and
//! readers of physical OpenQASM 3 files call it on what they read. The circuit is read through
//! [`DeviceCircuit::circuit`] (or `as_ref`) and taken out with [`DeviceCircuit::into_inner`];
//! nothing outside this module can change it in place.

use crate::circuit::verify::{verify_ir, IrError, Rules};
use crate::circuit::Circuit;
use crate::device::Device;

/// A circuit on a device's physical qubits in its native gates, every two-qubit gate on a
/// coupled pair (see the module header).
#[derive(Clone, Debug, PartialEq)]
pub struct DeviceCircuit {
    circuit: Circuit,
}

impl DeviceCircuit {
    /// `c` as a circuit of `dev`, after checking it with `verify_ir` and `dev`'s coupling and
    /// native names; the error names the first gate that breaks a rule.
    pub fn checked(c: Circuit, dev: &Device) -> Result<DeviceCircuit, IrError> {
        if c.num_qubits > dev.num_qubits {
            return Err(IrError {
                index: 0,
                gate: None,
                message: format!(
                    "the circuit has {} qubits but the device `{}` has {}",
                    c.num_qubits, dev.name, dev.num_qubits
                ),
            });
        }
        let coupled = |a: u32, b: u32| dev.coupled(a, b);
        verify_ir(
            &c,
            &Rules {
                coupled: Some(&coupled),
                native: Some(&dev.native.names),
            },
        )?;
        Ok(DeviceCircuit { circuit: c })
    }

    /// The circuit, to read.
    pub fn circuit(&self) -> &Circuit {
        &self.circuit
    }

    /// The circuit, to own (and change: it is then an ordinary [`Circuit`] again).
    pub fn into_inner(self) -> Circuit {
        self.circuit
    }
}

impl AsRef<Circuit> for DeviceCircuit {
    fn as_ref(&self) -> &Circuit {
        &self.circuit
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::circuit::Gate;
    use crate::device::{lattice, Calibration, NativeSet};
    use crate::route::{to_device, Ancilla, RouteConfig, TargetPlan};

    fn line() -> Device {
        Device::new(
            "line",
            3,
            &lattice::line(3),
            NativeSet::from_names(&["rz", "sx", "x", "cx"]).unwrap(),
            Calibration::default(),
        )
    }

    #[test]
    fn only_circuits_that_fit_the_device_are_accepted() {
        let dev = line();
        // Sites 0 and 2 of the line 0-1-2 are not coupled.
        let mut far = Circuit::new(3, 0);
        far.extend([Gate::Cx(0, 2)]);
        let err = DeviceCircuit::checked(far, &dev).unwrap_err();
        assert_eq!(err.gate, Some(Gate::Cx(0, 2)));
        // `h` is not among the native names.
        let mut foreign = Circuit::new(3, 0);
        foreign.extend([Gate::Rz(0, 0.5), Gate::H(1)]);
        let err = DeviceCircuit::checked(foreign, &dev).unwrap_err();
        assert_eq!((err.index, err.gate), (1, Some(Gate::H(1))));
        // More qubits than the device has.
        assert!(DeviceCircuit::checked(Circuit::new(4, 0), &dev).is_err());
        // A routed and lowered circuit with a CNOT between the ends of the line passes, and
        // checking it again keeps it as it was.
        let mut logical = Circuit::new(3, 1);
        logical.extend([Gate::H(0), Gate::Cx(0, 2), Gate::Measure(2, 0)]);
        let plan = TargetPlan::with_layout(3, Ancilla::None, &dev, vec![0, 1, 2]).unwrap();
        let routed = to_device(&logical, &plan, &dev, &RouteConfig::default()).unwrap();
        assert!(routed.swaps > 0);
        let again = DeviceCircuit::checked(routed.circuit.circuit().clone(), &dev).unwrap();
        assert_eq!(again, routed.circuit);
    }
}
