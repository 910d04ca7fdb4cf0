//! `termvel export`: every decoded channel and every derived quantity for
//! the tools the engineer already uses, as CSV or Parquet.
//!
//! Two shapes:
//! - **resampled** (`--rate 50Hz`, the default): one row per tick of a
//!   common time base (the engine's snapshots at that rate), a column per
//!   channel (the latest value; empty when the channel has had no sample
//!   yet, is stale, or is out of range) and per derived quantity;
//! - **long** (`--long`): one row per decoded sample as it arrived
//!   (`t_ns, channel, value, unit, flag`), and the derived quantities at each
//!   snapshot as rows named `derived.…`.
//!
//! Units are in the column names (`vehicle.speed [m/s]`) and, in Parquet, in
//! the file's key/value metadata too (`termvel.units`, a JSON object from
//! column name to unit). Times: `t_ns` is nanoseconds since 1970 (UTC; in
//! Parquet a TIMESTAMP(NANOS) column), `t_s` seconds from the first event.

use std::io::Write;
use std::path::{Path, PathBuf};
use std::sync::Arc;

use serde_json::Value;

use crate::config::ConfigSet;
use crate::decode::{Decoder, Sample};
use crate::engine::derived::Derived;
use crate::engine::quantities::{self, QUANTITIES, Quantity, Reading};
use crate::engine::{Engine, EngineOptions, Snapshot};
use crate::event::{NS_PER_S, Payload, SourceKind, TimeNs};
use crate::output_file::{OutputError, PendingFile, is_same_file};
use crate::record::{RecordingError, RecordingReader};

/// Output format.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Format {
    Csv,
    Parquet,
}

/// What kind of values a column holds.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum ColKind {
    Int,
    Num,
    Text,
}

#[derive(Clone, Debug, PartialEq)]
pub struct Column {
    pub name: String,
    pub unit: &'static str,
    pub kind: ColKind,
}

/// One cell.
#[derive(Clone, Debug, PartialEq)]
pub enum Cell {
    Int(i64),
    Num(f64),
    Text(String),
    Empty,
}

/// Why an export failed.
#[derive(Debug, thiserror::Error)]
pub enum ExportError {
    /// The recording could not be opened or read.
    #[error(transparent)]
    Recording(#[from] RecordingError),
    /// The config to derive with could not be resolved (the text says why).
    #[error(transparent)]
    Config(#[from] crate::record::ConfigChoiceError),
    /// The output file could not be created, written or put in place.
    #[error(transparent)]
    Output(#[from] OutputError),
    /// The output is the input (the same file once links are resolved):
    /// writing it would destroy the recording.
    #[error("{out}: this is the input file {input}; refusing to overwrite it (give another --out)")]
    SameAsInput { input: String, out: String },
    /// The Parquet writer refused a schema, a row group or the file.
    #[cfg(feature = "parquet")]
    #[error("{path}: {source}")]
    Parquet {
        path: String,
        #[source]
        source: parquet::errors::ParquetError,
    },
    /// Parquet was asked of a build without it.
    #[error("this termvel was built without Parquet (the `parquet` cargo feature); use --to csv")]
    NoParquet,
    /// The recording holds no events.
    #[error("{path}: no events to export")]
    NoEvents { path: String },
}

/// A rate that is not one.
#[derive(Clone, Debug, PartialEq, thiserror::Error)]
pub enum RateError {
    /// Not a number of Hz.
    #[error("expected a rate such as 50Hz, found \"{0}\"")]
    NotARate(String),
    /// A number of Hz outside what an export can use.
    #[error("expected a rate from 0.01Hz to 1000Hz, found \"{0}\"")]
    OutOfRange(String),
}

/// The derived quantities exported, one column each: every quantity of the
/// table (`crate::engine::quantities`), named as there.
pub fn derived_quantities() -> &'static [Quantity] {
    QUANTITIES
}

/// The unit a derived column carries: flags are exported as 0/1.
fn derived_unit(q: &Quantity) -> &'static str {
    if matches!(q.kind(), Reading::Flag(_)) { "0/1" } else { q.unit }
}

fn derived_kind(q: &Quantity) -> ColKind {
    if matches!(q.kind(), Reading::Text(_)) { ColKind::Text } else { ColKind::Num }
}

/// A derived quantity's cell: empty when unknown, not finite or in an
/// absent group; flags as 0/1.
fn derived_cell(q: &Quantity, d: &Derived) -> Cell {
    if quantities::in_absent_group(q, d) {
        return Cell::Empty;
    }
    match (q.read)(d) {
        Reading::Num(Some(v)) if v.is_finite() => Cell::Num(v),
        Reading::Num(_) | Reading::Text(None) => Cell::Empty,
        Reading::Count(n) => Cell::Num(n as f64),
        Reading::Flag(b) => Cell::Num(if b { 1.0 } else { 0.0 }),
        Reading::Text(Some(t)) => Cell::Text(t.into()),
    }
}

fn col(name: impl Into<String>, unit: &'static str, kind: ColKind) -> Column {
    let name = name.into();
    let name = if unit.is_empty() { name } else { format!("{name} [{unit}]") };
    Column { name, unit, kind }
}

/// Writes rows to a file.
pub trait Sink {
    fn row(&mut self, cells: &[Cell]) -> Result<(), ExportError>;
    fn finish(self: Box<Self>) -> Result<(), ExportError>;
}

struct CsvSink {
    out: std::io::BufWriter<std::fs::File>,
    /// The temporary the rows go to, renamed to `path` when complete.
    pending: PendingFile,
    path: PathBuf,
    line: String,
}

/// A write to the output at `path` failed.
fn io(path: &Path) -> impl Fn(std::io::Error) -> ExportError + '_ {
    move |source| ExportError::Output(OutputError { path: path.to_path_buf(), what: "cannot write", source })
}

