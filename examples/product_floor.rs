//! The floor of a time-domain fit: only the resampling product, B × n × P multiply-adds,
//! done as fdtemp does it (counts drawn per resample, faer's product, in parallel) but on
//! one copied matrix in chunks of 256, its fastest shape: the fit itself multiplies the
//! campaign's arrays and the moment columns block by block in smaller chunks to hold
//! less memory (`fdtemp::twotime::chunk_rows`).
//! Usage: cargo run --release --example product_floor -- FILE B
use rayon::prelude::*;

fn main() {
    let args: Vec<String> = std::env::args().collect();
    let (file, b): (&str, usize) = (&args[1], args[2].parse().unwrap());
    let t0 = std::time::Instant::now();
    let camp =
        fdtemp::input::read_campaign(std::path::Path::new(file), &Default::default()).unwrap();
    let read = t0.elapsed().as_secs_f64();
    let n = camp.n_samples();
    let time_product = |d: &ndarray::Array2<f64>| {
        let t1 = std::time::Instant::now();
        let checksum: f64 = (0..b.div_ceil(256))
            .into_par_iter()
            .map(|c| {
                let rows = (b - c * 256).min(256);
                let mut counts = vec![0u32; n];
                let wm = fdtemp::resample::weight_rows(1, c * 256, rows, &mut counts);
                fdtemp::resample::product(&wm, d).sum()
            })
            .sum();
        (t1.elapsed().as_secs_f64(), checksum)
    };
    let (plain, checksum) = time_product(&fdtemp::twotime::points::data_matrix(&camp, false));
    // With one moment column per point, as inverse-variance weights re-estimated in every
    // resample need (the default fit).
    let wide = fdtemp::twotime::points::data_matrix_with_room(&camp, false, camp.n_points());
    let (with_moments, _) = time_product(&wide);
    println!(
        "{{\"read_seconds\": {read}, \"product_seconds\": {plain}, \
         \"product_with_moments_seconds\": {with_moments}, \"checksum\": {checksum}}}"
    );
}
