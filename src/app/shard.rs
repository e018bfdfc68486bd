//! Campaigns split over the tasks of a batch scheduler's job array, and joined again.
//!
//! In: `compile --shard I/N` keeps share I of N of a compiled campaign; `verify` and
//! `rehearse --shard I/N` narrow a whole campaign's plan to the same share; `merge` takes the N
//! share folders (with their counts files, when every share was rehearsed) or the N shard
//! counts files. Out: share folders (their circuits and a plan that lists them, marked with
//! [`ShardInfo`]); shard counts files (marked with [`CountsShard`]); the merged folder or
//! counts file. Invariant: circuit `j` of the campaign (plan order) goes to share
//! `j mod N + 1` ([`ShardInfo::holds`], the one rule), so the merged folder and counts are byte
//! for byte those one `compile` and one `rehearse` write; `merge` refuses shares of different
//! campaigns or rehearsals, a share given twice, a missing share, a circuit counted twice, and
//! any file whose SHA-256 differs from its plan (exit 2).

use super::Global;
use crate::diag::Code;
use crate::diag::Diagnostic;
use crate::error::{Error, Result};
use crate::pipeline::Compiled;
use crate::plan::{Plan, ShardInfo};
use clap::Args;
use serde::{Deserialize, Serialize};
use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

/// The `shard` mark of a counts file that holds one share's counts (`rehearse` on a share).
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct CountsShard {
    /// 1-based share number.
    pub index: usize,
    pub count: usize,
    /// Circuits in the whole campaign.
    pub campaign_circuits: usize,
    /// [`campaign_id`] of the campaign's plan.
    pub campaign: String,
    /// Seed of the rehearsal (absent for counts from a device).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub seed: Option<u64>,
    /// Whether the rehearsal applied `--noise`.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub noise: Option<bool>,
}

/// Most shares a campaign may be split into (job arrays are bounded by their schedulers too).
pub const MAX_SHARDS: usize = 10_000;

/// Parses `I/N` (1 ≤ I ≤ N ≤ [`MAX_SHARDS`]).
pub fn parse_shard(s: &str) -> std::result::Result<(usize, usize), String> {
    let bad = || format!("`{s}` is not a share I/N, e.g. 2/8 (I from 1 to N)");
    let (i, n) = s.split_once('/').ok_or_else(bad)?;
    let i: usize = i.trim().parse().map_err(|_| bad())?;
    let n: usize = n.trim().parse().map_err(|_| bad())?;
    if n == 0 || n > MAX_SHARDS {
        return Err(format!("{n} shares: use 1 to {MAX_SHARDS}"));
    }
    if i == 0 || i > n {
        return Err(format!(
            "share {i} of {n} does not exist: shares are numbered 1 to {n}"
        ));
    }
    Ok((i, n))
}

/// Keeps share `index` of `count` (1-based) of a compiled campaign and marks its plan.
pub fn keep_share(c: &mut Compiled, index: usize, count: usize) {
    let total = c.plan.circuits.len();
    fn take<T>(v: &mut Vec<T>, index: usize, count: usize) {
        let all = std::mem::take(v);
        *v = all
            .into_iter()
            .enumerate()
            .filter(|(j, _)| ShardInfo::holds(index, count, *j))
            .map(|(_, x)| x)
            .collect();
    }
    take(&mut c.plan.circuits, index, count);
    take(&mut c.programs, index, count);
    c.plan.shard = Some(ShardInfo {
        index,
        count,
        campaign_circuits: total,
    });
}