impl CsvSink {
    fn new(path: &Path, cols: &[Column]) -> Result<CsvSink, ExportError> {
        let (pending, f) = PendingFile::create(path)?;
        let mut s = CsvSink {
            out: std::io::BufWriter::with_capacity(1 << 20, f),
            pending,
            path: path.to_path_buf(),
            line: String::new(),
        };
        let header: Vec<String> = cols.iter().map(|c| csv_text(&c.name)).collect();
        writeln!(s.out, "{}", header.join(",")).map_err(io(path))?;
        Ok(s)
    }
}

fn csv_text(s: &str) -> String {
    if s.contains([',', '"', '\n', '\r']) { format!("\"{}\"", s.replace('"', "\"\"")) } else { s.to_string() }
}

impl Sink for CsvSink {
    fn row(&mut self, cells: &[Cell]) -> Result<(), ExportError> {
        use std::fmt::Write as _;
        self.line.clear();
        for (i, c) in cells.iter().enumerate() {
            if i > 0 {
                self.line.push(',');
            }
            match c {
                Cell::Int(v) => {
                    let _ = write!(self.line, "{v}");
                }
                // Rust prints the shortest text that reads back exactly.
                Cell::Num(v) if v.is_finite() => {
                    let _ = write!(self.line, "{v}");
                }
                Cell::Num(_) | Cell::Empty => {}
                Cell::Text(t) => self.line.push_str(&csv_text(t)),
            }
        }
        self.line.push('\n');
        self.out.write_all(self.line.as_bytes()).map_err(io(&self.path))
    }

    fn finish(mut self: Box<Self>) -> Result<(), ExportError> {
        self.out.flush().map_err(io(&self.path))?;
        let CsvSink { pending, .. } = *self;
        pending.commit()?;
        Ok(())
    }
}

#[cfg(feature = "parquet")]
mod pq {
    use std::sync::Arc;

    use parquet::basic::{Compression, LogicalType, Repetition, TimeUnit, Type as Physical};
    use parquet::data_type::{ByteArray, ByteArrayType, DoubleType, Int64Type};
    use parquet::file::metadata::KeyValue;
    use parquet::file::properties::WriterProperties;
    use parquet::file::writer::SerializedFileWriter;
    use parquet::schema::types::Type;

    use super::{Cell, ColKind, Column, ExportError, PendingFile, Sink};

    /// Rows per row group.
    const GROUP: usize = 64 * 1024;

    enum Buf {
        Int(Vec<i64>),
        Num(Vec<f64>, Vec<i16>),
        Text(Vec<ByteArray>, Vec<i16>),
    }

