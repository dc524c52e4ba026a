//! The `fieldglass` command-line program: `scan` checks a file (or the demo scene) offline and
//! writes JSON and an HTML report; `demo` writes the demo scene to a WAV file.
//!
//! Exit codes: 0 done; 1 an output could not be written; 2 usage error or unreadable input;
//! 3 a `--fail-on` threshold was met.

use clap::{Args, Parser, Subcommand, ValueEnum};
use fieldglass::picture::load_picture;
use fieldglass::scan::demo::{DemoOptions, write_demo};
use fieldglass::scan::report_html::ReportPicture;
use fieldglass::scan::{
    AssumedSource, CliError, EXIT_FAIL_ON, ScanInput, ScanOptions, json, report_html, scan, summary,
};
use fieldglass_dsp::engine::{MapMethod, Severity};
use fieldglass_dsp::format::AmbiFormat;
use std::io::Write;
use std::path::PathBuf;
use std::process::ExitCode;

#[derive(Parser, Debug)]
#[command(
    name = "fieldglass",
    version,
    about = "Sound-field map, channel meters and format check for higher-order Ambisonics"
)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand, Debug)]
enum Command {
    /// Scan a WAV/RF64/BW64 file (or the demo scene) and report format, levels, loudness and sources.
    Scan(ScanArgs),
    /// Write the demo scene (a harbour-front terrace at dusk) to a WAV file.
    Demo(DemoArgs),
    /// Run the monitor as a standalone app (JACK, ALSA or a silent dummy device).
    #[cfg(feature = "standalone")]
    Live(LiveArgs),
}

/// Options of `fieldglass live`.
#[cfg(feature = "standalone")]
#[derive(Args, Debug)]
struct LiveArgs {
    /// Feed the analysis from `demo` (the demo scene) or a WAV file at real-time pace, instead
    /// of the audio input; with it the dummy audio device is used unless --backend is given.
    #[arg(long, value_name = "demo|FILE")]
    play: Option<String>,
    /// Ambisonic order of the layout (1-7); with --play FILE it follows the file.
    #[arg(long, default_value_t = 3, value_parser = clap::value_parser!(u32).range(1..=7))]
    order: u32,
    /// Further options for the standalone wrapper (e.g. --backend jack, --sample-rate 96000).
    #[arg(trailing_var_arg = true, allow_hyphen_values = true)]
    standalone: Vec<String>,
}

/// The standalone wrapper's number (counted from 1) of the layout for `order`.
#[cfg(feature = "standalone")]
fn layout_number(order: u32) -> usize {
    fieldglass::SUPPORTED_ORDERS
        .iter()
        .position(|&o| o == order)
        .map_or(1, |i| i + 1)
}

#[cfg(feature = "standalone")]
fn run_live(args: LiveArgs) -> Result<ExitCode, CliError> {
    use fieldglass::player::{PlaySource, set_play_source};
    let mut order = args.order;
    if let Some(play) = &args.play {
        if play == "demo" {
            set_play_source(PlaySource::Demo);
        } else {
            let path = PathBuf::from(play);
            let reader = fieldglass::wav::WavReader::open(&path)
                .map_err(|e| CliError::input(format!("cannot read '{}': {e}", path.display())))?;
            let channels = usize::from(reader.spec().channels);
            order = fieldglass_dsp::sh::order_of_channel_count(channels)
                .filter(|o| (1..=7).contains(o))
                .ok_or_else(|| {
                    CliError::input(format!(
                        "'{}' has {channels} channels; live playback needs (N+1)² channels for order 1-7",
                        path.display()
                    ))
                })? as u32;
            set_play_source(PlaySource::File(path));
        }
    }
    let mut wrapper_args = vec![
        "fieldglass live".to_string(),
        "--audio-layout".into(),
        // The wrapper counts layouts from 1.
        layout_number(order).to_string(),
    ];
    if args.play.is_some()
        && !args
            .standalone
            .iter()
            .any(|a| a == "--backend" || a == "-b")
    {
        wrapper_args.extend(["--backend".to_string(), "dummy".to_string()]);
    }
    wrapper_args.extend(args.standalone);
    let ok = nice_plug::prelude::nice_export_standalone_with_args::<fieldglass::Fieldglass, _>(
        wrapper_args,
    );
    Ok(if ok {
        ExitCode::SUCCESS
    } else {
        ExitCode::from(2)
    })
}

/// Channel formats accepted on the command line.
#[derive(Clone, Copy, Debug, PartialEq, Eq, ValueEnum)]
enum FormatArg {
    /// AmbiX: ACN order, SN3D.
    #[value(name = "acn-sn3d")]
    AcnSn3d,
    /// ACN order, N3D.
    #[value(name = "acn-n3d")]
    AcnN3d,
    /// Furse-Malham order and maxN weights (orders 1-3).
    #[value(name = "fuma")]
    Fuma,
}

impl FormatArg {
    fn format(self) -> AmbiFormat {
        match self {
            Self::AcnSn3d => AmbiFormat::ACN_SN3D,
            Self::AcnN3d => AmbiFormat::ACN_N3D,
            Self::Fuma => AmbiFormat::FUMA,
        }
    }
}

