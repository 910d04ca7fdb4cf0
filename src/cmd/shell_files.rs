//! `termvel shell-files DIR`: the man pages and the shell completions,
//! generated from the same clap definitions as the parser and `--help`, so
//! they can never describe options termvel does not have.
//!
//! Written below DIR as `man/man1/termvel.1` (and `termvel-<command>.1` for
//! each command) and `completions/termvel.bash`, `completions/_termvel`
//! (zsh) and `completions/termvel.fish`; `scripts/install-shell-files.sh`
//! puts them where the shells and `man` look. Each file is written under a
//! temporary name and renamed when complete, so an interrupted run leaves
//! no half-written page.

use std::path::{Path, PathBuf};
use std::process::ExitCode;

use anyhow::Context as _;
use clap::CommandFactory as _;
use clap_complete::Shell;

use crate::cli::{Cli, ShellFilesArgs};

/// The completion scripts written, by shell, with their conventional names.
const SHELLS: [(Shell, &str); 3] =
    [(Shell::Bash, "termvel.bash"), (Shell::Zsh, "_termvel"), (Shell::Fish, "termvel.fish")];

pub fn run(args: &ShellFilesArgs) -> anyhow::Result<ExitCode> {
    let written = write_all(&args.dir)?;
    for p in &written {
        crate::out!("{}", crate::printable::printable(&p.display().to_string()));
    }
    crate::say!("termvel: wrote {} files; scripts/install-shell-files.sh installs them for this user", written.len());
    Ok(ExitCode::SUCCESS)
}

/// Writes every man page and completion script below `dir`; returns the
/// paths written.
pub fn write_all(dir: &Path) -> anyhow::Result<Vec<PathBuf>> {
    let man_dir = dir.join("man").join("man1");
    let comp_dir = dir.join("completions");
    for d in [&man_dir, &comp_dir] {
        std::fs::create_dir_all(d).with_context(|| format!("{}: cannot create the directory", d.display()))?;
    }
    let mut written = Vec::new();
    let cmd = Cli::command();
    let mut page = Vec::new();
    clap_mangen::Man::new(cmd.clone()).render(&mut page).context("rendering the man page")?;
    written.push(write_whole(&man_dir.join("termvel.1"), &page)?);
    for sub in cmd.get_subcommands() {
        let name = format!("termvel-{}", sub.get_name());
        // Each command's page carries its full name, so `man termvel-replay`
        // works. clap takes static names; this command runs once and exits.
        let leaked: &'static str = Box::leak(name.clone().into_boxed_str());
        let sub = sub.clone().name(leaked).display_name(leaked);
        let mut page = Vec::new();
        clap_mangen::Man::new(sub).render(&mut page).with_context(|| format!("rendering the man page of {name}"))?;
        written.push(write_whole(&man_dir.join(format!("{name}.1")), &page)?);
    }
    for (shell, file) in SHELLS {
        let mut script = Vec::new();
        clap_complete::generate(shell, &mut Cli::command(), "termvel", &mut script);
        written.push(write_whole(&comp_dir.join(file), &script)?);
    }
    Ok(written)
}

/// Writes `bytes` to `path` through a temporary file beside it, renamed
/// when complete.
fn write_whole(path: &Path, bytes: &[u8]) -> anyhow::Result<PathBuf> {
    let name = path.file_name().map(|n| n.to_string_lossy().into_owned()).unwrap_or_default();
    let tmp = path.with_file_name(format!(".{name}.partial"));
    let result = std::fs::write(&tmp, bytes).and_then(|()| std::fs::rename(&tmp, path));
    if let Err(e) = result {
        let _ = std::fs::remove_file(&tmp);
        return Err(e).with_context(|| format!("{}: cannot write", path.display()));
    }
    Ok(path.to_path_buf())
}
