//! Downsampling of old steady-state trend rows.
//!
//! Old trend rows are merged into fixed buckets of `bucket_s` seconds, aligned on multiples of
//! `bucket_s` since the unix epoch, so the buckets are the same on every pass. Only buckets that
//! end at or before the horizon are merged, so a bucket is normally merged once, from all its
//! rows, and a pass over rows already merged finds one row per bucket and changes nothing
//! (idempotent).
//!
//! A merged row is the mean of the rows it replaces, weighted by their `samples`. Rows stored late
//! into an already merged bucket (a capture file backfilled days later) are merged with it on the
//! next pass; the weighting keeps the 1X vector, speed and time exact, while 2X and the overall
//! level, which a row may lack, are then weighted by the merged row's whole `samples`: a close
//! approximation.
//!
//! Vectors are averaged as phasors (vector averaging, common practice for 1X/2X trends): the mean of
//! `a·e^{−jφ}`, so that phase lags either side of 0°/360° average to about 0°, not 180°. When the
//! phase wanders within a bucket, the mean vector's amplitude is smaller than the mean amplitude,
//! as it should be for a vector trend. The overall level is averaged as a number, and the lowest
//! and highest overall levels of the bucket are kept.

use rusqlite::params;

use crate::error::StorageError;
use crate::read::{trend_row, TREND_COLS};
use crate::rows::{DownsampleStats, Polar, Stored, TrendRow};
use crate::tx::Tx;

/// Running weighted sums of one bucket.
#[derive(Default)]
struct Sums {
    w: f64,
    time: f64,
    time_min: f64,
    time_max: f64,
    speed: f64,
    x1: (f64, f64),
    x2_w: f64,
    x2: (f64, f64),
    overall_w: f64,
    overall: f64,
    overall_min: Option<f64>,
    overall_max: Option<f64>,
    samples: u64,
}

/// The weighted mean of trend rows of one machine and channel (`rows` not empty).
pub(crate) fn merge(rows: &[TrendRow]) -> Option<TrendRow> {
    let first = rows.first()?;
    let mut s = Sums {
        time_min: f64::INFINITY,
        time_max: f64::NEG_INFINITY,
        ..Sums::default()
    };
    for r in rows {
        let w = r.samples.max(1) as f64;
        s.w += w;
        s.samples += r.samples.max(1);
        s.time += w * r.time;
        s.time_min = s.time_min.min(r.time);
        s.time_max = s.time_max.max(r.time);
        s.speed += w * r.speed_rpm;
        let (re, im) = r.x1.to_re_im();
        s.x1.0 += w * re;
        s.x1.1 += w * im;
        if let Some(x2) = r.x2 {
            let (re, im) = x2.to_re_im();
            s.x2_w += w;
            s.x2.0 += w * re;
            s.x2.1 += w * im;
        }
        if let Some(o) = r.overall {
            s.overall_w += w;
            s.overall += w * o;
            let lo = r.overall_min.unwrap_or(o).min(o);
            let hi = r.overall_max.unwrap_or(o).max(o);
            s.overall_min = Some(s.overall_min.map_or(lo, |m| m.min(lo)));
            s.overall_max = Some(s.overall_max.map_or(hi, |m| m.max(hi)));
        }
    }
    let x2 = (s.x2_w > 0.0).then(|| Polar::from_re_im(s.x2.0 / s.x2_w, s.x2.1 / s.x2_w));
    let overall = (s.overall_w > 0.0).then(|| s.overall / s.overall_w);
    Some(TrendRow {
        machine: first.machine.clone(),
        channel: first.channel.clone(),
        // Clamped so rounding cannot move the merged row out of its bucket.
        time: (s.time / s.w).clamp(s.time_min, s.time_max),
        speed_rpm: s.speed / s.w,
        x1: Polar::from_re_im(s.x1.0 / s.w, s.x1.1 / s.w),
        x2,
        overall,
        overall_min: s.overall_min,
        overall_max: s.overall_max,
        samples: s.samples,
    })
}

