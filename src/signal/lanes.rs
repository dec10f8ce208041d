//! Zero-phase filtering of several channels at once.
//!
//! A second-order section is a recursion whose every output waits for the
//! previous one, so one channel alone keeps the processor idle between
//! samples. Here `LANES` channels are interleaved and filtered in lockstep
//! (independent recursions that the processor overlaps), two sections per
//! pass over the buffer. Each lane performs exactly the arithmetic of
//! [`sosfilt_inplace`](super::filter::sosfilt_inplace), in the same order,
//! so the results equal the one-channel functions bit for bit.

use super::filter::{sosfilt_zi, Section, Sos};
use crate::error::{Error, Result};

/// Channels filtered together.
pub const LANES: usize = 4;

type Lane = [f64; LANES];

#[inline(always)]
fn step(s: &Section, x: &Lane, z0: &mut Lane, z1: &mut Lane) -> Lane {
    let [b0, b1, b2, _, a1, a2] = *s;
    let mut y = [0.0; LANES];
    for l in 0..LANES {
        y[l] = b0 * x[l] + z0[l];
        z0[l] = b1 * x[l] - a1 * y[l] + z1[l];
        z1[l] = b2 * x[l] - a2 * y[l];
    }
    y
}

/// Causal filtering of interleaved lanes in place from the states
/// `zi[s] = (z0, z1)` of each section (updated to the final states).
fn filter_lanes(sos: &Sos, buf: &mut [Lane], zi: &mut [(Lane, Lane)]) {
    let mut s = 0;
    while s + 1 < sos.len() {
        let (sa, sb) = (&sos.sections[s], &sos.sections[s + 1]);
        let ((mut a0, mut a1), (mut b0, mut b1)) = (zi[s], zi[s + 1]);
        for v in buf.iter_mut() {
            let y = step(sa, v, &mut a0, &mut a1);
            *v = step(sb, &y, &mut b0, &mut b1);
        }
        zi[s] = (a0, a1);
        zi[s + 1] = (b0, b1);
        s += 2;
    }
    if s < sos.len() {
        let sa = &sos.sections[s];
        let (mut a0, mut a1) = zi[s];
        for v in buf.iter_mut() {
            *v = step(sa, v, &mut a0, &mut a1);
        }
        zi[s] = (a0, a1);
    }
}

fn scaled_zi(zi: &[[f64; 2]], x0: &Lane) -> Vec<(Lane, Lane)> {
    zi.iter()
        .map(|z| {
            let mut a = [0.0; LANES];
            let mut b = [0.0; LANES];
            for l in 0..LANES {
                a[l] = z[0] * x0[l];
                b[l] = z[1] * x0[l];
            }
            (a, b)
        })
        .collect()
}

/// [`sosfiltfilt`](super::filter::sosfiltfilt) of up to [`LANES`] channels of
/// equal length at once; `outs[c]` receives the output of `xs[c]`.
pub fn sosfiltfilt_many(sos: &Sos, xs: &[&[f64]], outs: &mut [Vec<f64>]) -> Result<()> {
    assert!(xs.len() <= LANES && outs.len() >= xs.len());
    let Some(n) = xs.first().map(|x| x.len()) else {
        return Ok(());
    };
    assert!(xs.iter().all(|x| x.len() == n), "channels of equal length");
    let pad = sos.default_padlen();
    if n <= pad {
        return Err(Error::Analysis(format!(
            "{n} samples are too few for zero-phase filtering (more than {pad} are needed)"
        )));
    }
    let mut buf: Vec<Lane> = vec![[0.0; LANES]; n + 2 * pad];
    for (l, x) in xs.iter().enumerate() {
        let (first, last) = (x[0], x[n - 1]);
        for k in 1..=pad {
            buf[pad - k][l] = 2.0 * first - x[k];
            buf[pad + n - 1 + k][l] = 2.0 * last - x[n - 1 - k];
        }
        for (b, &v) in buf[pad..pad + n].iter_mut().zip(x.iter()) {
            b[l] = v;
        }
    }
    let zi = sosfilt_zi(sos);
    let mut state = scaled_zi(&zi, &buf[0]);
    filter_lanes(sos, &mut buf, &mut state);
    buf.reverse();
    let mut state = scaled_zi(&zi, &buf[0]);
    filter_lanes(sos, &mut buf, &mut state);
    buf.reverse();
    for (l, out) in outs.iter_mut().enumerate().take(xs.len()) {
        out.clear();
        out.extend(buf[pad..pad + n].iter().map(|b| b[l]));
    }
    Ok(())
}

/// Causal filtering of up to [`LANES`] channels at once, each from the
/// steady state of its first sample (`sosfilt_zi · x₀`).
pub fn sosfilt_steady_many(sos: &Sos, xs: &[&[f64]], outs: &mut [Vec<f64>]) {
    assert!(xs.len() <= LANES && outs.len() >= xs.len());
    let Some(n) = xs.first().map(|x| x.len()) else {
        return;
    };
    let mut buf: Vec<Lane> = vec![[0.0; LANES]; n];
    for (l, x) in xs.iter().enumerate() {
        for (b, &v) in buf.iter_mut().zip(x.iter()) {
            b[l] = v;
        }
    }
    if n == 0 {
        return;
    }
    let mut state = scaled_zi(&sosfilt_zi(sos), &buf[0]);
    filter_lanes(sos, &mut buf, &mut state);
    for (l, out) in outs.iter_mut().enumerate().take(xs.len()) {
        out.clear();
        out.extend(buf.iter().map(|b| b[l]));
    }
}

#[cfg(test)]
mod tests {
    use super::super::filter::{butter_sos, iirnotch, sosfilt_inplace, sosfiltfilt, Band};
    use super::*;

    #[test]
    fn lanes_equal_single_channel_bit_for_bit() {
        let fs = 2000.0;
        let mut sos = butter_sos(4, Band::Bandpass(20.0, 450.0), fs).unwrap();
        sos = sos.then(&Sos::new(vec![iirnotch(50.0, 30.0, fs).unwrap()]));
        let xs: Vec<Vec<f64>> = (0..3)
            .map(|c| {
                (0..1500)
                    .map(|i| ((i * (c + 3)) as f64 * 0.013).sin() + 0.1 * c as f64)
                    .collect()
            })
            .collect();
        let refs: Vec<&[f64]> = xs.iter().map(|x| x.as_slice()).collect();
        let mut outs = vec![Vec::new(); 3];
        sosfiltfilt_many(&sos, &refs, &mut outs).unwrap();
        let mut causal = vec![Vec::new(); 3];
        sosfilt_steady_many(&sos, &refs, &mut causal);
        let zi = sosfilt_zi(&sos);
        for c in 0..3 {
            assert_eq!(outs[c], sosfiltfilt(&sos, &xs[c]).unwrap());
            let mut y = xs[c].clone();
            let mut z: Vec<[f64; 2]> = zi.iter().map(|z| [z[0] * y[0], z[1] * y[0]]).collect();
            sosfilt_inplace(&sos, &mut y, &mut z);
            assert_eq!(causal[c], y);
        }
    }
}
