//! `fdtemp reduce`: raw runs (twin runs or repeated quenches) → a campaign `fit` reads,
//! with the linear-response verdict; optionally fitted at once.

use super::progress::Bar;
use super::{RunArgs, in_file, print};
use fdtemp::output::{self, Output};
use fdtemp::reduce::quench::{QuenchReduction, QuenchSettings, reduce_quenches};
use fdtemp::reduce::twin::{Combine, TwinReduction, TwinSettings};
use fdtemp::report::format::{fmt_num, p_clause, sig};
use std::fmt::Write;
use std::path::PathBuf;

/// Which protocol the raw file follows.
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum Protocol {
    /// From the header: `sample, tw, t, h, corr, m` is twins; `run, t, value, h, tw` is
    /// quenches.
    Auto,
    /// Twin runs: per sample an unperturbed run and perturbed twins sharing its noise.
    Twins,
    /// Repeated quenches: many runs of one system, some with a step field from tw.
    Quenches,
}

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
    /// How χ is formed from several field levels (twins).
    #[arg(long, value_enum, default_value_t = Combine::Extrapolate)]
    combine: Combine,
    /// Also write the per-point table (means, intervals, levels, shifts, p-values) here.
    #[arg(long, value_name = "FILE")]
    table: Option<PathBuf>,
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
    /// Fit the reduced campaign at once (defaults of `fit`; needs --temperature).
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

/// The protocol named by the header line.
fn detect(file: &std::path::Path) -> fdtemp::Result<Protocol> {
    use std::io::BufRead;
    let mut first = String::new();
    let mut r =
        std::io::BufReader::new(
            std::fs::File::open(file).map_err(|source| fdtemp::Error::Io {
                path: file.to_path_buf(),
                action: "cannot read",
                source,
            })?,
        );
    while first.trim().is_empty() || first.starts_with('#') {
        first.clear();
        if r.read_line(&mut first).unwrap_or(0) == 0 {
            break;
        }
    }
    let names: Vec<String> = first
        .trim_start_matches('\u{feff}')
        .split(',')
        .map(|s| s.trim().to_string())
        .collect();
    let has = |n: &str| names.iter().any(|h| h == n);
    if has("m") && has("sample") {
        Ok(Protocol::Twins)
    } else if has("value") && has("run") {
        Ok(Protocol::Quenches)
    } else {
        Err(fdtemp::Error::input(
            file,
            Some(1),
            None,
            format!(
                "the header ({}) is neither twin runs (sample, tw, t, h, corr, m) nor repeated \
                 quenches (run, t, value, h, tw); name the columns so, or pass --protocol",
                names.join(", ")
            ),
        ))
    }
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
        &[&Some(a.out.clone()), &a.table],
        &[a.file.as_path()],
        a.overwrite,
    )?;
    let protocol = match a.protocol {
        Protocol::Auto => detect(&a.file)?,
        p => p,
    };
    if protocol == Protocol::Quenches && a.table.is_some() {
        return Err(fdtemp::Error::Setting(
            "--table is for twin runs; for repeated quenches --out is already the per-point table"
                .into(),
        ));
    }
    if protocol == Protocol::Quenches && fit_settings.is_some() {
        return Err(fdtemp::Error::Setting(
            "--fit is not available for repeated quenches yet: fit resamples whole samples, and \
             these data need runs resampled within each stratum (docs/reduce.md); use the \
             pointwise C and chi that reduce writes"
                .into(),
        ));
    }
    let (campaign, text, out_bytes, table) = match protocol {
        Protocol::Quenches => {
            let settings = QuenchSettings {
                connected: !a.plain,
                tws: a.tw.clone(),
                resamples: a.resamples,
                seed: a.seed,
                level: a.level,
            };
            let red = reduce_quenches(&a.file, &settings).map_err(in_file(&a.file))?;
            let text = render_quenches(&red, &a.file.display().to_string());
            let bytes = table_quenches(&red);
            (None, text, bytes, None)
        }
        _ => {
            let settings = TwinSettings {
                combine: a.combine,
                resamples: a.resamples,
                seed: a.seed,
                level: a.level,
            };
            settings.validate()?;
            let runs = fdtemp::reduce::read_twins(&a.file)?;
            let red = fdtemp::reduce::reduce_twins(&runs, &settings).map_err(in_file(&a.file))?;
            let text = render_twins(&red, &a.file.display().to_string());
            let bytes = fdtemp::input::write_campaign(&red.campaign);
            (
                Some(red.campaign.clone()),
                text,
                bytes,
                Some(table_twins(&red)),
            )
        }
    };
    let mut outputs = vec![Output {
        path: a.out.clone(),
        bytes: out_bytes,
    }];
    if let Some(p) = &a.table {
        outputs.push(Output {
            path: p.clone(),
            bytes: table.unwrap_or_default(),
        });
    }
    output::write_all(&outputs, a.overwrite)?;
    let mut text = text;
    let _ = writeln!(text, "wrote      {}", a.out.display());
    if let Some(p) = &a.table {
        let _ = writeln!(text, "wrote      {}", p.display());
    }
    match (fit_settings, campaign) {
        (None, Some(_)) => {
            let _ = writeln!(
                text,
                "analyse    fdtemp fit {} --temperature T",
                a.out.display()
            );
            print(text.as_bytes());
        }
        (None, None) => print(text.as_bytes()),
        (Some(s), campaign) => {
            let Some(campaign) = campaign else {
                return Ok(());
            };
            print(text.as_bytes());
            let input = Some(a.out.display().to_string());
            let report =
                fdtemp::analyze(&campaign, &s, input, &Bar::new()).map_err(in_file(&a.out))?;
            print(b"\n");
            print(&fdtemp::report::text::render(&report));
        }
    }
    Ok(())
}

