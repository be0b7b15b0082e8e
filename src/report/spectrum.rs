//! The text report of a spectral analysis.

use super::format::fmt_num;
use super::sig;
use super::text::wrap;
use crate::common::Units;
use crate::spectral::analysis::{ErrorModel, Estimator, SpectrumFit, SpectrumReport};
use crate::spectral::findings::{BathRelation, SpectralCaution, SpectralFinding, SpectralVerdict};
use std::fmt::Write;

/// Rows of the per-frequency table shown in text (all are in the JSON).
const SHOWN: usize = 16;

fn iv(lo: Option<f64>, hi: Option<f64>) -> String {
    match (lo, hi) {
        (Some(a), Some(b)) => format!("[{}, {}]", sig(a, 4), sig(b, 4)),
        _ => "—".into(),
    }
}

/// The human-readable report.
pub fn render(r: &SpectrumReport, extra_header: &[String]) -> Vec<u8> {
    let s = &r.settings;
    let unit = if s.units == Units::Si { " K" } else { "" };
    let mut o = String::new();
    let _ = writeln!(
        o,
        "fdtemp {} · effective temperature from noise and dissipation",
        r.tool.version
    );
    for line in extra_header {
        let _ = writeln!(o, "{line}");
    }
    let _ = writeln!(o, "convention  {}", r.convention_text);
    let units = match s.units {
        Units::Si => format!("SI, k = {} J/K", sig(r.k, 7)),
        Units::Reduced => "reduced, k = 1".into(),
    };
    let t = s
        .temperature
        .map_or("not given (no departure test)".into(), |t| {
            format!("{}{unit}", fmt_num(t))
        });
    let _ = writeln!(o, "units       {units}; bath temperature {t}");
    for fit in &r.spectra {
        section(&mut o, r, fit, unit);
    }
    if let Some(i) = &r.intermittency {
        intermittency_section(&mut o, i, "");
    }
    for a in &r.intermittency_by_age {
        intermittency_section(&mut o, &a.test, &format!(" at tw = {}", fmt_num(a.tw)));
    }
    let mut cautions: Vec<String> = r.cautions.iter().map(caution).collect();
    for f in &r.spectra {
        let who =
            f.tw.map_or_else(String::new, |t| format!("tw = {}: ", fmt_num(t)));
        cautions.extend(f.cautions.iter().map(|c| format!("{who}{}", caution(c))));
    }
    if !cautions.is_empty() {
        let _ = writeln!(o, "\ncautions");
        for c in &cautions {
            let _ = writeln!(o, "  - {c}");
        }
    }
    let _ = writeln!(o, "\nmethods\n{}", wrap(&methods(r), 92, "  "));
    o.into_bytes()
}

/// One spectrum's section of the report (one per waiting time).
fn section(o: &mut String, r: &SpectrumReport, fit: &SpectrumFit, unit: &str) {
    let _ = writeln!(o);
    if let Some(tw) = fit.tw {
        let _ = writeln!(o, "── tw = {}", fmt_num(tw));
    }
    summary(o, r, fit, unit);
    if let Some(lvl) = fit.test_level {
        departure_table(o, r, fit, lvl);
    }
    points_table(o, fit);
}

/// The spectrum's lines: its runs and frequencies, where intervals come from, the band
/// average and the verdict.
fn summary(o: &mut String, r: &SpectrumReport, fit: &SpectrumFit, unit: &str) {
    let s = &r.settings;
    let (f0, f1) = (fit.points[0].f, fit.points[fit.points.len() - 1].f);
    let _ = writeln!(
        o,
        "spectrum    {} run(s), {} frequencies from {} to {} Hz",
        fit.n_runs,
        fit.points.len(),
        sig(f0, 4),
        sig(f1, 4)
    );
    let how = match fit.errors {
        ErrorModel::Runs => format!(
            "{:.0}% {} from {} resamples of runs (seed {})",
            100.0 * s.level,
            s.interval.label(),
            s.resamples,
            s.seed
        ),
        ErrorModel::Normal => format!(
            "{:.0}% normal, from the variance of each {} value",
            100.0 * s.level,
            estimate_name(s.estimator)
        ),
        _ => format!(
            "{:.0}% chi-square, from each PSD value's degrees of freedom",
            100.0 * s.level
        ),
    };
    let _ = writeln!(o, "intervals   {how}");
    if let Some(b) = &fit.band {
        let e = &b.t_eff;
        let dof = b.dof.map_or(String::new(), |d| {
            format!(", {} degrees of freedom", sig(d, 4))
        });
        let _ = writeln!(
            o,
            "band        {}–{} Hz ({} frequencies{dof}): T_eff = {}{unit} {}",
            sig(b.fmin, 4),
            sig(b.fmax, 4),
            b.n_freqs,
            e.estimate.map_or("—".into(), |v| sig(v, 4)),
            iv(e.low, e.high)
        );
    }
    let _ = writeln!(o, "verdict     {}", verdict(&fit.verdict));
}

