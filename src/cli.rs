//! Command-line arguments as written (clap, derive). Validation of values
//! happens here; turning them into settings happens in [`crate::cmd`].

use std::path::PathBuf;

use clap::{Args, Parser, Subcommand};

use crate::event::TimeNs;

#[derive(Parser, Debug)]
#[command(
    name = "termvel",
    version,
    about = "Telemetry, derived quantities and projections for high-speed runs, in the terminal.",
    long_about = "Telemetry, derived quantities and projections for high-speed runs, in the terminal.\n\nWith no command, termvel rehearses the bundled demo plan on the run screen.",
    after_help = "Advisory only: the run director, track officials and local rules decide; termvel is not a safety system."
)]
pub struct Cli {
    #[command(subcommand)]
    pub command: Option<Command>,
}

#[derive(Subcommand, Debug)]
pub enum Command {
    /// Rehearse a run plan with the simulator, on the screens or headless.
    #[command(mut_arg("config", |a| a.help(REHEARSE_CONFIG_HELP)))]
    Rehearse(RehearseArgs),
    /// Replay a termvel recording or a candump -L log.
    Replay(ReplayArgs),
    /// Watch a run live from SocketCAN and serial inputs.
    #[command(mut_arg("config", |a| a.help(LIVE_CONFIG_HELP)))]
    Live(LiveArgs),
    /// Summarise a recorded run: peaks, derating, estimates, alerts, data quality.
    Report(ReportArgs),
    /// Export every channel and derived quantity to CSV or Parquet.
    Export(ExportArgs),
    /// Plan a run: predicted peak, best boost start, probabilities.
    Plan(PlanArgs),
    /// Before the run: what it takes to reach a speed (power, time, battery, sensitivities).
    Envelope(EnvelopeArgs),
    /// Validate config files and print what they define, without running anything.
    Check(CheckArgs),
    /// Write the man pages and the bash, zsh and fish completions into a directory.
    ShellFiles(ShellFilesArgs),
    /// Follow a run shared through an MQTT broker (`--share` on the reading station).
    Follow(FollowArgs),
}

/// `--config` of `rehearse` and `live`: [`RunOpts`] words it for replay
/// (where a recording carries its own set), wrong for these two.
const REHEARSE_CONFIG_HELP: &str =
    "Config files or directories to use instead of those the plan names (or the built-in demo set).";
const LIVE_CONFIG_HELP: &str =
    "Config files or directories: car, track, signal map, alerts (default: the built-in demo set).";

#[derive(Args, Debug)]
pub struct ShellFilesArgs {
    /// Where to write them (created if missing): man/man1/ and completions/ below it.
    #[arg(value_name = "DIR")]
    pub dir: PathBuf,
}

#[derive(Args, Debug)]
pub struct ReportArgs {
    /// A termvel recording or a candump -L log; give a second to compare the two runs.
    #[arg(required = true, num_args = 1..=2, value_name = "FILE")]
    pub files: Vec<PathBuf>,
    /// Print the summary as one JSON document (schema in the README).
    #[arg(long)]
    pub json: bool,
    /// Write the plots (SVG and PNG) into this directory.
    #[arg(long, value_name = "DIR")]
    pub plots: Option<PathBuf>,
    /// Config files or directories to use instead of the recording's own (or the built-in demo set).
    #[arg(long = "config", short = 'c', value_name = "PATH")]
    pub config: Vec<PathBuf>,
}

#[derive(Clone, Copy, Debug, PartialEq, Eq, clap::ValueEnum)]
pub enum ExportFormat {
    Csv,
    Parquet,
}

#[derive(Args, Debug)]
pub struct ExportArgs {
    /// A termvel recording or a candump -L log.
    pub file: PathBuf,
    /// Output format.
    #[arg(long = "to", value_enum, value_name = "FORMAT")]
    pub to: ExportFormat,
    /// The file to write.
    #[arg(long, value_name = "PATH")]
    pub out: PathBuf,
    /// Common time base: one row per tick at this rate (e.g. 50Hz, 10Hz).
    #[arg(long, value_name = "RATE", default_value = "50Hz", value_parser = crate::report::table_export::parse_rate)]
    pub rate: TimeNs,
    /// Raw samples, long form (time, channel, value, unit, source, flag), instead of resampled columns; derived quantities come at --rate.
    #[arg(long)]
    pub long: bool,
    /// Config files or directories to use instead of the recording's own (or the built-in demo set).
    #[arg(long = "config", short = 'c', value_name = "PATH")]
    pub config: Vec<PathBuf>,
}

