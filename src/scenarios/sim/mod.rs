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
//! - `two-baths-twins`: the two-bath system as raw twin runs (`sample, tw, t, h, corr, m`)
//!   with a real force at two amplitudes and both signs, for `reduce` (`twins.rs`).
//! - `two-baths-quenches`: the same system as repeated quenches (`run, t, value, h, tw`),
//!   for `reduce` (`twins.rs`).
//! - `ising-twins`: the Glauber–Ising chain as raw twin runs with a random-sign field at
//!   two amplitudes, both signs, for `reduce` (`ising_twins.rs`).
//! - `two-lines`: the invented campaign of [`super::synth`] at benchmark size.
//!
//! One file per system: `ou.rs` (two-baths, ou-equilibrium), `brownian.rs`, `ising.rs`,
//! `resistor.rs`, `two_lines.rs`.

mod brownian;
mod ising;
pub mod ising_twins;
mod ou;
pub mod resistor;
pub mod twins;
mod two_lines;
pub use ising::ratio_at_fixed_t;

use crate::error::{Error, Result};
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
    /// A resistor's Johnson–Nyquist noise recorded at once through two amplifiers, each
    /// adding its own white and 1/f-like noise (for `noise --cross-with`); also writes the
    /// second channel and a record of the first amplifier alone.
    ResistorTwoChannels,
    /// Raw twin runs of the two-bath system (fields ±0.05, ±0.1 from tw) for `reduce`.
    TwoBathsTwins,
    /// Raw repeated quenches of the two-bath system (runs, a third unperturbed, field 0.5
    /// from tw = 50 or 500) for `reduce`.
    TwoBathsQuenches,
    /// Raw twin runs of the Glauber–Ising chain with a random-sign field (±0.05, ±0.1)
    /// for `reduce`; unperturbed rows carry the field-free estimator as `chi_free`.
    IsingTwins,
    /// Invented two-line campaign with a built-in answer (not a simulation; for
    /// benchmarks): 12 waiting times × 100 times (3 × 40 with `--quick`).
    TwoLines,
    /// Two observables of the two-bath system (column `observable`: a, b), b also coupled
    /// to a second slow bath at `--bath-b` (default 2.5: both share X = 0.4), for `fit`'s
    /// joint test.
    TwoBathsObservables,
    /// Invented noise records after a quench (a slow mode cooling with age beside a fast
    /// one at the bath), for `noise --ages`; its loss table goes beside it as
    /// `STEM.loss.csv` (not a simulation of a material: `scenarios::aging_noise`).
    AgingNoise,
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
    /// Which time is held along one curve: the waiting time (the usual plan), or the later
    /// time t with the earlier time running (`ising-chain` only).
    pub hold: crate::twotime::settings::Hold,
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
    check(spec)?;
    Ok(match spec.scenario {
        Scenario::TwoBaths => ou::two_baths(spec),
        Scenario::OuEquilibrium => ou::equilibrium(spec),
        Scenario::Brownian => brownian::brownian(spec),
        Scenario::IsingChain => ising::ising_chain(spec),
        Scenario::Resistor => resistor::resistor(spec),
        Scenario::ResistorTwoChannels => resistor::resistor_two_channels(spec).0,
        Scenario::TwoLines => two_lines::two_lines(spec)?,
        Scenario::TwoBathsTwins => twins::two_baths(spec),
        Scenario::TwoBathsQuenches => twins::two_baths_quenches(spec, &[])?,
        Scenario::IsingTwins => ising_twins::ising_twins(spec),
        Scenario::TwoBathsObservables => ou::two_observables(spec, SLOW_B_DEFAULT),
        Scenario::AgingNoise => aging_records(spec).0,
    })
}

/// The files a scenario writes beside its data file and truth: `(suffix, bytes)`, the
/// suffix replacing the data file's extension (`resistor-two-channels`: the second
/// channel `STEM.ch2.csv` and the first amplifier alone `STEM.amp.csv`).
///
/// # Errors
/// As [`simulate`].
pub fn companions(spec: &SimSpec) -> Result<Vec<(&'static str, Vec<u8>)>> {
    check(spec)?;
    Ok(match spec.scenario {
        Scenario::ResistorTwoChannels => {
            let (_, b, amp) = resistor::resistor_two_channels(spec);
            vec![("ch2.csv", b), ("amp.csv", amp)]
        }
        Scenario::AgingNoise => vec![("loss.csv", aging_records(spec).1)],
        _ => Vec::new(),
    })
}

