//! `fdtemp reduce`: raw runs (twin runs or repeated quenches) → a campaign `fit` reads,
//! with the linear-response verdict; optionally fitted at once.

use super::progress::Bar;
use super::{RunArgs, in_file, print};
use fdtemp::output::{self, Output};
use fdtemp::reduce::quench_fit::QuenchFitSettings;
use fdtemp::reduce::twin::Combine;
use fdtemp::reduce::{Protocol, RawSource, ReduceSettings};
use fdtemp::report::reduce as reduce_report;
use std::fmt::Write;
use std::path::PathBuf;

#[derive(clap::Args)]
pub struct ReduceArgs {
    /// Raw runs CSV: `sample, tw, t, h, corr, m` (twins) or `run, t, value, h, tw` (quenches).
    file: PathBuf,
    /// The campaign CSV to write (sample, tw, t, corr, resp), the format `fit` reads.
    #[arg(long, value_name = "FILE")]
    out: PathBuf,
    /// The protocol of the raw file.
    #[arg(long, value_enum, default_value_t = Protocol::Auto)]
    protocol: Protocol,
    /// How χ is formed from several field levels (twins; quenches with several fields at a
    /// tw).
    #[arg(long, value_enum, default_value_t = Combine::Extrapolate)]
    combine: Combine,
    /// Also write the per-point table (means, intervals, levels, shifts, p-values) here
    /// (twins; quenches with several fields at a tw).
    #[arg(long, value_name = "FILE")]
    table: Option<PathBuf>,
    /// Write the reduction as JSON to this file (settings, levels, the linearity test,
    /// cautions, every point).
    #[arg(long, value_name = "FILE")]
    json: Option<PathBuf>,
    /// Bootstrap resamples of the samples (runs) for intervals and the linearity test.
    #[arg(long, short = 'B', default_value_t = 1999)]
    resamples: usize,
    /// Seed of the random streams.
    #[arg(long, default_value_t = 1)]
    seed: u64,
    /// Confidence level of the intervals; the tests reject at 1 − level.
    #[arg(long, default_value_t = 0.95, allow_negative_numbers = true)]
    level: f64,
    /// Quenches: plain C = <A(t)A(tw)> instead of the connected one.
    #[arg(long)]
    plain: bool,
    /// Quenches: waiting times to form C at (comma-separated; default: the perturbed runs'
    /// switch-on times).
    #[arg(long, value_name = "TW,...", value_delimiter = ',')]
    tw: Vec<f64>,
    /// Fit at once (needs --temperature): twins by `fit` with its defaults; quenches by the
    /// broken stick refitted on every stratified replicate of runs.
    #[arg(long)]
    fit: bool,
    /// Bath temperature for --fit (reduced units).
    #[arg(long, short = 'T', allow_negative_numbers = true)]
    temperature: Option<f64>,
    /// Replace output files that exist already.
    #[arg(long)]
    overwrite: bool,
    #[command(flatten)]
    pub(super) run: RunArgs,
}

/// Reads, reduces, writes the campaign (and table), prints the verdict, fits on request.
pub fn run(a: ReduceArgs) -> fdtemp::Result<()> {
    let fit_settings = if a.fit {
        let t = a.temperature.ok_or_else(|| {
            fdtemp::Error::Setting("--fit needs --temperature (the bath temperature T)".into())
        })?;
        let s = fdtemp::FitSettings {
            temperature: t,
            seed: a.seed,
            level: a.level,
            ..Default::default()
        };
        s.validate()?;
        Some(s)
    } else {
        None
    };
    output::check_paths(
        &[&Some(a.out.clone()), &a.table, &a.json],
        &[a.file.as_path()],
        a.overwrite,
    )?;
    let src = RawSource::File(a.file.clone());
    let protocol = match a.protocol {
        Protocol::Auto => src.detect()?,
        p => p,
    };
    let settings = ReduceSettings {
        protocol,
        combine: a.combine,
        resamples: a.resamples,
        seed: a.seed,
        level: a.level,
        connected: !a.plain,
        tws: a.tw.clone(),
        quench_fit: match (protocol, &fit_settings) {
            (Protocol::Quenches, Some(f)) => Some(QuenchFitSettings {
                temperature: f.temperature,
                ..Default::default()
            }),
            _ => None,
        },
    };
    let red = fdtemp::reduce::reduce(&src, &settings)?;
    let table = reduce_report::table_csv(&red);
    if a.table.is_some() && table.is_none() {
        return Err(fdtemp::Error::Setting(
            "--table is for twin runs and for repeated quenches with several fields at a tw; \
             with one field per tw --out is already the per-point table"
                .into(),
        ));
    }
    let mut outputs = vec![Output {
        path: a.out.clone(),
        bytes: reduce_report::out_csv(&red),
    }];
    if let Some(p) = &a.table {
        outputs.push(Output {
            path: p.clone(),
            bytes: table.clone().unwrap_or_default(),
        });
    }
    if let Some(p) = &a.json {
        outputs.push(Output {
            path: p.clone(),
            bytes: reduce_report::json(&red),
        });
    }
    output::write_all(&outputs, a.overwrite)?;
    let text = reduce_report::text(&red);
    let campaign = red.campaign().cloned();
    let mut text = text;
    let _ = writeln!(text, "wrote      {}", a.out.display());
    for p in [&a.table, &a.json].into_iter().flatten() {
        let _ = writeln!(text, "wrote      {}", p.display());
    }
    if fit_settings.is_none() && campaign.is_some() {
        let _ = writeln!(
            text,
            "analyse    fdtemp fit {} --temperature T",
            a.out.display()
        );
    }
    print(text.as_bytes());
    if let (Some(s), Some(campaign)) = (fit_settings, campaign) {
        let input = Some(a.out.display().to_string());
        let report = fdtemp::analyze(&campaign, &s, input, &Bar::new()).map_err(in_file(&a.out))?;
        print(b"\n");
        print(&fdtemp::report::text::render(&report));
    }
    Ok(())
}