/// Options every running command shares.
#[derive(Args, Debug, Clone)]
pub struct RunOpts {
    /// Print snapshots as JSON lines instead of drawing the screens.
    #[arg(long)]
    pub headless: bool,
    /// Stream time between snapshots (e.g. 100ms, 0.25s, 1s).
    #[arg(long, value_name = "DURATION", default_value = "100ms", value_parser = parse_duration_ns)]
    pub every: TimeNs,
    /// Do not record this session.
    #[arg(long)]
    pub no_record: bool,
    /// Directory for the recording (default: the platform's data directory).
    #[arg(long, value_name = "DIR")]
    pub record_dir: Option<PathBuf>,
    /// Config files or directories to use instead of the recording's own (or the built-in demo set).
    #[arg(long = "config", short = 'c', value_name = "PATH")]
    pub config: Vec<PathBuf>,
    /// After the screens close, say on stderr how they kept up (frames drawn, the longest gap between two); the log has it always.
    #[arg(long)]
    pub verbose: bool,
    #[command(flatten)]
    pub share: ShareOpts,
}

impl Default for RunOpts {
    fn default() -> Self {
        RunOpts {
            headless: false,
            every: 100_000_000,
            no_record: false,
            record_dir: None,
            config: Vec::new(),
            verbose: false,
            share: ShareOpts::default(),
        }
    }
}

/// Sharing a run through an MQTT broker (off unless `--share` is given:
/// termvel opens no network connection unless asked).
#[derive(Args, Debug, Clone, Default)]
pub struct ShareOpts {
    /// Share this run through an MQTT broker: mqtt://HOST[:PORT], or mqtts://HOST[:PORT] for TLS. Credentials come from --share-credentials or the environment, never the URL.
    #[arg(long, value_name = "URL")]
    pub share: Option<String>,
    /// Topic prefix of the shared run.
    #[arg(long, value_name = "PREFIX", default_value = "termvel", requires = "share")]
    pub share_topic: String,
    /// Broker credentials: a TOML file (username = "…", password = "…") readable by you only. Default: TERMVEL_SHARE_USERNAME and TERMVEL_SHARE_PASSWORD.
    #[arg(long, value_name = "FILE", requires = "share")]
    pub share_credentials: Option<PathBuf>,
    /// CA certificate (PEM) that signed the broker's, for mqtts:// (default: the system's).
    #[arg(long, value_name = "FILE", requires = "share")]
    pub share_ca: Option<PathBuf>,
    /// This station's certificate (PEM), for a broker that asks for one (mqtts://; needs --share-key and --share-ca).
    #[arg(long, value_name = "FILE", requires_all = ["share", "share_key"])]
    pub share_cert: Option<PathBuf>,
    /// The private key (PEM) of --share-cert, readable by you only.
    #[arg(long, value_name = "FILE", requires_all = ["share", "share_cert"])]
    pub share_key: Option<PathBuf>,
    /// Take acknowledgements and marks that followers send back (PREFIX/control/USERNAME; the broker's ACL says who may). Off by default: a run takes no orders unless asked.
    #[arg(long, requires = "share")]
    pub share_accept_control: bool,
    /// Also share the raw events, in batches every 100 ms of stream time, so another station can keep a full recording.
    #[arg(long, requires = "share")]
    pub share_events: bool,
}

