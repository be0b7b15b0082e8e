//! The floor of `fdtemp noise`: stream a record file and parse its numbers, nothing else.
//! Usage: cargo run --release --example read_floor -- FILE
fn main() {
    let path = std::env::args().nth(1).expect("usage: read_floor FILE");
    let t = std::time::Instant::now();
    let (mut n, mut sum) = (0u64, 0.0f64);
    fdtemp::spectral::input::stream_records(std::path::Path::new(&path), |_, v| {
        n += 1;
        sum += v;
    })
    .unwrap();
    println!(
        "{{\"seconds\": {}, \"values\": {n}, \"sum\": {sum}}}",
        t.elapsed().as_secs_f64()
    );
}
