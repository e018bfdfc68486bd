//! The plan: a machine-readable description of a compiled campaign (`DIR/plan.json`).
//!
//! In: what the compiler decided (Hamiltonian summary, formula, states, circuits and what each
//! one reads). Out: a serde model written as JSON and read back by `verify`, `rehearse`,
//! `allot`, `merge` and `estimate`. Invariant: the plan alone says how to recombine counts: every circuit lists its
//! [`Read`]s, each naming the quantity it estimates and the classical bits whose parity gives it.
//!
//! Schema `phasewright-plan/3` (documented in README; a `phasewright-plan/2` plan is a valid
//! `/3` plan and is read as one):
//! - `family`: `overlap` | `krylov` | `trace` | `evolution` (plain time-evolution circuits: no
//!   ancilla, no `part`, no `ancilla_bit`, no reads; bit q holds system qubit q, and the counts
//!   sample `|⟨b|U(k·dt)|ψ⟩|²` for the user's own analysis);
//! - `control` (new in `/3`, `evolution` when absent): what the Hadamard-test ancilla controls,
//!   `evolution` or `prep` (see `family::control`);
//! - `hamiltonian`: `qubit_count`, constant (identity coefficient, never a gate), one-norm, terms;
//! - `formula`: order, Trotter steps per unit of `k`, `dt`;
//! - `states`: reference states (`0 1 + - r l`, qubit 0 first); one for overlap/krylov, N for trace;
//! - `device` (absent on all-to-all): name, `qubit_count`, native gates, `start_placement`;
//! - `circuits`: id, file, `k`, time, part (`re`/`im`), state index, optional group,
//!   `qubit_count`, `bit_count`, ancilla bit, reads, costs, `end_placement` (on a device), and
//!   the file's SHA-256 (the plan is written after every file it lists), and optionally the
//!   shots planned for it (`shots`, written by `phasewright allot`).
//!
//! The Rust field names (`num_qubits`, `num_clbits`, `initial_layout`, `final_layout`) are
//! those the compiler passes use; the JSON keys are the plan's own words.
//!
//! A read's value is `⟨Π_{b ∈ bits} (−1)^{c_b}⟩` over the shots, i.e. the parity expectation of
//! the listed classical bits; for part `re` it estimates `Re q`, for part `im` it estimates `Im q`,
//! where `q` is `⟨ψ_s|U(k·dt)|ψ_s⟩` (target `overlap`) or `⟨ψ_s|P_j U(k·dt)|ψ_s⟩` (target `term`
//! j, an index into `hamiltonian.terms`).
//!
//! Errors: what the plan's contents cannot give back is a [`PlanError`] (today: a term of
//! `hamiltonian.terms` that does not read as a Pauli string on the plan's qubits). A plan is
//! user input, so every [`PlanError`] is bad input, reported under `P301` (exit 2).
//! [`Plan::validate`] reports the same problems with their place in the file first; a plan
//! built in code can still reach these.

use crate::circuit::metrics::Counts;
use crate::diag::Code;
use crate::error::{Blame, LayerError};
use serde::{Deserialize, Serialize};

/// What a plan's contents cannot give back; always bad input (see the module header).
#[derive(Clone, Debug, PartialEq)]
pub enum PlanError {
    /// A term's text does not read as a Pauli string on `num_qubits` qubits.
    UnreadableTerm { term: String, num_qubits: usize },
}

impl std::fmt::Display for PlanError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            PlanError::UnreadableTerm { term, num_qubits } => write!(
                f,
                "plan.json: cannot read term `{term}` on {num_qubits} qubits"
            ),
        }
    }
}

impl std::error::Error for PlanError {}

impl LayerError for PlanError {
    fn blame(&self) -> Blame {
        match self {
            PlanError::UnreadableTerm { .. } => Blame::Input(Code::PlanInconsistent),
        }
    }
}

/// Identifies the schema in `plan.json`.
pub const PLAN_FORMAT: &str = "phasewright-plan/3";

/// Every schema this reader accepts: the current one and `/2`, which differs only by lacking
/// `control` (read as `evolution`) and the `evolution` family.
pub const READABLE_PLAN_FORMATS: [&str; 2] = [PLAN_FORMAT, "phasewright-plan/2"];