#[derive(Args, Debug)]
pub struct FollowArgs {
    /// The broker: mqtt://HOST[:PORT] or mqtts://HOST[:PORT].
    #[arg(value_name = "URL")]
    pub url: String,
    /// Topic prefix of the shared run.
    #[arg(long, value_name = "PREFIX", default_value = "termvel")]
    pub topic: String,
    /// Print every message received as a JSON line instead of drawing the screens (the screens need the reading station's --share-events; this does not).
    #[arg(long)]
    pub headless: bool,
    /// Record the followed run into this directory (from the shared event batches; a follower records only when asked: the reading station's recording is the record of truth).
    #[arg(long, value_name = "DIR")]
    pub record_dir: Option<PathBuf>,
    /// Stop after this long (e.g. 90s, 10min); default: until the run ends or Ctrl-C.
    #[arg(long = "for", value_name = "DURATION", value_parser = parse_session_length)]
    pub for_ns: Option<TimeNs>,
    /// Broker credentials: a TOML file (username = "…", password = "…") readable by you only. Default: TERMVEL_SHARE_USERNAME and TERMVEL_SHARE_PASSWORD.
    #[arg(long, value_name = "FILE")]
    pub credentials: Option<PathBuf>,
    /// CA certificate (PEM) that signed the broker's, for mqtts://.
    #[arg(long, value_name = "FILE")]
    pub ca: Option<PathBuf>,
    /// This station's certificate (PEM), for a broker that asks for one (mqtts://; needs --key and --ca).
    #[arg(long, value_name = "FILE", requires = "key")]
    pub cert: Option<PathBuf>,
    /// The private key (PEM) of --cert, readable by you only.
    #[arg(long, value_name = "FILE", requires = "cert")]
    pub key: Option<PathBuf>,
    /// Read acknowledgements and marks from standard input, one a line (`ack KEY`, `mark [NOTE]`), and send them to the reading station (which must run with --share-accept-control; the broker's ACL says who may send).
    #[arg(long, requires = "headless")]
    pub send_from_stdin: bool,
    /// On the screens, send `a` (acknowledge the alerts shown) and `m` (a mark) to the reading station (which must run with --share-accept-control; the broker's ACL says who may send). Without it the screens are read-only.
    #[arg(long, conflicts_with = "headless")]
    pub send_keys: bool,
}

#[derive(Args, Debug)]
pub struct ReplayArgs {
    /// A termvel recording (.tvrec) or a candump -L log.
    pub file: PathBuf,
    #[command(flatten)]
    pub run: RunOpts,
    /// Pace at this factor of real time (0.1 to 64). Screens start at 1; headless runs go as fast as possible unless this is given.
    #[arg(long, value_name = "FACTOR", value_parser = parse_speed)]
    pub speed: Option<f64>,
    /// Replay as fast as possible.
    #[arg(long, alias = "fast", conflicts_with = "speed")]
    pub as_fast_as_possible: bool,
    /// Start paused.
    #[arg(long)]
    pub paused: bool,
}

#[derive(Args, Debug, Default)]
pub struct RehearseArgs {
    /// A run plan (.toml, kind = "plan"); default: the built-in demo plan.
    pub plan: Option<PathBuf>,
    #[command(flatten)]
    pub run: RunOpts,
    /// Pace at this factor of real time (0.1 to 64). Screens start at 1; headless runs go as fast as possible unless this is given.
    #[arg(long, value_name = "FACTOR", value_parser = parse_speed)]
    pub speed: Option<f64>,
    /// Run as fast as possible.
    #[arg(long, alias = "fast", conflicts_with = "speed")]
    pub as_fast_as_possible: bool,
    /// Start paused.
    #[arg(long)]
    pub paused: bool,
}

#[derive(Args, Debug)]
pub struct LiveArgs {
    /// A SocketCAN interface (repeatable), e.g. can0.
    #[arg(long = "can", value_name = "IFACE", value_parser = parse_iface)]
    pub can: Vec<String>,
    /// A serial port (repeatable): PATH[,baud=N][,proto=nmea|slcan|lines][,bitrate=N][,name=NAME].
    #[arg(long = "serial", value_name = "SPEC")]
    pub serial: Vec<crate::sources::serial_port::SerialSpec>,
    /// Take every CAN id, not only the signal map's.
    #[arg(long)]
    pub all_ids: bool,
    /// End the session after this long (e.g. 90s, 10min).
    #[arg(long = "for", value_name = "DURATION", value_parser = parse_session_length)]
    pub for_ns: Option<TimeNs>,
    #[command(flatten)]
    pub run: RunOpts,
}

fn parse_session_length(s: &str) -> Result<TimeNs, String> {
    let s = s.trim();
    if let Some(h) = s.strip_suffix('h')
        && let Ok(h) = h.parse::<f64>()
        && (0.0..=24.0 * 7.0).contains(&h)
    {
        return Ok((h * 3600e9) as TimeNs);
    }
    parse_duration_ns(s)
}

