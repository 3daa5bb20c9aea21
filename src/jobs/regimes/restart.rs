//! What a regimes checkpoint holds: the columns, and each finished row by index (its counts
//! of stable states and equilibria per cell, kinds, branch and fold counts, folds).

use crate::checkpoint::{Restart, RestartError};
use crate::equilibrium::regimes::{RegimeRow, RowFold};

/// The finished rows (any subset, by index) into the restart `r`.
pub(super) fn save(r: &mut Restart, columns: &[f64], done: &[Option<RegimeRow>]) {
    let rows: Vec<(usize, &RegimeRow)> = done
        .iter()
        .enumerate()
        .filter_map(|(i, row)| row.as_ref().map(|row| (i, row)))
        .collect();
    let u =
        |f: &dyn Fn(&RegimeRow) -> Vec<u64>| -> Vec<u64> { rows.iter().flat_map(|(_, x)| f(x)).collect() };
    let g =
        |f: &dyn Fn(&RegimeRow) -> Vec<f64>| -> Vec<f64> { rows.iter().flat_map(|(_, x)| f(x)).collect() };
    r.put_f64("columns", columns);
    r.put_u64(
        "rows.index",
        &rows.iter().map(|(i, _)| *i as u64).collect::<Vec<_>>(),
    );
    r.put_f64("rows.value", &g(&|x| vec![x.row_value]));
    r.put_u64(
        "rows.stable",
        &u(&|x| x.stable.iter().map(|&v| u64::from(v)).collect()),
    );
    r.put_u64(
        "rows.equilibria",
        &u(&|x| x.equilibria.iter().map(|&v| u64::from(v)).collect()),
    );
    r.put_u64(
        "rows.kinds",
        &u(&|x| x.kinds.iter().map(|&v| u64::from(v)).collect()),
    );
    r.put_u64("rows.branches", &u(&|x| vec![x.branches as u64]));
    r.put_u64("rows.stuck_ends", &u(&|x| vec![x.stuck_ends as u64]));
    r.put_u64("rows.linearisations", &u(&|x| vec![x.linearisations]));
    r.put_u64("rows.folds", &u(&|x| vec![x.folds.len() as u64]));
    r.put_f64(
        "folds.control",
        &g(&|x| x.folds.iter().map(|f| f.control).collect()),
    );
    r.put_f64(
        "folds.ice_edge",
        &g(&|x| x.folds.iter().map(|f| f.ice_edge).collect()),
    );
    r.put_u64(
        "folds.corner",
        &u(&|x| {
            x.folds
                .iter()
                .map(|f| u64::from(f.corner) | (u64::from(f.minimum) << 1))
                .collect()
        }),
    );
}

/// The rows [`save`] stored into `done`, checked against this map's columns and rows.
pub(super) fn restore(
    r: &Restart,
    columns: &[f64],
    values: &[f64],
    done: &mut [Option<RegimeRow>],
) -> Result<(), RestartError> {
    let bits = |v: &[f64]| v.iter().map(|x| x.to_bits()).collect::<Vec<_>>();
    if bits(r.f64s("columns")?) != bits(columns) {
        return Err(r.bad("its columns differ from this map's"));
    }
    let index = r.u64s("rows.index")?;
    let k = index.len();
    let nc = columns.len();
    let (value, stable, equilibria, kinds) = (
        r.f64s("rows.value")?,
        r.u64s("rows.stable")?,
        r.u64s("rows.equilibria")?,
        r.u64s("rows.kinds")?,
    );
    let (branches, stuck, lins, nfolds) = (
        r.u64s("rows.branches")?,
        r.u64s("rows.stuck_ends")?,
        r.u64s("rows.linearisations")?,
        r.u64s("rows.folds")?,
    );
    let (fc, fe, fk) = (
        r.f64s("folds.control")?,
        r.f64s("folds.ice_edge")?,
        r.u64s("folds.corner")?,
    );
    let total_folds: u64 = nfolds.iter().sum();
    if [value.len(), branches.len(), stuck.len(), lins.len(), nfolds.len()] != [k; 5]
        || [stable.len(), equilibria.len(), kinds.len()] != [k * nc; 3]
        || [fc.len(), fe.len(), fk.len()] != [total_folds as usize; 3]
    {
        return Err(r.bad("its row arrays have inconsistent lengths"));
    }
    let mut f0 = 0;
    for (j, &i) in index.iter().enumerate() {
        let i = i as usize;
        if i >= values.len() || values[i].to_bits() != value[j].to_bits() {
            return Err(r.bad(format!("its row {i} does not belong to this map")));
        }
        let cells = j * nc..(j + 1) * nc;
        let nf = nfolds[j] as usize;
        done[i] = Some(RegimeRow {
            row_value: value[j],
            stable: stable[cells.clone()].iter().map(|&v| v as u32).collect(),
            equilibria: equilibria[cells.clone()].iter().map(|&v| v as u32).collect(),
            kinds: kinds[cells].iter().map(|&v| v as u8).collect(),
            folds: (f0..f0 + nf)
                .map(|m| RowFold {
                    control: fc[m],
                    ice_edge: fe[m],
                    corner: fk[m] & 1 != 0,
                    minimum: fk[m] & 2 != 0,
                })
                .collect(),
            branches: branches[j] as usize,
            stuck_ends: stuck[j] as usize,
            linearisations: lins[j],
        });
        f0 += nf;
    }
    Ok(())
}
