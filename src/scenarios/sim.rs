//! Simulated systems with a known or published fluctuation–dissipation ratio.
//!
//! Unlike [`super::synth`], these campaigns come from simulating the dynamics, one
//! independent run per sample, and are written in exactly the format `fit` (or `noise`)
//! reads, with a truth file that names where the expected value comes from.
//!
//! Each sample is one run of a system of [`PARTICLES`] independent particles, and its C
//! and χ are averages over them, as a simulation averages over its particles.
//!
//! - `two-baths`: a particle coordinate made of two Ornstein–Uhlenbeck modes, each coupled
//!   to its own bath (temperature, mobility, time); the response to a small force is the
//!   perturbed run minus its zero-field twin (same noise). Exact update steps, no
//!   discretization error.
//! - `brownian`: free Brownian motion from the origin; response as above. With the later
//!   time held fixed, X = 1/2 (Cugliandolo, Kurchan & Parisi, J. Phys. I France 4, 1641
//!   (1994)).
//! - `ising-chain`: a 1D Ising chain with heat-bath (Glauber) single-spin dynamics quenched
//!   from a random state to a low temperature. The integrated response comes from the
//!   unperturbed dynamics by the field-free estimator
//!   `T χ(t,s) = (1/L) Σ_i ⟨σ_i(t) Σ_{updates u of i in (s,t]} [σ_i(u) − tanh(β h_i(u))]⟩`
//!   (Ricci-Tersenghi, Phys. Rev. E 68, 065104(R) (2003); Chatelain, J. Phys. A 36, 10739
//!   (2003)). Published: `X∞ = 1/2` (Godrèche & Luck, J. Phys. A 33, 1151 (2000);
//!   Lippiello & Zannetti, Phys. Rev. E 61, 3369 (2000)).
//! - `ou-equilibrium`: one Ornstein–Uhlenbeck mode in equilibrium: X = 1.
//! - `resistor`: Johnson–Nyquist noise of a resistor, white with one-sided PSD 4kTR
//!   (Nyquist, Phys. Rev. 32, 110 (1928)), for `noise`.

use crate::error::{Error, Result};
use crate::resample::replicate_rng;
use crate::settings::BOLTZMANN_SI;
use rand::RngExt;
use rand_distr::StandardNormal;
use rayon::prelude::*;
use serde_json::json;
use std::fmt::Write;

/// The simulated systems.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, clap::ValueEnum)]
#[serde(rename_all = "kebab-case")]
pub enum Scenario {
    /// Two Ornstein–Uhlenbeck modes coupled to baths at different temperatures.
    TwoBaths,
    /// Free Brownian motion (X = 1/2 with the later time fixed).
    Brownian,
    /// Glauber–Ising chain quenched to low temperature (X∞ = 1/2).
    IsingChain,
    /// One Ornstein–Uhlenbeck mode in equilibrium (X = 1).
    OuEquilibrium,
    /// Johnson–Nyquist noise records of a resistor (for `noise`).
    Resistor,
    /// Invented two-line campaign with a built-in answer (not a simulation; for
    /// benchmarks): 12 waiting times × 100 times (3 × 40 with `--quick`).
    TwoLines,
}

/// What to simulate.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct SimSpec {
    /// The system.
    pub scenario: Scenario,
    /// Independent runs (samples; records for `resistor`).
    pub samples: usize,
    /// Seed: run `i` uses stream `i` of this seed.
    pub seed: u64,
    /// A smaller, faster version (for tests).
    pub quick: bool,
}

/// The simulated file and its truth.
#[derive(Debug, Clone)]
pub struct SimOutput {
    /// The data file's bytes.
    pub data: Vec<u8>,
    /// What the analysis should find, and the source of that value.
    pub truth: serde_json::Value,
}

