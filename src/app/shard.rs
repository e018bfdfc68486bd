//! Campaigns split over the tasks of a batch scheduler's job array, and joined again.
//!
//! In: `compile --shard I/N` keeps share I of N of a compiled campaign; `merge` takes the N
//! share folders. Out: share folders (their circuits and a plan that lists them, marked with
//! [`ShardInfo`]); the merged folder. Invariant: circuit `j` of the campaign (plan order) goes to
//! share `j mod N + 1`, so the merged folder is byte for byte the folder one `compile` writes;
//! `merge` refuses shares of different campaigns, a share given twice, a missing share, and any
//! file whose SHA-256 differs from its plan.

use super::Global;
use crate::error::{Error, Result};
use crate::family::plan::{Plan, ShardInfo};
use crate::lang::codes::Code;
use crate::pipeline::Compiled;
use clap::Args;
use std::path::{Path, PathBuf};

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
            .filter(|(j, _)| j % count + 1 == index)
            .map(|(_, x)| x)
            .collect();
    }
    take(&mut c.plan.circuits, index, count);
    take(&mut c.programs, index, count);
    if !c.circuits.is_empty() {
        take(&mut c.circuits, index, count);
    }
    c.plan.shard = Some(ShardInfo {
        index,
        count,
        campaign_circuits: total,
    });
}

pub const MERGE_EXAMPLES: &str = "\
Example (a job array of 4 tasks, then one merge):
  phasewright compile model.ham --state 0101 --dt 0.1 --points 20 --shard $TASK/4 -o parts/$TASK
  phasewright merge parts/1 parts/2 parts/3 parts/4 -o campaign
  phasewright verify campaign";

#[derive(Args, Debug)]
pub struct MergeArgs {
    /// The share folders written by `compile --shard I/N`, one per share, in any order.
    #[arg(required = true)]
    pub parts: Vec<PathBuf>,
    /// Folder for the whole campaign.
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
fn common_part(p: &Plan) -> String {
    let mut q = p.clone();
    q.circuits.clear();
    q.shard = None;
    q.to_json()
}

pub fn merge(args: &MergeArgs, g: &Global) -> Result<()> {
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
        if e.sha256.as_deref() != Some(super::io::sha256_hex(&bytes).as_str()) {
            return Err(Error::input(crate::lang::diag::Diagnostic::whole_file(
                Code::PlanFiles,
                &path.display().to_string(),
                format!("changed since it was compiled (circuit `{}`)", e.id),
                Some("recompile the share".into()),
            )));
        }
        merged.circuits.push(e.clone());
        texts.push(bytes);
    }
    let plan_text = merged.to_json();
    let mut files: Vec<(&str, &[u8])> = merged
        .circuits
        .iter()
        .zip(&texts)
        .map(|(e, t)| (e.file.as_str(), t.as_slice()))
        .collect();
    files.push(("plan.json", plan_text.as_bytes()));
    super::io::check_out_folder(&args.out, args.force)?;
    super::io::replace_folder(&args.out, &files)?;
    g.json(&serde_json::json!({ "shares": n, "circuits": total, "out": args.out.display().to_string() }))?;
    g.say(&format!(
        "{n} shares joined: {total} circuits written to {}\n",
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
