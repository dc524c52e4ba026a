//! The `fieldglass` command-line program: `scan` checks a file (or the demo scene) offline and
//! writes JSON and an HTML report; `compare` checks a delivery against its master;
//! `demo` writes the demo scene to a WAV file.
//!
//! Exit codes: 0 done; 1 an output could not be written; 2 usage error or unreadable input;
//! 3 a `--fail-on` threshold was met.

use clap::{Args, Parser, Subcommand, ValueEnum};
use fieldglass::picture::load_picture;
use fieldglass::scan::demo::{DemoOptions, write_demo};
use fieldglass::scan::report_html::ReportPicture;
use fieldglass::scan::{
    AssumedSource, CliError, EXIT_FAIL_ON, ScanInput, ScanOptions, batch, index, json, report_html,
    scan, summary,
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
    /// Scan WAV/RF64/BW64/Ogg Opus files or folders (or the demo scene): format, levels, loudness, sources.
    Scan(ScanArgs),
    /// Compare a delivery (CANDIDATE) with its master (REFERENCE): offset, rotation or mirror,
    /// channel faults, level and detail lost per order.
    Compare(CompareArgs),
    /// Write the demo scene (harbour-front terrace at dusk, synthesised) to a WAV or BW64 file.
    Demo(DemoArgs),
    /// Build the batch index page from JSON lines written by `scan --json-lines` (e.g. on
    /// other machines).
    Index(IndexArgs),
    /// Run the monitor as a standalone app (JACK, ALSA or a silent dummy device).
    #[cfg(feature = "standalone")]
    Live(LiveArgs),
}

/// Options of `fieldglass live`.
#[cfg(feature = "standalone")]
#[derive(Args, Debug)]
struct LiveArgs {
    /// Feed the analysis from `demo` (the demo scene) or a WAV or Ogg Opus file at real-time
    /// pace, instead of the audio input; with it the dummy audio device is used unless
    /// --backend is given.
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
            let channels = fieldglass::player::file_channels(&path).map_err(CliError::input)?;
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
    /// Files or folders to scan (WAV, AMB, RF64, BW64, Ogg Opus with channel mapping family
    /// 2 or 3; folders are searched recursively for those). One file prints a summary; several files or a folder make a batch.
    #[arg(
        required_unless_present = "demo",
        conflicts_with = "demo",
        value_name = "FILE|DIR"
    )]
    inputs: Vec<PathBuf>,
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
    /// Write report.html and its pictures into DIR (a batch: one folder per file and
    /// index.html).
    #[arg(long, value_name = "DIR")]
    report: Option<PathBuf>,
    /// A batch: write one fieldglass-scan/1 JSON document per line to PATH ("-" = stdout).
    #[arg(long, value_name = "PATH|-")]
    json_lines: Option<String>,
    /// A batch: files scanned at once [default: the number of cores].
    #[arg(long, value_name = "N", value_parser = clap::value_parser!(u32).range(1..=256))]
    jobs: Option<u32>,
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
struct IndexArgs {
    /// JSON lines files (one fieldglass-scan/1 document or error object per line).
    #[arg(required = true, value_name = "JSONL")]
    lines: Vec<PathBuf>,
    /// Folder for index.html; reports already in it (one folder per file, as `scan --report`
    /// writes them) are linked.
    #[arg(long, value_name = "DIR")]
    report: PathBuf,
}

