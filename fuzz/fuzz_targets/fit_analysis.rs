//! Whatever campaign the reader accepts, the analysis returns a result or an error: no
//! panic, and no NaN or infinity in the JSON.
#![no_main]
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    let names = fdtemp::input::ColumnNames::default();
    let Ok(campaign) = fdtemp::input::tidy::parse_campaign(data, std::path::Path::new("f.csv"), &names) else {
        return;
    };
    let settings = fdtemp::FitSettings { resamples: 100, min_branch: 2, ..Default::default() };
    if let Ok(report) = fdtemp::analyze(&campaign, &settings, None, &fdtemp::twotime::Silent) {
        let json = String::from_utf8(fdtemp::report::json::fit_json(&report)).unwrap();
        assert!(!json.contains("NaN") && !json.contains("inf"), "non-finite number in JSON");
        let _ = fdtemp::report::text::render(&report);
    }
});
