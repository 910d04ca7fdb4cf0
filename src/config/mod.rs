//! Configuration: TOML files in termvel's own schema, validated with errors
//! that name the file, line, column, key and what was expected.
//!
//! Two stages, as in a careful command-line tool: each file is read as
//! written into a raw serde structure (validation only), then turned into
//! one validated, SI-unit value the rest of the program uses. Every file
//! names its kind in a top-level `kind` key.

pub mod alerts;
pub mod locate;
pub mod run_plan;
pub mod signals;
pub mod track;
pub mod vehicle;

use std::fmt;
use std::ops::Range;
use std::path::{Path, PathBuf};

use serde::de::DeserializeOwned;
use toml::Spanned;

pub use alerts::{AlertRule, Alerts, Severity};
pub use signals::Signals;
pub use track::Track;
pub use vehicle::Vehicle;

/// A problem in a config file, located.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct ConfigError {
    /// The file as the user named it (or `<embedded>/NAME` for the built-ins).
    pub file: String,
    /// 1-based line; 0 when the problem is the whole set (a missing file).
    pub line: usize,
    /// 1-based column in characters.
    pub column: usize,
    /// Dotted key path, with array indices (`message[2].signal[0].scale`).
    pub key: String,
    /// What was expected and what was found.
    pub message: String,
}

/// Longest key and message shown: a 1 MB key is named by its start and length.
const SHOWN_KEY_CHARS: usize = 80;
const SHOWN_MESSAGE_CHARS: usize = 1000;

impl fmt::Display for ConfigError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        // Keys and messages echo the file's own text: escape what a terminal
        // would act on, and cut what would flood it.
        let file = crate::printable::printable(&self.file);
        let key = crate::printable::clipped(&self.key, SHOWN_KEY_CHARS);
        let message = crate::printable::clipped(&self.message, SHOWN_MESSAGE_CHARS);
        if self.line == 0 {
            write!(f, "{file}: {message}")
        } else if self.key.is_empty() {
            write!(f, "{file}:{}:{}: {message}", self.line, self.column)
        } else {
            write!(f, "{file}:{}:{}: {key}: {message}", self.line, self.column)
        }
    }
}

impl std::error::Error for ConfigError {}

/// All the problems found in a set of files.
#[derive(Clone, Debug, Default)]
pub struct ConfigErrors(pub Vec<ConfigError>);

impl fmt::Display for ConfigErrors {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        for (i, e) in self.0.iter().enumerate() {
            if i > 0 {
                writeln!(f)?;
            }
            write!(f, "{e}")?;
        }
        Ok(())
    }
}

impl std::error::Error for ConfigErrors {}

/// The kinds of config file.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub enum ConfigKind {
    Vehicle,
    Track,
    Signals,
    Alerts,
    Plan,
}

impl ConfigKind {
    pub const ALL: [ConfigKind; 5] =
        [ConfigKind::Vehicle, ConfigKind::Track, ConfigKind::Signals, ConfigKind::Alerts, ConfigKind::Plan];

    pub fn as_str(self) -> &'static str {
        match self {
            ConfigKind::Vehicle => "vehicle",
            ConfigKind::Track => "track",
            ConfigKind::Signals => "signals",
            ConfigKind::Alerts => "alerts",
            ConfigKind::Plan => "plan",
        }
    }

    pub fn parse(s: &str) -> Option<ConfigKind> {
        ConfigKind::ALL.into_iter().find(|k| k.as_str() == s)
    }
}

/// One config file's text as loaded, kept so a recording can embed exactly
/// what was used.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct ConfigText {
    pub kind: ConfigKind,
    /// Where it came from, for messages.
    pub origin: String,
    pub text: String,
}

/// Collects located errors and warnings while one file is validated.
pub struct Ctx<'a> {
    pub file: &'a str,
    pub src: &'a str,
    pub errors: Vec<ConfigError>,
    pub warnings: Vec<ConfigError>,
}