#[derive(Args, Debug)]
struct CompareArgs {
    /// REFERENCE then CANDIDATE (WAV, RF64 or BW64); with --demo only CANDIDATE.
    #[arg(value_name = "REFERENCE CANDIDATE", num_args = 1..=2, required = true)]
    files: Vec<PathBuf>,
    /// Use the built-in demo scene as the reference.
    #[arg(long)]
    demo: bool,
    /// Order of the demo reference.
    #[arg(long, default_value_t = 3, requires = "demo", value_parser = clap::value_parser!(u32).range(1..=7))]
    demo_order: u32,
    /// Length of the demo reference, seconds.
    #[arg(long, default_value_t = 20.0, requires = "demo")]
    demo_seconds: f64,
    /// How the reference's channels are ordered and normalised [default: acn-sn3d, or fuma
    /// for a file that declares the AMB B-format]
    #[arg(long, value_enum)]
    assume_reference: Option<FormatArg>,
    /// How the candidate's channels are ordered and normalised (same default).
    #[arg(long, value_enum)]
    assume_candidate: Option<FormatArg>,
    /// Largest offset between the files searched, seconds.
    #[arg(long, default_value_t = 2.0, value_name = "SECONDS")]
    max_offset: f64,
    /// Report `rotated` from this angle on, degrees.
    #[arg(long, default_value_t = 2.0, value_name = "DEG")]
    rotation_threshold: f64,
    /// Report `level-change` from this change of W loudness (or of an order relative to W) on, LU.
    #[arg(long, default_value_t = 1.0, value_name = "LU")]
    level_threshold: f64,
    /// Report `detail-lost` when an order's coherence is below this (0-1).
    #[arg(long, default_value_t = 0.9, value_name = "X")]
    coherence_threshold: f64,
    /// Write the JSON result to PATH ("-" = stdout, replacing the summary).
    #[arg(long, value_name = "PATH|-")]
    json: Option<String>,
    /// Write report.html, its pictures and compare.json into DIR.
    #[arg(long, value_name = "DIR")]
    report: Option<PathBuf>,
    /// Exit with code 3 if any finding is at least this severe.
    #[arg(long, value_enum)]
    fail_on: Option<FailOn>,
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
    /// Write a BW64 file with ADM metadata (chna + axml, ITU-R BS.2088 / BS.2076) declaring
    /// the HOA pack in the chosen format.
    #[arg(long)]
    adm: bool,
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

fn run_index(args: IndexArgs) -> Result<ExitCode, CliError> {
    let mut rows = Vec::new();
    for path in &args.lines {
        let text = std::fs::read_to_string(path)
            .map_err(|e| CliError::input(format!("cannot read '{}': {e}", path.display())))?;
        rows.extend(index::rows_from_json_lines(
            &text,
            &path.display().to_string(),
        )?);
    }
    let written = index::write_index(&rows, &args.report)?;
    println!(
        "fieldglass index: {} file(s), index written to '{}'",
        rows.len(),
        written.display()
    );
    Ok(ExitCode::SUCCESS)
}

fn scan_options(args: &ScanArgs) -> ScanOptions {
    let defaults = ScanOptions::default();
    ScanOptions {
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
    }
}

fn fail_on_severity(fail_on: Option<FailOn>) -> Option<Severity> {
    fail_on.map(|f| match f {
        FailOn::Warning => Severity::Warning,
        FailOn::Error => Severity::Error,
    })
}

fn run_scan(args: ScanArgs) -> Result<ExitCode, CliError> {
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
    let single = match args.inputs.as_slice() {
        [one] if !one.is_dir() && args.json_lines.is_none() => Some(one.clone()),
        _ => None,
    };
    if !args.demo && single.is_none() {
        if args.json.is_some() {
            let what = match args.inputs.as_slice() {
                [one] => format!("'{}' is a folder", one.display()),
                many => format!("{} inputs were given", many.len()),
            };
            return Err(CliError::input(format!(
                "{what}: --json takes one file; for several files or a folder use --json-lines"
            )));
        }
        let (files, errors) = batch::collect_inputs(&args.inputs);
        if files.is_empty() && errors.is_empty() {
            return Err(CliError::input(
                "no file to scan: the folders hold no .wav, .amb, .rf64, .bw64, .opus or .ogg files",
            ));
        }
        let cores = std::thread::available_parallelism().map_or(1, |n| n.get());
        let jobs = args
            .jobs
            .map_or(cores, |j| j as usize)
            .min(files.len().max(1));
        let options = batch::BatchOptions {
            // One file over several cores only while cores are left over.
            scan: ScanOptions {
                parallel: jobs < cores,
                ..scan_options(&args)
            },
            jobs,
            json_lines: args.json_lines.clone(),
            report: args.report.clone(),
            fail_on: fail_on_severity(args.fail_on),
            picture,
        };
        return Ok(ExitCode::from(batch::run_batch(&files, errors, &options)));
    }
    let input = match (single, args.demo) {
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
        (Some(path), false) => ScanInput::File(path),
        (None, false) => return Err(CliError::input("scan needs a FILE or --demo")),
    };
    let result = scan(&input, scan_options(&args))?;
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
    let findings = result.findings.iter().map(|f| (f.severity, f.code.label()));
    Ok(fail_on_exit(fail_on_severity(args.fail_on), findings))
}

/// Exit 3, naming the findings, when any is at least as severe as `threshold`; else 0.
fn fail_on_exit(
    threshold: Option<Severity>,
    findings: impl Iterator<Item = (Severity, &'static str)>,
) -> ExitCode {
    let Some(threshold) = threshold else {
        return ExitCode::SUCCESS;
    };
    let hits: Vec<&str> = findings
        .filter(|(severity, _)| *severity >= threshold)
        .map(|(_, code)| code)
        .collect();
    if hits.is_empty() {
        return ExitCode::SUCCESS;
    }
    eprintln!(
        "fieldglass: {} finding(s) at or above '{}': {}",
        hits.len(),
        threshold.label(),
        hits.join(", ")
    );
    ExitCode::from(EXIT_FAIL_ON)
}

/// Writes `text` to the file `target`, or to stdout for "-".
fn write_json(target: &str, text: &str) -> Result<(), CliError> {
    if target == "-" {
        let mut stdout = std::io::stdout().lock();
        stdout
            .write_all(text.as_bytes())
            .and_then(|_| stdout.flush())
            .map_err(|e| CliError::output(format!("cannot write the JSON to stdout: {e}")))
    } else {
        std::fs::write(target, text)
            .map_err(|e| CliError::output(format!("cannot write '{target}': {e}")))
    }
}

fn run_compare(args: CompareArgs) -> Result<ExitCode, CliError> {
    use fieldglass::compare::{self, CompareOptions, Thresholds};
    let (reference, candidate) = match (args.demo, args.files.as_slice()) {
        (true, [candidate]) => {
            if !(args.demo_seconds.is_finite()
                && args.demo_seconds > 0.0
                && args.demo_seconds <= 86_400.0)
            {
                return Err(CliError::input(format!(
                    "--demo-seconds {} is outside 0 … 86400 s",
                    args.demo_seconds
                )));
            }
            (
                ScanInput::Demo {
                    order: args.demo_order as usize,
                    seconds: args.demo_seconds,
                    sample_rate_hz: 48_000.0,
                    format: AmbiFormat::ACN_SN3D,
                },
                ScanInput::File(candidate.clone()),
            )
        }
        (false, [reference, candidate]) => (
            ScanInput::File(reference.clone()),
            ScanInput::File(candidate.clone()),
        ),
        (true, _) => {
            return Err(CliError::input(
                "compare --demo takes one file: the CANDIDATE",
            ));
        }
        (false, _) => {
            return Err(CliError::input(
                "compare needs REFERENCE and CANDIDATE (or --demo and CANDIDATE)",
            ));
        }
    };
    let thresholds_valid = (0.0..=1.0).contains(&args.coherence_threshold)
        && args.rotation_threshold >= 0.0
        && args.level_threshold >= 0.0;
    if !thresholds_valid {
        return Err(CliError::input(
            "thresholds: --coherence-threshold in 0-1, --rotation-threshold and --level-threshold ≥ 0",
        ));
    }
    let options = CompareOptions {
        reference_format: args.assume_reference.map(|f| f.format()),
        candidate_format: args.assume_candidate.map(|f| f.format()),
        max_offset_s: args.max_offset,
        thresholds: Thresholds {
            rotation_deg: args.rotation_threshold,
            level_change_lu: args.level_threshold,
            coherence: args.coherence_threshold,
        },
        progress: true,
    };
    let result = compare::compare(&reference, &candidate, options)?;
    let json_to_stdout = args.json.as_deref() == Some("-");
    if let Some(target) = args.json.as_deref() {
        write_json(target, &compare::json::to_json_string(&result))?;
    }
    let report = match &args.report {
        Some(dir) => Some(compare::report::write_report(&result, dir)?),
        None => None,
    };
    if !json_to_stdout {
        let shown = report.as_ref().map(|p| p.display().to_string());
        print!("{}", compare::summary::summary(&result, shown.as_deref()));
    }
    let findings = result.findings.iter().map(|f| (f.severity, f.code.label()));
    Ok(fail_on_exit(fail_on_severity(args.fail_on), findings))
}

fn run_demo(args: DemoArgs) -> Result<ExitCode, CliError> {
    let options = DemoOptions {
        order: args.order as usize,
        format: args.format.format(),
        seconds: args.seconds,
        sample_rate_hz: args.sample_rate,
        float: args.sample_format == SampleFormatArg::Float32,
        rf64: args.rf64,
        adm: args.adm,
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
        Command::Compare(args) => run_compare(args),
        Command::Demo(args) => run_demo(args),
        Command::Index(args) => run_index(args),
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
