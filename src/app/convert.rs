//! `phasewright convert`: a `.ham` file with fermionic terms, or an FCIDUMP integral file, to
//! the mapped qubit Hamiltonian written in the `.ham` language.
//!
//! In: the input path, the encoding, an optional active space. Out: the output file (written
//! atomically) and a one-paragraph summary on stdout. Also the entry point the other commands
//! use to read any Hamiltonian input: [`load_qubit_hamiltonian`].

use crate::app::io::read_text;
use crate::diag::Code;
use crate::error::{Error, Result};
use crate::fermion::fcidump::{self, ActiveSpace};
use crate::fermion::{qubit_hamiltonian_from_integrals, ChemInfo, Encoding};
use crate::lang::ham::{write_flat, FlatSum};
use crate::pauli::PauliSum;
use clap::Args;
use std::path::{Path, PathBuf};

/// Help text shown after the options of `phasewright convert`.
pub const EXAMPLES: &str = "\
The input is a .ham file (Pauli terms and/or fermionic terms cr{k}, an{k}, n{k}) or an FCIDUMP
integral file (recognised by its &FCI header). Mode k is qubit k. Spin orbitals of an integral
file are interleaved: orbital p (counted from 0 in the active space) is mode 2p (alpha) and
mode 2p+1 (beta). The Hartree-Fock state is printed as a bitstring, qubit 0 first (leftmost).

`-` as the input reads stdin; `-o -` writes the .ham text to stdout (and no summary).

Examples:
  phasewright convert h2.fcidump --encoding jw -o h2.ham
  phasewright convert hubbard_ring4.ham --encoding bk -o hubbard_qubits.ham
  phasewright convert molecule.fcidump --encoding jw --active 2-5 -o active.ham";

/// Arguments of `phasewright convert`.
#[derive(Args, Debug)]
pub struct ConvertArgs {
    /// Input: a .ham file or an FCIDUMP integral file (`-`: stdin).
    pub input: PathBuf,
    /// Output .ham file, written whole or not at all (`-`: stdout).
    #[arg(short = 'o', long = "out", alias = "output")]
    pub output: PathBuf,
    /// Fermion-to-qubit encoding: jw (Jordan–Wigner) or bk (Bravyi–Kitaev). Required for
    /// integral files and for .ham files with fermionic terms but no `encoding` line.
    #[arg(long, value_parser = parse_encoding)]
    pub encoding: Option<Encoding>,
    /// Active orbitals FIRST-LAST of an integral file, numbered from 1 as in the file; lower
    /// orbitals are frozen doubly occupied, higher ones dropped. Example: --active 2-5
    #[arg(long, value_parser = parse_active)]
    pub active: Option<ActiveSpace>,
    /// Drop Pauli strings whose |coefficient| is below this (integral round-off; 0 keeps all).
    #[arg(long, default_value_t = DEFAULT_CUTOFF, value_parser = parse_cutoff)]
    pub cutoff: f64,
}

/// Default of `--cutoff` (in the input's units, hartree for integral files): far below
/// chemical accuracy (1.6e-3 Ha) and any Trotter error a campaign can resolve, and above the
/// round-off of double-precision integral transformations (about 1e-14 relative).
pub const DEFAULT_CUTOFF: f64 = 1e-10;

/// A non-negative finite `--cutoff`.
pub fn parse_cutoff(s: &str) -> std::result::Result<f64, String> {
    match s.parse::<f64>() {
        Ok(x) if x.is_finite() && x >= 0.0 => Ok(x),
        _ => Err(format!("`{s}` is not a non-negative number")),
    }
}

fn parse_encoding(s: &str) -> std::result::Result<Encoding, crate::fermion::FermionError> {
    s.parse()
}

fn parse_active(s: &str) -> std::result::Result<ActiveSpace, crate::fermion::FermionError> {
    ActiveSpace::parse(s)
}

/// Options for [`load_qubit_hamiltonian_with`].
#[derive(Clone, Copy, Debug, Default)]
pub struct LoadOptions {
    pub encoding: Option<Encoding>,
    pub active: Option<ActiveSpace>,
}

