//! `resistor`: Johnson–Nyquist noise records of a resistor, white with one-sided PSD 4kTR
//! (Nyquist, Phys. Rev. 32, 110 (1928)), for `noise`.

use super::{SimOutput, SimSpec};
use crate::common::BOLTZMANN_SI;
use crate::resample::replicate_rng;
use rand::RngExt;
use rand_distr::StandardNormal;
use rayon::prelude::*;
use serde_json::json;

/// Simulates `resistor`: one column per record.
pub(super) fn resistor(spec: &SimSpec) -> SimOutput {
    let (temperature, resistance, rate) = (300.0, 1000.0, 1e4);
    let n = if spec.quick { 1 << 16 } else { 1 << 20 };
    let sd = (4.0 * BOLTZMANN_SI * temperature * resistance * rate / 2.0).sqrt();
    let columns: Vec<Vec<f64>> = (0..spec.samples)
        .into_par_iter()
        .map(|r| {
            let mut rng = replicate_rng(spec.seed, r as u64);
            (0..n)
                .map(|_| sd * rng.sample::<f64, _>(StandardNormal))
                .collect()
        })
        .collect();
    let mut s = (1..=spec.samples)
        .map(|r| format!("run{r:02}"))
        .collect::<Vec<_>>()
        .join(",");
    s.push('\n');
    for k in 0..n {
        let line: Vec<String> = columns.iter().map(|c| format!("{:e}", c[k])).collect();
        s.push_str(&line.join(","));
        s.push('\n');
    }
    SimOutput {
        data: s.into_bytes(),
        truth: json!({
            "scenario": "resistor",
            "fit": "fdtemp noise FILE --sample-rate 10000 --resistance 1000 --temperature 300",
            "temperature": temperature,
            "resistance_ohm": resistance,
            "sample_rate_hz": rate,
            "t_eff": temperature,
            "source": "Nyquist, Phys. Rev. 32, 110 (1928): one-sided voltage noise 4 k T R (white); 1 kOhm at 300 K gives 4.0704 nV/sqrt(Hz)",
        }),
    }
}

/// The two-channel Johnson–Nyquist setup of `resistor-two-channels` (invented amplifier
/// amplitudes): a 1 kΩ resistor at 300 K, whose noise 4kTR (Nyquist 1928) is recorded at
/// once through two independent amplifiers, each adding its own white and 1/f-like noise.
pub mod two_channels {
    use crate::common::BOLTZMANN_SI;
    use crate::resample::replicate_rng;
    use rand::RngExt;
    use rand_distr::StandardNormal;

    /// Bath temperature (K).
    pub const TEMPERATURE: f64 = 300.0;
    /// Resistance (Ω).
    pub const RESISTANCE: f64 = 1000.0;
    /// Sample rate (Hz).
    pub const RATE: f64 = 1e4;
    /// Voltage gains of the two channels.
    pub const GAINS: [f64; 2] = [100.0, 1000.0];
    /// White input noise of each amplifier (one-sided, V²/Hz): 3 and 5 nV/√Hz.
    pub const WHITE: [f64; 2] = [9e-18, 2.5e-17];
    /// Corner frequencies (Hz) where each amplifier's 1/f-like noise equals its white.
    pub const CORNER: [f64; 2] = [200.0, 100.0];
    /// Relaxation frequencies (Hz) of the Lorentzians whose sum makes the 1/f-like part.
    const LORENTZ: [f64; 4] = [1.0, 10.0, 100.0, 1000.0];
    /// The stream offset of the amplifier-alone records (independent of the two channels).
    const AMP_STREAMS: u64 = 1 << 40;

    /// One amplifier's noise: white plus a sum of Lorentzians (AR(1) processes, one per
    /// relaxation frequency, each with the low-frequency level `W·f_c·(ln 10)/(π/2)/f_r`
    /// so that their sum falls about as `W f_c / f` between 1 Hz and 1 kHz).
    struct Amplifier {
        white_sd: f64,
        a: [f64; 4],
        sd: [f64; 4],
        x: [f64; 4],
    }

    impl Amplifier {
        fn new(ch: usize, rng: &mut impl rand::Rng) -> Self {
            let white_sd = (WHITE[ch] * RATE / 2.0).sqrt();
            let mut a = [0.0; 4];
            let mut sd = [0.0; 4];
            let mut x = [0.0; 4];
            for (i, &fr) in LORENTZ.iter().enumerate() {
                // A Lorentzian of one-sided level G0 and corner fr has variance G0·fr·π/2.
                let g0 = WHITE[ch] * CORNER[ch] * std::f64::consts::LN_10
                    / std::f64::consts::FRAC_PI_2
                    / fr;
                let var = g0 * fr * std::f64::consts::FRAC_PI_2;
                a[i] = (-2.0 * std::f64::consts::PI * fr / RATE).exp();
                sd[i] = (var * (1.0 - a[i] * a[i])).sqrt();
                x[i] = var.sqrt() * rng.sample::<f64, _>(StandardNormal);
            }
            Amplifier { white_sd, a, sd, x }
        }

