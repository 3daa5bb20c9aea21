//! What a sweep checkpoint holds: the finished steps (with their states), the tipping points,
//! the counters, the carried state and the eigenvalue warm start.

use crate::checkpoint::{Restart, RestartError};
use crate::equilibrium::sweep::{Reached, SweepProgress, SweepStep, Tipping};

/// The restart content of a sweep's progress.
pub(super) fn save(p: &SweepProgress, r: &mut Restart) {
    let f: Vec<f64> = p
        .steps
        .iter()
        .flat_map(|s| {
            [
                s.control,
                s.global_mean,
                s.ice_edge,
                s.ice_edge_south.unwrap_or(f64::NAN),
                s.leading,
                s.settle_years,
                s.max_rate,
            ]
        })
        .collect();
    let i: Vec<u64> = p
        .steps
        .iter()
        .flat_map(|s| {
            [
                (s.direction + 1) as u64,
                u64::from(s.ice_edge_south.is_some()),
                u64::from(s.settled),
                u64::from(s.reached == Reached::Settled),
            ]
        })
        .collect();
    r.put_f64("sweep.steps.f", &f);
    r.put_u64("sweep.steps.i", &i);
    r.put_f64(
        "sweep.steps.state",
        &p.steps.iter().flat_map(|s| s.state.clone()).collect::<Vec<_>>(),
    );
    let tf: Vec<f64> = p
        .tipping
        .iter()
        .flat_map(|t| {
            [
                t.control,
                t.bracket.0,
                t.bracket.1,
                t.ice_edge_before,
                t.ice_edge_after,
                t.global_mean_before,
                t.global_mean_after,
                t.after_control,
            ]
        })
        .collect();
    let ti: Vec<u64> = p
        .tipping
        .iter()
        .flat_map(|t| [(t.direction + 1) as u64, t.step as u64, u64::from(t.resolved)])
        .collect();
    r.put_f64("sweep.tipping.f", &tf);
    r.put_u64("sweep.tipping.i", &ti);
    r.put_f64(
        "sweep.tipping.after_state",
        &p.tipping
            .iter()
            .flat_map(|t| t.after_state.clone())
            .collect::<Vec<_>>(),
    );
    r.put_u64(
        "sweep.counts",
        &[p.settled_steps as u64, p.unsettled_steps as u64],
    );
    r.put_u64("sweep.has_carry", &[u64::from(p.carry.is_some())]);
    r.put_f64("sweep.carry", p.carry.as_deref().unwrap_or(&[]));
    r.put_f64("sweep.eigen_guess", &[p.eigen_guess]);
}

/// The progress [`save`] stored, for a grid of `n` bands.
pub(super) fn restore(r: &Restart, n: usize) -> Result<SweepProgress, RestartError> {
    let (f, i, st) = (
        r.f64s("sweep.steps.f")?,
        r.u64s("sweep.steps.i")?,
        r.f64s("sweep.steps.state")?,
    );
    let k = f.len() / 7;
    if f.len() != 7 * k || i.len() != 4 * k || st.len() != n * k {
        return Err(r.bad("sweep step arrays do not match the step count and the grid"));
    }
    let steps = (0..k)
        .map(|j| {
            let (f, i) = (&f[7 * j..7 * j + 7], &i[4 * j..4 * j + 4]);
            SweepStep {
                control: f[0],
                direction: i[0] as i32 - 1,
                state: st[n * j..n * (j + 1)].to_vec(),
                global_mean: f[1],
                ice_edge: f[2],
                ice_edge_south: (i[1] != 0).then_some(f[3]),
                leading: f[4],
                settle_years: f[5],
                max_rate: f[6],
                settled: i[2] != 0,
                reached: if i[3] != 0 {
                    Reached::Settled
                } else {
                    Reached::Followed
                },
            }
        })
        .collect();
    let (tf, ti, ta) = (
        r.f64s("sweep.tipping.f")?,
        r.u64s("sweep.tipping.i")?,
        r.f64s("sweep.tipping.after_state")?,
    );
    let m = tf.len() / 8;
    if tf.len() != 8 * m || ti.len() != 3 * m || ta.len() != n * m {
        return Err(r.bad("sweep tipping arrays do not match"));
    }
    let tipping = (0..m)
        .map(|j| {
            let (f, i) = (&tf[8 * j..8 * j + 8], &ti[3 * j..3 * j + 3]);
            Tipping {
                control: f[0],
                resolved: i[2] != 0,
                bracket: (f[1], f[2]),
                direction: i[0] as i32 - 1,
                step: i[1] as usize,
                ice_edge_before: f[3],
                ice_edge_after: f[4],
                global_mean_before: f[5],
                global_mean_after: f[6],
                after_control: f[7],
                after_state: ta[n * j..n * (j + 1)].to_vec(),
            }
        })
        .collect();
    let counts = r.u64s("sweep.counts")?;
    if counts.len() != 2 {
        return Err(r.bad("sweep.counts needs 2 values"));
    }
    let carry = r.f64s("sweep.carry")?;
    Ok(SweepProgress {
        steps,
        tipping,
        settled_steps: counts[0] as usize,
        unsettled_steps: counts[1] as usize,
        carry: (r.u64("sweep.has_carry")? != 0).then(|| carry.to_vec()),
        eigen_guess: r.f64("sweep.eigen_guess")?,
    })
}