#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct Plan {
    /// Schema name, [`PLAN_FORMAT`] when written (a reader also takes every name in
    /// [`READABLE_PLAN_FORMATS`]).
    pub format: String,
    /// Which circuit family the campaign holds, hence how `estimate` recombines its counts.
    pub family: Family,
    /// The compiled Hamiltonian: its terms as compiled, the constant added back at estimation.
    pub hamiltonian: HamiltonianInfo,
    /// The product formula every circuit's evolution uses.
    pub formula: FormulaInfo,
    /// Reference states, one character per qubit from `0 1 + - r l`, qubit 0 first; one for
    /// `overlap` and `krylov`, one per random state for `trace`. [`CircuitEntry::state`]
    /// indexes this list.
    pub states: Vec<String>,
    /// Seed used to draw random states (trace family), if any.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub seed: Option<u64>,
    /// Unit of the coefficients, hence of every energy (`hartree` for an integral-file input);
    /// absent when the input does not say (a `.ham` file), and then energies are in the units
    /// of its coefficients.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub energy_unit: Option<String>,
    /// Strings with `|coefficient|` below this were dropped from the input as round-off
    /// before compiling (`compile --cutoff`); absent in plans written before the option.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub coefficient_cutoff: Option<f64>,
    /// Number of time points K: k runs over 0..K.
    pub points: usize,
    /// What the ancilla controls: `evolution` (every rotation) or `prep` (only the state
    /// preparation; the evolution runs uncontrolled). Absent in older plans: `evolution`.
    #[serde(default = "default_control")]
    pub control: crate::family::control::Control,
    /// The device the circuits were routed and lowered for; absent on the all-to-all target
    /// (logical qubits, any gate).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub device: Option<DeviceInfo>,
    /// On the all-to-all target: the sign-flip step (`synth::flip`) through which the
    /// circuits marked `flipped` control their Trotter steps. Absent: no circuit is flipped
    /// (on a device the flip is `device.flip_string`, for every circuit).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub flip: Option<FlipInfo>,
    /// Present when this plan is one share of a campaign split for a job array
    /// (`compile --shard I/N`): it lists only that share's circuits.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub shard: Option<ShardInfo>,
    /// Every circuit of the campaign (of this share, for a shard), in the order `compile`
    /// wrote them, which is the order of a counts file's entries.
    pub circuits: Vec<CircuitEntry>,
}

/// Which share of a split campaign a plan holds: circuit `j` of the whole campaign (plan order)
/// belongs to share `j mod count + 1`, so shares are balanced across time points.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct ShardInfo {
    /// 1-based share number.
    pub index: usize,
    /// Number of shares the campaign was split into.
    pub count: usize,
    /// Circuits in the whole campaign.
    pub campaign_circuits: usize,
}

impl ShardInfo {
    /// Does circuit `j` of the whole campaign (plan order, from 0) belong to share `index` of
    /// `count`? The one partition rule of `compile`, `verify`, `rehearse` and `merge`.
    pub fn holds(index: usize, count: usize, j: usize) -> bool {
        count > 0 && j % count + 1 == index
    }

    /// The campaign-wide index (plan order, from 0) of this share's `local`-th circuit.
    pub fn global_index(&self, local: usize) -> usize {
        local * self.count + (self.index - 1)
    }

    /// How many circuits this share holds.
    pub fn len(&self) -> usize {
        (self.campaign_circuits + self.count - self.index) / self.count
    }

    /// Does this share hold no circuit (more shares than circuits)?
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }
}

fn default_control() -> crate::family::control::Control {
    crate::family::control::Control::Evolution
}

#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize, PartialOrd, Ord, Hash)]
#[serde(rename_all = "lowercase")]
pub enum Family {
    /// Hadamard tests of `⟨ψ|U(k·dt)|ψ⟩` only (energies from the overlaps alone).
    Overlap,
    /// Hadamard tests of the overlaps and of `⟨ψ|P_j U(k·dt)|ψ⟩` for every term, measured
    /// in commuting groups (Krylov matrix elements `S_k` and `h_k`).
    Krylov,
    /// Hadamard tests of `⟨ψ_s|U(k·dt)|ψ_s⟩` over random states `ψ_s` (a stochastic trace,
    /// for the density of states).
    Trace,
    /// Plain time evolution, every qubit measured (no Hadamard test).
    Evolution,
}

#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct HamiltonianInfo {
    /// The name of the input it was read from, as the caller of `compile` gave it.
    pub source: String,
    /// System qubits (the ancilla, when there is one, is not counted).
    #[serde(rename = "qubit_count")]
    pub num_qubits: usize,
    /// Coefficient of the identity: added back at estimation time, never compiled.
    pub constant: f64,
    /// `Σ |c_j|` over the non-identity terms.
    pub one_norm: f64,
    /// The non-identity terms as compiled, in the order a [`Target::Term`] indexes them.
    pub terms: Vec<TermInfo>,
}

#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct TermInfo {
    /// Sparse text form, e.g. `X0 Y1 Z3`.
    pub pauli: String,
    /// Real coefficient of the string, in the units of [`Plan::energy_unit`].
    pub coeff: f64,
}