    pub struct ParquetSink {
        w: SerializedFileWriter<std::fs::File>,
        /// The temporary the file goes to, renamed into place when complete.
        pending: PendingFile,
        bufs: Vec<Buf>,
        rows: usize,
        path: String,
    }

    fn e(path: &str) -> impl Fn(parquet::errors::ParquetError) -> ExportError + '_ {
        move |source| ExportError::Parquet { path: path.to_string(), source }
    }

    impl ParquetSink {
        pub fn new(
            path: &std::path::Path,
            cols: &[Column],
            meta: Vec<(String, String)>,
        ) -> Result<ParquetSink, ExportError> {
            let p = path.display().to_string();
            let mut fields = Vec::new();
            for c in cols {
                let t = match c.kind {
                    ColKind::Int => Type::primitive_type_builder(&c.name, Physical::INT64)
                        .with_repetition(Repetition::REQUIRED)
                        .with_logical_type(Some(LogicalType::timestamp(true, TimeUnit::NANOS))),
                    ColKind::Num => {
                        Type::primitive_type_builder(&c.name, Physical::DOUBLE).with_repetition(Repetition::OPTIONAL)
                    }
                    ColKind::Text => Type::primitive_type_builder(&c.name, Physical::BYTE_ARRAY)
                        .with_repetition(Repetition::OPTIONAL)
                        .with_logical_type(Some(LogicalType::String)),
                };
                fields.push(Arc::new(t.build().map_err(e(&p))?));
            }
            let schema = Arc::new(Type::group_type_builder("termvel").with_fields(fields).build().map_err(e(&p))?);
            let props = WriterProperties::builder()
                .set_compression(Compression::SNAPPY)
                .set_created_by(format!("termvel {}", env!("CARGO_PKG_VERSION")))
                .set_key_value_metadata(Some(meta.into_iter().map(|(k, v)| KeyValue::new(k, v)).collect()))
                .build();
            let (pending, f) = PendingFile::create(path)?;
            let w = SerializedFileWriter::new(f, schema, Arc::new(props)).map_err(e(&p))?;
            let bufs = cols
                .iter()
                .map(|c| match c.kind {
                    ColKind::Int => Buf::Int(Vec::new()),
                    ColKind::Num => Buf::Num(Vec::new(), Vec::new()),
                    ColKind::Text => Buf::Text(Vec::new(), Vec::new()),
                })
                .collect();
            Ok(ParquetSink { w, pending, bufs, rows: 0, path: p })
        }

        fn flush(&mut self) -> Result<(), ExportError> {
            if self.rows == 0 {
                return Ok(());
            }
            let p = self.path.clone();
            let mut rg = self.w.next_row_group().map_err(e(&p))?;
            let mut i = 0;
            while let Some(mut c) = rg.next_column().map_err(e(&p))? {
                match &mut self.bufs[i] {
                    Buf::Int(v) => {
                        c.typed::<Int64Type>().write_batch(v, None, None).map_err(e(&p))?;
                        v.clear();
                    }
                    Buf::Num(v, d) => {
                        c.typed::<DoubleType>().write_batch(v, Some(d), None).map_err(e(&p))?;
                        v.clear();
                        d.clear();
                    }
                    Buf::Text(v, d) => {
                        c.typed::<ByteArrayType>().write_batch(v, Some(d), None).map_err(e(&p))?;
                        v.clear();
                        d.clear();
                    }
                }
                c.close().map_err(e(&p))?;
                i += 1;
            }
            rg.close().map_err(e(&p))?;
            self.rows = 0;
            Ok(())
        }
    }

    impl Sink for ParquetSink {
        fn row(&mut self, cells: &[Cell]) -> Result<(), ExportError> {
            for (b, c) in self.bufs.iter_mut().zip(cells) {
                match (b, c) {
                    (Buf::Int(v), Cell::Int(x)) => v.push(*x),
                    (Buf::Int(v), _) => v.push(0),
                    (Buf::Num(v, d), Cell::Num(x)) if x.is_finite() => {
                        v.push(*x);
                        d.push(1);
                    }
                    (Buf::Num(_, d), _) => d.push(0),
                    (Buf::Text(v, d), Cell::Text(t)) => {
                        v.push(ByteArray::from(t.as_str()));
                        d.push(1);
                    }
                    (Buf::Text(_, d), _) => d.push(0),
                }
            }
            self.rows += 1;
            if self.rows >= GROUP { self.flush() } else { Ok(()) }
        }

        fn finish(mut self: Box<Self>) -> Result<(), ExportError> {
            self.flush()?;
            let p = self.path.clone();
            let ParquetSink { w, pending, .. } = *self;
            w.close().map_err(e(&p))?;
            pending.commit()?;
            Ok(())
        }
    }
}