impl<'a> Ctx<'a> {
    pub fn new(file: &'a str, src: &'a str) -> Ctx<'a> {
        Ctx { file, src, errors: Vec::new(), warnings: Vec::new() }
    }

    fn located(&self, span: Range<usize>, key: &str, message: String) -> ConfigError {
        let (line, column) = locate::line_col(self.src, span.start);
        ConfigError { file: self.file.to_string(), line, column, key: key.to_string(), message }
    }

    /// An error at `span`.
    pub fn err(&mut self, span: Range<usize>, key: &str, message: impl Into<String>) {
        let e = self.located(span, key, message.into());
        self.errors.push(e);
    }

    /// A warning at `span`: the file is usable but something is probably wrong.
    pub fn warn(&mut self, span: Range<usize>, key: &str, message: impl Into<String>) {
        let e = self.located(span, key, message.into());
        self.warnings.push(e);
    }

    /// Checks `lo <= v <= hi` and finiteness; records an error otherwise.
    pub fn range(&mut self, v: &Spanned<f64>, key: &str, lo: f64, hi: f64, what: &str) -> f64 {
        let x = *v.get_ref();
        if !x.is_finite() || x < lo || x > hi {
            // An open upper end is said in words, not as a 309-digit number.
            let range = if hi >= 1e300 { format!("{lo} or more") } else { format!("{lo} to {hi}") };
            self.err(v.span(), key, format!("expected {what} ({range}), found {x}"));
        }
        x
    }

    /// Checks `v > 0` and finiteness.
    pub fn positive(&mut self, v: &Spanned<f64>, key: &str, what: &str) -> f64 {
        let x = *v.get_ref();
        if !x.is_finite() || x <= 0.0 {
            self.err(v.span(), key, format!("expected {what} above 0, found {x}"));
        }
        x
    }

    /// Deserialises the whole file into a raw structure, translating serde's
    /// message into "expected …, found …" with the key located.
    pub fn parse<T: DeserializeOwned>(&mut self) -> Option<T> {
        match toml::from_str::<T>(self.src) {
            Ok(v) => Some(v),
            Err(e) => {
                let span = e.span().unwrap_or(0..0);
                let mut key = locate::key_path_at(self.src, span.start);
                // toml gives a key missing from the top level no span (or an
                // empty one at 0): it is a top-level key, not one under the
                // key that happens to stand on the first line.
                let top_level = e.span().is_none_or(|s| s.is_empty() && s.start == 0);
                let mut message = humanise(e.message(), &mut key, top_level);
                // `[[chassis]]` where `[chassis]` belongs: serde reads the
                // array as a struct's fields in order and complains about a map.
                if let Some(base) = key.strip_suffix("[0]")
                    && message.ends_with("found map")
                    && self.src.lines().any(|l| l.trim() == format!("[[{base}]]"))
                {
                    message = format!("expected one table `[{base}]`, found an array of tables `[[{base}]]`");
                    key = base.to_string();
                }
                let err = self.located(span, &key, message);
                self.errors.push(err);
                None
            }
        }
    }
}

/// Rewrites serde's wording into termvel's: what was expected first.
fn humanise(msg: &str, key: &mut String, top_level: bool) -> String {
    let msg = msg.trim();
    if let Some(rest) = msg.strip_prefix("invalid type: ")
        && let Some((found, expected)) = rest.split_once(", expected ")
    {
        return format!("expected {}, found {}", plain_type(expected), found);
    }
    if let Some(rest) = msg.strip_prefix("invalid value: ")
        && let Some((found, expected)) = rest.split_once(", expected ")
    {
        return format!("expected {}, found {}", plain_type(expected), found);
    }
    if let Some(rest) = msg.strip_prefix("invalid length ")
        && let Some((found, expected)) = rest.split_once(", expected an array of length ")
    {
        return format!("expected a list of {expected} values, found {found}");
    }
    if let Some(rest) = msg.strip_prefix("unknown field ") {
        let (field, allowed) = rest.split_once(", expected ").unwrap_or((rest, ""));
        // The key is named once in full (cut) in the location already.
        let field = crate::printable::clipped(field, 60);
        let allowed = allowed.strip_prefix("one of ").unwrap_or(allowed);
        return if allowed.is_empty() {
            format!("unknown key {field}; this table takes no keys")
        } else {
            format!("unknown key {field}; expected one of {allowed}")
        };
    }
    if let Some(rest) = msg.strip_prefix("missing field ") {
        let name = rest.trim_matches('`');
        if key.is_empty() || top_level {
            *key = name.to_string();
        } else {
            key.push('.');
            key.push_str(name);
        }
        return format!("missing key `{name}`");
    }
    if msg.starts_with("string values must be quoted") {
        return "expected a value: a number, \"quoted text\", true or false, or a [list]; \
                units belong in the key's name (e.g. period_ms = 10), not after the number"
            .to_string();
    }
    if let Some(rest) = msg.strip_prefix("unknown variant ") {
        let (found, allowed) = rest.split_once(", expected ").unwrap_or((rest, "?"));
        return format!("expected {allowed}, found {found}");
    }
    msg.to_string()
}