#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct FormulaInfo {
    /// 1 (Lie–Trotter), 2 (Strang), 4 (Suzuki).
    pub order: u32,
    /// Trotter steps used for one `dt`; time point k uses `k·steps` steps of `dt/steps`.
    pub steps_per_dt: usize,
    /// Time between consecutive points: time point `k` evolves for `k·dt`.
    pub dt: f64,
}

#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct DeviceInfo {
    /// The device's name (its `name` statement, else the `.dev` file's stem).
    pub name: String,
    /// Physical qubits of the device.
    #[serde(rename = "qubit_count")]
    pub num_qubits: usize,
    /// Native gate names (OpenQASM spelling, `U` for the built-in) the files are written in.
    pub native: Vec<String>,
    /// `start_placement[l]` = physical qubit holding logical qubit l when every circuit starts
    /// (the ancilla is the last l).
    #[serde(rename = "start_placement")]
    pub initial_layout: Vec<u32>,
    /// Physical qubits of the ancilla's control copies when every circuit with a Trotter step
    /// starts (`route::cat`): spare qubits that the fan-out after the ancilla's `h` sets equal
    /// to it and its undoing returns to |0⟩. Empty (absent) for the usual Hadamard test.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub copy_placement: Vec<u32>,
    /// The circuits use qubits outside `start_placement` (control copies, temporary copies,
    /// qubits moved into unused sites by two CNOTs): correct, like every circuit, on a device
    /// whose qubits all start in |0⟩, and each such qubit ends in |0⟩ again (`route::cat`).
    /// Absent: false, unused qubits are only moved around by SWAPs.
    #[serde(default, skip_serializing_if = "std::ops::Not::not")]
    pub spare_qubits: bool,
    /// The Pauli string `Q` (factor text, logical qubits) through which the ancilla controls
    /// each Trotter step when the step is written by a sign flip (`synth::flip`): `Q`
    /// anticommutes with every term, the ancilla controls `Q` twice per step and every
    /// rotation runs uncontrolled. Absent: the ancilla controls the rotations themselves.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub flip_string: Option<String>,
    /// With `flip_string`: how many terms, leading in the formula's order (its first commuting
    /// groups), the ancilla still controls rotation by rotation, around the flipped inner
    /// groups (a partial flip, `synth::flip::flip_split`). Absent: 0, every term flips.
    #[serde(default, skip_serializing_if = "is_zero")]
    pub flip_controlled_terms: usize,
    /// With `flip_string`: the order in which each commuting block's rotations are written,
    /// `"given"` (the terms' order) or `"layers"` (layers on disjoint qubits). Absent: given.
    #[serde(default, skip_serializing_if = "is_given")]
    pub flip_order: crate::synth::flip::BlockOrder,
    /// With `flip_string`: the step is *signed* (`synth::flip::Choice::Signed`): every term
    /// that commutes with `Q` (every term when `Q` is `I`) rides on the ancilla's sign in the
    /// step's first half, and `flip_controlled_terms` counts them. Absent: false.
    #[serde(default, skip_serializing_if = "std::ops::Not::not")]
    pub flip_signed: bool,
    /// With `compile --tries N` (N > 1): the seed whose layout search built this campaign, so
    /// that `--seed` with it and one try builds the same files. Absent: one search.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub search_seed: Option<u64>,
}

/// The sign-flip step of an all-to-all campaign ([`Plan::flip`]): the same three facts a
/// device campaign records in `device.flip_string`, `flip_controlled_terms` and `flip_order`.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct FlipInfo {
    /// The Pauli string `Q` (factor text, logical qubits) the ancilla controls twice per
    /// flipped palindrome; it anticommutes with every flipped term.
    pub string: String,
    /// How many leading terms (in the formula's order) stay controlled rotation by rotation.
    /// Absent: 0, every term flips.
    #[serde(default, skip_serializing_if = "is_zero")]
    pub controlled_terms: usize,
    /// The order of each commuting block's rotations. Absent: given.
    #[serde(default, skip_serializing_if = "is_given")]
    pub order: crate::synth::flip::BlockOrder,
    /// The step is signed, as `device.flip_signed` says. Absent: false.
    #[serde(default, skip_serializing_if = "std::ops::Not::not")]
    pub signed: bool,
}

fn is_given(o: &crate::synth::flip::BlockOrder) -> bool {
    *o == crate::synth::flip::BlockOrder::Given
}

#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize, PartialOrd, Ord, Hash)]
#[serde(rename_all = "lowercase")]
pub enum Part {
    /// The real part: the ancilla is measured in the `X` basis.
    Re,
    /// The imaginary part: the ancilla gets `sdg` before the `X`-basis measurement.
    Im,
}

#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(tag = "target", rename_all = "lowercase")]
pub enum Target {
    /// `⟨ψ_s|U|ψ_s⟩`.
    Overlap,
    /// `⟨ψ_s|P_j U|ψ_s⟩` for `hamiltonian.terms[term]`.
    Term { term: usize },
}