/// Narrows a whole campaign's plan read from `dir` to share `index` of `count` (`verify` and
/// `rehearse --shard I/N`): the same circuits `compile --shard I/N` would have written, and the
/// same mark, so the rest of the command treats it as a share folder. A folder that already
/// holds one share is refused (exit 2): its circuits are split already.
pub fn select_share(plan: &mut Plan, share: Option<(usize, usize)>, dir: &Path) -> Result<()> {
    let Some((index, count)) = share else {
        return Ok(());
    };
    if let Some(s) = plan.shard {
        return Err(Error::usage(
            Code::UsageConflict,
            format!(
                "{} already holds share {}/{} of its campaign; --shard splits a whole campaign",
                dir.display(),
                s.index,
                s.count
            ),
            Some("drop --shard: a share folder is one task's work already"),
        ));
    }
    let total = plan.circuits.len();
    let all = std::mem::take(&mut plan.circuits);
    plan.circuits = all
        .into_iter()
        .enumerate()
        .filter(|(j, _)| ShardInfo::holds(index, count, *j))
        .map(|(_, e)| e)
        .collect();
    plan.shard = Some(ShardInfo {
        index,
        count,
        campaign_circuits: total,
    });
    Ok(())
}

/// A short fingerprint of the campaign a plan (whole or share) belongs to: the first 16 hex
/// digits of the SHA-256 of [`common_part`]. Shard counts files carry it so that `merge` can
/// refuse counts of different campaigns.
pub fn campaign_id(plan: &Plan) -> String {
    crate::plan::sha256_hex(common_part(plan).as_bytes())[..16].to_string()
}

pub const MERGE_EXAMPLES: &str = "\
Example (a job array of 4 tasks, then one merge):
  phasewright compile model.ham --state 0101 --dt 0.1 --points 20 --shard $TASK/4 -o parts/$TASK
  phasewright rehearse parts/$TASK --shots 10000 --seed 7
  phasewright merge parts/1 parts/2 parts/3 parts/4 -o campaign
  phasewright verify campaign

Or one campaign folder, sampled by 4 tasks, then the counts joined:
  phasewright rehearse campaign --seed 7 --shard $TASK/4 -o counts-$TASK.json
  phasewright merge counts-1.json counts-2.json counts-3.json counts-4.json -o counts.json";

#[derive(Args, Debug)]
pub struct MergeArgs {
    /// The share folders written by `compile --shard I/N` (their counts.json files are joined
    /// too when every share has one), or the counts files of `rehearse --shard I/N`; one per
    /// share, in any order.
    #[arg(required = true)]
    pub parts: Vec<PathBuf>,
    /// Folder for the whole campaign (from share folders), or counts file (from counts files;
    /// `-`: stdout).
    #[arg(short = 'o', long = "out")]
    pub out: PathBuf,
    /// Replace a folder that holds files other than an older phasewright campaign.
    #[arg(long)]
    pub force: bool,
}

fn refuse(message: String, hint: &str) -> Error {
    Error::usage(Code::UsageInput, message, Some(hint))
}

/// The plan without its circuits and share mark: what every share of one campaign has in common.
pub fn common_part(p: &Plan) -> String {
    let mut q = p.clone();
    q.circuits.clear();
    q.shard = None;
    q.to_json()
}

/// Runs `phasewright merge`: share folders or shard counts files, never a mix.
pub fn merge(args: &MergeArgs, g: &Global) -> Result<()> {
    let folders = args.parts.iter().filter(|p| p.is_dir()).count();
    if folders == 0 {
        return merge_counts_files(args, g);
    }
    if folders != args.parts.len() {
        return Err(refuse(
            "merge was given both folders and files".into(),
            "give the share folders of `compile --shard I/N`, or the counts files of `rehearse --shard I/N`",
        ));
    }
    merge_folders(args, g)
}