fn plain_type(t: &str) -> String {
    match t {
        "f64" | "f32" => "a number".to_string(),
        "u8" => "a whole number from 0 to 255".to_string(),
        "u16" => "a whole number from 0 to 65535".to_string(),
        "u32" => "a whole number from 0 to 4294967295".to_string(),
        "u64" | "usize" => "a whole number ≥ 0".to_string(),
        "i8" | "i16" | "i32" | "i64" => "a whole number".to_string(),
        "a boolean" | "bool" => "true or false".to_string(),
        other => other.to_string(),
    }
}

#[derive(serde::Deserialize)]
struct KindOnly {
    kind: Option<Spanned<String>>,
}

/// Reads the `kind` key of a file.
pub fn detect_kind(file: &str, src: &str) -> Result<ConfigKind, ConfigError> {
    let mut ctx = Ctx::new(file, src);
    let Some(k) = ctx.parse::<KindOnly>() else {
        return Err(ctx.errors.remove(0));
    };
    let expected = "expected one of \"vehicle\", \"track\", \"signals\", \"alerts\", \"plan\"";
    match k.kind {
        None => Err(ConfigError {
            file: file.to_string(),
            line: 1,
            column: 1,
            key: "kind".into(),
            message: format!("missing key `kind`; every termvel config names its kind: {expected}"),
        }),
        Some(s) => ConfigKind::parse(s.get_ref()).ok_or_else(|| {
            let (line, column) = locate::line_col(src, s.span().start);
            ConfigError {
                file: file.to_string(),
                line,
                column,
                key: "kind".into(),
                message: format!("{expected}, found \"{}\"", s.get_ref()),
            }
        }),
    }
}

/// One validated file.
#[derive(Clone, Debug)]
#[allow(clippy::large_enum_variant)] // built once per file read
pub enum Parsed {
    Vehicle(Vehicle),
    Track(Track),
    Signals(Signals),
    Alerts(Alerts),
    Plan(run_plan::Plan),
}

/// Result of validating one file: the value (if valid) and any warnings.
pub struct FileReport {
    pub origin: String,
    pub kind: Option<ConfigKind>,
    pub parsed: Option<Parsed>,
    pub errors: Vec<ConfigError>,
    pub warnings: Vec<ConfigError>,
}

/// Validates one file's text.
pub fn validate_text(origin: &str, text: &str) -> FileReport {
    let kind = match detect_kind(origin, text) {
        Ok(k) => k,
        Err(e) => {
            return FileReport { origin: origin.into(), kind: None, parsed: None, errors: vec![e], warnings: vec![] };
        }
    };
    let mut ctx = Ctx::new(origin, text);
    let parsed = match kind {
        ConfigKind::Vehicle => vehicle::validate(&mut ctx).map(Parsed::Vehicle),
        ConfigKind::Track => track::validate(&mut ctx).map(Parsed::Track),
        ConfigKind::Signals => signals::validate(&mut ctx).map(Parsed::Signals),
        ConfigKind::Alerts => alerts::validate(&mut ctx).map(Parsed::Alerts),
        ConfigKind::Plan => run_plan::validate(&mut ctx).map(Parsed::Plan),
    };
    let parsed = if ctx.errors.is_empty() { parsed } else { None };
    FileReport { origin: origin.into(), kind: Some(kind), parsed, errors: ctx.errors, warnings: ctx.warnings }
}

