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
use crate::decode::Decoder;
use crate::engine::{Engine, EngineOptions, Snapshot};
use crate::event::{NS_PER_S, Payload, SourceKind, TimeNs};
use crate::headless::derived_json;
use crate::record::RecordingReader;

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

/// The derived quantities exported: column, unit, and where the value sits
/// in the headless derived block (a JSON pointer). Booleans become 0/1.
pub const DERIVED: &[(&str, &str, &str)] = &[
    ("derived.speed", "m/s", "/speed_mps"),
    ("derived.speed_source", "", "/speed_source"),
    ("derived.distance", "m", "/distance_m"),
    ("derived.accel", "m/s²", "/accel_mps2"),
    ("derived.air_density", "kg/m³", "/air/density_kg_m3"),
    ("derived.road_load.aero", "W", "/road_load/aero_w"),
    ("derived.road_load.rolling", "W", "/road_load/rolling_w"),
    ("derived.road_load.grade", "W", "/road_load/grade_w"),
    ("derived.road_load.total", "W", "/road_load/total_w"),
    ("derived.road_load.inertial", "W", "/road_load/inertial_w"),
    ("derived.road_load.demand", "W", "/road_load/demand_w"),
    ("derived.road_load.wheel", "W", "/road_load/wheel_w"),
    ("derived.road_load.available", "W", "/road_load/available_w"),
    ("derived.road_load.margin", "W", "/road_load/margin_w"),
    ("derived.estimate.cda", "m²", "/estimate/cda_m2"),
    ("derived.estimate.cda_sd", "m²", "/estimate/cda_sd_m2"),
    ("derived.estimate.crr", "1", "/estimate/crr"),
    ("derived.estimate.crr_sd", "1", "/estimate/crr_sd"),
    ("derived.estimate.converged", "0/1", "/estimate/converged"),
    ("derived.battery.power", "W", "/battery/power_w"),
    ("derived.battery.discharge_rate", "kW/kWh", "/battery/discharge_rate_kw_per_kwh"),
    ("derived.battery.soc", "1", "/battery/soc"),
    ("derived.battery.energy_above_reserve", "J", "/battery/energy_above_reserve_j"),
    ("derived.battery.temp", "°C", "/battery/temp_c"),
    ("derived.battery.ocv", "V", "/battery/ocv_v"),
    ("derived.battery.resistance", "Ω", "/battery/resistance_ohm"),
    ("derived.battery.hppc_max", "W", "/battery/hppc_max_w"),
    ("derived.battery.reported_limit", "W", "/battery/reported_limit_w"),
    ("derived.battery.deliverable", "W", "/battery/deliverable_w"),
    ("derived.battery.rated", "W", "/battery/rated_w"),
    ("derived.battery.derating_ratio", "1", "/battery/derating_ratio"),
    ("derived.battery.boosting", "0/1", "/battery/boosting"),
    ("derived.battery.time_in_boost", "s", "/battery/time_in_boost_s"),
    ("derived.battery.heating_rate", "°C/s", "/battery/heating_c_per_s"),
    ("derived.battery.derating_fit.tau", "s", "/battery/derating_fit/tau_s"),
    ("derived.battery.derating_fit.floor", "1", "/battery/derating_fit/floor"),
    ("derived.boost_left.energy", "s", "/boost_left/energy_s"),
    ("derived.boost_left.power", "s", "/boost_left/power_s"),
    ("derived.boost_left.thermal", "s", "/boost_left/thermal_s"),
    ("derived.boost_left", "s", "/boost_left/seconds"),
    ("derived.boost_left.binding", "", "/boost_left/binding"),
    ("derived.boost_left.need", "W", "/boost_left/need_w"),
    ("derived.projection.peak", "m/s", "/projection/peak_mps"),
    ("derived.projection.peak_low", "m/s", "/projection/peak_low_mps"),
    ("derived.projection.peak_high", "m/s", "/projection/peak_high_mps"),
    ("derived.projection.peak_at", "m", "/projection/peak_at_m"),
    ("derived.projection.peak_in", "s", "/projection/peak_in_s"),
    ("derived.projection.terminal", "m/s", "/projection/terminal_mps"),
    ("derived.projection.target_reachable", "0/1", "/projection/target_reachable"),
    ("derived.braking.point", "m", "/braking/point_m"),
    ("derived.braking.distance", "m", "/braking/distance_m"),
    ("derived.braking.in", "s", "/braking/in_s"),
    ("derived.braking.stopping", "m", "/braking/stopping_m"),
    ("derived.tyre.margin", "m/s", "/tyre/margin_mps"),
];