#[derive(Args, Debug)]
pub struct PlanArgs {
    /// A run plan (.toml, kind = "plan"); default: the built-in demo plan.
    pub plan: Option<PathBuf>,
    /// Monte Carlo trials.
    #[arg(long, default_value_t = 10_000, value_parser = clap::value_parser!(u32).range(1..=10_000_000))]
    pub trials: u32,
    /// Seed of the Monte Carlo (default: the plan's seed).
    #[arg(long)]
    pub seed: Option<u64>,
    /// Threads for the Monte Carlo (default: one per core).
    #[arg(long)]
    pub threads: Option<usize>,
    /// One JSON document instead of text.
    #[arg(long)]
    pub json: bool,
    /// Config files or directories instead of those the plan names.
    #[arg(long = "config", short = 'c', value_name = "PATH")]
    pub config: Vec<PathBuf>,
}

#[derive(Args, Debug)]
pub struct EnvelopeArgs {
    /// A run plan (.toml, kind = "plan") for the car, course and weather; default: the built-in demo plan, or no plan when --config is given.
    pub plan: Option<PathBuf>,
    /// Config files or directories (vehicle, track, signals); without a plan the air is the standard atmosphere unless given.
    #[arg(long = "config", short = 'c', value_name = "PATH")]
    pub config: Vec<PathBuf>,
    /// Step of the speed table, km/h.
    #[arg(long, value_name = "KMH", default_value_t = 20.0)]
    pub step: f64,
    /// Time and distance from this speed, km/h (default 0 when --to is given).
    #[arg(long, value_name = "KMH")]
    pub from: Option<f64>,
    /// Time and distance to this speed, km/h (default the target when --from is given).
    #[arg(long, value_name = "KMH")]
    pub to: Option<f64>,
    /// The speed to reach, km/h (default: the track's target).
    #[arg(long, value_name = "KMH")]
    pub target_kmh: Option<f64>,
    /// Margin above the target to give the power to hold for, km/h.
    #[arg(long, value_name = "KMH", default_value_t = 10.0)]
    pub margin_kmh: f64,
    /// Air temperature, °C (the rest of the air from the plan, or the standard atmosphere).
    #[arg(long, value_name = "C", allow_hyphen_values = true)]
    pub air_temp_c: Option<f64>,
    /// Air pressure, hPa.
    #[arg(long, value_name = "HPA")]
    pub air_pressure_hpa: Option<f64>,
    /// Relative humidity, %.
    #[arg(long, value_name = "PCT")]
    pub humidity_pct: Option<f64>,
    /// Air density, kg/m³, instead of temperature, pressure and humidity.
    #[arg(long, value_name = "KG_M3", conflicts_with_all = ["air_temp_c", "air_pressure_hpa", "humidity_pct", "standard_air"])]
    pub air_density: Option<f64>,
    /// Use the standard atmosphere at the track's elevation even when the plan has weather.
    #[arg(long)]
    pub standard_air: bool,
    /// Headwind along the run, m/s (negative: tailwind; default the plan's, or 0).
    #[arg(long, value_name = "MPS", allow_hyphen_values = true)]
    pub wind_mps: Option<f64>,
    /// Take the road as level instead of the track's mean grade.
    #[arg(long)]
    pub level: bool,
    /// One JSON document instead of text.
    #[arg(long)]
    pub json: bool,
    /// Write the plots (SVG) into this directory.
    #[arg(long, value_name = "DIR")]
    pub plots: Option<PathBuf>,
}

#[derive(Args, Debug)]
pub struct CheckArgs {
    /// Config files or directories (default: ./config if present, else the built-in demo set).
    pub files: Vec<PathBuf>,
}

/// Parses `100ms`, `0.25s`, `1s`, `500us`, `2min`, `1h` into nanoseconds.
pub fn parse_duration_ns(s: &str) -> Result<TimeNs, String> {
    let s = s.trim();
    let split = s.find(|c: char| !(c.is_ascii_digit() || c == '.')).unwrap_or(s.len());
    let (num, unit) = s.split_at(split);
    let v: f64 = num.parse().map_err(|_| format!("expected a duration like 100ms or 0.25s, found \"{s}\""))?;
    let scale = match unit.trim() {
        "ns" => 1.0,
        "us" | "µs" => 1e3,
        "ms" => 1e6,
        "s" | "" => 1e9,
        "min" => 60e9,
        "h" => 3600e9,
        other => return Err(format!("expected a unit of ns, us, ms, s, min or h, found \"{other}\"")),
    };
    let ns = (v * scale).round();
    if !(1e6..=3600e9).contains(&ns) {
        return Err(format!("expected a duration from 1ms to 1h, found \"{s}\""));
    }
    Ok(ns as TimeNs)
}

