//! TEMPORARY: minimal stand-ins for the `signal` module (constellation points,
//! RRC impulse, PRBS/Barker/Zadoff-Chu, symbol files) so that `profile` and
//! `synth` compile before `signal` lands on main. Replaced by `crate::signal`
//! on merge; nothing outside this crate sees it.

use crate::profile::Modulation;
use crate::Cf32;

/// Constellation points indexed by label (3GPP TS 38.211 §5.1 closed form,
/// first bit = MSB of the label; REFERENCE-VALUES §1.1).
pub fn points(m: Modulation) -> Vec<Cf32> {
    let bps = bits_per_symbol(m);
    let s = |label: usize, i: usize| 1.0 - 2.0 * ((label >> (bps - 1 - i)) & 1) as f64;
    (0..1usize << bps)
        .map(|l| {
            let (re, im) = match m {
                Modulation::Bpsk => (s(l, 0) / 2f64.sqrt(), s(l, 0) / 2f64.sqrt()),
                Modulation::Qpsk => (s(l, 0) / 2f64.sqrt(), s(l, 1) / 2f64.sqrt()),
                Modulation::Psk8 => {
                    // DVB-S2 Gray map (REFERENCE-VALUES §1.3), angles in units of π/4.
                    let eighth = [1.0, 0.0, 4.0, 5.0, 2.0, 7.0, 3.0, 6.0][l];
                    let a = eighth * std::f64::consts::FRAC_PI_4;
                    (a.cos(), a.sin())
                }
                Modulation::Qam16 => {
                    let k = 10f64.sqrt();
                    (s(l, 0) * (2.0 - s(l, 2)) / k, s(l, 1) * (2.0 - s(l, 3)) / k)
                }
                Modulation::Qam64 => {
                    let k = 42f64.sqrt();
                    (
                        s(l, 0) * (4.0 - s(l, 2) * (2.0 - s(l, 4))) / k,
                        s(l, 1) * (4.0 - s(l, 3) * (2.0 - s(l, 5))) / k,
                    )
                }
                Modulation::Qam256 => {
                    let k = 170f64.sqrt();
                    (
                        s(l, 0) * (8.0 - s(l, 2) * (4.0 - s(l, 4) * (2.0 - s(l, 6)))) / k,
                        s(l, 1) * (8.0 - s(l, 3) * (4.0 - s(l, 5) * (2.0 - s(l, 7)))) / k,
                    )
                }
            };
            Cf32::new(re as f32, im as f32)
        })
        .collect()
}

/// Bits per symbol.
pub fn bits_per_symbol(m: Modulation) -> usize {
    match m {
        Modulation::Bpsk => 1,
        Modulation::Qpsk => 2,
        Modulation::Psk8 => 3,
        Modulation::Qam16 => 4,
        Modulation::Qam64 => 6,
        Modulation::Qam256 => 8,
    }
}

/// RRC impulse response, T = 1 (REFERENCE-VALUES §5).
pub fn rrc_impulse(t: f64, beta: f64) -> f64 {
    use std::f64::consts::PI;
    if t.abs() < 1e-12 {
        return 1.0 - beta + 4.0 * beta / PI;
    }
    let edge = 1.0 / (4.0 * beta);
    if (t.abs() - edge).abs() < 1e-9 {
        return beta / 2f64.sqrt()
            * ((1.0 + 2.0 / PI) * (PI / (4.0 * beta)).sin()
                + (1.0 - 2.0 / PI) * (PI / (4.0 * beta)).cos());
    }
    ((PI * t * (1.0 - beta)).sin() + 4.0 * beta * t * (PI * t * (1.0 + beta)).cos())
        / (PI * t * (1.0 - (4.0 * beta * t).powi(2)))
}

/// PRBS bits from a Fibonacci LFSR x^n + x^a + 1: the register (stages 1..n,
/// stage i = bit i−1 of `seed`) shifts (stage a XOR stage n) into stage 1;
/// output is stage n (REFERENCE-VALUES §3).
pub fn prbs_bits(n: u32, a: u32, seed: u64, inverted: bool, out: &mut [u8]) {
    let mut reg = seed;
    for o in out.iter_mut() {
        let sn = (reg >> (n - 1)) & 1;
        let sa = (reg >> (a - 1)) & 1;
        *o = (sn as u8) ^ (inverted as u8);
        reg = ((reg << 1) | (sn ^ sa)) & ((1u64 << n) - 1);
    }
}

/// Barker codes (REFERENCE-VALUES §4).
pub fn barker(n: usize) -> Option<&'static [i8]> {
    const B2: [i8; 2] = [1, -1];
    const B3: [i8; 3] = [1, 1, -1];
    const B4: [i8; 4] = [1, 1, -1, 1];
    const B5: [i8; 5] = [1, 1, 1, -1, 1];
    const B7: [i8; 7] = [1, 1, 1, -1, -1, 1, -1];
    const B11: [i8; 11] = [1, 1, 1, -1, -1, -1, 1, -1, -1, 1, -1];
    const B13: [i8; 13] = [1, 1, 1, 1, 1, -1, -1, 1, 1, -1, 1, -1, 1];
    match n {
        2 => Some(&B2),
        3 => Some(&B3),
        4 => Some(&B4),
        5 => Some(&B5),
        7 => Some(&B7),
        11 => Some(&B11),
        13 => Some(&B13),
        _ => None,
    }
}

/// Zadoff-Chu x_u(n) = exp(−jπ u n(n+1)/N), cyclically shifted by `shift`.
pub fn zadoff_chu(root: u32, len: usize, shift: usize) -> Vec<Cf32> {
    (0..len)
        .map(|i| {
            let n = ((i + shift) % len) as f64;
            let ph = -std::f64::consts::PI * root as f64 * n * (n + 1.0) / len as f64;
            Cf32::new(ph.cos() as f32, ph.sin() as f32)
        })
        .collect()
}

/// One "re im" pair per line, '#' comments.
pub fn parse_symbols(text: &str) -> Result<Vec<Cf32>, String> {
    let mut v = Vec::new();
    for (i, line) in text.lines().enumerate() {
        let line = line.split('#').next().unwrap_or("").trim();
        if line.is_empty() {
            continue;
        }
        let mut it = line.split_whitespace();
        let (Some(a), Some(b), None) = (it.next(), it.next(), it.next()) else {
            return Err(format!("line {}: expected \"re im\"", i + 1));
        };
        let re: f32 = a
            .parse()
            .map_err(|_| format!("line {}: bad number {a}", i + 1))?;
        let im: f32 = b
            .parse()
            .map_err(|_| format!("line {}: bad number {b}", i + 1))?;
        v.push(Cf32::new(re, im));
    }
    Ok(v)
}
