//! `fdtemp synth`: simulates a system with a known answer into a data file and its truth.

use super::RunArgs;
use fdtemp::output::{self, Output};
use fdtemp::scenarios::sim::{Scenario, SimSpec, simulate_with_fields};
use fdtemp::twotime::settings::Hold;
use std::path::PathBuf;

#[derive(clap::Args)]
pub struct SynthArgs {
    /// The system to simulate.
    #[arg(value_enum)]
    scenario: Scenario,
    /// Independent runs (samples; for resistor, records).
    #[arg(long, default_value_t = 200)]
    samples: usize,
    /// Seed: run i uses random stream i of this seed.
    #[arg(long, default_value_t = 1)]
    seed: u64,
    /// The data file to write; the truth goes beside it as STEM.truth.json.
    #[arg(long, value_name = "FILE")]
    out: PathBuf,
    /// A smaller, faster version of the simulation.
    #[arg(long)]
    quick: bool,
    /// Replace files that exist already.
    #[arg(long)]
    overwrite: bool,
    /// Which time each curve holds: tw (the later time runs), or t (ising-chain only: the
    /// earlier time runs at fixed later times, where the slope of a curve is the two-time
    /// ratio X(t, s)).
    #[arg(long, value_enum, default_value_t = Hold::Tw)]
    hold: Hold,
    /// two-baths-quenches only: the fields of the perturbed runs (comma-separated, signed;
    /// they take turns within each waiting time; default 0.5). Two or more give `reduce`
    /// its linear-response test.
    #[arg(
        long,
        value_name = "H,...",
        value_delimiter = ',',
        allow_negative_numbers = true
    )]
    fields: Vec<f64>,
    /// two-baths-observables only: the temperature of the second slow bath, which only
    /// observable b feels (default 2.5, the first slow bath's: both observables share
    /// X = 0.4; another value gives b its own X, written in the truth file).
    #[arg(long, value_name = "T")]
    bath_b: Option<f64>,
    #[command(flatten)]
    pub(super) run: RunArgs,
}

/// Writes the data file and `STEM.truth.json`, and prints how to analyse them.
pub fn run(a: SynthArgs) -> fdtemp::Result<()> {
    let truth_path = a.out.with_extension("truth.json");
    output::check_paths(
        &[&Some(a.out.clone()), &Some(truth_path.clone())],
        &[],
        a.overwrite,
    )?;
    let spec = SimSpec {
        scenario: a.scenario,
        samples: a.samples,
        seed: a.seed,
        quick: a.quick,
        hold: a.hold,
    };
    let companions: Vec<(PathBuf, Vec<u8>)> = fdtemp::scenarios::sim::companions(&spec)?
        .into_iter()
        .map(|(ext, bytes)| (a.out.with_extension(ext), bytes))
        .collect();
    let companion_paths: Vec<Option<PathBuf>> =
        companions.iter().map(|(p, _)| Some(p.clone())).collect();
    output::check_paths(
        &companion_paths.iter().collect::<Vec<_>>(),
        &[],
        a.overwrite,
    )?;
    let sim = match a.bath_b {
        Some(t) => fdtemp::scenarios::sim::simulate_observables(&spec, t)?,
        None => simulate_with_fields(&spec, &a.fields)?,
    };
    let mut fit = sim.truth["fit"]
        .as_str()
        .unwrap_or("")
        .replace("FILE", &a.out.display().to_string());
    if let Some((p, _)) = companions.first() {
        fit = fit.replace("SECOND", &p.display().to_string());
    }
    let mut outputs = vec![
        Output {
            path: a.out.clone(),
            bytes: sim.data,
        },
        Output {
            path: truth_path.clone(),
            bytes: fdtemp::report::json::sorted_json(&sim.truth),
        },
    ];
    let also: Vec<PathBuf> = companions.iter().map(|(p, _)| p.clone()).collect();
    for (path, bytes) in companions {
        outputs.push(Output { path, bytes });
    }
    output::write_all(&outputs, a.overwrite)?;
    for p in also {
        println!("also       {}", p.display());
    }
    println!(
        "wrote      {} ({} runs) and {}",
        a.out.display(),
        a.samples,
        truth_path.display()
    );
    println!("truth      {}", sim.truth["source"].as_str().unwrap_or(""));
    println!("analyse    {fit}");
    Ok(())
}