/// The twin reduction in words.
fn render_twins(r: &TwinReduction, file: &str) -> String {
    let mut s = String::new();
    let tws = r.campaign.waiting_times();
    let levels: Vec<String> = r
        .design
        .levels
        .iter()
        .map(|v| {
            if r.design.symmetric {
                format!("±{}", fmt_num(*v))
            } else {
                fmt_num(*v)
            }
        })
        .collect();
    let _ = writeln!(
        s,
        "twin runs  {file}: {} samples, {} waiting times, {} points; fields {}",
        r.samples,
        tws.len(),
        r.points.len(),
        levels.join(", ")
    );
    let _ = writeln!(s, "chi        {}", r.design.rule);
    match &r.test {
        None => {
            let _ = writeln!(
                s,
                "linearity  not tested: one field level only (run a second amplitude to test that chi does not depend on h)"
            );
        }
        Some(t) => {
            let stat = if t.statistic.is_finite() {
                sig(t.statistic, 3)
            } else {
                "∞".into()
            };
            let b = r.settings.resamples;
            if t.rejects {
                let _ = writeln!(
                    s,
                    "linearity  chi depends on h: max |t| = {stat} at tw = {}, t = {} ({}; level {}); {} of {} points reject on their own",
                    fmt_num(t.worst.tw),
                    fmt_num(t.worst.t),
                    p_clause(t.p, b),
                    fmt_num(t.alpha),
                    t.points_rejecting,
                    r.points.len()
                );
                let _ = writeln!(
                    s,
                    "           the response is not linear at these fields: use smaller fields, or keep the extrapolation to h → 0 (--combine extrapolate) and check it with a third amplitude"
                );
            } else {
                let _ = writeln!(
                    s,
                    "linearity  no dependence of chi on h detected: max |t| = {stat} over {} points ({}; level {})",
                    r.points.len(),
                    p_clause(t.p, b),
                    fmt_num(t.alpha)
                );
            }
            let _ = writeln!(
                s,
                "           test of {}, {b} resamples of samples",
                t.looks_at
            );
        }
    }
    if let Some(e) = &r.early {
        let _ = writeln!(
            s,
            "caution    the field moved the observable before tw: sample '{}', tw = {}, h = {}: m(h) − m(0) = {} at t = {} ({} perturbed run(s) differ before tw); twins should share the noise and switch the field on at tw",
            e.sample,
            fmt_num(e.tw),
            fmt_num(e.h),
            sig(e.difference, 3),
            fmt_num(e.t),
            e.runs
        );
    }
    s
}