/// The departure test's bands, each interval at the corrected level `lvl`.
fn departure_table(o: &mut String, r: &SpectrumReport, fit: &SpectrumFit, lvl: f64) {
    let _ = writeln!(
        o,
        "\ndeparture test: log bands, each interval at {:.4} = 1 − {:.2}/{} (Bonferroni)",
        lvl,
        1.0 - r.settings.level,
        fit.test_bands.len()
    );
    let _ = writeln!(
        o,
        "  {:>10}  {:>10}  {:>6}  {:>10}  {:<22}  differs from T",
        "fmin (Hz)", "fmax (Hz)", "freqs", "T_eff", "interval"
    );
    for tb in &fit.test_bands {
        let b = &tb.band;
        let _ = writeln!(
            o,
            "  {:>10}  {:>10}  {:>6}  {:>10}  {:<22}  {}",
            sig(b.fmin, 4),
            sig(b.fmax, 4),
            b.n_freqs,
            b.t_eff.estimate.map_or("—".into(), |v| sig(v, 4)),
            iv(b.t_eff.low, b.t_eff.high),
            tb.direction.map_or("no", |d| d.label())
        );
    }
}

/// `T_eff(f)` at up to [`SHOWN`] log-spaced frequencies.
fn points_table(o: &mut String, fit: &SpectrumFit) {
    let n = fit.points.len();
    let rows = log_spaced_rows(fit, SHOWN);
    let _ = writeln!(
        o,
        "\nT_eff(f){}",
        if rows.len() < n {
            format!(
                " ({} of {n} frequencies, log-spaced; all in --json)",
                rows.len()
            )
        } else {
            String::new()
        }
    );
    let _ = writeln!(
        o,
        "  {:>10}  {:>10}  {:<22}  {:>10}  {:>10}",
        "f (Hz)", "T_eff", "interval", "psd", "loss"
    );
    for p in rows.iter().map(|&j| &fit.points[j]) {
        let _ = writeln!(
            o,
            "  {:>10}  {:>10}  {:<22}  {:>10}  {:>10}",
            sig(p.f, 4),
            sig(p.t_eff, 4),
            iv(p.low, p.high),
            sig(p.psd, 4),
            sig(p.loss, 4)
        );
    }
}

/// What the PSD column holds for an estimator, in words.
fn estimate_name(e: Estimator) -> &'static str {
    match e {
        Estimator::SingleChannel => "PSD",
        Estimator::CrossSpectrum => "cross-spectrum",
        Estimator::Subtracted => "subtracted PSD",
    }
}

/// The methods sentences on the gain and on how the PSD was estimated (empty for one
/// channel without a gain).
fn estimate_methods(r: &SpectrumReport) -> String {
    let s = &r.settings;
    let mut out = String::new();
    match (s.estimator, s.gain, s.second_gain) {
        (Estimator::CrossSpectrum, g1, g2) => {
            let (g1, g2) = (g1.unwrap_or(1.0), g2.or(g1).unwrap_or(1.0));
            let _ = write!(
                out,
                " The sample's noise was recorded simultaneously through two independent \
                 amplifiers (voltage gains {} and {}); its PSD was estimated by the real part of \
                 the Welch cross-spectrum of the two records (same Hann segments), divided by \
                 the product of the gains, so that the amplifiers' uncorrelated noise averages \
                 out. Its variance is (G11 G22 + Re(G12)^2 - Im(G12)^2)/nu with nu the \
                 overlap-corrected degrees of freedom (Bendat & Piersol, Random Data, ch. 9).",
                fmt_num(g1),
                fmt_num(g2)
            );
        }
        (Estimator::Subtracted, g, _) => {
            if let Some(g) = g {
                let _ = write!(
                    out,
                    " The record's PSD was divided by the squared voltage gain {} (referred to \
                     the sample).",
                    fmt_num(g)
                );
            }
            out.push_str(
                " A measured amplifier-noise PSD (interpolated in log f and log PSD) was \
                 subtracted from it; the variance of the difference is the sum of the two \
                 estimates' variances (2G^2/nu each, from their own degrees of freedom).",
            );
        }
        (Estimator::SingleChannel, Some(g), _) => {
            let _ = write!(
                out,
                " The record's PSD was divided by the squared voltage gain {} (referred to the \
                 sample); the amplifier's own noise is included in it.",
                fmt_num(g)
            );
        }
        (Estimator::SingleChannel, None, _) => {}
    }
    out
}

