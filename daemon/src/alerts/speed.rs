//! The running speed as the speed rules see it: per-revolution speeds averaged into short buckets,
//! and the recent history of those buckets for the trend.
//!
//! Averaging first takes out the revolution-to-revolution jitter, so the margin rule judges the
//! speed the machine runs at, not its noise, and the work per bucket is the same whether the
//! engine reports every revolution or once a second. The history is bounded: buckets older than
//! the drift window are dropped, and the bucket length grows with the window so a long window still
//! holds about [`MAX_POINTS`] points.

use std::collections::VecDeque;

/// Most points the history holds for a window (the bucket length is chosen for it).
const MAX_POINTS: f64 = 1000.0;

/// Shortest bucket, s.
const MIN_BUCKET_S: f64 = 1.0;

/// One bucket's mean speed.
#[derive(Clone, Copy, Debug, PartialEq)]
pub(super) struct Point {
    /// Mean data time of the bucket's samples, unix s.
    pub t: f64,
    /// Mean speed, r/min.
    pub rpm: f64,
    /// Whether every sample in it was at steady speed.
    pub steady: bool,
}

#[derive(Clone, Copy, Debug)]
struct Bucket {
    index: i64,
    sum_t: f64,
    sum_rpm: f64,
    n: u32,
    steady: bool,
}

impl Bucket {
    fn point(&self) -> Point {
        let n = f64::from(self.n);
        Point {
            t: self.sum_t / n,
            rpm: self.sum_rpm / n,
            steady: self.steady,
        }
    }
}

/// Buckets of speed and the steady stretch of history behind them.
#[derive(Clone, Debug)]
pub(super) struct SpeedHistory {
    bucket_s: f64,
    window_s: f64,
    current: Option<Bucket>,
    points: VecDeque<Point>,
}

impl SpeedHistory {
    /// A history for a trend window of `window_s` seconds.
    pub fn new(window_s: f64) -> Self {
        let window_s = if window_s.is_finite() && window_s > 0.0 {
            window_s
        } else {
            0.0
        };
        Self {
            bucket_s: (window_s / MAX_POINTS).max(MIN_BUCKET_S),
            window_s,
            current: None,
            points: VecDeque::new(),
        }
    }

    /// Length of a bucket, s.
    pub fn bucket_s(&self) -> f64 {
        self.bucket_s
    }

    /// Adds one speed sample; returns the bucket it closed, if the sample starts a new one.
    ///
    /// A bucket that is not all steady empties the history: the trend is fitted over steady
    /// running only, since a run-up's slope says nothing about where a steady speed is heading.
    pub fn push(&mut self, t: f64, rpm: f64, steady: bool) -> Option<Point> {
        let index = (t / self.bucket_s).floor() as i64;
        let mut closed = None;
        match &mut self.current {
            Some(b) if b.index == index => {
                b.sum_t += t;
                b.sum_rpm += rpm;
                b.n += 1;
                b.steady &= steady;
                return None;
            }
            Some(b) if index < b.index => return None, // out of order: dropped
            Some(b) => closed = Some(b.point()),
            None => {}
        }
        self.current = Some(Bucket {
            index,
            sum_t: t,
            sum_rpm: rpm,
            n: 1,
            steady,
        });
        if let Some(p) = closed {
            if p.steady {
                self.points.push_back(p);
                while self
                    .points
                    .front()
                    .is_some_and(|f| f.t < p.t - self.window_s)
                {
                    self.points.pop_front();
                }
            } else {
                self.points.clear();
            }
        }
        closed
    }

    /// Forgets everything: the speed data stopped being trustworthy.
    pub fn reset(&mut self) {
        self.current = None;
        self.points.clear();
    }

    /// The steady points within the window, oldest first.
    pub fn points(&self) -> &VecDeque<Point> {
        &self.points
    }

    /// Length of the window, s.
    pub fn window_s(&self) -> f64 {
        self.window_s
    }
}