/// Runs the simulation.
///
/// # Errors
/// [`Error::Setting`] when fewer than 2 samples are asked for.
pub fn simulate(spec: &SimSpec) -> Result<SimOutput> {
    if spec.samples < 2 {
        return Err(Error::Setting(format!(
            "--samples is {}, expected at least 2 independent runs",
            spec.samples
        )));
    }
    Ok(match spec.scenario {
        Scenario::TwoBaths => two_baths(spec, &[Mode::FAST, Mode::SLOW]),
        Scenario::OuEquilibrium => two_baths(spec, &[Mode::FAST]),
        Scenario::Brownian => brownian(spec),
        Scenario::IsingChain => ising_chain(spec),
        Scenario::Resistor => resistor(spec),
        Scenario::TwoLines => two_lines(spec)?,
    })
}

/// One Ornstein–Uhlenbeck mode: `dx = −x/τ dt + μ h dt + √(2 μ T) dW`.
#[derive(Debug, Clone, Copy)]
struct Mode {
    temperature: f64,
    mobility: f64,
    time: f64,
}

impl Mode {
    const FAST: Mode = Mode {
        temperature: 1.0,
        mobility: 1.0,
        time: 1.0,
    };
    const SLOW: Mode = Mode {
        temperature: 2.5,
        mobility: 0.0004,
        time: 1000.0,
    };

    /// Stationary variance `μ T τ`.
    fn variance(self) -> f64 {
        self.mobility * self.temperature * self.time
    }

    /// Exact step of length `dt` under force `h`: `(decay, drift, noise sd)`.
    fn step(self, dt: f64, h: f64) -> (f64, f64, f64) {
        let e = (-dt / self.time).exp();
        let sd = (self.variance() * (1.0 - e * e)).sqrt();
        (e, self.mobility * h * self.time * (1.0 - e), sd)
    }
}

const FIELD: f64 = 0.01;
/// Independent particles in one sample (one run of a system); C and χ are their averages.
pub const PARTICLES: usize = 100;

/// One campaign row: sample index, tw, t, C, chi, C(t,t).
type Row = (usize, f64, f64, f64, f64, Option<f64>);

/// Rows of a campaign CSV.
fn campaign_csv(rows: &[Row]) -> Vec<u8> {
    let with_eq = rows.first().is_some_and(|r| r.5.is_some());
    let mut s = String::from(if with_eq {
        "sample,tw,t,corr,resp,corr_eq\n"
    } else {
        "sample,tw,t,corr,resp\n"
    });
    for &(i, tw, t, c, r, eq) in rows {
        let _ = write!(s, "run{:04},{tw:?},{t:?},{c:?},{r:?}", i + 1);
        if let Some(e) = eq {
            let _ = write!(s, ",{e:?}");
        }
        s.push('\n');
    }
    s.into_bytes()
}

fn log_grid(lo: f64, hi: f64, n: usize) -> Vec<f64> {
    (0..n)
        .map(|i| lo * (hi / lo).powf(i as f64 / (n - 1) as f64))
        .collect()
}