/// Everything a run needs, validated.
#[derive(Clone, Debug)]
pub struct ConfigSet {
    pub vehicle: Vehicle,
    pub track: Track,
    pub signals: Signals,
    pub alerts: Alerts,
    /// The texts these came from, in kind order, for embedding in recordings.
    pub texts: Vec<ConfigText>,
}

/// The demo configuration compiled into the binary, so `termvel` runs from
/// anywhere.
pub const EMBEDDED: &[(&str, &str)] = &[
    ("vehicle.toml", include_str!("../../config/vehicle.toml")),
    ("track.toml", include_str!("../../config/track.toml")),
    ("signals.toml", include_str!("../../config/signals.toml")),
    ("alerts.toml", include_str!("../../config/alerts.toml")),
];

impl ConfigSet {
    /// The built-in demo set.
    pub fn embedded() -> ConfigSet {
        let texts = EMBEDDED.iter().map(|(n, t)| (format!("<embedded>/{n}"), t.to_string())).collect();
        ConfigSet::from_texts(texts).expect("the embedded demo config is valid (tested)")
    }

    /// Builds a set from (origin, text) pairs. Missing vehicle, track or
    /// signals files are errors; a missing alerts file means no custom rules
    /// and default limits.
    pub fn from_texts(files: Vec<(String, String)>) -> Result<ConfigSet, ConfigErrors> {
        let mut errors = Vec::new();
        let mut vehicle = None;
        let mut track = None;
        let mut signals = None;
        let mut alerts = None;
        let mut texts = Vec::new();
        for (origin, text) in files {
            let report = validate_text(&origin, &text);
            errors.extend(report.errors);
            let Some(kind) = report.kind else { continue };
            if kind == ConfigKind::Plan {
                continue;
            }
            if texts.iter().any(|t: &ConfigText| t.kind == kind) {
                errors.push(ConfigError {
                    file: origin.clone(),
                    line: 1,
                    column: 1,
                    key: "kind".into(),
                    message: format!("a second {} config in one set; give one file per kind", kind.as_str()),
                });
                continue;
            }
            texts.push(ConfigText { kind, origin: origin.clone(), text });
            match report.parsed {
                Some(Parsed::Vehicle(v)) => vehicle = Some(v),
                Some(Parsed::Track(t)) => track = Some(t),
                Some(Parsed::Signals(s)) => signals = Some(s),
                Some(Parsed::Alerts(a)) => alerts = Some(a),
                Some(Parsed::Plan(_)) | None => {}
            }
        }
        for (kind, present) in [
            (ConfigKind::Vehicle, texts.iter().any(|t| t.kind == ConfigKind::Vehicle)),
            (ConfigKind::Track, texts.iter().any(|t| t.kind == ConfigKind::Track)),
            (ConfigKind::Signals, texts.iter().any(|t| t.kind == ConfigKind::Signals)),
        ] {
            if !present {
                errors.push(ConfigError {
                    file: "(config set)".into(),
                    line: 0,
                    column: 0,
                    key: String::new(),
                    message: format!(
                        "no {} config in the set; give a file with kind = \"{}\"",
                        kind.as_str(),
                        kind.as_str()
                    ),
                });
            }
        }
        if !errors.is_empty() {
            return Err(ConfigErrors(errors));
        }
        texts.sort_by_key(|t| t.kind);
        Ok(ConfigSet {
            vehicle: vehicle.expect("checked"),
            track: track.expect("checked"),
            signals: signals.expect("checked"),
            alerts: alerts.unwrap_or_default(),
            texts,
        })
    }