impl Tx<'_> {
    /// Merges a machine's trend rows into buckets of `bucket_s` seconds per channel, for the
    /// buckets that end at or before `older_than` (see the module doc), deleting the originals.
    /// Idempotent.
    pub fn downsample_trend(
        &self,
        machine: &str,
        older_than: f64,
        bucket_s: f64,
    ) -> Result<DownsampleStats, StorageError> {
        const OP: &str = "downsample the trend";
        if !(bucket_s > 0.0 && bucket_s.is_finite()) {
            return Err(StorageError::InvalidArgument {
                path: self.path.to_path_buf(),
                op: OP,
                reason: format!(
                    "bucket width must be a positive number of seconds, not {bucket_s}"
                ),
            });
        }
        // Only whole buckets: the horizon moves down to a bucket boundary.
        let horizon = (older_than / bucket_s).floor() * bucket_s;
        let sql = format!(
            "SELECT {TREND_COLS} FROM trend WHERE machine = ?1 AND time < ?2
             ORDER BY channel, time, id"
        );
        let rows: Vec<Stored<TrendRow>> = {
            let mut st = self.conn.prepare_cached(&sql).map_err(self.sql(OP))?;
            let it = st
                .query_map(params![machine, horizon], trend_row)
                .map_err(self.sql(OP))?;
            it.collect::<Result<_, _>>().map_err(self.sql(OP))?
        };
        let bucket_of = |r: &TrendRow| (r.time / bucket_s).floor();
        let mut stats = DownsampleStats::default();
        let mut start = 0;
        while start < rows.len() {
            let key = (&rows[start].channel, bucket_of(&rows[start]));
            let len = rows[start..]
                .iter()
                .take_while(|r| (&r.channel, bucket_of(r)) == key)
                .count();
            let group = &rows[start..start + len];
            start += len;
            if group.len() < 2 {
                continue;
            }
            let plain: Vec<TrendRow> = group.iter().map(|r| r.row.clone()).collect();
            let Some(merged) = merge(&plain) else {
                continue;
            };
            let mut del = self
                .conn
                .prepare_cached("DELETE FROM trend WHERE id = ?1")
                .map_err(self.sql(OP))?;
            for r in group {
                del.execute([r.id]).map_err(self.sql(OP))?;
            }
            self.insert_trend(std::slice::from_ref(&merged))?;
            stats.buckets_merged += 1;
            stats.rows_deleted += group.len() as u64;
        }
        Ok(stats)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn row(time: f64, amp: f64, lag: f64, overall: f64) -> TrendRow {
        TrendRow {
            machine: "m".into(),
            channel: "x".into(),
            time,
            speed_rpm: 1000.0 + time,
            x1: Polar {
                amplitude: amp,
                phase_deg: lag,
            },
            x2: None,
            overall: Some(overall),
            overall_min: None,
            overall_max: None,
            samples: 1,
        }
    }

    #[test]
    fn phases_either_side_of_zero_average_near_zero() {
        let m = merge(&[row(0.0, 1.0, 350.0, 1.0), row(1.0, 1.0, 10.0, 3.0)]).expect("rows");
        // The mean of unit vectors at ±10° is cos(10°) at 0° (plain vector algebra).
        assert!(m.x1.phase_deg.abs() < 1e-9 || (m.x1.phase_deg - 360.0).abs() < 1e-9);
        assert!((m.x1.amplitude - 10f64.to_radians().cos()).abs() < 1e-12);
        assert_eq!(m.overall, Some(2.0));
        assert_eq!((m.overall_min, m.overall_max), (Some(1.0), Some(3.0)));
        assert_eq!(m.samples, 2);
        assert!((m.time - 0.5).abs() < 1e-12 && (m.speed_rpm - 1000.5).abs() < 1e-9);
        assert!(m.x2.is_none());
    }

    #[test]
    fn merging_a_merged_row_weights_by_samples() {
        let raw: Vec<TrendRow> = (0..6)
            .map(|i| row(f64::from(i), 1.0 + f64::from(i), 30.0, f64::from(i)))
            .collect();
        let all = merge(&raw).expect("rows");
        let first = merge(&raw[..4]).expect("rows");
        let mut again = vec![first];
        again.extend_from_slice(&raw[4..]);
        let two_step = merge(&again).expect("rows");
        assert_eq!(two_step.samples, 6);
        for (a, b) in [
            (all.x1.amplitude, two_step.x1.amplitude),
            (all.time, two_step.time),
            (
                all.overall.unwrap_or(f64::NAN),
                two_step.overall.unwrap_or(f64::NAN),
            ),
        ] {
            assert!((a - b).abs() < 1e-12, "{a} vs {b}");
        }
        assert_eq!(two_step.overall_min, Some(0.0));
        assert_eq!(two_step.overall_max, Some(5.0));
    }
}
