//! `fdtemp demo`: the invented scenario generated, fitted, written and compared with its
//! truth.

use super::progress::Bar;
use super::{RunArgs, print};
use fdtemp::output;
use fdtemp::scenarios::demo;
use std::path::PathBuf;

#[derive(clap::Args)]
pub struct DemoArgs {
    /// Folder for the demo's files.
    #[arg(long, default_value = "demo-data")]
    out: PathBuf,
    /// Replace demo files whose content differs.
    #[arg(long)]
    overwrite: bool,
    #[command(flatten)]
    pub(super) run: RunArgs,
}

/// Runs the demo into `--out`, leaving files with the same content alone, and prints both
/// reports, the comparison with the truth and how to rerun the analyses.
pub fn run(a: DemoArgs) -> fdtemp::Result<()> {
    if !a.out.exists() {
        std::fs::create_dir_all(&a.out).map_err(|source| fdtemp::Error::Io {
            path: a.out.clone(),
            action: "cannot create the folder",
            source,
        })?;
    }
    let d = demo::run(&a.out, &Bar::new())?;
    let outputs = demo::prune_unchanged(d.outputs.clone(), a.overwrite)?;
    output::write_all(&outputs, true)?;
    print(&fdtemp::report::text::render(&d.report));
    println!("\n════ spectral part\n");
    print(&fdtemp::report::spectrum::render(
        &d.spectrum,
        &[format!(
            "data        {}",
            a.out.join("spectrum.csv").display()
        )],
    ));
    println!();
    print!("{}", demo::compare(&d));
    println!(
        "files      {} (try: fdtemp fit {} --temperature {}; fdtemp spectrum {} --temperature {} --band 20:500)",
        a.out.display(),
        a.out.join("campaign.csv").display(),
        d.spec.temperature,
        a.out.join("spectrum.csv").display(),
        d.spectrum_spec.temperature
    );
    Ok(())
}