fn merge_folders(args: &MergeArgs, g: &Global) -> Result<()> {
    let mut shares: Vec<(ShardInfo, Plan, &Path)> = Vec::new();
    for dir in &args.parts {
        let plan = super::io::read_plan(dir)?;
        let Some(info) = plan.shard else {
            return Err(refuse(
                format!(
                    "{}: this campaign is not a share (no `shard` in its plan)",
                    dir.display()
                ),
                "merge joins the folders of `compile --shard I/N`",
            ));
        };
        shares.push((info, plan, dir.as_path()));
    }
    let (first, first_plan, first_dir) = (shares[0].0, &shares[0].1, shares[0].2);
    let common = common_part(first_plan);
    for (info, plan, dir) in &shares[1..] {
        if info.count != first.count
            || info.campaign_circuits != first.campaign_circuits
            || common_part(plan) != common
        {
            return Err(refuse(
                format!(
                    "{} and {} are shares of different campaigns",
                    first_dir.display(),
                    dir.display()
                ),
                "compile every share with the same input files and options",
            ));
        }
    }
    let n = first.count;
    let mut by_index: Vec<Option<usize>> = vec![None; n];
    for (s, (info, _, dir)) in shares.iter().enumerate() {
        if let Some(other) = by_index[info.index - 1] {
            return Err(refuse(
                format!(
                    "{} and {} are both share {}/{n}",
                    shares[other].2.display(),
                    dir.display(),
                    info.index
                ),
                "give each share once",
            ));
        }
        by_index[info.index - 1] = Some(s);
    }
    let missing: Vec<String> = (1..=n)
        .filter(|i| by_index[i - 1].is_none())
        .map(|i| format!("{i}/{n}"))
        .collect();
    if !missing.is_empty() {
        return Err(refuse(
            format!("share {} is missing", missing.join(", ")),
            "give the folders of every task of the job array",
        ));
    }
    let total = first.campaign_circuits;
    for (info, plan, dir) in &shares {
        let expected = (total + n - info.index) / n;
        if plan.circuits.len() != expected {
            return Err(refuse(
                format!(
                    "{}: share {}/{n} lists {} circuits, but a campaign of {total} gives it {expected}",
                    dir.display(),
                    info.index,
                    plan.circuits.len()
                ),
                "recompile the share",
            ));
        }
    }
    let mut merged = first_plan.clone();
    merged.shard = None;
    merged.circuits.clear();
    let mut texts: Vec<Vec<u8>> = Vec::with_capacity(total);
    for j in 0..total {
        let (_, plan, dir) = &shares[by_index[j % n].unwrap_or(0)];
        let e = &plan.circuits[j / n];
        let path = dir.join(&e.file);
        let bytes = std::fs::read(&path).map_err(|source| Error::Io {
            path: path.display().to_string(),
            source,
            reading: true,
        })?;
        if e.sha256.as_deref() != Some(crate::plan::sha256_hex(&bytes).as_str()) {
            return Err(Error::input(crate::diag::Diagnostic::whole_file(
                Code::PlanFiles,
                &path.display().to_string(),
                format!("changed since it was compiled (circuit `{}`)", e.id),
                Some("recompile the share".into()),
            )));
        }
        merged.circuits.push(e.clone());
        texts.push(bytes);
    }
    let counts = join_folder_counts(&shares, &by_index)?;
    let plan_text = merged.to_json();
    let mut files: Vec<(&str, &[u8])> = merged
        .circuits
        .iter()
        .zip(&texts)
        .map(|(e, t)| (e.file.as_str(), t.as_slice()))
        .collect();
    if let Some(c) = &counts {
        files.push(("counts.json", c.as_bytes()));
    }
    files.push(("plan.json", plan_text.as_bytes()));
    super::io::check_out_folder(&args.out, args.force)?;
    super::io::replace_folder(&args.out, &files)?;
    g.json(&serde_json::json!({ "shares": n, "circuits": total, "counts": counts.is_some(), "out": args.out.display().to_string() }))?;
    g.say(&format!(
        "{n} shares joined: {total} circuits{} written to {}\n",
        if counts.is_some() {
            " and their counts (counts.json)"
        } else {
            ""
        },
        args.out.display()
    ))
}

/// One counts file read for merging: its header and its entries in file order.
struct ShareCounts {
    name: String,
    shard: Option<CountsShard>,
    bit_order: String,
    shots: Option<u64>,
    entries: Vec<(String, BTreeMap<String, u64>)>,
}