/// `aging-noise`: the records (a time column, then one column per run) and the loss table.
fn aging_records(spec: &SimSpec) -> (SimOutput, Vec<u8>) {
    use crate::scenarios::aging_noise::AgingNoiseSpec;
    let a = AgingNoiseSpec {
        runs: spec.samples,
        seed: spec.seed,
        duration: if spec.quick { 300.0 } else { 1000.0 },
        ..AgingNoiseSpec::default()
    };
    let records = a.records();
    let n = records.first().map_or(0, Vec::len);
    let mut data = String::from("time_s");
    for r in 0..a.runs {
        let _ = write!(data, ",run{:03}", r + 1);
    }
    data.push('\n');
    for i in 0..n {
        let _ = write!(data, "{}", i as f64 / a.fs);
        for rec in &records {
            let _ = write!(data, ",{:.6}", rec[i]);
        }
        data.push('\n');
    }
    let mut loss = String::from("f,loss\n");
    for k in 0..=160 {
        let f = 0.05 * 10f64.powf(f64::from(k) / 53.0);
        if f <= a.fs / 2.0 {
            let _ = writeln!(loss, "{f:?},{:?}", a.loss(f));
        }
    }
    let (ages, span, band) = if spec.quick {
        ([50.0, 200.0], 0.5, [3.0, 15.0])
    } else {
        ([50.0, 800.0], 0.5, [3.0, 15.0])
    };
    let segment = 512.0;
    let band_truth: Vec<serde_json::Value> = ages
        .iter()
        .map(|&tw| {
            let w = [tw * (1.0 - span / 2.0), tw * (1.0 + span / 2.0)];
            let fs: Vec<f64> = (1..=256)
                .map(|k| f64::from(k) * a.fs / segment)
                .filter(|f| band[0] <= *f && *f <= band[1])
                .collect();
            let mean = fs.iter().map(|&f| a.t_eff(f, w)).sum::<f64>() / fs.len() as f64;
            serde_json::json!({"tw": tw, "window": w, "t_eff_band": mean,
                               "slow_temperature_window_mean": a.mean_slow_temperature(w)})
        })
        .collect();
    let ages_text = ages.map(|t| t.to_string()).join(",");
    let truth = serde_json::json!({
        "scenario": "aging-noise",
        "fit": format!(
            "fdtemp noise FILE --ages {ages_text} --age-span {span} --loss-file SECOND -T 1 \
             --units reduced --convention loss --segment 512 --band {}:{}",
            band[0], band[1]
        ),
        "recipe": a,
        "ages": band_truth,
        "t_eff": "T_eff(f; a, b) = (T G_fast(f) + Tbar_s G_slow(f)) / (G_fast(f) + G_slow(f)), G of each sampled mode at T = 1, Tbar_s the window mean of T_s(t) = T (1 + hot / (1 + t/age_scale))",
        "source": "invented records with a built-in answer (common practice: the AR(1) spectrum of an exactly sampled Ornstein-Uhlenbeck mode); the loss is defined so that the equilibrium system obeys G = 2 k T chi''/(pi f)",
    });
    (
        SimOutput {
            data: data.into_bytes(),
            truth,
        },
        loss.into_bytes(),
    )
}

/// The default temperature of `two-baths-observables`' second slow bath: that of the
/// first, so that both observables share X = 0.4.
pub const SLOW_B_DEFAULT: f64 = 2.5;

/// `two-baths-observables` with the second slow bath at `bath_b` (positive).
///
/// # Errors
/// As [`simulate`]; [`Error::Setting`] for another scenario or a temperature that is not
/// positive.
pub fn simulate_observables(spec: &SimSpec, bath_b: f64) -> Result<SimOutput> {
    if spec.scenario != Scenario::TwoBathsObservables {
        return Err(Error::Setting(
            "--bath-b is simulated only for two-baths-observables".into(),
        ));
    }
    if !(bath_b > 0.0 && bath_b.is_finite()) {
        return Err(Error::Setting(format!(
            "--bath-b is {bath_b}, expected a positive temperature"
        )));
    }
    check(spec)?;
    Ok(ou::two_observables(spec, bath_b))
}

/// The settings' checks shared by every scenario.
fn check(spec: &SimSpec) -> Result<()> {
    if spec.samples < 2 {
        return Err(Error::Setting(format!(
            "--samples is {}, expected at least 2 independent runs",
            spec.samples
        )));
    }
    if spec.hold == crate::twotime::settings::Hold::T && spec.scenario != Scenario::IsingChain {
        return Err(Error::Setting(
            "--hold t is simulated only for ising-chain; the other systems hold tw".into(),
        ));
    }
    Ok(())
}

/// Runs the simulation with the perturbed runs at `fields` (`two-baths-quenches` only;
/// empty: as [`simulate`]).
///
/// # Errors
/// As [`simulate`]; [`Error::Setting`] for fields with another scenario, a zero or
/// repeated field.
pub fn simulate_with_fields(spec: &SimSpec, fields: &[f64]) -> Result<SimOutput> {
    if fields.is_empty() {
        return simulate(spec);
    }
    if spec.scenario != Scenario::TwoBathsQuenches {
        return Err(Error::Setting(
            "--fields is simulated only for two-baths-quenches".into(),
        ));
    }
    check(spec)?;
    twins::two_baths_quenches(spec, fields)
}

/// The small constant force of the perturbed twins.
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