fn two_baths(spec: &SimSpec, modes: &[Mode]) -> SimOutput {
    let tws = [50.0, 500.0];
    let per_tw = if spec.quick { 24 } else { 40 };
    let lags = log_grid(0.02, 10_000.0, per_tw);
    let mut events: Vec<(f64, usize, usize)> = Vec::new(); // (time, tw index, lag index or MAX)
    for (a, &tw) in tws.iter().enumerate() {
        events.push((tw, a, usize::MAX));
        for (b, &lag) in lags.iter().enumerate() {
            events.push((tw + lag, a, b));
        }
    }
    events.sort_by(|x, y| x.0.total_cmp(&y.0));
    let rows: Vec<Vec<Row>> = (0..spec.samples)
        .into_par_iter()
        .map(|i| {
            let mut rng = replicate_rng(spec.seed, i as u64);
            // Per point: sums over particles of A(t)A(tw), (A_h(t) − A(t))/h, A(t)².
            let mut sums: Vec<[f64; 3]> = vec![[0.0; 3]; events.len()];
            for _ in 0..PARTICLES {
                // Unperturbed state, and one perturbed twin per waiting time (force from tw on).
                let mut x0: Vec<f64> = modes
                    .iter()
                    .map(|m| m.variance().sqrt() * rng.sample::<f64, _>(StandardNormal))
                    .collect();
                let mut xh: Vec<Vec<f64>> = vec![x0.clone(); tws.len()];
                let mut a_tw = vec![0.0; tws.len()];
                let mut now = 0.0;
                for (ev, &(time, a, b)) in events.iter().enumerate() {
                    let dt = time - now;
                    if dt > 0.0 {
                        for (k, m) in modes.iter().enumerate() {
                            let z: f64 = rng.sample(StandardNormal);
                            let (e, _, sd) = m.step(dt, 0.0);
                            let noise = sd * z;
                            x0[k] = x0[k] * e + noise;
                            for (w, twin) in xh.iter_mut().enumerate() {
                                let h = if now >= tws[w] { FIELD } else { 0.0 };
                                let (e, drift, _) = m.step(dt, h);
                                twin[k] = twin[k] * e + drift + noise;
                            }
                        }
                        now = time;
                    }
                    let a0: f64 = x0.iter().sum();
                    if b == usize::MAX {
                        a_tw[a] = a0;
                        xh[a] = x0.clone();
                    } else {
                        let ah: f64 = xh[a].iter().sum();
                        let acc = &mut sums[ev];
                        acc[0] += a0 * a_tw[a];
                        acc[1] += (ah - a0) / FIELD;
                        acc[2] += a0 * a0;
                    }
                }
            }
            let np = PARTICLES as f64;
            events
                .iter()
                .zip(&sums)
                .filter(|(e, _)| e.2 != usize::MAX)
                .map(|(&(time, a, _), acc)| {
                    (i, tws[a], time, acc[0] / np, acc[1] / np, Some(acc[2] / np))
                })
                .collect::<Vec<_>>()
        })
        .collect();
    let data = campaign_csv(&rows.concat());
    let total: f64 = modes.iter().map(|m| m.variance()).sum();
    let truth = if modes.len() == 2 {
        let (f, s) = (modes[0], modes[1]);
        json!({
            "scenario": "two-baths",
            "fit": "fdtemp fit FILE --temperature 1",
            "axes": "normalized (the file has corr_eq = C(t,t))",
            "temperature": f.temperature,
            "ratio": f.temperature / s.temperature,
            "t_eff": s.temperature,
            "break": s.variance() / total,
            "modes": [{"temperature": f.temperature, "mobility": f.mobility, "time": f.time},
                      {"temperature": s.temperature, "mobility": s.mobility, "time": s.time}],
            "closed_form": "C(t,tw) = sum_i mu_i T_i tau_i exp(-(t-tw)/tau_i); chi(t,tw) = sum_i mu_i tau_i (1 - exp(-(t-tw)/tau_i))",
            "source": "exact for independent Ornstein-Uhlenbeck modes (common practice): slope -T/T_fast then -T/T_slow; with T = T_fast, X = T_fast/T_slow, q = (mu T tau)_slow / C(t,t)",
        })
    } else {
        json!({
            "scenario": "ou-equilibrium",
            "fit": "fdtemp fit FILE --temperature 1",
            "temperature": modes[0].temperature,
            "ratio": 1.0,
            "t_eff": modes[0].temperature,
            "break": null,
            "source": "equilibrium fluctuation-dissipation theorem (common practice): X = 1, no break",
        })
    };
    SimOutput { data, truth }
}