#[derive(Clone, Copy, Debug, PartialEq, Eq, ValueEnum)]
enum MethodArg {
    #[value(name = "max-re")]
    MaxRe,
    #[value(name = "basic")]
    Basic,
    #[value(name = "in-phase")]
    InPhase,
    #[value(name = "mvdr")]
    Mvdr,
    #[value(name = "music")]
    Music,
}

impl MethodArg {
    fn method(self) -> MapMethod {
        match self {
            Self::MaxRe => MapMethod::MaxRe,
            Self::Basic => MapMethod::Basic,
            Self::InPhase => MapMethod::InPhase,
            Self::Mvdr => MapMethod::Mvdr,
            Self::Music => MapMethod::Music,
        }
    }
}

#[derive(Clone, Copy, Debug, PartialEq, Eq, ValueEnum)]
enum FailOn {
    Warning,
    Error,
}

#[derive(Clone, Copy, Debug, PartialEq, Eq, ValueEnum)]
enum SampleFormatArg {
    /// 32-bit float.
    Float32,
    /// 24-bit PCM.
    Pcm24,
}

#[derive(Args, Debug)]
struct ScanArgs {
    /// The file to scan (WAV, RF64 or BW64).
    #[arg(required_unless_present = "demo", conflicts_with = "demo")]
    file: Option<PathBuf>,
    /// Scan the built-in demo scene instead of a file.
    #[arg(long)]
    demo: bool,
    /// Order of the demo scene.
    #[arg(long, default_value_t = 3, requires = "demo", value_parser = clap::value_parser!(u32).range(1..=7))]
    order: u32,
    /// Length of the demo scene, seconds.
    #[arg(long, default_value_t = 20.0, requires = "demo")]
    seconds: f64,
    /// How the file's channels are ordered and normalised [default: acn-sn3d, or fuma for a
    /// file that declares the AMB B-format]
    #[arg(long, value_enum)]
    assume: Option<FormatArg>,
    /// Write the JSON result to PATH ("-" = stdout, replacing the summary).
    #[arg(long, value_name = "PATH|-")]
    json: Option<String>,
    /// Write report.html and its pictures into DIR.
    #[arg(long, value_name = "DIR")]
    report: Option<PathBuf>,
    /// Band edges LO-HI in Hz (low/mid and mid/high), e.g. 250-4000.
    #[arg(long, value_name = "LO-HI", value_parser = parse_band)]
    band: Option<[f64; 2]>,
    /// Map method for the sources and pictures.
    #[arg(long, value_enum, default_value = "max-re")]
    method: MethodArg,
    /// Exit with code 3 if any finding is at least this severe.
    #[arg(long, value_enum)]
    fail_on: Option<FailOn>,
    /// A still of the video (PNG or JPEG, equirectangular 2:1) behind the report's maps.
    #[arg(long, value_name = "FILE", requires = "report")]
    picture: Option<PathBuf>,
    /// How much of the picture shows through the maps, 0 (maps only) … 1 (picture only).
    #[arg(long, value_name = "0…1", default_value_t = 0.5, requires = "picture", value_parser = parse_opacity)]
    picture_opacity: f64,
    /// Azimuth the picture's centre is turned to, degrees (positive = to the left).
    #[arg(long, value_name = "DEG", default_value_t = 0.0, requires = "picture", allow_negative_numbers = true, value_parser = parse_yaw)]
    picture_yaw: f64,
}

fn parse_opacity(text: &str) -> Result<f64, String> {
    match text.trim().parse::<f64>() {
        Ok(v) if (0.0..=1.0).contains(&v) => Ok(v),
        _ => Err(format!("'{text}' is not an opacity from 0 to 1")),
    }
}

fn parse_yaw(text: &str) -> Result<f64, String> {
    match text.trim().parse::<f64>() {
        Ok(v) if v.is_finite() && v.abs() <= 360.0 => Ok(v),
        _ => Err(format!("'{text}' is not an angle from -360 to 360 degrees")),
    }
}

#[derive(Args, Debug)]
struct DemoArgs {
    /// Output WAV file.
    #[arg(long, value_name = "FILE.wav")]
    write: PathBuf,
    /// Ambisonic order.
    #[arg(long, default_value_t = 3, value_parser = clap::value_parser!(u32).range(1..=7))]
    order: u32,
    /// Channel format.
    #[arg(long, value_enum, default_value = "acn-sn3d")]
    format: FormatArg,
    /// Length, seconds.
    #[arg(long, default_value_t = 20.0)]
    seconds: f64,
    /// Sample rate, Hz.
    #[arg(long, default_value_t = 48_000)]
    sample_rate: u32,
    /// Sample format.
    #[arg(long, value_enum, default_value = "float32")]
    sample_format: SampleFormatArg,
    /// Write an RF64 header even for small files.
    #[arg(long)]
    rf64: bool,
}