/// A methods paragraph for the spectral analysis.
pub fn methods(r: &SpectrumReport) -> String {
    let s = &r.settings;
    let errors = if r.spectra.iter().all(|f| f.errors == ErrorModel::Runs) {
        format!(
            "{} intervals from {} bootstrap resamples of whole runs (seed {})",
            s.interval.label(),
            s.resamples,
            s.seed
        )
    } else if r.spectra.iter().all(|f| f.errors == ErrorModel::Normal) {
        "intervals from the normal approximation with each value's variance (the dissipation \
         taken as exact); band averages weight each frequency by its degrees of freedom, their \
         variance including the correlation of neighbouring bins"
            .into()
    } else {
        "intervals from the chi-square distribution of an averaged periodogram with the stated \
         degrees of freedom (the dissipation taken as exact); band averages weight each \
         frequency by its degrees of freedom, with Satterthwaite's equivalent degrees of freedom \
         corrected for the correlation of neighbouring bins"
            .into()
    };
    let test = match s.temperature {
        Some(_) => format!(
            " Departure from the bath temperature was tested in log-spaced bands ({} per decade), \
             each at the Bonferroni-corrected level. A departure is a run of differing bands on \
             one side of T (hot or cold) that starts at the lowest band; it is reported as a \
             detection bound, the upper edge of the run's last band, below which T_eff differs \
             from T in every band. Differing bands outside that run are reported separately, \
             never as a departure frequency.",
            s.bands_per_decade
        ),
        None => String::new(),
    };
    format!(
        "Effective temperatures were computed with fdtemp {} as T_eff(f) = {} — convention: {}.{}{} \
         Uncertainties are {:.0}% {}.{}",
        r.tool.version,
        match s.convention {
            crate::spectral::Convention::Loss => "pi f G(f) / (2 k chi''(f))",
            crate::spectral::Convention::Angular => "w S(w) / (2 k chi''(w))",
            crate::spectral::Convention::Voltage => "G_V / (4 k Re Z)",
            crate::spectral::Convention::Current => "G_I / (4 k Re Y)",
        },
        r.convention_text,
        ages_methods(r),
        estimate_methods(r),
        100.0 * s.level,
        errors,
        test
    )
}

/// `noise --intermittency`: the test per band, its verdict and findings.
fn intermittency_section(
    o: &mut String,
    i: &crate::spectral::intermittency::IntermittencyReport,
    at: &str,
) {
    let _ = writeln!(
        o,
        "\nintermittency{at}: per-segment band powers against {} Gaussian surrogates of the \
         records (max over {} bands)",
        i.settings.surrogates,
        i.bands.len()
    );
    let _ = writeln!(
        o,
        "   fmin (Hz)   fmax (Hz)   scatter   Gaussian   p (adjusted)   excess kurtosis   T_eff median/mean   flagged"
    );
    for b in &i.bands {
        let _ = writeln!(
            o,
            "  {:>10}  {:>10}  {:>8}  {:>9}  {:>13}  {:>16}  {:>18}   {}",
            sig(b.fmin, 4),
            sig(b.fmax, 4),
            sig(b.normalized_variance, 3),
            sig(b.null_normalized_variance, 3),
            crate::report::format::fmt_p(b.p_adjusted),
            match (b.excess_kurtosis, b.kurtosis_se) {
                (Some(k), Some(se)) => format!("{} ± {}", sig(k, 2), sig(se, 2)),
                (Some(k), None) => sig(k, 2),
                _ => "—".into(),
            },
            sig(b.teff_median_over_mean, 3),
            if b.flagged { "yes" } else { "" }
        );
    }
    for f in &i.findings {
        let _ = writeln!(o, "{}", wrap(&format!("- {}", f.message), 92, "  "));
    }
    let _ = writeln!(o, "{}", wrap(&i.interval_note, 92, "  "));
}

