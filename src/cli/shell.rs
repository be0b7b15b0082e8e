//! `fdtemp completions` and `fdtemp man-pages`: shell completions and manual pages, both
//! generated from the clap definitions of this folder, so they never disagree with
//! `fdtemp --help`.

use super::Cli;
use clap::CommandFactory;
use fdtemp::output::{self, Output};
use std::path::PathBuf;

#[derive(clap::Args)]
pub struct CompletionsArgs {
    /// The shell to complete for (docs/install.md says where each one looks).
    #[arg(value_enum)]
    shell: clap_complete::Shell,
}

#[derive(clap::Args)]
pub struct ManPagesArgs {
    /// Folder (existing) to write fdtemp.1 and one page per command (fdtemp-fit.1, …) into.
    dir: PathBuf,
    /// Replace pages that exist already.
    #[arg(long)]
    overwrite: bool,
}

/// Prints the completion script for one shell to standard output.
pub fn completions(a: CompletionsArgs) -> fdtemp::Result<()> {
    let mut bytes = Vec::new();
    clap_complete::generate(a.shell, &mut Cli::command(), "fdtemp", &mut bytes);
    super::print(&bytes);
    Ok(())
}

/// Writes the manual pages (section 1) into the folder and lists them.
pub fn man_pages(a: ManPagesArgs) -> fdtemp::Result<()> {
    let mut cmd = Cli::command();
    cmd.build();
    let mut pages = vec![("fdtemp".to_string(), cmd.clone())];
    for sub in cmd.get_subcommands().filter(|s| s.get_name() != "help") {
        let name = format!("fdtemp-{}", sub.get_name());
        // clap takes a command's name as a static string; the program ends right after.
        let page = sub.clone().name(&*name.clone().leak());
        pages.push((name, page));
    }
    let outputs = pages
        .into_iter()
        .map(|(name, page)| {
            let mut bytes = Vec::new();
            clap_mangen::Man::new(page)
                .render(&mut bytes)
                .map_err(|e| fdtemp::Error::Setting(format!("cannot render {name}.1: {e}")))?;
            Ok(Output {
                path: a.dir.join(format!("{name}.1")),
                bytes,
            })
        })
        .collect::<fdtemp::Result<Vec<_>>>()?;
    output::check(&outputs, &[], a.overwrite)?;
    output::write_all(&outputs, a.overwrite)?;
    let mut listing = String::new();
    for o in &outputs {
        listing.push_str(&format!("wrote {}\n", o.path.display()));
    }
    super::print(listing.as_bytes());
    Ok(())
}
