//! What an ensemble checkpoint holds: the shard's range, the finished members' records,
//! failures, Gregory fits and sensitivities, and their samples (checked on resume).

use super::member::MemberResult;
use crate::checkpoint::{Restart, RestartError};
use std::ops::Range;

/// Save the finished members' results (and their samples, to check on resume).
pub(super) fn save(r: &mut Restart, results: &[MemberResult], range: Range<usize>, samples: &[Vec<f64>]) {
    r.put_u64("members.range", &[range.start as u64, range.end as u64]);
    r.put_u64("members.done", &[results.len() as u64]);
    let flat = |f: &dyn Fn(&MemberResult) -> Vec<f64>| -> Vec<f64> { results.iter().flat_map(f).collect() };
    r.put_f64("members.records", &flat(&|m| m.records.clone()));
    r.put_f64(
        "members.samples",
        &samples.iter().flatten().copied().collect::<Vec<_>>(),
    );
    r.put_u64(
        "members.failed",
        &results
            .iter()
            .map(|m| u64::from(m.failure.is_some()))
            .collect::<Vec<_>>(),
    );
    let texts: Vec<&str> = results
        .iter()
        .map(|m| m.failure.as_deref().unwrap_or(""))
        .collect();
    r.put_str("members.failure_text", &texts.join("\u{1e}"));
    r.put_u64(
        "members.has_fit",
        &results
            .iter()
            .map(|m| u64::from(m.fit.is_some()))
            .collect::<Vec<_>>(),
    );
    r.put_f64(
        "members.fit",
        &flat(&|m| {
            m.fit.map_or(vec![f64::NAN; 4], |f| {
                vec![f.slope, f.intercept_at_first, f.r2, f.x_sd]
            })
        }),
    );
    r.put_u64(
        "members.fit_n",
        &results
            .iter()
            .map(|m| m.fit.map_or(0, |f| f.n))
            .collect::<Vec<_>>(),
    );
    r.put_f64(
        "members.sensitivity",
        &flat(&|m| m.sensitivity.map_or(vec![f64::NAN; 4], |s| s.to_vec())),
    );
}

/// The members [`save`] stored, checked against this shard, its record width and the samples
/// drawn from the seed (`samples`: this shard's).
pub(super) fn restore(
    r: &Restart,
    range: Range<usize>,
    per_member: usize,
    sensitivity: bool,
    samples: &[Vec<f64>],
) -> Result<Vec<MemberResult>, RestartError> {
    let saved = r.u64s("members.range")?;
    if saved != [range.start as u64, range.end as u64] {
        return Err(r.bad(format!(
            "it holds members {} to {}, this run is members {} to {} (use the same --shard)",
            saved.first().copied().unwrap_or(0),
            saved.get(1).copied().unwrap_or(0),
            range.start,
            range.end
        )));
    }
    let done = r.u64("members.done")? as usize;
    let records = r.f64s("members.records")?;
    let (failed, has_fit, fit, fit_n, sens) = (
        r.u64s("members.failed")?,
        r.u64s("members.has_fit")?,
        r.f64s("members.fit")?,
        r.u64s("members.fit_n")?,
        r.f64s("members.sensitivity")?,
    );
    let texts: Vec<&str> = r.str("members.failure_text")?.split('\u{1e}').collect();
    if done > range.len()
        || records.len() != done * per_member
        || failed.len() != done
        || has_fit.len() != done
        || fit.len() != 4 * done
        || fit_n.len() != done
        || sens.len() != 4 * done
        || (done > 0 && texts.len() != done)
    {
        return Err(r.bad("member arrays do not match the member count and the record width"));
    }
    let want: Vec<u64> = samples[..done].iter().flatten().map(|v| v.to_bits()).collect();
    let have: Vec<u64> = r.f64s("members.samples")?.iter().map(|v| v.to_bits()).collect();
    if want != have {
        return Err(r.bad("the saved samples differ from those drawn from ensemble.seed"));
    }
    Ok((0..done)
        .map(|i| MemberResult {
            records: records[i * per_member..(i + 1) * per_member].to_vec(),
            failure: (failed[i] != 0).then(|| texts[i].to_string()),
            fit: (has_fit[i] != 0).then(|| crate::ensemble::stats::Fit {
                slope: fit[4 * i],
                intercept_at_first: fit[4 * i + 1],
                r2: fit[4 * i + 2],
                n: fit_n[i],
                x_sd: fit[4 * i + 3],
            }),
            sensitivity: sensitivity
                .then(|| [sens[4 * i], sens[4 * i + 1], sens[4 * i + 2], sens[4 * i + 3]]),
        })
        .collect())
}