    /// Loads files and directories (every `*.toml` in a directory, sorted).
    /// Plan files in a directory are skipped; they are not part of a set.
    pub fn load(paths: &[PathBuf]) -> Result<ConfigSet, ConfigErrors> {
        let files = read_paths(paths)?;
        ConfigSet::from_texts(files)
    }
}

/// Largest config file read. The biggest real signal maps are a few hundred
/// kilobytes; a limit keeps `/dev/zero` or a wrong file from filling memory.
pub const MAX_CONFIG_BYTES: u64 = 4 << 20;

/// Reads one config file: a regular file of at most [`MAX_CONFIG_BYTES`] in
/// UTF-8. A device, a pipe, a directory, a larger file or bytes that are not
/// UTF-8 (located by line and column) are errors naming the file.
pub fn read_config_file(p: &Path) -> Result<String, ConfigError> {
    use std::io::Read as _;
    let at = |line: usize, column: usize, message: String| ConfigError {
        file: p.display().to_string(),
        line,
        column,
        key: String::new(),
        message,
    };
    let meta = std::fs::metadata(p).map_err(|e| io_error(p, &e))?;
    if meta.is_dir() {
        return Err(at(0, 0, "is a directory, expected a config file".into()));
    }
    if !meta.is_file() {
        return Err(at(0, 0, "is not a regular file (a device, pipe or socket); expected a config file".into()));
    }
    if meta.len() > MAX_CONFIG_BYTES {
        return Err(at(
            0,
            0,
            format!("is {} bytes; config files are limited to {} MiB", meta.len(), MAX_CONFIG_BYTES >> 20),
        ));
    }
    let mut bytes = Vec::new();
    let f = std::fs::File::open(p).map_err(|e| io_error(p, &e))?;
    // The size was checked, but a file can grow between the two calls.
    f.take(MAX_CONFIG_BYTES + 1).read_to_end(&mut bytes).map_err(|e| io_error(p, &e))?;
    if bytes.len() as u64 > MAX_CONFIG_BYTES {
        return Err(at(0, 0, format!("is larger than {} MiB, the limit for config files", MAX_CONFIG_BYTES >> 20)));
    }
    String::from_utf8(bytes).map_err(|e| {
        let good = &e.as_bytes()[..e.utf8_error().valid_up_to()];
        let good = std::str::from_utf8(good).expect("valid up to here");
        let (line, column) = locate::line_col(good, good.len());
        let byte = e.as_bytes()[good.len()];
        at(line, column, format!("expected UTF-8 text, found the byte 0x{byte:02X}"))
    })
}

/// Reads files and the `*.toml` files of directories, as (origin, text).
pub fn read_paths(paths: &[PathBuf]) -> Result<Vec<(String, String)>, ConfigErrors> {
    let (out, errors) = read_paths_partial(paths);
    if errors.is_empty() { Ok(out) } else { Err(ConfigErrors(errors)) }
}

/// As [`read_paths`], but keeps every file that could be read beside the
/// errors of those that could not, so `check` reports all of them: one
/// unreadable file must not hide the others' problems.
pub fn read_paths_partial(paths: &[PathBuf]) -> (Vec<(String, String)>, Vec<ConfigError>) {
    let mut out = Vec::new();
    let mut errors = Vec::new();
    for p in paths {
        if p.is_dir() {
            let mut entries: Vec<PathBuf> = match std::fs::read_dir(p) {
                Ok(rd) => rd
                    .filter_map(|e| e.ok().map(|e| e.path()))
                    .filter(|p| p.extension().is_some_and(|e| e == "toml"))
                    .collect(),
                Err(e) => {
                    errors.push(io_error(p, &e));
                    continue;
                }
            };
            entries.sort();
            for e in entries {
                match read_config_file(&e) {
                    Ok(t) => {
                        // Plans live beside the set but are not part of it.
                        if detect_kind(&e.display().to_string(), &t).ok() != Some(ConfigKind::Plan) {
                            out.push((e.display().to_string(), t));
                        }
                    }
                    Err(err) => errors.push(err),
                }
            }
        } else {
            match read_config_file(p) {
                Ok(t) => out.push((p.display().to_string(), t)),
                Err(e) => errors.push(e),
            }
        }
    }
    (out, errors)
}

