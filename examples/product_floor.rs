//! The floor of a time-domain fit: only the resampling product, B × n × P multiply-adds,
//! done exactly as fdtemp does it (counts drawn per resample, chunks of 256, faer's product, in parallel).
//! Usage: cargo run --release --example product_floor -- FILE B
use rayon::prelude::*;

fn main() {
    let args: Vec<String> = std::env::args().collect();
    let (file, b): (&str, usize) = (&args[1], args[2].parse().unwrap());
    let t0 = std::time::Instant::now();
    let camp =
        fdtemp::input::read_campaign(std::path::Path::new(file), &Default::default()).unwrap();
    let read = t0.elapsed().as_secs_f64();
    let d = fdtemp::twotime::points::data_matrix(&camp, false);
    let n = camp.n_samples();
    let t1 = std::time::Instant::now();
    let checksum: f64 = (0..b.div_ceil(256))
        .into_par_iter()
        .map(|c| {
            let rows = (b - c * 256).min(256);
            let mut wm = ndarray::Array2::<f64>::zeros((rows, n));
            let mut counts = vec![0u32; n];
            for r in 0..rows {
                fdtemp::resample::draw_counts(1, (c * 256 + r) as u64, n, &mut counts);
                for (i, &k) in counts.iter().enumerate() {
                    wm[[r, i]] = f64::from(k) / n as f64;
                }
            }
            fdtemp::resample::product(&wm, &d).sum()
        })
        .sum();
    println!(
        "{{\"read_seconds\": {read}, \"product_seconds\": {}, \"checksum\": {checksum}}}",
        t1.elapsed().as_secs_f64()
    );
}