/// The methods sentence of records after a quench (`noise --ages`).
fn ages_methods(r: &SpectrumReport) -> String {
    use crate::spectral::aging::Width;
    let Some(a) = &r.settings.ages else {
        return String::new();
    };
    let width = match a.width {
        Width::Seconds(s) => format!("{} s long", sig(s, 4)),
        Width::Fraction(f) => format!("{:.0}% of the age long", 100.0 * f),
    };
    let ages: Vec<String> = a.ages.iter().map(|t| sig(*t, 4)).collect();
    format!(
        " The records start at a quench ({} s on their clock); each was cut into windows {} \
         centred at the ages tw = {} s after it, a Welch PSD was estimated in every window of \
         every run, and T_eff(f, tw) is the window's mean over runs: where the system ages \
         inside a window, it is the window's mean spectrum.",
        sig(a.quench_at, 4),
        width,
        ages.join(", ")
    )
}

/// Indices of about `n` points spread evenly in log frequency.
fn log_spaced_rows(fit: &SpectrumFit, n: usize) -> Vec<usize> {
    let p = &fit.points;
    if p.len() <= n {
        return (0..p.len()).collect();
    }
    let (l0, l1) = (p[0].f.ln(), p[p.len() - 1].f.ln());
    let mut out: Vec<usize> = (0..n)
        .map(|i| {
            let target = l0 + (l1 - l0) * i as f64 / (n - 1) as f64;
            p.partition_point(|q| q.f.ln() < target).min(p.len() - 1)
        })
        .collect();
    out.dedup();
    out
}

/// The sentence of a spectral caution (without its subject).
pub fn caution(c: &SpectralCaution) -> String {
    match &c.finding {
        SpectralFinding::ChiSquareAssumesGaussian => "chi-square intervals assume Gaussian \
             noise and an exact dissipation; intermittent noise makes them too narrow (resample \
             runs when you have them)"
            .into(),
        SpectralFinding::NormalAssumesGaussian => "normal intervals assume Gaussian noise, \
             many averaged segments and an exact dissipation; with few segments per frequency \
             or intermittent noise they are too narrow (resample runs when you have them)"
            .into(),
        SpectralFinding::NonPositiveTeff {
            frequencies,
            total,
            estimator,
        } => format!(
            "T_eff <= 0 at {frequencies} of {total} frequencies: the {} is at or below zero \
             there ({}); these values are reported as computed and left out of the figure's \
             log axes",
            estimate_name(*estimator),
            match estimator {
                Estimator::CrossSpectrum => {
                    "the common noise is small against the amplifiers' there, or the channels \
                     are not in phase"
                }
                Estimator::Subtracted => {
                    "the amplifier noise is most of the measured PSD there, or was measured \
                     higher than it is in this setup"
                }
                Estimator::SingleChannel => "a PSD of zero",
            }
        ),
        SpectralFinding::LargeSubtraction { bands, limit } => {
            let list: Vec<String> = bands
                .iter()
                .map(|b| {
                    format!(
                        "{}–{} Hz (up to {:.0}%)",
                        sig(b.fmin, 4),
                        sig(b.fmax, 4),
                        100.0 * b.fraction
                    )
                })
                .collect();
            format!(
                "the subtracted amplifier noise is more than {:.0}% of the measured PSD in {}: \
                 T_eff there is the difference of two nearly equal numbers and rests on the \
                 amplifier-noise measurement being right for this setup (same gain, input \
                 impedance and temperature); a second channel (cross-spectrum) avoids this",
                100.0 * limit,
                list.join(", ")
            )
        }
        SpectralFinding::OutsideAmplifierTable {
            frequencies,
            range: [lo, hi],
        } => format!(
            "{frequencies} frequencies outside the amplifier-noise table's range ({}–{} Hz) \
             were left out",
            fmt_num(*lo),
            fmt_num(*hi)
        ),
        SpectralFinding::FewRunsNoDof { runs } => format!(
            "only {runs} runs and no degrees of freedom: intervals from resampling so few runs \
             are unreliable"
        ),
        SpectralFinding::ShortRuns { runs, limit } => format!(
            "{runs} runs: below {limit} runs resampled intervals are read at Student's width \
             and still run a little short (measured on white records with 12 runs: 95% \
             intervals cover 0.94 per frequency, 0.925 for the band average); the departure \
             test's bands use Student's t and keep their level"
        ),
        SpectralFinding::FewRuns { runs, limit } => format!(
            "only {runs} runs: intervals from resampling fewer than {limit} runs are unreliable"
        ),
        SpectralFinding::SeparateBands {
            level,
            bands,
            after_departure,
        } => {
            let fmt = |v: f64| sig(v, 4);
            let list: Vec<String> = bands
                .iter()
                .map(|b| {
                    format!(
                        "{}–{} Hz ({}: T_eff {} T)",
                        fmt(b.fmin),
                        fmt(b.fmax),
                        b.direction.label(),
                        b.direction.side()
                    )
                })
                .collect();
            let from = if *after_departure {
                "the low-frequency departure"
            } else {
                "the lowest band"
            };
            format!(
                "T_eff differs from T at the corrected level {level:.4} in {} band(s) not \
                 contiguous with {from}: {}. This is a separate finding, not a departure \
                 frequency; one band can be a line in the spectrum or a chance excursion — look \
                 at T_eff(f) there",
                bands.len(),
                list.join(", ")
            )
        }
        SpectralFinding::OutsideTable {
            frequencies,
            range: [lo, hi],
        } => format!(
            "{frequencies} frequencies outside the dissipation table's range ({}–{} Hz) were \
             left out",
            fmt_num(*lo),
            fmt_num(*hi)
        ),
        SpectralFinding::WindowLeakage {
            slope,
            slope_se,
            bias,
            below,
            limit,
        } => format!(
            "the PSD {} f^{}{} (± {}) at its lowest bins: Hann-window leakage biases the lowest \
             bin by {:+.0}% (predicted from that power law) and every bin up to {} Hz by more \
             than {:.0}%; distrust the PSD and T_eff at and below {} Hz (a longer Welch segment \
             moves it down)",
            if *slope >= 0.0 {
                "falls as"
            } else {
                "rises as"
            },
            if *slope >= 0.0 { "-" } else { "" },
            sig(slope.abs(), 2),
            sig(*slope_se, 1),
            100.0 * bias,
            fmt_num(*below),
            100.0 * limit,
            fmt_num(*below)
        ),
        SpectralFinding::AgeWindowWide { span, limit } => format!(
            "the window spans {:.0}% of the age (more than {:.0}%): the system ages inside \
             it, and the estimate is the window's mean spectrum (narrow it with --age-span or \
             --age-window)",
            100.0 * span,
            100.0 * limit
        ),
        SpectralFinding::AgeWindowFewPeriods { below, periods } => format!(
            "below {} Hz fewer than {periods:.0} periods fit in the window (1/f ≪ Δt does \
             not hold there): distrust T_eff below it, or widen the window",
            sig(*below, 3)
        ),
        SpectralFinding::ImplausibleScale { ratio, factor } => format!(
            "T_eff is {} times the bath temperature (median), and beyond a factor {} from it at \
             every frequency: an aging system departs at low frequencies, not everywhere, so \
             check the units (--units), the amplifier gain (--gain) and the convention \
             (--convention) before reading this as physics",
            super::format::sig(*ratio, 2),
            super::format::fmt_num(*factor)
        ),
    }
}