fn io_error(p: &Path, e: &std::io::Error) -> ConfigError {
    ConfigError {
        file: p.display().to_string(),
        line: 0,
        column: 0,
        key: String::new(),
        message: format!("cannot read: {e}"),
    }
}

/// Piecewise-linear interpolation in a table sorted by `xs`, clamped at the ends.
pub fn interp(xs: &[f64], ys: &[f64], x: f64) -> f64 {
    debug_assert_eq!(xs.len(), ys.len());
    match xs.len() {
        0 => 0.0,
        1 => ys[0],
        n => {
            if x <= xs[0] {
                return ys[0];
            }
            if x >= xs[n - 1] {
                return ys[n - 1];
            }
            let i = xs.partition_point(|&v| v <= x).clamp(1, n - 1);
            let (x0, x1, y0, y1) = (xs[i - 1], xs[i], ys[i - 1], ys[i]);
            y0 + (y1 - y0) * (x - x0) / (x1 - x0)
        }
    }
}

/// Checks a table of (x, y) points: at least `min_points`, x strictly
/// increasing, all finite. Returns the columns.
pub fn check_table(
    ctx: &mut Ctx<'_>,
    pts: &Spanned<Vec<[f64; 2]>>,
    key: &str,
    what: &str,
    min_points: usize,
) -> (Vec<f64>, Vec<f64>) {
    let v = pts.get_ref();
    if v.len() < min_points {
        let n = if min_points == 1 { "one".to_string() } else { min_points.to_string() };
        let s = if min_points == 1 { "" } else { "s" };
        ctx.err(pts.span(), key, format!("expected at least {n} [{what}] point{s}, found {}", v.len()));
    }
    for (i, w) in v.windows(2).enumerate() {
        if w[1][0] <= w[0][0] {
            ctx.err(
                pts.span(),
                key,
                format!(
                    "expected increasing first values; point {} ({}) is not above point {} ({})",
                    i + 1,
                    w[1][0],
                    i,
                    w[0][0]
                ),
            );
            break;
        }
    }
    if v.iter().flatten().any(|x| !x.is_finite()) {
        ctx.err(pts.span(), key, "expected finite numbers, found nan or inf");
    }
    (v.iter().map(|p| p[0]).collect(), v.iter().map(|p| p[1]).collect())
}

/// The demo run plan compiled into the binary; its file names refer to
/// the embedded set.
pub const EMBEDDED_PLAN: (&str, &str) = ("demo-plan.toml", include_str!("../../config/demo-plan.toml"));

/// Loads a run plan and the config set it names. `None`: the embedded demo.
/// A plan's file names are relative to its directory; `override_set`
/// replaces them (the `--config` option). A problem with a named file is
/// reported at the plan's own line and key (see [`plan_references`]).
pub fn load_plan(path: Option<&Path>, override_set: &[PathBuf]) -> Result<(run_plan::Plan, ConfigSet), ConfigErrors> {
    let (origin, text) = match path {
        None => (format!("<embedded>/{}", EMBEDDED_PLAN.0), EMBEDDED_PLAN.1.to_string()),
        Some(p) => match read_config_file(p) {
            Ok(t) => (p.display().to_string(), t),
            Err(e) => return Err(ConfigErrors(vec![e])),
        },
    };
    let report = validate_text(&origin, &text);
    let plan = match (report.kind, report.parsed) {
        (_, Some(Parsed::Plan(p))) => p,
        (Some(k), Some(_)) => {
            return Err(ConfigErrors(vec![ConfigError {
                file: origin,
                line: 1,
                column: 1,
                key: "kind".into(),
                message: format!("expected a run plan (kind = \"plan\"), found a {} config", k.as_str()),
            }]));
        }
        _ => return Err(ConfigErrors(report.errors)),
    };
    if !override_set.is_empty() {
        return Ok((plan, ConfigSet::load(override_set)?));
    }
    let Some(path) = path else {
        return Ok((plan, ConfigSet::embedded()));
    };
    let (files, errors) = plan_references(&plan, path);
    if !errors.is_empty() {
        return Err(ConfigErrors(errors));
    }
    Ok((plan, ConfigSet::from_texts(files)?))
}

