//! `icefold branches CONFIG`: pseudo-arclength continuation of every branch in the range.

use super::{ConfigArgs, OutputArgs, ResumeArgs};
use crate::error::Error;
use crate::jobs::branches::branches_job;

/// Trace the `[branches]` of the config and write the file.
pub fn main(
    args: &ConfigArgs,
    out: &OutputArgs,
    checkpoint_every: Option<usize>,
    resume: &ResumeArgs,
) -> Result<(), Error> {
    let cfg = super::load(args)?;
    let path = super::output_path_resuming(out, &args.config, "branches", resume.resume.is_some())?;
    let ck = resume.checkpointing(checkpoint_every.map(|n| n as f64));
    let set = branches_job(&cfg, &path, &super::command_line(), &ck)?;
    let points: usize = set.branches.iter().map(|b| b.points.len()).sum();
    let folds: Vec<String> = set
        .branches
        .iter()
        .flat_map(|b| b.folds.iter().map(|f| format!("{:.6}", f.control)))
        .collect();
    for w in stuck_warnings(&set.branches) {
        eprintln!("icefold: warning: {w}");
    }
    eprintln!(
        "icefold: wrote {} ({} branches, {} points); folds at {}",
        path.display(),
        set.branches.len(),
        points,
        if folds.is_empty() {
            "none".to_string()
        } else {
            folds.join(", ")
        }
    );
    Ok(())
}

/// One line per branch end where the corrector failed at ever smaller steps: the branch
/// beyond that control is missing from the file (also shown by `icefold inspect`).
pub fn stuck_warnings(branches: &[crate::equilibrium::continuation::Branch]) -> Vec<String> {
    use crate::equilibrium::continuation::LegEnd;
    let mut out = Vec::new();
    for (b, br) in branches.iter().enumerate() {
        for (side, end) in ["first", "last"].iter().zip(br.ends) {
            if let LegEnd::Stuck { control } = end {
                out.push(format!(
                    "branch {b} ends stuck at its {side} point (control {control}): the corrector failed at ever smaller steps there, so the branch beyond it (and any fold on it) is missing"
                ));
            }
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::equilibrium::continuation::{Branch, LegEnd};

    #[test]
    fn a_stuck_branch_end_gives_a_warning() {
        // Before, a stuck end was written to the file with no word on the console.
        let b = |ends| Branch {
            points: vec![],
            folds: vec![],
            ends,
        };
        let set = [
            b([LegEnd::LeftRange, LegEnd::Closed]),
            b([LegEnd::Stuck { control: 1750.5 }, LegEnd::LeftRange]),
        ];
        let w = stuck_warnings(&set);
        assert_eq!(w.len(), 1, "{w:?}");
        assert!(
            w[0].contains("branch 1") && w[0].contains("first") && w[0].contains("1750.5"),
            "{}",
            w[0]
        );
    }
}
