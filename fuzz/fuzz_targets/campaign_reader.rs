//! The campaign reader never panics: any bytes give a campaign or an error.
#![no_main]
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    let names = fdtemp::input::ColumnNames::default();
    let _ = fdtemp::input::tidy::parse_campaign(data, std::path::Path::new("fuzz.csv"), &names);
});