/// Reads and validates the config files a plan at `plan_path` names: each
/// must be a readable file other than the plan itself, of the kind its key
/// says, and valid. Returns the texts read and the errors, each located at
/// the plan's line and key (followed by the named file's own errors).
pub fn plan_references(plan: &run_plan::Plan, plan_path: &Path) -> (Vec<(String, String)>, Vec<ConfigError>) {
    let origin = plan_path.display().to_string();
    let dir = plan_path.parent().unwrap_or(Path::new("."));
    let mut files = Vec::new();
    let mut errors = Vec::new();
    let at = |r: &run_plan::FileRef, message: String| ConfigError {
        file: origin.clone(),
        line: r.line,
        column: r.column,
        key: r.key.to_string(),
        message,
    };
    for key in ["vehicle", "track", "signals"] {
        if !plan.refs.iter().any(|r| r.key == key) {
            errors.push(ConfigError {
                file: origin.clone(),
                line: 1,
                column: 1,
                key: key.into(),
                message: format!("missing key `{key}`: the plan must name its {key} file (or give --config)"),
            });
        }
    }
    let plan_id = std::fs::canonicalize(plan_path).ok();
    for r in &plan.refs {
        let target = dir.join(&r.name);
        if plan_id.is_some() && std::fs::canonicalize(&target).ok() == plan_id {
            errors.push(at(r, format!("expected a {} file, found the plan itself ({})", r.kind.as_str(), r.name)));
            continue;
        }
        let text = match read_config_file(&target) {
            Ok(t) => t,
            Err(e) => {
                errors.push(at(r, format!("cannot use {}: {}", target.display(), e.message)));
                continue;
            }
        };
        let name = target.display().to_string();
        let report = validate_text(&name, &text);
        match report.kind {
            Some(k) if k != r.kind => {
                errors.push(at(
                    r,
                    format!("expected a {} file, found a {} config in {name}", r.kind.as_str(), k.as_str()),
                ));
            }
            _ if !report.errors.is_empty() => {
                let n = report.errors.len();
                errors.push(at(
                    r,
                    format!(
                        "the {} file {name} is not valid ({n} error{}, below)",
                        r.kind.as_str(),
                        if n == 1 { "" } else { "s" }
                    ),
                ));
                errors.extend(report.errors);
            }
            _ => files.push((name, text)),
        }
    }
    (files, errors)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn embedded_set_is_valid() {
        let set = ConfigSet::embedded();
        assert!(set.signals.messages.len() >= 5);
        assert_eq!(set.texts.len(), 4);
    }

    #[test]
    fn interp_clamps_and_interpolates() {
        let xs = [0.0, 10.0, 20.0];
        let ys = [0.0, 100.0, 50.0];
        assert_eq!(interp(&xs, &ys, -5.0), 0.0);
        assert_eq!(interp(&xs, &ys, 5.0), 50.0);
        assert_eq!(interp(&xs, &ys, 15.0), 75.0);
        assert_eq!(interp(&xs, &ys, 25.0), 50.0);
        assert_eq!(interp(&xs, &ys, 10.0), 100.0);
    }

    #[test]
    fn kind_is_required_and_checked() {
        let e = detect_kind("f.toml", "name = 1\n").unwrap_err();
        assert_eq!((e.line, e.key.as_str()), (1, "kind"));
        let e = detect_kind("f.toml", "\nkind = \"boat\"\n").unwrap_err();
        assert_eq!((e.line, e.column), (2, 8));
        assert!(e.message.contains("found \"boat\""), "{}", e.message);
    }

    #[test]
    fn missing_kinds_are_named() {
        let err = ConfigSet::from_texts(vec![]).unwrap_err();
        let text = err.to_string();
        assert!(text.contains("no vehicle config"), "{text}");
        assert!(text.contains("no signals config"), "{text}");
    }
}
