//! `termvel report FILE [B]`: the summary of a run (or two side by side),
//! as text or JSON, and the plots.

use std::io::IsTerminal;
use std::process::ExitCode;

use crate::cli::ReportArgs;
use crate::report::{self, Run, Summary};

/// Files smaller than this read too fast for a progress bar to help.
const BAR_FROM_BYTES: u64 = 16 << 20;

pub fn run(args: ReportArgs) -> anyhow::Result<ExitCode> {
    // The plots folder is checked (and made) before anything is printed:
    // a report printed whole and then refused is a report twice.
    if let Some(dir) = &args.plots {
        if dir.exists() && !dir.is_dir() {
            return super::unusable(format!("{}: --plots needs a folder, and this is a file", dir.display()));
        }
        if let Err(e) = std::fs::create_dir_all(dir) {
            return super::unusable(format!("{}: cannot create the plots folder: {e}", dir.display()));
        }
    }
    let mut runs = Vec::new();
    for f in &args.files {
        let bar = std::io::stderr().is_terminal().then(|| {
            let b = indicatif::ProgressBar::new(0);
            b.set_style(
                indicatif::ProgressStyle::with_template(
                    "{msg} {wide_bar} {bytes}/{total_bytes} {bytes_per_sec} eta {eta}",
                )
                .expect("a valid template"),
            );
            b.set_message(format!("reading {}", f.display()));
            b
        });
        let mut progress = |done: u64, size: u64| {
            if let Some(b) = &bar
                && size >= BAR_FROM_BYTES
            {
                b.set_length(size);
                b.set_position(done);
            }
        };
        let r = Run::read(f, &args.config, &mut progress);
        if let Some(b) = bar {
            b.finish_and_clear();
        }
        match r {
            Ok(r) => runs.push(r),
            Err(e) => return super::unusable(e),
        }
    }
    let summaries: Vec<Summary> = runs.iter().map(Summary::of).collect();
    for (r, s) in runs.iter().zip(&summaries) {
        if let Some(line) = s.torn_tail_line {
            crate::say!(
                "termvel: {}: the last line ({line}) is torn (the recording was cut off); reported up to it",
                r.file.display()
            );
        }
        for line in s.time_order.describe(&r.file.display().to_string()) {
            crate::say!("termvel: {}", crate::printable::printable(&line));
        }
        if r.malformed_lines > 0 {
            crate::say!(
                "termvel: {}: {} malformed lines skipped (first: {})",
                r.file.display(),
                r.malformed_lines,
                crate::printable::printable(r.first_malformed.as_deref().unwrap_or("?"))
            );
        }
    }
    let mut text = String::new();
    if args.json {
        text.push_str(&serde_json::to_string_pretty(&report::json(&summaries))?);
        text.push('\n');
    } else {
        for s in &summaries {
            text.push_str(&report::text(s));
            text.push('\n');
        }
        if let [a, b] = &summaries[..] {
            text.push_str(&report::comparison_text(a, b));
            text.push('\n');
        }
    }
    if let Err(e) = super::write_stdout(&text) {
        return super::failed(e);
    }
    if let Some(dir) = &args.plots {
        let pairs: Vec<(&Run, &Summary)> = runs.iter().zip(&summaries).collect();
        match report::plots::write(dir, &pairs) {
            Ok(files) => crate::say!("termvel: {} plots written to {}", files.len(), dir.display()),
            Err(e) => return super::failed(e),
        }
    }
    Ok(ExitCode::SUCCESS)
}