#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct Read {
    /// The quantity this read estimates (written flat, as the `target` key and its fields).
    #[serde(flatten)]
    pub target: Target,
    /// Classical bits whose parity expectation estimates the target's `part`.
    pub bits: Vec<u32>,
}

#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct CircuitEntry {
    /// The circuit's name, unique in the plan: the key of its counts in a counts file.
    pub id: String,
    /// Its OpenQASM 3 file, a plain name in the campaign folder.
    pub file: String,
    /// Time point: the circuit evolves for `k` steps of `dt`.
    pub k: usize,
    /// `k·dt`, the evolution time.
    pub time: f64,
    /// Which part of the Hadamard test (absent for the `evolution` family).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub part: Option<Part>,
    /// Index into `Plan::states`.
    pub state: usize,
    /// Measurement group (krylov family), if any.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub group: Option<usize>,
    /// Qubits the file addresses (logical qubits, or the device's physical qubits).
    #[serde(rename = "qubit_count")]
    pub num_qubits: usize,
    /// Classical bits the file declares (the length of every bitstring of its counts).
    #[serde(rename = "bit_count")]
    pub num_clbits: usize,
    /// Classical bit holding the Hadamard-test ancilla (absent for the `evolution` family).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub ancilla_bit: Option<u32>,
    /// What the circuit's counts estimate, each from the parity of some classical bits.
    pub reads: Vec<Read>,
    /// Gate counts, depth and (on a device) duration and success probability of the file.
    pub costs: Costs,
    /// `end_placement[l]` = physical qubit holding logical qubit l when the circuit ends, after
    /// its SWAPs (the ancilla is the last l); empty on all-to-all.
    #[serde(
        rename = "end_placement",
        default,
        skip_serializing_if = "Vec::is_empty"
    )]
    pub final_layout: Vec<u32>,
    /// SHA-256 of `file` (lowercase hex), recorded by `compile` after writing it. When present,
    /// every reader of the campaign refuses a missing or changed file.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub sha256: Option<String>,
    /// Shots planned for this circuit (`phasewright allot`); `rehearse` draws this many when
    /// no `--shots` is given. Absent when no allocation was made.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub shots: Option<u64>,
    /// Control-free circuits on a device whose controlled preparation is a fan-out tree on the
    /// coupled pairs of the layout (`family::control::fanout_prep`): its CNOTs as logical
    /// `[control, target]` pairs (the ancilla is the last qubit), before and after the
    /// evolution. Absent: the preparation the plan's form implies (`control::Joins`).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub fanout: Option<FanOut>,
    /// On the all-to-all target: the circuit's Trotter steps are the sign-flip steps of
    /// [`Plan::flip`] (each step written so where that emitted fewer two-qubit gates). Absent:
    /// false.
    #[serde(default, skip_serializing_if = "std::ops::Not::not")]
    pub flipped: bool,
}

/// The controlled preparations of one control-free circuit, as CNOT lists (see
/// [`CircuitEntry::fanout`]).
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct FanOut {
    /// The preparation's CNOTs before the evolution, in order.
    pub before: Vec<[u32; 2]>,
    /// The CNOTs after the evolution that undo it, in order.
    pub after: Vec<[u32; 2]>,
}

impl FanOut {
    /// The gates of one list.
    pub fn gates(cnots: &[[u32; 2]]) -> Vec<crate::circuit::Gate> {
        cnots
            .iter()
            .map(|&[a, b]| crate::circuit::Gate::Cx(a, b))
            .collect()
    }

    /// The lists of two preparations made only of CNOTs, or `None`.
    pub fn of(before: &[crate::circuit::Gate], after: &[crate::circuit::Gate]) -> Option<FanOut> {
        let pairs = |w: &[crate::circuit::Gate]| -> Option<Vec<[u32; 2]>> {
            w.iter()
                .map(|g| match *g {
                    crate::circuit::Gate::Cx(a, b) => Some([a, b]),
                    _ => None,
                })
                .collect()
        };
        Some(FanOut {
            before: pairs(before)?,
            after: pairs(after)?,
        })
    }
}