fn brownian(spec: &SimSpec) -> SimOutput {
    let (mobility, temperature) = (1.0, 1.0);
    let ts = [100.0, 1000.0];
    let per_t = if spec.quick { 16 } else { 30 };
    let fractions: Vec<f64> = (0..per_t)
        .map(|k| 0.03 + 0.94 * k as f64 / (per_t - 1) as f64)
        .collect();
    let rows: Vec<Vec<Row>> = (0..spec.samples)
        .into_par_iter()
        .map(|i| {
            let mut rng = replicate_rng(spec.seed, i as u64);
            let d = mobility * temperature;
            let mut out = Vec::new();
            for &t in &ts {
                // Per particle one path; the earlier times s are points on it.
                let mut times: Vec<f64> = fractions.iter().map(|f| f * t).collect();
                times.push(t);
                let mut sums = vec![[0.0f64; 3]; times.len() - 1];
                for _ in 0..PARTICLES {
                    let (mut x, mut now) = (0.0f64, 0.0);
                    let mut at = Vec::with_capacity(times.len());
                    for &s in &times {
                        x += (2.0 * d * (s - now)).sqrt() * rng.sample::<f64, _>(StandardNormal);
                        now = s;
                        at.push(x);
                    }
                    let xt = at[at.len() - 1];
                    for (k, &s) in times[..times.len() - 1].iter().enumerate() {
                        // Perturbed twin: a force FIELD from s to t adds mobility·FIELD·(t − s).
                        let twin = xt + mobility * FIELD * (t - s);
                        sums[k][0] += xt * at[k];
                        sums[k][1] += (twin - xt) / FIELD;
                        sums[k][2] += xt * xt;
                    }
                }
                let np = PARTICLES as f64;
                for (k, &s) in times[..times.len() - 1].iter().enumerate() {
                    out.push((
                        i,
                        s,
                        t,
                        sums[k][0] / np,
                        sums[k][1] / np,
                        Some(sums[k][2] / np),
                    ));
                }
            }
            out
        })
        .collect();
    SimOutput {
        data: campaign_csv(&rows.concat()),
        truth: json!({
            "scenario": "brownian",
            "fit": "fdtemp fit FILE --temperature 1 --hold t --model line",
            "temperature": temperature,
            "ratio": 0.5,
            "t_eff": 2.0 * temperature,
            "break": null,
            "source": "Cugliandolo, Kurchan & Parisi, J. Phys. I France 4, 1641 (1994): C(t,s) = 2Ds and T R = D give X = 1/2 with the later time t fixed",
        }),
    }
}