/// The per-point table of a twin reduction.
fn table_twins(r: &TwinReduction) -> Vec<u8> {
    let mut s = String::from("tw,t,corr,chi,chi_se,chi_low,chi_high");
    for (k, v) in r.design.levels.iter().enumerate() {
        let _ = write!(s, ",chi_level{}_{:?}", k + 1, v);
    }
    s.push_str(",shift,p\n");
    for p in &r.points {
        let _ = write!(
            s,
            "{:?},{:?},{:?},{:?},{:?},{:?},{:?}",
            p.tw, p.t, p.corr, p.chi, p.chi_se, p.chi_low, p.chi_high
        );
        for c in &p.chi_levels {
            let _ = write!(s, ",{c:?}");
        }
        let opt = |v: Option<f64>| v.map_or(String::new(), |x| format!("{x:?}"));
        let _ = writeln!(s, ",{},{}", opt(p.shift), opt(p.p));
    }
    s.into_bytes()
}

/// The quench reduction in words.
fn render_quenches(r: &QuenchReduction, file: &str) -> String {
    let mut s = String::new();
    let groups: Vec<String> = r
        .perturbed
        .iter()
        .map(|(tw, n)| format!("{n} from tw = {}", fmt_num(*tw)))
        .collect();
    let _ = writeln!(
        s,
        "quenches   {file}: {} unperturbed runs, perturbed {}; {} times, {} points",
        r.unperturbed,
        groups.join(", "),
        r.times,
        r.points.len()
    );
    let _ = writeln!(
        s,
        "C          {} over the unperturbed runs; chi = (<A(t)>_h − <A(t)>_0)/h",
        if r.settings.connected {
            "connected <A(t)A(tw)> − <A(t)><A(tw)>"
        } else {
            "plain <A(t)A(tw)>"
        }
    );
    let _ = writeln!(
        s,
        "intervals  {}% percentile, {} Poisson-bootstrap replicates of runs, unperturbed and perturbed runs apart (seed {})",
        fmt_num(100.0 * r.settings.level),
        r.settings.resamples,
        r.settings.seed
    );
    match &r.early {
        None => {
            let _ = writeln!(
                s,
                "early      no perturbed group's mean differs from the unperturbed one before its tw (level {})",
                fmt_num(1.0 - r.settings.level)
            );
        }
        Some(e) => {
            let _ = writeln!(
                s,
                "caution    the field moved the observable before tw: runs switched on at tw = {} differ from the unperturbed mean at t = {} by z = {} (bound {} over {} comparisons)",
                fmt_num(e.tw),
                fmt_num(e.t),
                sig(e.z, 3),
                sig(e.bound, 3),
                e.comparisons
            );
        }
    }
    let _ = writeln!(
        s,
        "note       the output is pointwise C and chi, not a campaign of samples: fit cannot resample these runs by stratum yet"
    );
    s
}

/// The per-point table of a quench reduction.
fn table_quenches(r: &QuenchReduction) -> Vec<u8> {
    let mut s = String::from("tw,t,corr,corr_low,corr_high,chi,chi_low,chi_high\n");
    let opt = |v: Option<f64>| v.map_or(String::new(), |x| format!("{x:?}"));
    for p in &r.points {
        let _ = writeln!(
            s,
            "{:?},{:?},{:?},{:?},{:?},{},{},{}",
            p.tw,
            p.t,
            p.corr,
            p.corr_low,
            p.corr_high,
            opt(p.chi),
            opt(p.chi_low),
            opt(p.chi_high)
        );
    }
    s.into_bytes()
}