/// Costs of one circuit as recorded in the plan.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize, Default)]
pub struct Costs {
    /// Depth of the written circuit, every gate one layer ([`crate::circuit::metrics::counts`]).
    pub depth: usize,
    /// Two-qubit depth of the written circuit: the longest chain of two-qubit gates, one-qubit
    /// gates weighing nothing (absent in plans written before it was recorded: 0).
    #[serde(default)]
    pub two_qubit_depth: usize,
    /// Two-qubit gates in the written file (a SWAP the router inserted counts as the native
    /// gates it was lowered into).
    pub two_qubit: usize,
    /// One-qubit gates in the written file (measurements not counted).
    pub one_qubit: usize,
    /// SWAPs the router inserted (0 on all-to-all); their gates are in `two_qubit`.
    pub swaps: usize,
    /// Spare qubits the circuit uses as control copies of the ancilla (`route::cat`): the
    /// copies made once after the ancilla's `h` (`device.copy_placement`) plus the unused
    /// qubits set as a copy for one rotation and cleared again. Absent: none, the ancilla alone
    /// controls the evolution. Their CNOTs are counted in `two_qubit`.
    #[serde(default, skip_serializing_if = "is_zero")]
    pub control_copies: usize,
    /// Critical-path duration in ns from the device's gate times (absent without a device).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub duration_ns: Option<f64>,
    /// `Π (1 − error)` over gates and readouts (absent without a device).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub success_probability: Option<f64>,
}

fn is_zero(v: &usize) -> bool {
    *v == 0
}

impl From<Counts> for Costs {
    fn from(c: Counts) -> Costs {
        Costs {
            depth: c.depth,
            two_qubit_depth: c.two_qubit_depth,
            two_qubit: c.two_qubit,
            one_qubit: c.one_qubit,
            swaps: c.swaps,
            control_copies: 0,
            duration_ns: None,
            success_probability: None,
        }
    }
}

/// Most time points a plan (and `compile --points`) may have: the Krylov pencils of every
/// dimension 1..K cost O(K⁴) to solve, so K = 4096 is already far past any useful campaign.
pub const MAX_POINTS: usize = 4096;

/// Most qubits a plan's Hamiltonian may have (the `.ham` limit; bit 63 is the ancilla's).
pub const MAX_PLAN_QUBITS: usize = crate::lang::ham::MAX_HAM_QUBITS;

/// Most classical bits a circuit may have (outcome masks of counts files are `u128`).
pub const MAX_PLAN_BITS: usize = 128;

/// Most physical qubits a plan's device may have (the `.dev` limit).
pub const MAX_PLAN_DEVICE_QUBITS: usize = crate::lang::dev::MAX_DEVICE_QUBITS as usize;

/// One step of the path to a value in plan.json: an object key or an array index.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum PathStep {
    Key(&'static str),
    Index(usize),
}

/// A value in a plan that does not make sense: where it is and what is wrong.
#[derive(Clone, Debug, PartialEq)]
pub struct PlanProblem {
    /// Where the value is in plan.json, from the top.
    pub path: Vec<PathStep>,
    /// What is wrong with it.
    pub message: String,
    /// How to fix it, when there is something to say.
    pub hint: Option<String>,
}

/// `circuits[i].key`.
fn at_circuit(i: usize, key: &'static str) -> Vec<PathStep> {
    vec![
        PathStep::Key("circuits"),
        PathStep::Index(i),
        PathStep::Key(key),
    ]
}

/// SHA-256 of `bytes` as 64 lowercase hex digits: the digest [`CircuitEntry::sha256`] records
/// for a campaign file (and the fingerprint of a sharded campaign is built from).
pub fn sha256_hex(bytes: &[u8]) -> String {
    use sha2::{Digest, Sha256};
    Sha256::digest(bytes)
        .iter()
        .map(|b| format!("{b:02x}"))
        .collect()
}

/// A file name a plan may list: a plain name in the campaign folder, never a path.
pub fn is_plain_file_name(name: &str) -> bool {
    !name.is_empty()
        && name != "."
        && name != ".."
        && name != "plan.json"
        && !name.starts_with('.')
        && !name.contains(['/', '\\', ':', '\0'])
}

impl Plan {
    /// The energy axis label: `energy (hartree)`, or `energy (units of H's coefficients)`.
    pub fn energy_label(&self) -> String {
        match &self.energy_unit {
            Some(u) => format!("energy ({u})"),
            None => "energy (units of H's coefficients)".to_string(),
        }
    }