/// Reads any Hamiltonian input and returns the qubit Hamiltonian; for an FCIDUMP file (text
/// starting with `&FCI`) also the electron facts (HF state, energies).
pub fn load_qubit_hamiltonian(
    path: &Path,
    encoding: Option<Encoding>,
) -> Result<(PauliSum, Option<ChemInfo>)> {
    load_qubit_hamiltonian_with(
        path,
        LoadOptions {
            encoding,
            active: None,
        },
    )
}

/// [`load_qubit_hamiltonian`] with an active space for integral files.
pub fn load_qubit_hamiltonian_with(
    path: &Path,
    opts: LoadOptions,
) -> Result<(PauliSum, Option<ChemInfo>)> {
    let (h, info, _) = load(path, opts)?;
    Ok((h, info))
}

/// What was read, for the summary line.
struct Loaded {
    encoding: Option<Encoding>,
    terms_read: usize,
    dropped_zero: usize,
}

fn load(path: &Path, opts: LoadOptions) -> Result<(PauliSum, Option<ChemInfo>, Loaded)> {
    let name = crate::app::io::display_name(path);
    let src = read_text(path)?;
    if let Some((h, info, loaded)) = load_integrals(&name, &src, opts)? {
        return Ok((h, Some(info), loaded));
    }
    let read = crate::app::io::parse_hamiltonian_text(&name, &src, opts.encoding)?;
    let loaded = Loaded {
        encoding: read.encoding,
        terms_read: read.ham.terms_read,
        dropped_zero: read.ham.dropped_zero,
    };
    Ok((read.ham.sum, None, loaded))
}

/// [`load`] for `convert`, which only writes the sum back: a `.ham` input goes to the
/// writer's flat form directly ([`crate::hamiltonian::read_flat`]), with the same diagnostics.
fn load_flat(path: &Path, opts: LoadOptions) -> Result<(FlatSum, Option<ChemInfo>, Loaded)> {
    let name = crate::app::io::display_name(path);
    let src = read_text(path)?;
    if let Some((h, info, loaded)) = load_integrals(&name, &src, opts)? {
        return Ok((FlatSum::from_sum(&h), Some(info), loaded));
    }
    let read = crate::hamiltonian::read_flat(&name, &src, opts.encoding)
        .map_err(|d| Error::Input(crate::lang::suggest::hamiltonian_hints(&name, &src, d)))?;
    let loaded = Loaded {
        encoding: read.encoding,
        terms_read: read.terms_read,
        dropped_zero: read.dropped_zero,
    };
    Ok((read.sum, None, loaded))
}

/// The qubit Hamiltonian of an FCIDUMP text (`None` for any other text, which must then not
/// ask for an active space).
fn load_integrals(
    name: &str,
    src: &str,
    opts: LoadOptions,
) -> Result<Option<(PauliSum, ChemInfo, Loaded)>> {
    if fcidump::looks_like_fcidump(src) {
        let Some(enc) = opts.encoding else {
            return Err(Error::usage(
                Code::UsageInput,
                format!("{name} is an integral file: choose the encoding"),
                Some("pass --encoding jw (Jordan–Wigner) or --encoding bk (Bravyi–Kitaev)"),
            ));
        };
        let ints = fcidump::parse_fcidump(name, src).map_err(Error::Input)?;
        let (ints, frozen) = match opts.active {
            Some(space) => (fcidump::restrict(&ints, space)?, space.frozen),
            None => (ints, 0),
        };
        let (h, info) = qubit_hamiltonian_from_integrals(&ints, enc, frozen)
            .map_err(|e| Error::layer_in(&e, &format!("{name}: "), None))?;
        let loaded = Loaded {
            encoding: Some(enc),
            terms_read: 0,
            dropped_zero: info.dropped_roundoff,
        };
        return Ok(Some((h, info, loaded)));
    }
    if opts.active.is_some() {
        return Err(Error::usage(
            Code::UsageConflict,
            "--active applies to integral files only",
            Some("select orbitals in an FCIDUMP input"),
        ));
    }
    Ok(None)
}