/// Reads a counts file for merging. Only the layout is checked here (every bitstring and total
/// is checked again by `estimate` against the plan); a problem is a C101 diagnostic.
fn read_share_counts(path: &Path) -> Result<ShareCounts> {
    use crate::estimate::counts::COUNTS_FORMAT;
    let name = path.display().to_string();
    let text = super::io::read_text(path)?;
    let bad = |message: String| {
        Error::input(Diagnostic::whole_file(
            Code::CountsSyntax,
            &name,
            message,
            Some("merge joins counts files written by `rehearse` (see docs/counts.md)".into()),
        ))
    };
    let value: serde_json::Value = serde_json::from_str(&text).map_err(|e| {
        let off = crate::diag::offset_of(&text, e.line(), e.column());
        Error::input(Diagnostic::at(
            Code::CountsSyntax,
            &name,
            &text,
            off,
            1,
            format!(
                "not valid JSON: {}",
                crate::estimate::counts::strip_position(&e.to_string())
            ),
            None,
        ))
    })?;
    let Some(top) = value.as_object() else {
        return Err(bad("the top level must be a JSON object".into()));
    };
    if top.get("format").and_then(|f| f.as_str()) != Some(COUNTS_FORMAT) {
        return Err(bad(format!("`format` is not \"{COUNTS_FORMAT}\"")));
    }
    if let Some(k) = top
        .keys()
        .find(|k| !["format", "bit_order", "shots", "shard", "counts"].contains(&k.as_str()))
    {
        return Err(bad(format!("unknown key `{k}`")));
    }
    let bit_order = match top.get("bit_order") {
        None => "first".to_string(),
        Some(v) => match v.as_str() {
            Some(o @ ("first" | "last")) => o.to_string(),
            _ => return Err(bad("`bit_order` is neither \"first\" nor \"last\"".into())),
        },
    };
    let shots = match top.get("shots") {
        None => None,
        Some(v) => Some(
            v.as_u64()
                .ok_or_else(|| bad("`shots` is not a whole number".into()))?,
        ),
    };
    let shard = match top.get("shard") {
        None => None,
        Some(v) => Some(
            serde_json::from_value::<CountsShard>(v.clone())
                .map_err(|e| bad(format!("`shard` is not a share mark: {e}")))?,
        ),
    };
    let Some(counts) = top.get("counts").and_then(|c| c.as_object()) else {
        return Err(bad("`counts` is missing or not an object".into()));
    };
    let mut entries = Vec::with_capacity(counts.len());
    for (id, outcomes) in counts {
        let Some(outcomes) = outcomes.as_object() else {
            return Err(bad(format!("the counts of `{id}` are not an object")));
        };
        let mut m = BTreeMap::new();
        for (bits, n) in outcomes {
            let n = n.as_u64().filter(|&n| n > 0).ok_or_else(|| {
                bad(format!(
                    "`{id}`: the count of `{bits}` is not a positive whole number"
                ))
            })?;
            m.insert(bits.clone(), n);
        }
        entries.push((id.clone(), m));
    }
    Ok(ShareCounts {
        name,
        shard,
        bit_order,
        shots,
        entries,
    })
}

/// The header values every share's counts must agree on, with the name of each.
fn agree(shares: &[&ShareCounts]) -> Result<()> {
    let first = shares[0];
    for s in &shares[1..] {
        let what = if s.bit_order != first.bit_order {
            Some("bit_order")
        } else if s.shots != first.shots {
            Some("shots")
        } else {
            match (&first.shard, &s.shard) {
                (Some(a), Some(b)) if a.count != b.count => Some("share count"),
                (Some(a), Some(b)) if a.campaign_circuits != b.campaign_circuits => {
                    Some("campaign size")
                }
                (Some(a), Some(b)) if a.campaign != b.campaign => Some("campaign"),
                (Some(a), Some(b)) if a.seed != b.seed => Some("seed"),
                (Some(a), Some(b)) if a.noise != b.noise => Some("noise"),
                _ => None,
            }
        };
        if let Some(what) = what {
            return Err(refuse(
                format!(
                    "{} and {} are counts of different campaigns or rehearsals ({what} differs)",
                    first.name, s.name
                ),
                "rehearse every share of one campaign with the same --shots, --seed and --noise",
            ));
        }
    }
    Ok(())
}