    /// Every inconsistency between the plan's parts, each with its place in plan.json. A plan
    /// with none can be simulated, sampled and estimated without any index going out of
    /// range: states fit the Hamiltonian, circuits point at existing states, terms and bits,
    /// and the sizes stay within the limits above. Run on every plan read, before use.
    pub fn validate(&self) -> Vec<PlanProblem> {
        let mut out = Vec::new();
        let mut bad = |path: Vec<PathStep>, message: String, hint: Option<&str>| {
            out.push(PlanProblem {
                path,
                message,
                hint: hint.map(str::to_string),
            })
        };
        use PathStep::{Index, Key};
        let n = self.hamiltonian.num_qubits;
        if n == 0 || n > MAX_PLAN_QUBITS {
            bad(
                vec![Key("hamiltonian"), Key("qubit_count")],
                format!("the Hamiltonian has {n} qubits; a plan holds 1 to {MAX_PLAN_QUBITS}"),
                None,
            );
            // Every later check depends on n.
            return out;
        }
        if !self.hamiltonian.constant.is_finite() {
            bad(
                vec![Key("hamiltonian"), Key("constant")],
                "the constant is not a finite number".into(),
                None,
            );
        }
        let mut previous = None;
        for (j, t) in self.hamiltonian.terms.iter().enumerate() {
            let path = || vec![Key("hamiltonian"), Key("terms"), Index(j)];
            match crate::pauli::PauliString::parse_factor_text(&t.pauli) {
                Some(p) if p.is_identity() => bad(
                    path(),
                    format!("term {j} `{}` is the identity", t.pauli),
                    Some("the identity coefficient belongs in `constant`"),
                ),
                Some(p) if p.span() > n => bad(
                    path(),
                    format!(
                        "term {j} `{}` acts beyond the {n} qubits of the Hamiltonian",
                        t.pauli
                    ),
                    None,
                ),
                Some(p) => {
                    if previous.is_some_and(|q| q >= p) {
                        bad(
                            path(),
                            format!("term {j} `{}` is out of order or repeated", t.pauli),
                            Some("reads index the terms in the order phasewright wrote them; recompile instead of editing"),
                        );
                    }
                    previous = Some(p);
                }
                None => bad(
                    path(),
                    format!(
                        "term {j} `{}` is not a Pauli string such as `X0 Z2`",
                        t.pauli
                    ),
                    None,
                ),
            }
            if !(t.coeff.is_finite() && t.coeff != 0.0) {
                bad(
                    path(),
                    format!(
                        "term {j} has coefficient {}; it must be finite and non-zero",
                        t.coeff
                    ),
                    None,
                );
            }
        }
        if crate::formula::Order::from_number(self.formula.order).is_none() {
            bad(
                vec![Key("formula"), Key("order")],
                format!("formula order {} is not 1, 2 or 4", self.formula.order),
                None,
            );
        }
        if self.formula.steps_per_dt == 0 {
            bad(
                vec![Key("formula"), Key("steps_per_dt")],
                "steps_per_dt must be at least 1".into(),
                None,
            );
        }
        if !(self.formula.dt.is_finite() && self.formula.dt > 0.0) {
            bad(
                vec![Key("formula"), Key("dt")],
                format!("dt {} must be a positive number", self.formula.dt),
                None,
            );
        }
        if !(2..=MAX_POINTS).contains(&self.points) {
            bad(
                vec![Key("points")],
                format!("{} time points; a plan has 2 to {MAX_POINTS}", self.points),
                None,
            );
        }
        if self.states.is_empty() {
            bad(vec![Key("states")], "the plan lists no state".into(), None);
        }
        if let Some(sh) = &self.shard {
            if sh.count == 0 || sh.index == 0 || sh.index > sh.count {
                bad(
                    vec![Key("shard")],
                    format!(
                        "share {} of {} does not exist: shares are numbered 1 to the count",
                        sh.index, sh.count
                    ),
                    None,
                );
            } else if sh.len() != self.circuits.len() {
                bad(
                    vec![Key("shard")],
                    format!(
                        "share {}/{} of a campaign of {} circuits holds {}, but the plan lists {}",
                        sh.index,
                        sh.count,
                        sh.campaign_circuits,
                        sh.len(),
                        self.circuits.len()
                    ),
                    None,
                );
            }
        }
        for (s, st) in self.states.iter().enumerate() {
            let path = vec![Key("states"), Index(s)];
            use crate::family::{RefState, StateError};
            match RefState::parse(st, n) {
                Ok(_) => {}
                Err(StateError::Letter {
                    index,
                    letter,
                    reason,
                    ..
                }) => bad(
                    path,
                    format!("state {s} `{st}`: letter {index} `{letter}`: {reason}"),
                    Some("states use 0 1 + - r l (and ss), qubit 0 first"),
                ),
                Err(StateError::Length { letters, .. }) => bad(
                    path,
                    format!(
                        "state {s} `{st}` has {letters} letters but the Hamiltonian has {n} qubits"
                    ),
                    None,
                ),
            }
        }
        let device_qubits = self.device.as_ref().map(|d| d.num_qubits);
        if let Some(d) = &self.device {
            if d.num_qubits == 0 || d.num_qubits > MAX_PLAN_DEVICE_QUBITS {
                bad(
                    vec![Key("device"), Key("qubit_count")],
                    format!(
                        "a device of {} qubits; 1 to {MAX_PLAN_DEVICE_QUBITS} are allowed",
                        d.num_qubits
                    ),
                    None,
                );
            }
            let width = n + usize::from(self.family != Family::Evolution);
            if d.initial_layout.len() != width {
                bad(
                    vec![Key("device"), Key("start_placement")],
                    format!(
                        "the start placement lists {} qubits; the Hamiltonian{} need{} {}",
                        d.initial_layout.len(),
                        if width > n { " and the ancilla" } else { "" },
                        if width > n { "" } else { "s" },
                        width
                    ),
                    None,
                );
            }
            let mut used = std::collections::BTreeSet::new();
            for (l, &p) in d.initial_layout.iter().enumerate() {
                if p as usize >= d.num_qubits || !used.insert(p) {
                    bad(
                        vec![Key("device"), Key("start_placement"), Index(l)],
                        format!("logical qubit {l} is placed on physical qubit {p}, which is outside the device or used twice"),
                        None,
                    );
                }
            }
        }
        if let Some(d) = &self.device {
            if d.flip_signed && d.flip_string.is_none() {
                bad(
                    vec![Key("device"), Key("flip_signed")],
                    "a signed sign-flip step (`flip_signed`) without its string (`flip_string`; `I` when there is none)".into(),
                    None,
                );
            }
        }
        if self.flip.is_some() && self.device.is_some() {
            bad(
                vec![Key("flip")],
                "an all-to-all sign flip (`flip`) in a device campaign, which records its flip under `device`".into(),
                None,
            );
        }
        if self.circuits.is_empty() {
            bad(
                vec![Key("circuits")],
                "the plan lists no circuit".into(),
                None,
            );
        }
        let mut ids = std::collections::BTreeSet::new();
        let mut files = std::collections::BTreeSet::new();
        for (i, e) in self.circuits.iter().enumerate() {
            if e.id.is_empty() || !ids.insert(e.id.as_str()) {
                bad(
                    at_circuit(i, "id"),
                    format!("circuit {i}: id `{}` is empty or repeated", e.id),
                    None,
                );
            }
            if !is_plain_file_name(&e.file) || !files.insert(e.file.as_str()) {
                bad(
                    at_circuit(i, "file"),
                    format!(
                        "circuit `{}`: file `{}` is not a plain file name of its own",
                        e.id, e.file
                    ),
                    Some("a plan names files inside its own folder, without a path"),
                );
            }
            if e.flipped && (self.flip.is_none() || self.device.is_some()) {
                bad(
                    at_circuit(i, "flipped"),
                    format!(
                        "circuit `{}` is marked flipped but the plan records no all-to-all sign flip (`flip`)",
                        e.id
                    ),
                    None,
                );
            }
            if e.k >= self.points {
                bad(
                    at_circuit(i, "k"),
                    format!(
                        "circuit `{}`: k = {} but the plan has {} points",
                        e.id, e.k, self.points
                    ),
                    None,
                );
            }
            if !e.time.is_finite() {
                bad(
                    at_circuit(i, "time"),
                    format!("circuit `{}`: time is not finite", e.id),
                    None,
                );
            }
            if e.state >= self.states.len() {
                bad(
                    at_circuit(i, "state"),
                    format!(
                        "circuit `{}`: state {} but the plan lists {} state(s)",
                        e.id,
                        e.state,
                        self.states.len()
                    ),
                    Some("`state` indexes `states`, counting from 0"),
                );
            }
            let plain = self.family == Family::Evolution;
            let width = n + usize::from(!plain);
            let qubits_ok = match device_qubits {
                Some(d) => e.num_qubits >= width && e.num_qubits <= d,
                None => e.num_qubits == width,
            };
            // A missing key has no place of its own in the text: point at the circuit.
            let at_key_or_circuit = |present: bool, key| {
                if present {
                    at_circuit(i, key)
                } else {
                    vec![Key("circuits"), Index(i)]
                }
            };
            if plain != e.part.is_none() {
                bad(
                    at_key_or_circuit(e.part.is_some(), "part"),
                    format!(
                        "circuit `{}`: {}",
                        e.id,
                        if plain {
                            "an evolution circuit has no Hadamard-test part"
                        } else {
                            "a Hadamard-test circuit needs `part` (`re` or `im`)"
                        }
                    ),
                    None,
                );
            }
            if plain != e.ancilla_bit.is_none() {
                bad(
                    at_key_or_circuit(e.ancilla_bit.is_some(), "ancilla_bit"),
                    format!(
                        "circuit `{}`: {}",
                        e.id,
                        if plain {
                            "an evolution circuit has no ancilla"
                        } else {
                            "a Hadamard-test circuit needs `ancilla_bit`"
                        }
                    ),
                    None,
                );
            }
            if plain && e.num_clbits != n {
                bad(
                    at_circuit(i, "bit_count"),
                    format!(
                        "circuit `{}`: an evolution circuit measures all {n} qubits, not {}",
                        e.id, e.num_clbits
                    ),
                    None,
                );
            }
            if !qubits_ok {
                bad(
                    at_circuit(i, "qubit_count"),
                    format!("circuit `{}`: {} qubits does not fit a {n}-qubit Hamiltonian plus ancilla{}", e.id, e.num_qubits,
                        device_qubits.map(|d| format!(" on a {d}-qubit device")).unwrap_or_default()),
                    None,
                );
            }
            if e.num_clbits == 0 || e.num_clbits > MAX_PLAN_BITS {
                bad(
                    at_circuit(i, "bit_count"),
                    format!(
                        "circuit `{}`: {} classical bits; 1 to {MAX_PLAN_BITS} are allowed",
                        e.id, e.num_clbits
                    ),
                    None,
                );
            }
            if let Some(a) = e.ancilla_bit.filter(|&a| a as usize >= e.num_clbits) {
                bad(
                    at_circuit(i, "ancilla_bit"),
                    format!(
                        "circuit `{}`: ancilla bit {} is outside its {} classical bits",
                        e.id, a, e.num_clbits
                    ),
                    None,
                );
            }
            if e.reads.is_empty() && !plain {
                bad(
                    at_circuit(i, "reads"),
                    format!("circuit `{}` has no read", e.id),
                    None,
                );
            }
            for (r, rd) in e.reads.iter().enumerate() {
                let path = |key| vec![Key("circuits"), Index(i), Key("reads"), Index(r), Key(key)];
                if rd.bits.is_empty() {
                    bad(
                        path("bits"),
                        format!("circuit `{}`: read {r} lists no bit", e.id),
                        None,
                    );
                }
                for (b, &bit) in rd.bits.iter().enumerate() {
                    if bit as usize >= e.num_clbits {
                        let mut p = path("bits");
                        p.push(Index(b));
                        bad(
                            p,
                            format!("circuit `{}`: read {r} uses bit {bit}, outside its {} classical bits", e.id, e.num_clbits),
                            None,
                        );
                    }
                }
                if let Target::Term { term } = rd.target {
                    if term >= self.hamiltonian.terms.len() {
                        bad(
                            path("term"),
                            format!(
                                "circuit `{}`: read {r} names term {term} but the Hamiltonian lists {}",
                                e.id,
                                self.hamiltonian.terms.len()
                            ),
                            Some("`term` indexes `hamiltonian.terms`, counting from 0"),
                        );
                    }
                }
            }
            if e.shots == Some(0) {
                bad(
                    at_circuit(i, "shots"),
                    format!(
                        "circuit `{}`: 0 planned shots; a circuit needs at least 1",
                        e.id
                    ),
                    Some("rerun `phasewright allot` rather than editing plan.json"),
                );
            }
            if let Some(h) = &e.sha256 {
                if h.len() != 64
                    || !h
                        .bytes()
                        .all(|c| c.is_ascii_digit() || (b'a'..=b'f').contains(&c))
                {
                    bad(
                        at_circuit(i, "sha256"),
                        format!(
                            "circuit `{}`: `{h}` is not a SHA-256 (64 lowercase hex digits)",
                            e.id
                        ),
                        None,
                    );
                }
            }
            if let Some(d) = device_qubits {
                if let Some((l, p)) = e
                    .final_layout
                    .iter()
                    .enumerate()
                    .find(|(_, &p)| p as usize >= d)
                {
                    let mut path = at_circuit(i, "end_placement");
                    path.push(Index(l));
                    bad(
                        path,
                        format!(
                            "circuit `{}`: physical qubit {p} is outside the {d}-qubit device",
                            e.id
                        ),
                        None,
                    );
                }
            }
        }
        out
    }

    /// The Hamiltonian rebuilt from `hamiltonian.terms` (sparse `X0 Y1 Z3` text) with its
    /// identity coefficient as `constant`. Errors name the term that does not read back.
    pub fn pauli_sum(&self) -> Result<crate::pauli::PauliSum, PlanError> {
        let n = self.hamiltonian.num_qubits;
        let mut h = crate::pauli::PauliSum::new(n);
        h.constant = self.hamiltonian.constant;
        for t in &self.hamiltonian.terms {
            let p = crate::pauli::PauliString::parse_factor_text(&t.pauli)
                .filter(|p| p.span() <= n)
                .ok_or_else(|| PlanError::UnreadableTerm {
                    term: t.pauli.clone(),
                    num_qubits: n,
                })?;
            h.add(p, t.coeff);
        }
        Ok(h)
    }

    pub fn to_json(&self) -> String {
        serde_json::to_string_pretty(self).expect("plan serialises") + "\n"
    }

    pub fn from_json(text: &str) -> Result<Plan, serde_json::Error> {
        serde_json::from_str(text)
    }
}