fn ising_chain(spec: &SimSpec) -> SimOutput {
    let (l, sweeps_per_s): (usize, [usize; 2]) = if spec.quick {
        (2000, [10, 20])
    } else {
        (4000, [20, 40])
    };
    let max_ratio = if spec.quick { 60.0 } else { 150.0 };
    let temperature: f64 = 0.25;
    let beta = 1.0 / temperature;
    let per_s = if spec.quick { 24 } else { 40 };
    // Measurement sweeps for each s: t/s log-spaced in (1, max_ratio].
    let plans: Vec<(usize, Vec<usize>)> = sweeps_per_s
        .iter()
        .map(|&s| {
            // The published check ratios t/s = 2, 4, 10 are always on the grid.
            let mut ts: Vec<usize> = log_grid(1.1, max_ratio, per_s)
                .iter()
                .chain(&[2.0, 4.0, 10.0])
                .map(|r| (r * s as f64).round() as usize)
                .filter(|&t| t > s)
                .collect();
            ts.sort_unstable();
            ts.dedup();
            (s, ts)
        })
        .collect();
    let end = plans
        .iter()
        .flat_map(|(_, ts)| ts.iter().copied())
        .max()
        .unwrap_or(1);
    let tanh = [(-2.0 * beta).tanh(), 0.0, (2.0 * beta).tanh()];
    let rows: Vec<Vec<Row>> = (0..spec.samples)
        .into_par_iter()
        .map(|i| {
            let mut rng = replicate_rng(spec.seed, i as u64);
            let mut spin: Vec<i8> = (0..l)
                .map(|_| if rng.random_bool(0.5) { 1 } else { -1 })
                .collect();
            let mut snapshot: Vec<Vec<i8>> = vec![Vec::new(); plans.len()];
            let mut acc: Vec<Vec<f64>> = vec![Vec::new(); plans.len()];
            let mut out = Vec::new();
            for sweep in 1..=end {
                for _ in 0..l {
                    let k = rng.random_range(0..l);
                    let h = i32::from(spin[(k + l - 1) % l]) + i32::from(spin[(k + 1) % l]);
                    let th = tanh[(h / 2 + 1) as usize];
                    let new: i8 = if rng.random::<f64>() < 0.5 * (1.0 + th) {
                        1
                    } else {
                        -1
                    };
                    spin[k] = new;
                    for a in acc.iter_mut().filter(|a| !a.is_empty()) {
                        a[k] += f64::from(new) - th;
                    }
                }
                for (p, (s, ts)) in plans.iter().enumerate() {
                    if sweep == *s {
                        snapshot[p] = spin.clone();
                        acc[p] = vec![0.0; l];
                    } else if ts.binary_search(&sweep).is_ok() {
                        let c = spin
                            .iter()
                            .zip(&snapshot[p])
                            .map(|(a, b)| i32::from(a * b))
                            .sum::<i32>() as f64
                            / l as f64;
                        let tchi = spin
                            .iter()
                            .zip(&acc[p])
                            .map(|(a, d)| f64::from(*a) * d)
                            .sum::<f64>()
                            / l as f64;
                        out.push((i, *s as f64, sweep as f64, c, tchi / temperature, None));
                    }
                }
            }
            out
        })
        .collect();
    SimOutput {
        data: campaign_csv(&rows.concat()),
        truth: json!({
            "scenario": "ising-chain",
            "fit": "fdtemp fit FILE --temperature 0.25 --model line --range 0:0.15",
            "temperature": temperature,
            "ratio": 0.5,
            "ratio_note": "the asymptotic value X_inf as C -> 0; at finite t/s the local slope is (t+s)/(2t), about 0.51 on 0 < C < 0.15",
            "t_eff": 2.0 * temperature,
            "break": null,
            "chain_length": l,
            "waiting_times_sweeps": sweeps_per_s,
            "response": "field-free estimator from the unperturbed heat-bath dynamics (Ricci-Tersenghi, Phys. Rev. E 68, 065104(R) (2003); Chatelain, J. Phys. A 36, 10739 (2003))",
            "scaling_forms": "C(t,s) = (2/pi) arctan sqrt(2s/(t-s)); T chi(t,s) = (sqrt 2/pi) arccos sqrt(s/t)",
            "source": "Godreche & Luck, J. Phys. A 33, 1151 (2000); Lippiello & Zannetti, Phys. Rev. E 61, 3369 (2000): X(t,s) = (t+s)/(2t), X_inf = 1/2",
        }),
    }
}

fn resistor(spec: &SimSpec) -> SimOutput {
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

fn two_lines(spec: &SimSpec) -> Result<SimOutput> {
    let base = crate::scenarios::synth::SynthSpec::default();
    let synth = crate::scenarios::synth::SynthSpec {
        samples: spec.samples,
        seed: spec.seed,
        waiting_times: if spec.quick {
            base.waiting_times.clone()
        } else {
            (0..12).map(|k| 100.0 * 2f64.powi(k)).collect()
        },
        points_per_tw: if spec.quick { 40 } else { 100 },
        ..base
    };
    let campaign = crate::scenarios::synth::generate(&synth)?;
    Ok(SimOutput {
        data: crate::input::write_campaign(&campaign),
        truth: json!({
            "scenario": "two-lines",
            "fit": "fdtemp fit FILE --temperature 0.6",
            "temperature": synth.temperature,
            "ratio": synth.ratio,
            "t_eff": synth.temperature / synth.ratio,
            "break": synth.plateau,
            "source": "invented: the sample means lie on the broken stick by construction (fdtemp::synth)",
        }),
    })
}