/// A network interface name as the kernel takes it: 1 to 15 bytes, no
/// whitespace, no '/' (Linux `dev_valid_name`; also "." and ".." are not
/// names).
pub fn parse_iface(s: &str) -> Result<String, String> {
    let shown = crate::printable::clipped(s, 40);
    if s.is_empty() || s.len() > 15 {
        return Err(format!("an interface name is 1 to 15 bytes, found {} (\"{shown}\")", s.len()));
    }
    if let Some(c) = s.chars().find(|c| c.is_whitespace() || *c == '/' || c.is_control() || *c == ':') {
        return Err(format!(
            "an interface name holds no whitespace, '/', ':' or control character, found {} in \"{shown}\"",
            crate::printable::printable(&c.to_string())
        ));
    }
    if s == "." || s == ".." {
        return Err(format!("\"{s}\" is not an interface name"));
    }
    Ok(s.to_string())
}

fn parse_speed(s: &str) -> Result<f64, String> {
    let v: f64 =
        s.trim_end_matches('x').parse().map_err(|_| format!("expected a factor like 2 or 0.5, found \"{s}\""))?;
    if !(crate::stream::MIN_SPEED..=crate::stream::MAX_SPEED).contains(&v) {
        return Err(format!("expected a factor from 0.1 to 64, found {v}"));
    }
    Ok(v)
}

#[cfg(test)]
mod tests {
    use super::*;

    // Issue 15, item 21: the `--config` help of `live` and `rehearse` said
    // "instead of the recording's own", which they do not have.
    #[test]
    fn config_help_fits_each_command() {
        use clap::CommandFactory;
        let cmd = Cli::command();
        let help = |sub: &str| {
            let s = cmd.find_subcommand(sub).unwrap();
            let a = s.get_arguments().find(|a| a.get_id() == "config").unwrap();
            a.get_help().unwrap().to_string()
        };
        assert!(help("replay").contains("recording's own"), "{}", help("replay"));
        for sub in ["live", "rehearse"] {
            assert!(!help(sub).contains("recording"), "{sub}: {}", help(sub));
        }
        assert!(help("rehearse").contains("plan"));
    }

    #[test]
    fn durations() {
        assert_eq!(parse_duration_ns("100ms"), Ok(100_000_000));
        assert_eq!(parse_duration_ns("0.25s"), Ok(250_000_000));
        assert_eq!(parse_duration_ns("1"), Ok(1_000_000_000));
        assert!(parse_duration_ns("10 parsecs").is_err());
        assert!(parse_duration_ns("0ms").is_err());
        // Issue 13, item 17: the limit the message names was refused.
        assert_eq!(parse_duration_ns("1h"), Ok(3_600_000_000_000));
        assert_eq!(parse_duration_ns("1ms"), Ok(1_000_000));
        assert!(parse_duration_ns("2h").unwrap_err().contains("from 1ms to 1h"));
    }

    // Issue 13, item 6: `--can ""`, `--can "a b"` and a name with a newline
    // were taken, and recorded a header that replay rejected.
    #[test]
    fn interface_names_are_checked_as_the_kernel_does() {
        assert_eq!(parse_iface("can0"), Ok("can0".into()));
        assert_eq!(parse_iface("vcan-front_15ch"), Ok("vcan-front_15ch".into()));
        for bad in ["", "a b", "can\n0", "a/b", "can0:1", ".", "..", "sixteen_bytes_xx", "tab\there"] {
            assert!(parse_iface(bad).is_err(), "{bad:?}");
        }
        let e = parse_iface("can\u{1b}[2J").unwrap_err();
        assert!(e.contains("\\x1b") && !e.contains('\u{1b}'), "{e}");
    }

    #[test]
    fn cli_is_well_formed() {
        use clap::CommandFactory;
        Cli::command().debug_assert();
    }
}