fn open_sink(format: Format, path: &Path, cols: &[Column], source: &str) -> Result<Box<dyn Sink>, ExportError> {
    match format {
        Format::Csv => Ok(Box::new(CsvSink::new(path, cols)?)),
        #[cfg(feature = "parquet")]
        Format::Parquet => {
            let units: serde_json::Map<String, Value> =
                cols.iter().map(|c| (c.name.clone(), Value::from(c.unit))).collect();
            let meta = vec![
                ("termvel.units".to_string(), Value::Object(units).to_string()),
                ("termvel.source".to_string(), source.to_string()),
            ];
            Ok(Box::new(pq::ParquetSink::new(path, cols, meta)?))
        }
        #[cfg(not(feature = "parquet"))]
        Format::Parquet => {
            let _ = source;
            Err(ExportError::NoParquet)
        }
    }
}

/// What an export wrote.
#[derive(Clone, Debug, PartialEq)]
pub struct ExportOutcome {
    pub rows: u64,
    pub columns: usize,
    pub config_origin: String,
    /// Time jumps, gaps and reversals in the file, and what was done.
    pub time_order: crate::record::TimeOrderStats,
}

/// Opens a recording and its config (as a report does), after making sure
/// the output `out` is not the recording itself.
fn open(
    file: &Path,
    config: &[PathBuf],
    out: &Path,
) -> Result<(RecordingReader<std::fs::File>, Arc<ConfigSet>, String), ExportError> {
    if is_same_file(file, out) {
        return Err(ExportError::SameAsInput { input: file.display().to_string(), out: out.display().to_string() });
    }
    let r = RecordingReader::open(file)?;
    let (cfg, origin) = r.header.config_set(config, file)?;
    Ok((r, Arc::new(cfg), origin))
}

/// Channels a recording will produce: those of the signal map and the GNSS
/// receiver, and (when line telemetry is present) every key its lines
/// carry, found by a first pass.
fn channel_table(file: &Path, cfg: &ConfigSet, has_lines: bool) -> Result<crate::channel::ChannelTable, ExportError> {
    let mut dec = Decoder::new(&cfg.signals);
    if has_lines {
        let mut r = RecordingReader::open(file)?;
        let mut samples = Vec::new();
        while let Some(ev) = r.next_event() {
            if let Some(s) = r.header.sources.get(ev.source)
                && s.kind == SourceKind::Lines
            {
                samples.clear();
                dec.decode(&ev, SourceKind::Lines, &mut samples);
            }
        }
    }
    Ok(dec.channels)
}