/// Joins the `counts.json` files of share folders (every share has one, or none does: then
/// `None`). Each must hold the counts of exactly its share's circuits; a share mark, when
/// present, must name that share of this campaign.
fn join_folder_counts(
    shares: &[(ShardInfo, Plan, &Path)],
    by_index: &[Option<usize>],
) -> Result<Option<String>> {
    let has: Vec<bool> = shares
        .iter()
        .map(|(_, _, d)| d.join("counts.json").is_file())
        .collect();
    if !has.iter().any(|&h| h) {
        return Ok(None);
    }
    if let Some(k) = has.iter().position(|&h| !h) {
        let (info, _, dir) = &shares[k];
        let with = shares[has.iter().position(|&h| h).unwrap_or(0)].2;
        return Err(refuse(
            format!(
                "the counts of share {}/{} are missing: {} has no counts.json, but {} has",
                info.index,
                info.count,
                dir.display(),
                with.display()
            ),
            "rehearse every share (or run it on the device) before merging, or move the counts files away to join the plans alone",
        ));
    }
    let read: Vec<ShareCounts> = shares
        .iter()
        .map(|(_, _, d)| read_share_counts(&d.join("counts.json")))
        .collect::<Result<_>>()?;
    for ((info, plan, _), c) in shares.iter().zip(&read) {
        if let Some(m) = &c.shard {
            if m.index != info.index
                || m.count != info.count
                || m.campaign_circuits != info.campaign_circuits
                || m.campaign != campaign_id(plan)
            {
                return Err(refuse(
                    format!(
                        "{} holds the counts of share {}/{} of campaign {}, but its folder holds share {}/{} of campaign {}",
                        c.name, m.index, m.count, m.campaign, info.index, info.count, campaign_id(plan)
                    ),
                    "rehearse the share folder itself, or give each folder its own counts",
                ));
            }
        }
    }
    agree(&read.iter().collect::<Vec<_>>())?;
    let mut maps: Vec<BTreeMap<&str, &BTreeMap<String, u64>>> = Vec::with_capacity(read.len());
    for ((info, plan, _), c) in shares.iter().zip(&read) {
        let mut m = BTreeMap::new();
        for (id, counts) in &c.entries {
            if m.insert(id.as_str(), counts).is_some() {
                return Err(refuse(
                    format!("{} lists circuit `{id}` twice", c.name),
                    "each circuit has one entry",
                ));
            }
            if !plan.circuits.iter().any(|e| &e.id == id) {
                return Err(refuse(
                    format!(
                        "{} counts circuit `{id}`, which share {}/{} does not hold",
                        c.name, info.index, info.count
                    ),
                    "give each share folder the counts of its own circuits",
                ));
            }
        }
        maps.push(m);
    }
    let n = by_index.len();
    let total = shares[0].0.campaign_circuits;
    let mut entries = Vec::with_capacity(total);
    for j in 0..total {
        let s = by_index[j % n].unwrap_or(0);
        let (info, plan, _) = &shares[s];
        let e = &plan.circuits[j / n];
        let Some(counts) = maps[s].get(e.id.as_str()) else {
            return Err(refuse(
                format!(
                    "{} has no counts for circuit `{}` of share {}/{}",
                    read[s].name, e.id, info.index, info.count
                ),
                "every circuit of the share needs its counts",
            ));
        };
        entries.push((e.id.clone(), (*counts).clone()));
    }
    let first = &read[0];
    super::rehearse::counts_document(first.shots, &first.bit_order, &entries).map(Some)
}

