//! Resources known before the work: the memory a resampling will need, estimated from the
//! design, checked against what the machine has, and refused with a clear message when it
//! cannot fit (exit code 2 from the command line), instead of an allocation failure.

use crate::error::{Error, Result};

use crate::spectral::analysis::FREQ_CHUNK;
use crate::twotime::chunk_rows;

/// Memory a time-domain fit needs, in bytes, for `n` samples, a data matrix of `cols`
/// columns over `p` points, `groups` fits, `b` resamples and `threads` workers.
pub fn fit_bytes(n: usize, cols: usize, p: usize, groups: usize, b: usize, threads: usize) -> f64 {
    let f = |v: usize| v as f64;
    // The data matrix: the campaign's arrays, read in place, and the moment columns.
    let data = f(n) * f(cols) * 8.0;
    // The leave-one-out draws (their points are made one sample at a time).
    let jack = f(n) * f(groups) * f(crate::twotime::BYTES_PER_DRAW);
    // A chunk's W and W·D, the fits' scratch, and the product's packing buffers (4 MiB).
    let per_thread =
        f(chunk_rows(cols)) * (f(n) + 2.0 * f(cols)) * 8.0 + f(groups) * f(p) * 64.0 + f(4 << 20);
    let draws = f(b) * f(groups) * f(crate::twotime::BYTES_PER_DRAW);
    // Interval work: a few copies of one series of b numbers at a time.
    let series = 4.0 * f(b) * 8.0;
    data + jack + f(threads) * per_thread + draws + series
}

/// The memory this process may use: what the system reports as available (Linux
/// `/proc/meminfo`), or `None` where that cannot be read.
pub fn available_bytes() -> Option<f64> {
    let text = std::fs::read_to_string("/proc/meminfo").ok()?;
    let line = text.lines().find(|l| l.starts_with("MemAvailable:"))?;
    let kb: f64 = line.split_whitespace().nth(1)?.parse().ok()?;
    Some(kb * 1024.0)
}

/// Bytes as a short human figure ("1.2 GB").
pub fn human(bytes: f64) -> String {
    let units = ["B", "kB", "MB", "GB", "TB", "PB", "EB"];
    let mut v = bytes;
    let mut k = 0;
    while v >= 1000.0 && k + 1 < units.len() {
        v /= 1000.0;
        k += 1;
    }
    if v >= 1e4 {
        format!("{v:.1e} {}", units[k])
    } else {
        format!("{v:.1} {}", units[k])
    }
}

/// Refuses a fit whose resampling would not fit in memory.
///
/// # Errors
/// [`Error::Setting`] naming the need, the limit and what to change.
pub fn check_fit(n: usize, cols: usize, p: usize, groups: usize, b: usize) -> Result<()> {
    let need = fit_bytes(n, cols, p, groups, b, rayon::current_num_threads());
    check(need, b, available_bytes())
}

/// Memory the run bootstrap of one spectrum needs, in bytes: the `b × runs` resampling
/// matrix, per worker two `b ×` chunk products and the band sums, and the series of one
/// frequency's replicates.
pub fn spectrum_bytes(b: usize, runs: usize, freqs: usize, bands: usize, threads: usize) -> f64 {
    let f = |v: usize| v as f64;
    let chunk = f(freqs.min(FREQ_CHUNK));
    let w = f(b) * f(runs) * 8.0;
    let per_thread = f(b) * (2.0 * chunk + f(bands) + 2.0) * 8.0;
    let sums = f(b) * f(bands) * 8.0;
    w + f(threads.min(freqs.div_ceil(FREQ_CHUNK).max(1))) * per_thread + sums
}

/// Refuses a run bootstrap of a spectrum that would not fit in memory.
///
/// # Errors
/// [`Error::Setting`] naming the need, the limit and what to change.
pub fn check_spectrum(b: usize, runs: usize, freqs: usize, bands: usize) -> Result<()> {
    let need = spectrum_bytes(b, runs, freqs, bands, rayon::current_num_threads());
    check(need, b, available_bytes())
}

/// The check itself, with the limit given (for tests).
///
/// # Errors
/// [`Error::Setting`] when `need` exceeds the limit (or the address space).
pub fn check(need: f64, b: usize, limit: Option<f64>) -> Result<()> {
    // Without a reading, the address space of the machine is the only limit.
    let limit = limit.unwrap_or(f64::from(u32::MAX) * f64::from(u32::MAX));
    if need <= limit {
        return Ok(());
    }
    Err(Error::Setting(format!(
        "--resamples {b} needs about {} of memory, more than the {} available; use fewer \
         resamples (2000 suit intervals at 95%; 10^5 resolve p-values near 1e-4)",
        human(need),
        human(limit)
    )))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_million_resamples_of_a_modest_campaign_fit_in_a_gigabyte() {
        // 100 samples × 120 points (3 waiting times: 4 fits), inverse-variance weights
        // on plain axes: 3 columns per point.
        let need = fit_bytes(100, 360, 120, 4, 1_000_000, 2);
        assert!(need < 1e9, "{}", human(need));
        assert!(check(need, 1_000_000, Some(2e9)).is_ok());
    }

    #[test]
    fn an_absurd_number_of_resamples_is_refused_with_the_limit_named() {
        let need = fit_bytes(100, 360, 120, 4, 100_000_000_000, 2);
        let err = check(need, 100_000_000_000, Some(8e9))
            .unwrap_err()
            .to_string();
        assert!(err.contains("8.0 GB available"), "{err}");
        assert!(err.contains("--resamples 100000000000"), "{err}");
    }
}