/// Resampled export: one row per `every_ns` of stream time.
pub fn resampled(
    file: &Path,
    config: &[PathBuf],
    format: Format,
    out: &Path,
    every_ns: TimeNs,
) -> Result<ExportOutcome, ExportError> {
    let (mut r, cfg, origin) = open(file, config, out)?;
    let has_lines = r.header.sources.iter().any(|(_, s)| s.kind == SourceKind::Lines);
    let table = channel_table(file, &cfg, has_lines)?;
    let mut cols = vec![col("t_ns", "", ColKind::Int), col("t_s", "s", ColKind::Num)];
    let chans: Vec<(crate::channel::ChannelId, String)> = table.iter().map(|(id, c)| (id, c.name.clone())).collect();
    for (id, name) in &chans {
        cols.push(col(name.clone(), table.get(*id).dimension.si_unit(), ColKind::Num));
    }
    for q in derived_quantities() {
        cols.push(col(q.name, derived_unit(q), derived_kind(q)));
    }
    let mut sink = open_sink(format, out, &cols, &file.display().to_string())?;
    let mut engine = Engine::new(cfg, EngineOptions { snapshot_every_ns: every_ns });
    let mut start: Option<TimeNs> = None;
    let mut rows = 0u64;
    let mut err: Option<ExportError> = None;
    let mut cells = Vec::with_capacity(cols.len());
    let mut emit = |s: Snapshot, start: TimeNs, rows: &mut u64, err: &mut Option<ExportError>| {
        if err.is_some() {
            return;
        }
        cells.clear();
        cells.push(Cell::Int(s.t_ns));
        cells.push(Cell::Num((s.t_ns - start) as f64 * 1e-9));
        for (id, _) in &chans {
            cells.push(match s.channel(*id) {
                Some(c) if !c.stale && !c.out_of_range => Cell::Num(c.value),
                _ => Cell::Empty,
            });
        }
        for q in derived_quantities() {
            cells.push(derived_cell(q, &s.derived));
        }
        match sink.row(&cells) {
            Ok(()) => *rows += 1,
            Err(e) => *err = Some(e),
        }
    };
    while let Some(ev) = r.next_event() {
        if matches!(ev.payload, Payload::Note(_)) {
            continue;
        }
        let t0 = *start.get_or_insert(ev.t_ns);
        engine.feed(&ev, &r.header.sources, &mut |s| emit(s, t0, &mut rows, &mut err));
    }
    let t0 = start.ok_or_else(|| ExportError::NoEvents { path: file.display().to_string() })?;
    let sources = r.header.sources.clone();
    engine.finish(&sources, &mut |s| emit(s, t0, &mut rows, &mut err));
    if let Some(e) = err {
        return Err(e);
    }
    sink.finish()?;
    Ok(ExportOutcome { rows, columns: cols.len(), config_origin: origin, time_order: r.stats.time })
}

