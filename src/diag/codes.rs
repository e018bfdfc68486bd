//! The diagnostics catalogue: a stable code for every kind of problem a user can meet.
//!
//! In: nothing (a fixed table). Out: [`Code`], attached to every [`crate::diag::Diagnostic`]
//! and to every usage error, printed on the error's first line (`error H104: …`) and explained at
//! length by `phasewright explain CODE`. Invariant: a code, once published, keeps its meaning;
//! new kinds of problem get new codes, retired ones are never reused. The letter says which
//! reader or layer speaks (H `.ham`, D `.dev`, F integral files, Q OpenQASM 3 circuit files, C
//! counts files, P plan.json, U the command line, O output paths, I file access, X internal), the
//! first digit the stage (1 syntax, 2 names and values, 3 meaning, 4 limits).

use std::fmt;

macro_rules! catalogue {
    ($( $variant:ident = $id:literal, $title:literal, $long:literal; )*) => {
        /// One kind of problem. See the module documentation for the numbering.
        #[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
        pub enum Code { $( $variant, )* }

        impl Code {
            /// Every code, in catalogue order.
            pub const ALL: &'static [Code] = &[ $( Code::$variant, )* ];

            /// The printed identifier, e.g. `H104`.
            pub fn id(self) -> &'static str {
                match self { $( Code::$variant => $id, )* }
            }

            /// One line: what kind of problem this is.
            pub fn title(self) -> &'static str {
                match self { $( Code::$variant => $title, )* }
            }

            /// The long form shown by `phasewright explain`: why it happens and what to do.
            pub fn explanation(self) -> &'static str {
                match self { $( Code::$variant => $long, )* }
            }
        }
    };
}

