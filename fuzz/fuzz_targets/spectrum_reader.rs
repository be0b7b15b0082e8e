//! The spectrum reader never panics, and whatever it accepts can be analysed.
#![no_main]
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    let path = std::path::Path::new("fuzz.csv");
    if let Ok(groups) = fdtemp::spectral::input::parse_spectra(data, path) {
        let settings = fdtemp::spectral::SpectrumSettings {
            temperature: Some(300.0),
            resamples: 100,
            ..Default::default()
        };
        let _ = fdtemp::spectral::analyze_spectra(&groups, &[], &settings, None);
    }
});