fn derived_cell(d: &Value, pointer: &str) -> Cell {
    match d.pointer(pointer) {
        Some(Value::Number(n)) => n.as_f64().map_or(Cell::Empty, Cell::Num),
        Some(Value::Bool(b)) => Cell::Num(if *b { 1.0 } else { 0.0 }),
        Some(Value::String(s)) => Cell::Text(s.clone()),
        _ => Cell::Empty,
    }
}

fn derived_kind(pointer: &str) -> ColKind {
    if pointer.ends_with("source") || pointer.ends_with("binding") { ColKind::Text } else { ColKind::Num }
}

fn col(name: impl Into<String>, unit: &'static str, kind: ColKind) -> Column {
    let name = name.into();
    let name = if unit.is_empty() { name } else { format!("{name} [{unit}]") };
    Column { name, unit, kind }
}

/// Writes rows to a file.
pub trait Sink {
    fn row(&mut self, cells: &[Cell]) -> Result<(), String>;
    fn finish(self: Box<Self>) -> Result<(), String>;
}

struct CsvSink {
    out: std::io::BufWriter<std::fs::File>,
    path: PathBuf,
    line: String,
}

impl CsvSink {
    fn new(path: &Path, cols: &[Column]) -> Result<CsvSink, String> {
        let f = std::fs::File::create(path).map_err(|e| format!("{}: {e}", path.display()))?;
        let mut s = CsvSink {
            out: std::io::BufWriter::with_capacity(1 << 20, f),
            path: path.to_path_buf(),
            line: String::new(),
        };
        let header: Vec<String> = cols.iter().map(|c| csv_text(&c.name)).collect();
        writeln!(s.out, "{}", header.join(",")).map_err(|e| format!("{}: {e}", s.path.display()))?;
        Ok(s)
    }
}

fn csv_text(s: &str) -> String {
    if s.contains([',', '"', '\n', '\r']) { format!("\"{}\"", s.replace('"', "\"\"")) } else { s.to_string() }
}

impl Sink for CsvSink {
    fn row(&mut self, cells: &[Cell]) -> Result<(), String> {
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
        self.out.write_all(self.line.as_bytes()).map_err(|e| format!("{}: {e}", self.path.display()))
    }

    fn finish(mut self: Box<Self>) -> Result<(), String> {
        self.out.flush().map_err(|e| format!("{}: {e}", self.path.display()))
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

    use super::{Cell, ColKind, Column, Sink};

    /// Rows per row group.
    const GROUP: usize = 64 * 1024;

    enum Buf {
        Int(Vec<i64>),
        Num(Vec<f64>, Vec<i16>),
        Text(Vec<ByteArray>, Vec<i16>),
    }

    pub struct ParquetSink {
        w: SerializedFileWriter<std::fs::File>,
        bufs: Vec<Buf>,
        rows: usize,
        path: String,
    }

    fn e(path: &str) -> impl Fn(parquet::errors::ParquetError) -> String + '_ {
        move |err| format!("{path}: {err}")
    }

    impl ParquetSink {
        pub fn new(
            path: &std::path::Path,
            cols: &[Column],
            meta: Vec<(String, String)>,
        ) -> Result<ParquetSink, String> {
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
            let f = std::fs::File::create(path).map_err(|err| format!("{p}: {err}"))?;
            let w = SerializedFileWriter::new(f, schema, Arc::new(props)).map_err(e(&p))?;
            let bufs = cols
                .iter()
                .map(|c| match c.kind {
                    ColKind::Int => Buf::Int(Vec::new()),
                    ColKind::Num => Buf::Num(Vec::new(), Vec::new()),
                    ColKind::Text => Buf::Text(Vec::new(), Vec::new()),
                })
                .collect();
            Ok(ParquetSink { w, bufs, rows: 0, path: p })
        }