/// Long-form export: every decoded sample, and the derived quantities at
/// each snapshot (`every_ns`).
pub fn long(
    file: &Path,
    config: &[PathBuf],
    format: Format,
    out: &Path,
    every_ns: TimeNs,
) -> Result<ExportOutcome, ExportError> {
    let (mut r, cfg, origin) = open(file, config, out)?;
    let cols = vec![
        col("t_ns", "", ColKind::Int),
        col("t_s", "s", ColKind::Num),
        col("channel", "", ColKind::Text),
        col("value", "", ColKind::Num),
        col("unit", "", ColKind::Text),
        col("source", "", ColKind::Text),
        col("flag", "", ColKind::Text),
    ];
    let mut sink = open_sink(format, out, &cols, &file.display().to_string())?;
    let mut engine = Engine::new(cfg, EngineOptions { snapshot_every_ns: every_ns });
    // The samples the engine decoded from the latest event (its own
    // decoding, through its tap), with their channel's name and unit.
    let mut samples: Vec<(Sample, String, &'static str)> = Vec::new();
    let mut rows = 0u64;
    let mut start: Option<TimeNs> = None;
    let mut snaps = Vec::new();
    let mut cells = Vec::with_capacity(cols.len());
    let derived_rows =
        |s: &Snapshot, t0: TimeNs, sink: &mut Box<dyn Sink>, rows: &mut u64| -> Result<(), ExportError> {
            for q in derived_quantities() {
                let (value, flag) = match derived_cell(q, &s.derived) {
                    Cell::Num(v) => (Cell::Num(v), String::new()),
                    Cell::Text(t) => (Cell::Empty, t),
                    _ => continue,
                };
                sink.row(&[
                    Cell::Int(s.t_ns),
                    Cell::Num((s.t_ns - t0) as f64 * 1e-9),
                    Cell::Text(q.name.into()),
                    value,
                    Cell::Text(derived_unit(q).into()),
                    Cell::Text("derived".into()),
                    if flag.is_empty() { Cell::Empty } else { Cell::Text(flag) },
                ])?;
                *rows += 1;
            }
            Ok(())
        };
    while let Some(ev) = r.next_event() {
        if matches!(ev.payload, Payload::Note(_)) {
            continue;
        }
        let t0 = *start.get_or_insert(ev.t_ns);
        samples.clear();
        engine.feed_tapped(&ev, &r.header.sources, &mut |s| snaps.push(s), &mut |s, info| {
            samples.push((*s, info.name.clone(), info.dimension.si_unit()))
        });
        for s in snaps.drain(..) {
            derived_rows(&s, t0, &mut sink, &mut rows)?;
        }
        let source = r.header.sources.name(ev.source).to_string();
        for (s, name, unit) in samples.drain(..) {
            cells.clear();
            cells.extend([
                Cell::Int(ev.t_ns),
                Cell::Num((ev.t_ns - t0) as f64 * 1e-9),
                Cell::Text(name),
                Cell::Num(s.value),
                Cell::Text(unit.into()),
                Cell::Text(source.clone()),
                if s.valid { Cell::Empty } else { Cell::Text("out_of_range".into()) },
            ]);
            sink.row(&cells)?;
            rows += 1;
        }
    }
    let t0 = start.ok_or_else(|| ExportError::NoEvents { path: file.display().to_string() })?;
    let sources = r.header.sources.clone();
    engine.finish(&sources, &mut |s| snaps.push(s));
    for s in snaps.drain(..) {
        derived_rows(&s, t0, &mut sink, &mut rows)?;
    }
    sink.finish()?;
    Ok(ExportOutcome { rows, columns: cols.len(), config_origin: origin, time_order: r.stats.time })
}

/// Parses a rate such as `50Hz`, `10hz` or `0.5Hz` into a period in ns.
pub fn parse_rate(s: &str) -> Result<TimeNs, RateError> {
    let t = s.trim();
    let num = t.strip_suffix("Hz").or_else(|| t.strip_suffix("hz")).or_else(|| t.strip_suffix("HZ")).unwrap_or(t);
    let hz: f64 = num.trim().parse().map_err(|_| RateError::NotARate(s.to_string()))?;
    if !(0.01..=1000.0).contains(&hz) {
        return Err(RateError::OutOfRange(s.to_string()));
    }
    Ok((NS_PER_S as f64 / hz).round() as TimeNs)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn rates_parse() {
        assert_eq!(parse_rate("50Hz"), Ok(20_000_000));
        assert_eq!(parse_rate("10hz"), Ok(100_000_000));
        assert_eq!(parse_rate("0.5Hz"), Ok(2_000_000_000));
        assert!(parse_rate("fast").unwrap_err().to_string().contains("50Hz"));
        assert_eq!(parse_rate("0Hz"), Err(RateError::OutOfRange("0Hz".into())));
        assert!(parse_rate("5000Hz").is_err());
    }

    #[test]
    fn csv_quotes_what_needs_it() {
        assert_eq!(csv_text("plain"), "plain");
        assert_eq!(csv_text("a,b"), "\"a,b\"");
        assert_eq!(csv_text("say \"hi\""), "\"say \"\"hi\"\"\"");
    }

    #[test]
    fn the_derived_columns_are_the_tables_names() {
        let names: Vec<&str> = derived_quantities().iter().map(|q| q.name).collect();
        let table: Vec<&str> = QUANTITIES.iter().map(|q| q.name).collect();
        assert_eq!(names, table);
        // As written in a header: the name, then the unit in brackets.
        let total = quantities::find("derived.road_load.total_w").unwrap();
        assert_eq!(col(total.name, derived_unit(total), derived_kind(total)).name, "derived.road_load.total_w [W]");
        let boosting = quantities::find("derived.battery.boosting").unwrap();
        assert_eq!(
            col(boosting.name, derived_unit(boosting), derived_kind(boosting)).name,
            "derived.battery.boosting [0/1]"
        );
        let binding = quantities::find("derived.boost_left.binding").unwrap();
        assert_eq!(derived_kind(binding), ColKind::Text);
        assert_eq!(col(binding.name, derived_unit(binding), derived_kind(binding)).name, "derived.boost_left.binding");
    }

    #[test]
    fn derived_cells_are_empty_when_unknown_or_not_finite() {
        let d = Derived { speed_mps: Some(f64::NAN), air_density: 1.2, ..Derived::default() };
        let cell = |name: &str| derived_cell(quantities::find(name).unwrap(), &d);
        assert_eq!(cell("derived.speed_mps"), Cell::Empty);
        assert_eq!(cell("derived.air.density_kg_m3"), Cell::Num(1.2));
        assert_eq!(cell("derived.battery.boosting"), Cell::Num(0.0));
        assert_eq!(cell("derived.air.origin"), Cell::Text("standard atmosphere".into()));
        // In an absent group even a flag is empty, not 0.
        assert_eq!(cell("derived.braking.passed"), Cell::Empty);
    }
}
