//! Tests of the serial formats and the serial source.
//!
//! The decoders are fed what the encoders write, cut into pieces of different sizes, damaged,
//! shortened and joined mid-stream; the source is run against a pseudo-terminal.

mod frames;
mod pty;
mod text;

use super::StreamLayout;
use crate::ingest::types::{Gap, SampleBlock, StreamEvent};

/// A layout of `n` channels named `tach`, `c1`, `c2`, ...
fn layout(n: usize, rate: f64) -> StreamLayout {
    let channels = (0..n)
        .map(|c| {
            if c == 0 {
                "tach".to_string()
            } else {
                format!("c{c}")
            }
        })
        .collect();
    StreamLayout {
        sample_rate: rate,
        channels,
    }
}

/// Deterministic pseudo-random numbers (a 64-bit LCG, constants from Knuth's MMIX), so that
/// failures repeat.
struct Lcg(u64);

impl Lcg {
    fn next_u64(&mut self) -> u64 {
        self.0 = self
            .0
            .wrapping_mul(6_364_136_223_846_793_005)
            .wrapping_add(1_442_695_040_888_963_407);
        self.0 >> 11
    }

    /// Uniform in [-1, 1).
    fn unit(&mut self) -> f32 {
        (self.next_u64() as f64 / (1u64 << 53) as f64 * 2.0 - 1.0) as f32
    }

    /// Uniform in 0..n.
    fn below(&mut self, n: usize) -> usize {
        (self.next_u64() % n as u64) as usize
    }
}

/// `frames` frames of `channels` channels: values of different magnitudes, some with many
/// digits, so that number formatting is exercised.
fn signal(channels: usize, frames: usize, seed: u64) -> Vec<Vec<f32>> {
    let mut rng = Lcg(seed);
    (0..channels)
        .map(|c| {
            (0..frames)
                .map(|_| rng.unit() * 10f32.powi(c as i32 * 2 - 2))
                .collect()
        })
        .collect()
}

/// Views of columns.
fn views(cols: &[Vec<f32>]) -> Vec<&[f32]> {
    cols.iter().map(Vec::as_slice).collect()
}

/// The columns `from..to` of `cols`.
fn slice(cols: &[Vec<f32>], from: usize, to: usize) -> Vec<Vec<f32>> {
    cols.iter().map(|c| c[from..to].to_vec()).collect()
}

/// What a decoder produced, sorted by kind.
#[derive(Debug, Default)]
struct Collected {
    blocks: Vec<SampleBlock>,
    gaps: Vec<Gap>,
    other: Vec<StreamEvent>,
}

impl Collected {
    fn from_events(events: Vec<StreamEvent>) -> Collected {
        let mut c = Collected::default();
        for ev in events {
            c.add(ev);
        }
        c
    }

    fn add(&mut self, ev: StreamEvent) {
        match ev {
            StreamEvent::Block(b) => self.blocks.push(b),
            StreamEvent::Gap(g) => self.gaps.push(g),
            other => self.other.push(other),
        }
    }

    /// Frames delivered.
    fn frames(&self) -> usize {
        self.blocks.iter().map(|b| b.channels[0].len()).sum()
    }

    /// All blocks' samples joined, per channel.
    fn joined(&self) -> Vec<Vec<f32>> {
        let n = self.blocks.first().map_or(0, |b| b.channels.len());
        let mut cols = vec![Vec::new(); n];
        for b in &self.blocks {
            for (col, part) in cols.iter_mut().zip(&b.channels) {
                col.extend_from_slice(part);
            }
        }
        cols
    }

    /// Checks that the blocks follow each other without a hole except where a gap says so, and
    /// that none is over the size limit.
    fn assert_consistent(&self) {
        let mut expect: Option<u64> = None;
        let mut gaps = self.gaps.iter().peekable();
        for b in &self.blocks {
            let len = b.channels[0].len() as u64;
            assert!(
                len > 0 && len as usize <= super::MAX_BLOCK_FRAMES,
                "block of {len}"
            );
            assert!(b.channels.iter().all(|c| c.len() as u64 == len));
            if let Some(e) = expect {
                let mut at = e;
                while let Some(g) = gaps.peek() {
                    if g.first_frame == at
                        && g.first_frame.saturating_add(g.frames) <= b.first_frame
                    {
                        at = at.wrapping_add(g.frames);
                        gaps.next();
                    } else {
                        break;
                    }
                }
                assert_eq!(b.first_frame, at, "block after {e} not where the gaps say");
            }
            expect = Some(b.first_frame.wrapping_add(len));
        }
    }
}

/// Feeds `bytes` to `push` in pieces of `chunk` bytes, all at time `now`.
fn feed(
    bytes: &[u8],
    chunk: usize,
    now: f64,
    mut push: impl FnMut(&[u8], f64, &mut Vec<StreamEvent>),
) -> Collected {
    let mut out = Vec::new();
    for piece in bytes.chunks(chunk) {
        push(piece, now, &mut out);
    }
    Collected::from_events(out)
}