/// The sentence of a spectrum's verdict.
pub fn verdict(v: &SpectralVerdict) -> String {
    let SpectralVerdict::BandAverage {
        band: [fmin, fmax],
        t_eff: [v, lo, hi],
        kelvin,
        bath,
        relation,
        departure,
    } = v
    else {
        return "no interval could be formed".into();
    };
    let fmt = |v: f64| sig(v, 4);
    let unit = if *kelvin { " K" } else { "" };
    let mut out = format!(
        "T_eff over {}–{} Hz = {}{unit} [{}, {}]",
        fmt(*fmin),
        fmt(*fmax),
        fmt(*v),
        fmt(*lo),
        fmt(*hi)
    );
    let (Some(t), Some(rel)) = (bath, relation) else {
        return out;
    };
    out.push_str(&match rel {
        BathRelation::Equal => format!(
            ": equal to the bath temperature {}{unit} within errors",
            fmt(*t)
        ),
        BathRelation::Above => format!(": above the bath temperature {}{unit}", fmt(*t)),
        BathRelation::Below => format!(": below the bath temperature {}{unit}", fmt(*t)),
    });
    match departure {
        Some((d, [from, below])) => out.push_str(&format!(
            "; T_eff is detectably {} T ({}) in every band from {} to {} Hz; above {} Hz no \
             departure is detected at this precision",
            d.side(),
            d.label(),
            fmt(*from),
            fmt(*below),
            fmt(*below)
        )),
        None => out.push_str("; no low-frequency departure from T at the corrected level"),
    }
    out
}
