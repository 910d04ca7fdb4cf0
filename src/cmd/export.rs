//! `termvel export FILE --to csv|parquet --out PATH`: channels and derived
//! quantities for other tools.

use std::process::ExitCode;

use crate::cli::{ExportArgs, ExportFormat};
use crate::report::table_export::{self, Format};

pub fn run(args: ExportArgs) -> anyhow::Result<ExitCode> {
    let format = match args.to {
        ExportFormat::Csv => Format::Csv,
        ExportFormat::Parquet => Format::Parquet,
    };
    let r = if args.long {
        table_export::long(&args.file, &args.config, format, &args.out, args.rate)
    } else {
        table_export::resampled(&args.file, &args.config, format, &args.out, args.rate)
    };
    match r {
        Ok(o) => {
            for line in o.time_order.describe(&args.file.display().to_string()) {
                crate::say!("termvel: {}", crate::printable::printable(&line));
            }
            crate::say!(
                "termvel: {} rows × {} columns written to {} (config {})",
                o.rows,
                o.columns,
                args.out.display(),
                o.config_origin
            );
            Ok(ExitCode::SUCCESS)
        }
        // Writing failed part-way (the message names the file and what
        // failed): nothing is left at --out. An --out that cannot even be
        // created is unusable input, as anything else.
        Err(table_export::ExportError::Output(o)) if !o.is_create() => super::failed(o),
        Err(e) => super::unusable(e),
    }
}