catalogue! {
    // ----- .ham Hamiltonian files ---------------------------------------------------------
    HamSyntax = "H101", "a .ham line does not follow the grammar",
        "The reader expected one thing and found another: a term is an optional coefficient \
followed by factors such as `X0 Z3`, a statement starts with a keyword (`qubits`, `let`, `sum`, \
`encoding`). Look at the caret: the text before it was read, the text under it was not. A stray \
operator, an unclosed bracket or a missing `}` of a `sum` body are the usual causes.";
    HamHeader = "H102", "the `qubits N` declaration is missing, repeated or out of range",
        "Every .ham file starts with `qubits N` (after comments), once, with 1 ≤ N ≤ 4096. The \
qubit count fixes the register the circuits act on; it is never guessed from the terms.";
    HamUnknownWord = "H103", "an unknown keyword, factor or function",
        "A factor is X, Y or Z followed by a qubit index (or a fermionic operator `a+`/`a` under an \
`encoding`); keywords and functions are listed in the README (Input languages). The hint names the nearest known \
word when one is close. A .dev device file given where a Hamiltonian is expected is recognised \
and said so.";
    HamQubitRange = "H104", "a qubit index outside the declared register",
        "Qubits are numbered from 0 to N−1, where N is the `qubits N` declaration. An index \
computed in a `sum` body is checked for every value of the loop variable; the caret points at \
the factor, and the message gives the value.";
    HamName = "H201", "an undefined or redefined name",
        "Names are introduced by `let NAME = value` or as a `sum` loop variable and must be \
defined before use; a name is defined once per scope. Check the spelling (the hint suggests a \
close name) and the order of the lines.";
    HamValue = "H202", "a value that cannot be used where it stands",
        "Coefficients must be finite real numbers (or complex pairs where a Hermitian part is \
taken), ranges must be ascending integers, divisions must not divide by zero. The message says \
which value and why.";
    HamMeaning = "H301", "terms that are well-formed but do not make a Hamiltonian",
        "Examples: a qubit repeated in one Pauli term, fermionic terms without an encoding, a \
sum with no non-identity term. phasewright compiles Hermitian sums of Pauli strings; the message \
names the term.";
    HamLimit = "H401", "the file exceeds a size or nesting limit",
        "Brackets nest at most 64 deep and a line carries at most 1,024 operators, so that the \
reader's recursion stays bounded; the term count is bounded by the memory the compile would \
need. Split long expressions with `let`.";
    // ----- .dev device files --------------------------------------------------------------
    DevSyntax = "D101", "a .dev line does not follow the grammar",
        "Each line of a device file is a keyword and its arguments: `qubits N`, `lattice KIND \
…`, `link A B`, `native GATES…`, calibration lines. Look at the caret for the first text the \
reader could not take.";
    DevDeclare = "D102", "the qubits, lattice or native gates are missing or repeated",
        "A device declares its qubits once (`qubits N` or a `lattice` line) and its native gate \
set once (`native …`). Without them no circuit can be placed or lowered.";
    DevUnknownWord = "D103", "an unknown keyword or gate name",
        "Keywords and gate names are listed in the README (Input languages). The hint names the nearest known \
word when one is close. A .ham file given where a device is expected is recognised and said so.";
    DevQubitRange = "D104", "a coupling or calibration names a qubit the device does not have",
        "Device qubits are numbered from 0 to N−1. A `link` between a qubit and itself, or a \
coupling listed twice, is reported here as well.";
    DevValue = "D201", "a calibration value out of range",
        "Durations are positive, error rates lie in [0, 1], lattice sizes are positive integers. \
The message names the value and its allowed range.";
    DevLimit = "D401", "the device exceeds a size limit or cannot hold the campaign",
        "A device has at most 4,096 qubits and a bounded number of couplings; a campaign needs a \
connected coupling graph with at least one more qubit than the Hamiltonian (the Hadamard-test \
ancilla).";
    // ----- integral (FCIDUMP) files ------------------------------------------------------
    FciSyntax = "F101", "an integral file does not follow the FCIDUMP layout",
        "An integral file opens with a `&FCI … &END` (or `/`) namelist giving NORB, NELEC and \
MS2, followed by lines `value i j k l`. The caret marks the first text that does not fit.";
    FciValue = "F201", "an integral index or value out of range",
        "Orbital indices run from 1 to NORB (0 marks the one-electron and constant lines); \
values must be finite. The message names the offending line's field.";
    FciLimit = "F401", "the integral file needs more spin orbitals than supported",
        "Integral files and the `hf` reference are read with 64-bit occupations: at most 63 \
spin orbitals (31 spatial orbitals). Select an active space with --active FIRST-LAST.";
    // ----- OpenQASM 3 circuit files -------------------------------------------------------
    QasmSyntax = "Q101", "a circuit file is not the OpenQASM 3 subset phasewright writes",
        "phasewright reads back only the circuits it wrote: a version line, one qubit and one bit \
register, standard gates, measurements. A hand-edited file that uses other statements is \
refused; recompile the campaign instead of editing its files.";
    QasmPlan = "Q301", "a circuit file disagrees with plan.json",
        "The register sizes or the measured bits of a circuit file differ from what plan.json \
records for that circuit, or the file's SHA-256 differs from the recorded one: the campaign \
folder was edited or mixed with another. Recompile it.";
    // ----- counts files -------------------------------------------------------------------
    CountsSyntax = "C101", "a counts file is not valid JSON of the counts layout",
        "A counts file is a JSON object with a `format` key and one entry per circuit id mapping \
bit strings to counts (docs/counts.md). The caret marks where the JSON or its layout breaks.";
    CountsEntry = "C201", "a counts entry names an unknown circuit or holds a bad bit string",
        "Circuit ids must be those of plan.json (e.g. `k01-re`), each once; bit strings carry one \
character 0/1 per classical bit of that circuit; counts are non-negative integers.";
    CountsPlan = "C301", "the counts do not answer this plan",
        "Circuits of the plan have no counts, or the counts were written for another campaign \
or with the other bit order. Check `bit_order` and that the counts and the plan belong \
together.";
    // ----- plan.json ----------------------------------------------------------------------
    PlanSyntax = "P101", "plan.json is not a plan phasewright wrote",
        "The plan is JSON in the layout named by its `format` key. A plan from another program, \
a truncated file or one written by an incompatible version is refused; recompile the \
campaign.";
    PlanInconsistent = "P301", "plan.json contradicts itself",
        "Reads that name bits a circuit does not have, states of the wrong length, term indices \
beyond the Hamiltonian: a hand-edited plan. Recompile the campaign rather than editing it.";
    PlanFiles = "P302", "a file of the campaign is missing or changed",
        "plan.json records the SHA-256 of every file it lists. A missing file or one whose hash \
differs means the folder was edited, partly copied or mixed; recompile the campaign.";
    // ----- command line -------------------------------------------------------------------
    UsageOption = "U101", "a command-line option or value is not accepted",
        "The option is unknown, or its value has the wrong form or lies outside its range \
(e.g. --dt must be positive, --order is 1, 2 or 4). `phasewright COMMAND --help` lists every \
option with an example.";
    UsageConflict = "U201", "options that cannot go together, or a required one missing",
        "Some options apply only to some campaigns (--samples to trace campaigns, --state to \
overlap and Krylov ones), and some need another (--noise needs a plan compiled for a device). \
The hint says which option to add or drop.";
    UsageInput = "U301", "an input of the wrong kind or that does not fit the target",
        "The input is not a text file, is a file of the other language, has nothing to evolve, \
or does not fit on the device (too few or disconnected qubits). For `merge`: the shares given \
do not make one whole campaign (a share missing or given twice, shares of different campaigns \
or rehearsals, a circuit counted twice); give every share of one job array once.";
    UsageLimit = "U401", "the request exceeds a limit or the machine's memory",
        "Points, steps and circuits are bounded so that a typing slip cannot fill the disk; the \
peak memory of a compile is predicted before any work and refused when it exceeds the machine. \
The message states the cost; reduce --points, --steps, --order or the number of terms.";
    OutputPath = "O101", "an output path cannot be used",
        "A campaign folder must be new, empty, or an older phasewright campaign (replaced whole, \
or with --force); `-` (stdout) is not available where a command writes several files; a plot \
goes to an .svg file in an existing folder.";
    // ----- files and internal -------------------------------------------------------------
    FileAccess = "I101", "a file cannot be read or written",
        "The operating system refused: the path does not exist, permissions forbid it, or the \
disk is full. The message gives the path and the system's reason.";
    Internal = "X101", "an internal failure (a phasewright bug)",
        "A pass broke an invariant of the circuit IR or an internal check failed. This is never \
caused by your input alone; please report it with the command and input files.";
}

impl Code {
    /// The code whose identifier is `id` (case-insensitive).
    pub fn find(id: &str) -> Option<Code> {
        Code::ALL
            .iter()
            .copied()
            .find(|c| c.id().eq_ignore_ascii_case(id.trim()))
    }
}

impl fmt::Display for Code {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.id())
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::collections::HashSet;

    #[test]
    fn identifiers_are_unique_and_well_formed() {
        let mut seen = HashSet::new();
        for c in Code::ALL {
            let id = c.id();
            assert!(seen.insert(id), "{id} used twice");
            assert_eq!(id.len(), 4, "{id}");
            assert!("HDFQCPUOIX".contains(&id[..1]), "{id}");
            assert!(id[1..].chars().all(|ch| ch.is_ascii_digit()), "{id}");
            assert!(!c.title().is_empty() && c.explanation().len() > 60, "{id}");
            assert_eq!(Code::find(&id.to_lowercase()), Some(*c));
        }
        assert_eq!(Code::find("H999"), None);
    }
}