fn parse_band(text: &str) -> Result<[f64; 2], String> {
    let (lo, hi) = text
        .split_once('-')
        .ok_or_else(|| format!("'{text}' is not LO-HI (e.g. 250-4000)"))?;
    let parse = |s: &str| {
        s.trim()
            .parse::<f64>()
            .map_err(|_| format!("'{s}' in '{text}' is not a number of Hz"))
    };
    let (lo, hi) = (parse(lo)?, parse(hi)?);
    if !(lo.is_finite() && hi.is_finite() && lo > 0.0 && lo < hi) {
        return Err(format!(
            "band edges must satisfy 0 < LO < HI, got {lo}-{hi}"
        ));
    }
    Ok([lo, hi])
}

fn run_scan(args: ScanArgs) -> Result<ExitCode, CliError> {
    let input = match (&args.file, args.demo) {
        (_, true) => {
            if !(args.seconds.is_finite() && args.seconds > 0.0 && args.seconds <= 86_400.0) {
                return Err(CliError::input(format!(
                    "--seconds {} is outside 0 … 86400 s",
                    args.seconds
                )));
            }
            ScanInput::Demo {
                order: args.order as usize,
                seconds: args.seconds,
                sample_rate_hz: 48_000.0,
                format: AmbiFormat::ACN_SN3D,
            }
        }
        (Some(path), false) => ScanInput::File(path.clone()),
        (None, false) => return Err(CliError::input("scan needs a FILE or --demo")),
    };
    // A missing or broken picture stops the command before the scan starts.
    let picture = match &args.picture {
        Some(path) => Some(ReportPicture {
            name: path.display().to_string(),
            picture: load_picture(path, report_html::PICTURE_MAX_SIDE)
                .map_err(|e| CliError::input(e.to_string()))?,
            yaw_deg: args.picture_yaw,
            opacity: args.picture_opacity,
        }),
        None => None,
    };
    let defaults = ScanOptions::default();
    let options = ScanOptions {
        assumed: args.assume.map_or(AmbiFormat::ACN_SN3D, |a| a.format()),
        assumed_source: if args.assume.is_some() {
            AssumedSource::Option
        } else {
            AssumedSource::Default
        },
        method: args.method.method(),
        band_edges_hz: args.band.unwrap_or(defaults.band_edges_hz),
        progress: true,
        ..defaults
    };
    let result = scan(&input, options)?;
    let json_to_stdout = args.json.as_deref() == Some("-");
    if let Some(target) = args.json.as_deref() {
        let text = json::to_json_string(&result);
        if json_to_stdout {
            let mut stdout = std::io::stdout().lock();
            stdout
                .write_all(text.as_bytes())
                .and_then(|_| stdout.flush())
                .map_err(|e| CliError::output(format!("cannot write the JSON to stdout: {e}")))?;
        } else {
            std::fs::write(target, text)
                .map_err(|e| CliError::output(format!("cannot write '{target}': {e}")))?;
        }
    }
    let report = match &args.report {
        Some(dir) => Some(report_html::write_report(&result, dir, picture.as_ref())?),
        None => None,
    };
    if !json_to_stdout {
        let shown = report.as_ref().map(|p| p.display().to_string());
        print!("{}", summary::summary(&result, shown.as_deref()));
    }
    if let Some(fail_on) = args.fail_on {
        let threshold = match fail_on {
            FailOn::Warning => Severity::Warning,
            FailOn::Error => Severity::Error,
        };
        let hits: Vec<&str> = result
            .findings
            .iter()
            .filter(|f| f.severity >= threshold)
            .map(|f| f.code.label())
            .collect();
        if !hits.is_empty() {
            eprintln!(
                "fieldglass: {} finding(s) at or above '{}': {}",
                hits.len(),
                threshold.label(),
                hits.join(", ")
            );
            return Ok(ExitCode::from(EXIT_FAIL_ON));
        }
    }
    Ok(ExitCode::SUCCESS)
}

fn run_demo(args: DemoArgs) -> Result<ExitCode, CliError> {
    let options = DemoOptions {
        order: args.order as usize,
        format: args.format.format(),
        seconds: args.seconds,
        sample_rate_hz: args.sample_rate,
        float: args.sample_format == SampleFormatArg::Float32,
        rf64: args.rf64,
    };
    let frames = write_demo(&args.write, options)?;
    println!(
        "fieldglass demo: wrote '{}' ({} frames, {:.2} s, order {}, {})",
        args.write.display(),
        frames,
        frames as f64 / args.sample_rate as f64,
        args.order,
        options.format.human_name()
    );
    Ok(ExitCode::SUCCESS)
}

fn main() -> ExitCode {
    let cli = Cli::parse();
    let outcome = match cli.command {
        Command::Scan(args) => run_scan(args),
        Command::Demo(args) => run_demo(args),
        #[cfg(feature = "standalone")]
        Command::Live(args) => run_live(args),
    };
    match outcome {
        Ok(code) => code,
        Err(error) => {
            eprintln!("fieldglass: {error}");
            ExitCode::from(error.exit_code)
        }
    }
}