/// Runs `phasewright convert`.
pub fn run(args: ConvertArgs, g: &super::Global) -> Result<()> {
    let to_stdout = crate::app::io::is_stdio(&args.output);
    if to_stdout && g.json {
        return Err(Error::usage(
            Code::OutputPath,
            "-o - and --json both want stdout",
            Some("write the .ham to a file, or drop --json"),
        ));
    }
    crate::app::io::check_out_file(&args.output, "-o", None, true)?;
    let (mut h, info, loaded) = load_flat(
        &args.input,
        LoadOptions {
            encoding: args.encoding,
            active: args.active,
        },
    )?;
    let before = h.terms.len();
    let cutoff = args.cutoff;
    h.terms.retain(|c| c.abs() >= cutoff);
    let cut = before - h.terms.len();
    let input = if crate::app::io::is_stdio(&args.input) {
        "<stdin>".to_string()
    } else {
        args.input
            .file_name()
            .map(|n| n.to_string_lossy().into_owned())
            .unwrap_or_default()
    };
    let mut header = format!("converted by phasewright from {input}\n");
    if let Some(enc) = loaded.encoding {
        header.push_str(&format!(
            "encoding: {enc} ({}); mode k is qubit k\n",
            enc.short_name()
        ));
    }
    if let Some(i) = &info {
        header.push_str(&format!(
            "spin orbitals: orbital p (from 0 in the active space) is mode 2p (alpha) and 2p+1 (beta)\n\
             active space: {} orbitals, {} electrons, MS2 = {}, {} frozen orbitals\n\
             core energy (hartree, frozen orbitals included): {}\n\
             Hartree-Fock state, qubit 0 first: {}\n\
             Hartree-Fock energy (hartree): {}\n",
            i.norb, i.nelec, i.ms2, i.frozen_orbitals, i.core_energy_ha, i.hf_state, i.hf_energy_ha
        ));
    }
    header.push_str(&format!(
        "coefficient cutoff: strings with |c| < {:e} dropped ({cut} of them)\n",
        args.cutoff
    ));
    let text = write_flat(&h, &header);
    crate::app::io::write_output(&args.output, text.as_bytes())?;
    if to_stdout {
        return Ok(());
    }
    let mut summary = format!(
        "wrote {}: {} Pauli strings on {} qubits",
        args.output.display(),
        h.terms.len(),
        h.num_qubits
    );
    if let Some(enc) = loaded.encoding {
        summary.push_str(&format!(" ({enc})"));
    }
    if info.is_none() {
        summary.push_str(&format!(
            "; {} terms read, {} exactly zero dropped",
            loaded.terms_read, loaded.dropped_zero
        ));
    }
    summary.push_str(&format!(
        "; {cut} strings with |coefficient| < {:e} dropped (--cutoff)",
        args.cutoff
    ));
    summary.push('\n');
    if let Some(i) = &info {
        summary += &format!(
            "Hartree-Fock state (qubit 0 first): {}  energy {:.10} hartree\n",
            i.hf_state, i.hf_energy_ha
        );
    }
    g.json(&serde_json::json!({
        "out": args.output.display().to_string(),
        "qubits": h.num_qubits,
        "pauli_strings": h.terms.len(),
        "constant": h.constant,
        "encoding": loaded.encoding.map(|e| e.short_name()),
        "terms_read": info.is_none().then_some(loaded.terms_read),
        "dropped_zero": loaded.dropped_zero,
        "coefficient_cutoff": args.cutoff,
        "dropped_below_cutoff": cut,
        "hartree_fock": info.as_ref().map(|i| serde_json::json!({
            "state": i.hf_state,
            "energy_ha": i.hf_energy_ha,
            "electrons": i.nelec,
            "orbitals": i.norb,
            "frozen_orbitals": i.frozen_orbitals,
        })),
    }))?;
    g.say(&summary)
}