/// `merge` of the counts files of `rehearse --shard I/N`: every share once, from one
/// rehearsal of one campaign; the joined file is the one a single run writes.
fn merge_counts_files(args: &MergeArgs, g: &Global) -> Result<()> {
    let read: Vec<ShareCounts> = args
        .parts
        .iter()
        .map(|p| read_share_counts(p))
        .collect::<Result<_>>()?;
    let mut marks = Vec::with_capacity(read.len());
    for c in &read {
        let Some(m) = &c.shard else {
            return Err(refuse(
                format!(
                    "{}: these counts are not a share's (no `shard` key)",
                    c.name
                ),
                "merge joins the counts files of `rehearse --shard I/N`, or share folders",
            ));
        };
        marks.push(m);
    }
    agree(&read.iter().collect::<Vec<_>>())?;
    let n = marks[0].count;
    let total = marks[0].campaign_circuits;
    if n == 0 || marks.iter().any(|m| m.index == 0 || m.index > n) {
        return Err(refuse(
            format!(
                "{}: a share mark names a share that does not exist",
                read[0].name
            ),
            "shares are numbered 1 to N",
        ));
    }
    let mut by_index: Vec<Option<usize>> = vec![None; n];
    for (s, m) in marks.iter().enumerate() {
        if let Some(other) = by_index[m.index - 1] {
            return Err(refuse(
                format!(
                    "{} and {} are both the counts of share {}/{n}",
                    read[other].name, read[s].name, m.index
                ),
                "give each share's counts once",
            ));
        }
        by_index[m.index - 1] = Some(s);
    }
    let missing: Vec<String> = (1..=n)
        .filter(|i| by_index[i - 1].is_none())
        .map(|i| format!("{i}/{n}"))
        .collect();
    if !missing.is_empty() {
        return Err(refuse(
            format!("the counts of share {} are missing", missing.join(", ")),
            "give the counts files of every task of the job array",
        ));
    }
    let mut seen: BTreeMap<&str, usize> = BTreeMap::new();
    for (s, (c, m)) in read.iter().zip(&marks).enumerate() {
        let expected = ShardInfo {
            index: m.index,
            count: n,
            campaign_circuits: total,
        }
        .len();
        if c.entries.len() != expected {
            return Err(refuse(
                format!(
                    "{}: share {}/{n} holds the counts of {} circuits, but a campaign of {total} gives it {expected}",
                    c.name,
                    m.index,
                    c.entries.len()
                ),
                "rehearse the share again",
            ));
        }
        for (id, _) in &c.entries {
            if let Some(other) = seen.insert(id.as_str(), s) {
                return Err(refuse(
                    format!(
                        "circuit `{id}` is counted in both {} and {}",
                        read[other].name, c.name
                    ),
                    "shares of one campaign count each circuit once",
                ));
            }
        }
    }
    let entries: Vec<(String, BTreeMap<String, u64>)> = (0..total)
        .map(|j| read[by_index[j % n].unwrap_or(0)].entries[j / n].clone())
        .collect();
    let text = super::rehearse::counts_document(read[0].shots, &read[0].bit_order, &entries)?;
    super::io::check_out_file(&args.out, "-o", None, true)?;
    super::io::write_output(&args.out, text.as_bytes())?;
    if super::io::is_stdio(&args.out) {
        return Ok(());
    }
    g.json(&serde_json::json!({ "shares": n, "circuits": total, "out": args.out.display().to_string() }))?;
    g.say(&format!(
        "{n} shares joined: counts of {total} circuits written to {}\n",
        args.out.display()
    ))
}

#[cfg(test)]
mod tests {
    use super::parse_shard;

    #[test]
    fn shares_are_numbered_from_one() {
        assert_eq!(parse_shard("1/4"), Ok((1, 4)));
        assert_eq!(parse_shard("4/4"), Ok((4, 4)));
        for bad in ["0/4", "5/4", "1/0", "x/2", "3", "1/100001"] {
            assert!(parse_shard(bad).is_err(), "{bad}");
        }
    }
}
