//! The record reader and Welch's method never panic on any bytes.
#![no_main]
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    let settings = fdtemp::spectral::welch::WelchSettings { sample_rate: 10.0, segment: 8, overlap: 4 };
    let Ok(mut welch) = fdtemp::spectral::welch::Welch::new(settings) else { return };
    let path = std::path::Path::new("fuzz.txt");
    if fdtemp::spectral::input::stream_records_from(data, path, |run, v| {
        if run == 0 {
            welch.push(v);
        }
    })
    .is_ok()
    {
        let _ = welch.finish();
    }
});