        fn flush(&mut self) -> Result<(), String> {
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
        fn row(&mut self, cells: &[Cell]) -> Result<(), String> {
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

        fn finish(mut self: Box<Self>) -> Result<(), String> {
            self.flush()?;
            let p = self.path.clone();
            self.w.close().map_err(e(&p))?;
            Ok(())
        }
    }
}

fn open_sink(format: Format, path: &Path, cols: &[Column], source: &str) -> Result<Box<dyn Sink>, String> {
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
            Err("this termvel was built without Parquet (the `parquet` cargo feature); use --to csv".into())
        }
    }
}

/// What an export wrote.
#[derive(Clone, Debug, PartialEq)]
pub struct ExportOutcome {
    pub rows: u64,
    pub columns: usize,
    pub config_origin: String,
}

/// Opens a recording and its config (as a report does).
fn open(file: &Path, config: &[PathBuf]) -> Result<(RecordingReader<std::fs::File>, Arc<ConfigSet>, String), String> {
    let r = RecordingReader::open(file).map_err(|e| e.to_string())?;
    let (cfg, origin) = r.header.config_set(config, file).map_err(|e| e.to_string())?;
    Ok((r, Arc::new(cfg), origin))
}

/// Channels a recording will produce: those of the signal map and the GNSS
/// receiver, and (when line telemetry is present) every key its lines
/// carry, found by a first pass.
fn channel_table(file: &Path, cfg: &ConfigSet, has_lines: bool) -> Result<crate::channel::ChannelTable, String> {
    let mut dec = Decoder::new(&cfg.signals);
    if has_lines {
        let mut r = RecordingReader::open(file).map_err(|e| e.to_string())?;
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
) -> Result<ExportOutcome, String> {
    let (mut r, cfg, origin) = open(file, config)?;
    let has_lines = r.header.sources.iter().any(|(_, s)| s.kind == SourceKind::Lines);
    let table = channel_table(file, &cfg, has_lines)?;
    let mut cols = vec![col("t_ns", "", ColKind::Int), col("t_s", "s", ColKind::Num)];
    let chans: Vec<(crate::channel::ChannelId, String)> = table.iter().map(|(id, c)| (id, c.name.clone())).collect();
    for (id, name) in &chans {
        cols.push(col(name.clone(), table.get(*id).dimension.si_unit(), ColKind::Num));
    }
    for (name, unit, ptr) in DERIVED {
        cols.push(col(*name, unit, derived_kind(ptr)));
    }
    let mut sink = open_sink(format, out, &cols, &file.display().to_string())?;
    let mut engine = Engine::new(cfg, EngineOptions { snapshot_every_ns: every_ns });
    let mut start: Option<TimeNs> = None;
    let mut rows = 0u64;
    let mut err: Option<String> = None;
    let mut cells = Vec::with_capacity(cols.len());
    let mut emit = |s: Snapshot, start: TimeNs, rows: &mut u64, err: &mut Option<String>| {
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
        let d = derived_json(&s.derived);
        for (_, _, ptr) in DERIVED {
            cells.push(derived_cell(&d, ptr));
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
    let t0 = start.ok_or_else(|| format!("{}: no events to export", file.display()))?;
    let sources = r.header.sources.clone();
    engine.finish(&sources, &mut |s| emit(s, t0, &mut rows, &mut err));
    if let Some(e) = err {
        return Err(e);
    }
    sink.finish()?;
    Ok(ExportOutcome { rows, columns: cols.len(), config_origin: origin })
}

/// Long-form export: every decoded sample, and the derived quantities at
/// each snapshot (`every_ns`).
pub fn long(
    file: &Path,
    config: &[PathBuf],
    format: Format,
    out: &Path,
    every_ns: TimeNs,
) -> Result<ExportOutcome, String> {
    let (mut r, cfg, origin) = open(file, config)?;
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
    let mut dec = Decoder::new(&cfg.signals);
    let mut engine = Engine::new(cfg, EngineOptions { snapshot_every_ns: every_ns });
    let mut samples = Vec::new();
    let mut rows = 0u64;
    let mut start: Option<TimeNs> = None;
    let mut snaps = Vec::new();
    let mut cells = Vec::with_capacity(cols.len());
    let derived_rows = |s: &Snapshot, t0: TimeNs, sink: &mut Box<dyn Sink>, rows: &mut u64| -> Result<(), String> {
        let d = derived_json(&s.derived);
        for (name, unit, ptr) in DERIVED {
            let (value, flag) = match derived_cell(&d, ptr) {
                Cell::Num(v) => (Cell::Num(v), String::new()),
                Cell::Text(t) => (Cell::Empty, t),
                _ => continue,
            };
            sink.row(&[
                Cell::Int(s.t_ns),
                Cell::Num((s.t_ns - t0) as f64 * 1e-9),
                Cell::Text((*name).into()),
                value,
                Cell::Text((*unit).into()),
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
        engine.feed(&ev, &r.header.sources, &mut |s| snaps.push(s));
        for s in snaps.drain(..) {
            derived_rows(&s, t0, &mut sink, &mut rows)?;
        }
        let kind = r.header.sources.get(ev.source).map_or(SourceKind::Can, |s| s.kind);
        samples.clear();
        dec.decode(&ev, kind, &mut samples);
        let source = r.header.sources.name(ev.source).to_string();
        for s in &samples {
            let info = dec.channels.get(s.channel);
            cells.clear();
            cells.extend([
                Cell::Int(ev.t_ns),
                Cell::Num((ev.t_ns - t0) as f64 * 1e-9),
                Cell::Text(info.name.clone()),
                Cell::Num(s.value),
                Cell::Text(info.dimension.si_unit().into()),
                Cell::Text(source.clone()),
                if s.valid { Cell::Empty } else { Cell::Text("out_of_range".into()) },
            ]);
            sink.row(&cells)?;
            rows += 1;
        }
    }
    let t0 = start.ok_or_else(|| format!("{}: no events to export", file.display()))?;
    let sources = r.header.sources.clone();
    engine.finish(&sources, &mut |s| snaps.push(s));
    for s in snaps.drain(..) {
        derived_rows(&s, t0, &mut sink, &mut rows)?;
    }
    sink.finish()?;
    Ok(ExportOutcome { rows, columns: cols.len(), config_origin: origin })
}

/// Parses a rate such as `50Hz`, `10hz` or `0.5Hz` into a period in ns.
pub fn parse_rate(s: &str) -> Result<TimeNs, String> {
    let t = s.trim();
    let num = t.strip_suffix("Hz").or_else(|| t.strip_suffix("hz")).or_else(|| t.strip_suffix("HZ")).unwrap_or(t);
    let hz: f64 = num.trim().parse().map_err(|_| format!("expected a rate such as 50Hz, found \"{s}\""))?;
    if !(0.01..=1000.0).contains(&hz) {
        return Err(format!("expected a rate from 0.01Hz to 1000Hz, found \"{s}\""));
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
        assert!(parse_rate("fast").unwrap_err().contains("50Hz"));
        assert!(parse_rate("0Hz").is_err());
        assert!(parse_rate("5000Hz").is_err());
    }

    #[test]
    fn csv_quotes_what_needs_it() {
        assert_eq!(csv_text("plain"), "plain");
        assert_eq!(csv_text("a,b"), "\"a,b\"");
        assert_eq!(csv_text("say \"hi\""), "\"say \"\"hi\"\"\"");
    }

    #[test]
    fn every_derived_pointer_exists_in_the_headless_block() {
        // A derived block with every optional part present (the demo run at
        // its 60 s mark), so a renamed field cannot silently export nothing.
        let rec = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("replays/demo.tvrec");
        let mut r = RecordingReader::open(&rec).unwrap();
        let cfg = Arc::new(ConfigSet::embedded());
        let mut engine = Engine::new(cfg, EngineOptions::default());
        let mut best: Option<Value> = None;
        while let Some(ev) = r.next_event() {
            engine.feed(&ev, &r.header.sources, &mut |s| {
                let d = derived_json(&s.derived);
                let present = DERIVED.iter().filter(|(_, _, p)| !d.pointer(p).is_none_or(Value::is_null)).count();
                if best.as_ref().is_none_or(|b| {
                    DERIVED.iter().filter(|(_, _, p)| !b.pointer(p).is_none_or(Value::is_null)).count() < present
                }) {
                    best = Some(d);
                }
            });
        }
        let d = best.unwrap();
        let missing: Vec<&str> =
            DERIVED.iter().filter(|(_, _, p)| d.pointer(p).is_none()).map(|(n, _, _)| *n).collect();
        assert!(missing.is_empty(), "pointers that name nothing: {missing:?}");
    }
}
