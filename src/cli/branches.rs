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
    info!(
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

/// One line per branch end where the corrector failed at ever smaller steps, or where the
/// point limit stopped the trace: the branch beyond that control is missing from the file, or
/// traced again from another seed (also shown by `icefold inspect`).
pub fn stuck_warnings(branches: &[crate::equilibrium::continuation::Branch]) -> Vec<String> {
    use crate::equilibrium::continuation::LegEnd;
    let mut out = Vec::new();
    for (b, br) in branches.iter().enumerate() {
        for (side, end) in ["first", "last"].iter().zip(br.ends) {
            match end {
                LegEnd::Stuck { control } => out.push(format!(
                    "branch {b} ends stuck at its {side} point (control {control}): the corrector failed at ever smaller steps there, so the branch beyond it (and any fold on it) is missing"
                )),
                LegEnd::PointLimit => out.push(format!(
                    "branch {b} ends at the point limit at its {side} point (control {}): raise branches.max_points to trace it further",
                    if side == &"first" { br.points.first() } else { br.points.last() }
                        .map_or(f64::NAN, |p| p.control)
                )),
                _ => {}
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

    #[test]
    fn a_branch_stopped_at_the_point_limit_gives_a_warning() {
        // Before, a point-limit end was written to the file with no word on the console.
        use crate::equilibrium::continuation::BranchPoint;
        let pt = |control| BranchPoint {
            control,
            state: vec![],
            dpds: 0.0,
            leading: -1.0,
            method: crate::equilibrium::stability::SpectrumMethod::SymmetricTridiagonal,
            arclength: 0.0,
        };
        let set = [Branch {
            points: vec![pt(1000.0), pt(1620.25)],
            folds: vec![],
            ends: [LegEnd::LeftRange, LegEnd::PointLimit],
        }];
        let w = stuck_warnings(&set);
        assert_eq!(w.len(), 1, "{w:?}");
        assert!(
            w[0].contains("branch 0") && w[0].contains("point limit") && w[0].contains("1620.25"),
            "{}",
            w[0]
        );
    }
}