        fn next(&mut self, rng: &mut impl rand::Rng) -> f64 {
            let mut v = self.white_sd * rng.sample::<f64, _>(StandardNormal);
            for i in 0..4 {
                self.x[i] =
                    self.a[i] * self.x[i] + self.sd[i] * rng.sample::<f64, _>(StandardNormal);
                v += self.x[i];
            }
            v
        }
    }

    /// Run `run` of `n` samples: the two channels as recorded (times their gains).
    pub fn record(seed: u64, run: u64, n: usize) -> (Vec<f64>, Vec<f64>) {
        let mut rng = replicate_rng(seed, run);
        let sd = (4.0 * BOLTZMANN_SI * TEMPERATURE * RESISTANCE * RATE / 2.0).sqrt();
        let mut amp = [Amplifier::new(0, &mut rng), Amplifier::new(1, &mut rng)];
        let mut a = Vec::with_capacity(n);
        let mut b = Vec::with_capacity(n);
        for _ in 0..n {
            let c = sd * rng.sample::<f64, _>(StandardNormal);
            a.push(GAINS[0] * (c + amp[0].next(&mut rng)));
            b.push(GAINS[1] * (c + amp[1].next(&mut rng)));
        }
        (a, b)
    }

    /// Run `run` of `n` samples of channel `ch`'s amplifier alone (input shorted), times
    /// its gain: an independent record for measuring its noise PSD.
    pub fn amplifier_alone(seed: u64, run: u64, ch: usize, n: usize) -> Vec<f64> {
        let mut rng = replicate_rng(seed, AMP_STREAMS + 2 * run + ch as u64);
        let mut amp = Amplifier::new(ch, &mut rng);
        (0..n).map(|_| GAINS[ch] * amp.next(&mut rng)).collect()
    }
}

/// One CSV column per run.
fn columns_csv(columns: &[Vec<f64>]) -> Vec<u8> {
    let mut s = (1..=columns.len())
        .map(|r| format!("run{r:02}"))
        .collect::<Vec<_>>()
        .join(",");
    s.push('\n');
    let n = columns.first().map_or(0, Vec::len);
    for k in 0..n {
        let line: Vec<String> = columns.iter().map(|c| format!("{:e}", c[k])).collect();
        s.push_str(&line.join(","));
        s.push('\n');
    }
    s.into_bytes()
}

/// Simulates `resistor-two-channels`: the first channel's file with the truth, the second
/// channel's file, and a record of the first amplifier alone (for `--amplifier-noise`).
pub(super) fn resistor_two_channels(spec: &SimSpec) -> (SimOutput, Vec<u8>, Vec<u8>) {
    use two_channels as tc;
    let n = if spec.quick { 1 << 16 } else { 1 << 20 };
    let runs: Vec<(Vec<f64>, Vec<f64>)> = (0..spec.samples)
        .into_par_iter()
        .map(|r| tc::record(spec.seed, r as u64, n))
        .collect();
    let (a, b): (Vec<Vec<f64>>, Vec<Vec<f64>>) = runs.into_iter().unzip();
    let amp: Vec<Vec<f64>> = (0..spec.samples)
        .into_par_iter()
        .map(|r| tc::amplifier_alone(spec.seed, r as u64, 0, n))
        .collect();
    let four_ktr = 4.0 * BOLTZMANN_SI * tc::TEMPERATURE * tc::RESISTANCE;
    let out = SimOutput {
        data: columns_csv(&a),
        truth: json!({
            "scenario": "resistor-two-channels",
            "fit": "fdtemp noise FILE --cross-with SECOND --gain 100 --cross-gain 1000 --sample-rate 10000 --resistance 1000 --temperature 300",
            "temperature": tc::TEMPERATURE,
            "resistance_ohm": tc::RESISTANCE,
            "sample_rate_hz": tc::RATE,
            "gains": tc::GAINS,
            "four_k_t_r": four_ktr,
            "amplifier_white_v2_per_hz": tc::WHITE,
            "amplifier_corner_hz": tc::CORNER,
            "t_eff": tc::TEMPERATURE,
            "single_channel_t_eff_white_limit": tc::TEMPERATURE * (1.0 + tc::WHITE[0] / four_ktr),
            "source": "Nyquist, Phys. Rev. 32, 110 (1928): the resistor's one-sided voltage noise 4 k T R (white), common to both channels; each amplifier adds its own white and 1/f-like noise (invented amplitudes), which the cross-spectrum removes and a single channel keeps",
        }),
    };
    (out, columns_csv(&b), columns_csv(&amp))
}
