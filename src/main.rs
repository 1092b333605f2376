//! The `trackswing` binary: parses arguments, resolves a plan, calls the library, reports.
//!
//! Exit codes: 0 success; 2 bad command line; 3 bad input (case, fields, track, towns);
//! 4 outputs could not be written.

mod cli;

use anyhow::Context;
use clap::Parser;
use cli::args::{self, Cli, Command, Common};
use cli::{commands, console};
use std::path::{Path, PathBuf};
use std::process::ExitCode;
use trackswing::case::{Case, Overrides};

/// Where the shipped demo case lives: `demo-grid/case.toml` in the current folder, else beside
/// the binary or up to three folders above it (a checkout's `target/release/trackswing`), else
/// in `../share/trackswing/` from the binary (an installed layout). Never a path baked in at build
/// time: a binary copied to another machine must not read a source tree that happens to be there.
/// The error lists every place looked.
fn demo_case() -> Result<PathBuf, Failure> {
    let rel = Path::new("demo-grid").join("case.toml");
    let mut places = vec![rel.clone()];
    if let Ok(exe) = std::env::current_exe() {
        let exe = exe.canonicalize().unwrap_or(exe);
        for dir in exe.ancestors().skip(1).take(4) {
            places.push(dir.join(&rel));
        }
        if let Some(bin) = exe.parent().and_then(Path::parent) {
            places.push(bin.join("share").join("trackswing").join(&rel));
        }
    }
    match places.iter().find(|p| p.is_file()) {
        Some(p) => Ok(p.clone()),
        None => Err(Failure::Input(anyhow::anyhow!(
            "the demo case was not found; looked for {}; run `trackswing demo` from a checkout \
             of trackswing, or copy its demo-grid/ folder into the current folder",
            places
                .iter()
                .map(|p| p.display().to_string())
                .collect::<Vec<_>>()
                .join(", ")
        ))),
    }
}

enum Failure {
    /// A command-line option's value is wrong (exit code 2, as clap gives for its own checks).
    Usage(anyhow::Error),
    Input(anyhow::Error),
    Output(anyhow::Error),
}

/// A case that could not be loaded: a bad option value is a bad command line (2), anything
/// else a bad input (3).
fn case_failure(e: trackswing::case::CaseError) -> Failure {
    if matches!(e, trackswing::case::CaseError::Flag { .. }) {
        Failure::Usage(e.into())
    } else {
        Failure::Input(e.into())
    }
}

/// A run that stopped: more scenarios than allowed without `--force` is a matter of the command
/// line (2), anything else of the input (3).
fn engine_failure(e: trackswing::engine::EngineError) -> Failure {
    let too_many = matches!(e, trackswing::engine::EngineError::TooManyScenarios { .. });
    let e = anyhow::Error::from(e).context("the run stopped; nothing was written");
    if too_many {
        Failure::Usage(e)
    } else {
        stopped(e)
    }
}

/// A run that stopped: a `--region` that misses the model grid is a bad command line (2), as
/// its value could not be checked before the grid was read; anything else a bad input (3).
fn stopped(e: anyhow::Error) -> Failure {
    let bad_flag = e.chain().any(|c| {
        c.downcast_ref::<trackswing::read::region::RegionError>()
            .is_some_and(|r| r.from_flag())
    });
    if bad_flag {
        Failure::Usage(e)
    } else {
        Failure::Input(e)
    }
}

/// What `run` was given: a case file, or model files with optional track and towns.
enum Plan<'a> {
    CaseFile(&'a Path),
    ModelFiles {
        members: Vec<(Option<String>, Vec<PathBuf>)>,
        track: Option<&'a str>,
        towns: Option<&'a Path>,
    },
}

/// What a run writes: the layers, one shard's totals, or the layers from shards' totals.
enum Mode<'a> {
    Layers,
    Shard(trackswing::shard::Shard),
    Merge(&'a [PathBuf]),
}

fn run_case(
    plan: Plan<'_>,
    common: &Common,
    default_out: Option<PathBuf>,
    with_report: bool,
    mode: Mode<'_>,
) -> Result<(), Failure> {
    let over = Overrides {
        cross: common.cross.clone(),
        along: common.along.clone(),
        out: common.out.clone().or(default_out),
        units: common.units.clone(),
        snow_ratio: common.snow_ratio.clone(),
        force: common.force,
        precip_type: common.precip_type.clone(),
        dry_air: common.dry_air,
        no_dry_air: common.no_dry_air,
        timing: common.timing.clone(),
        intensity: common.intensity.clone(),
        warm_bias: common.warm_bias.clone(),
        raster_type: common.raster_type.clone(),
        cross_sigma: common.cross_sigma,
        along_sigma: common.along_sigma,
        min_coverage: common.min_coverage,
        report: with_report || common.report,
        region: common.region.clone(),
    };
    let case = load_case(plan, &over)?;
    let threads = common.threads.unwrap_or_else(|| {
        std::thread::available_parallelism()
            .map(|n| n.get())
            .unwrap_or(1)
    });
    if threads == 0 {
        return Err(Failure::Usage(anyhow::anyhow!(
            "--threads must be at least 1"
        )));
    }
    let progress = console::Bar::new(common.quiet);
    let started = std::time::Instant::now();
    let mut merged = None;
    if case.is_ensemble() {
        let ensemble = match mode {
            Mode::Layers => {
                trackswing::engine::run_groups(&case, threads, &progress).map_err(engine_failure)?
            }
            Mode::Shard(shard) => return run_shard(&case, threads, &progress, shard, common.quiet),
            Mode::Merge(given) => {
                let paths = if given.is_empty() {
                    shard_files(&case.output.out_dir).map_err(Failure::Input)?
                } else {
                    given.to_vec()
                };
                merged = Some(paths.len());
                let runs = in_pool(threads, || {
                    trackswing::shard::ensemble::assemble_groups(&case, &progress, &paths)
                })?
                .map_err(merge_failure)?;
                trackswing::engine::ensemble_of(&case, runs, threads, &progress)
                    .map_err(engine_failure)?
            }
        };
        let summary = trackswing::summarise::summary::summarise_ensemble(&case, &ensemble)
            .with_context(|| format!("{}: the track-error weights", case.path.display()))
            .map_err(Failure::Input)?;
        let result = &ensemble.groups[0].run;
        let clock = std::time::Instant::now();
        let outcome = trackswing::write::write_ensemble(&case, &ensemble, &summary)
            .with_context(|| format!("writing the layers into {}", case.output.out_dir.display()))
            .map_err(Failure::Output)?;
        if !common.quiet {
            let write_s = clock.elapsed().as_secs_f64();
            console::summary(
                &case,
                result,
                &outcome,
                (started.elapsed(), write_s),
                merged,
            );
        }
        return Ok(());
    }
    let result = match mode {
        Mode::Layers => {
            trackswing::engine::run(&case, threads, &progress).map_err(engine_failure)?
        }
        Mode::Shard(shard) => return run_shard(&case, threads, &progress, shard, common.quiet),
        Mode::Merge(given) => {
            let paths = if given.is_empty() {
                shard_files(&case.output.out_dir).map_err(Failure::Input)?
            } else {
                given.to_vec()
            };
            merged = Some(paths.len());
            in_pool(threads, || {
                trackswing::shard::assemble(&case, &progress, &paths)
            })?
            .map_err(merge_failure)?
        }
    };
    let clock = std::time::Instant::now();
    let summary = trackswing::summarise::summary::summarise(&case, &result)
        .with_context(|| format!("{}: the track-error weights", case.path.display()))
        .map_err(Failure::Input)?;
    let outcome = trackswing::write::write_all(&case, &result, &summary)
        .with_context(|| format!("writing the layers into {}", case.output.out_dir.display()))
        .map_err(Failure::Output)?;
    if !common.quiet {
        let write_s = clock.elapsed().as_secs_f64();
        console::summary(
            &case,
            &result,
            &outcome,
            (started.elapsed(), write_s),
            merged,
        );
    }
    Ok(())
}

/// Runs one shard and writes its file; of a case with several members or methods, every
/// member × method part the shard holds, each into its own file.
fn run_shard(
    case: &Case,
    threads: usize,
    progress: &console::Bar,
    shard: trackswing::shard::Shard,
    quiet: bool,
) -> Result<(), Failure> {
    use trackswing::shard::{ensemble, run_and_write};
    let started = std::time::Instant::now();
    let folder = trackswing::shard::default_folder(&case.output.out_dir);
    if case.is_ensemble() {
        let parts = ensemble::run_and_write_groups(case, threads, progress, shard, &folder)
            .map_err(|e| shard_failure(e, shard))?;
        if !quiet {
            console::ensemble_shard_summary(case, &parts, shard, progress, started.elapsed());
        }
    } else {
        let (result, path) = run_and_write(case, threads, progress, shard, &folder)
            .map_err(|e| shard_failure(e, shard))?;
        if !quiet {
            console::shard_summary(case, &result, shard, &path, progress, started.elapsed());
        }
    }
    Ok(())
}

/// Runs `f` on a pool of `threads` threads.
fn in_pool<T: Send>(threads: usize, f: impl FnOnce() -> T + Send) -> Result<T, Failure> {
    Ok(rayon::ThreadPoolBuilder::new()
        .num_threads(threads)
        .build()
        .map_err(|e| Failure::Input(e.into()))?
        .install(f))
}

/// A merge that stopped: nothing was written.
fn merge_failure(e: trackswing::shard::ShardError) -> Failure {
    stopped(anyhow::Error::from(e).context("the merge stopped; nothing was written"))
}

/// How a shard's failure exits: a failed write is an output failure, the engine's its own.
fn shard_failure(e: trackswing::shard::ShardError, shard: trackswing::shard::Shard) -> Failure {
    let failed_write = matches!(
        e,
        trackswing::shard::ShardError::Io { .. } | trackswing::shard::ShardError::Format { .. }
    );
    match e {
        trackswing::shard::ShardError::Engine(e) => engine_failure(e),
        e if failed_write => Failure::Output(
            anyhow::Error::from(e).context(format!("writing shard {}", shard.label())),
        ),
        e => stopped(anyhow::Error::from(e).context("the run stopped; nothing was written")),
    }
}

/// The shard files in the default folder of `out_dir`, or an error saying where none were found.
fn shard_files(out_dir: &Path) -> anyhow::Result<Vec<PathBuf>> {
    let folder = trackswing::shard::default_folder(out_dir);
    let mut files: Vec<PathBuf> = std::fs::read_dir(&folder)
        .with_context(|| format!("{}: looking for shard files", folder.display()))?
        .filter_map(|e| e.ok().map(|e| e.path()))
        .filter(|p| {
            p.file_name()
                .and_then(|n| n.to_str())
                .is_some_and(|n| n.starts_with("shard-") && n.ends_with(".bin"))
        })
        .collect();
    files.sort();
    if files.is_empty() {
        anyhow::bail!(
            "{}: no shard files (shard-K-of-N.bin); run `trackswing run … --shard K/N` first, or name them with --shards",
            folder.display()
        );
    }
    Ok(files)
}

/// The case a plan names: the case file, or a case made from model files. The one way `run`,
/// `merge` and `sounding` load what they read.
fn load_case(plan: Plan<'_>, over: &Overrides) -> Result<Case, Failure> {
    match plan {
        Plan::CaseFile(p) => Case::load(p, over),
        Plan::ModelFiles {
            members,
            track,
            towns,
        } => Case::from_model_members(&members, track, towns, over),
    }
    .map_err(case_failure)
}

/// A case file, or model files with their track and towns.
fn plan_of(read: &args::Inputs) -> Result<Plan<'_>, Failure> {
    let (inputs, track, towns) = (&read.inputs, read.track.as_deref(), read.towns.as_deref());
    let is_case = inputs.len() == 1
        && inputs[0]
            .extension()
            .is_some_and(|e| e.eq_ignore_ascii_case("toml"));
    if is_case {
        if track.is_some() || towns.is_some() {
            return Err(Failure::Usage(anyhow::anyhow!(
                "--track and --towns go with model files; a case file names its own track and towns"
            )));
        }
        return Ok(Plan::CaseFile(&inputs[0]));
    }
    Ok(Plan::ModelFiles {
        members: vec![(None, inputs.clone())],
        track,
        towns,
    })
}

/// `--member NAME=FILES` of `run`: more members after the model files given first.
fn add_members(plan: &mut Plan<'_>, given: &[String]) -> Result<(), Failure> {
    if given.is_empty() {
        return Ok(());
    }
    let Plan::ModelFiles { members, .. } = plan else {
        return Err(Failure::Usage(anyhow::anyhow!(
            "--member goes with model files; a case file lists its members as [[member]] tables"
        )));
    };
    for m in given {
        let (name, files) = m
            .split_once('=')
            .filter(|(n, f)| !n.trim().is_empty() && !f.is_empty())
            .ok_or_else(|| {
                Failure::Usage(anyhow::anyhow!(
                    "--member '{m}': expected NAME=FILES, e.g. --member cycle-00z=runs/00z/ (a folder, a pattern with one '*', or files separated by commas)"
                ))
            })?;
        members.push((
            Some(name.trim().to_string()),
            files.split(',').map(PathBuf::from).collect(),
        ));
    }
    Ok(())
}

fn run_plan(a: &args::RunArgs) -> Result<(), Failure> {
    let mut plan = plan_of(&a.read)?;
    add_members(&mut plan, &a.member)?;
    let mode = match &a.shard {
        None => Mode::Layers,
        Some(text) => Mode::Shard(trackswing::shard::Shard::parse(text).ok_or_else(|| {
            Failure::Usage(anyhow::anyhow!(
                "--shard '{text}': expected K/N with 1 ≤ K ≤ N, e.g. 2/4 for the second of four shards"
            ))
        })?),
    };
    run_case(plan, &a.common, None, false, mode)
}

fn merge_plan(a: &args::MergeArgs) -> Result<(), Failure> {
    let plan = plan_of(&a.read)?;
    run_case(plan, &a.common, None, false, Mode::Merge(&a.shards))
}

/// `trackswing sounding`: the library makes the sounding, this prints it.
fn sounding(a: &args::SoundingArgs) -> Result<(), Failure> {
    let bad = |what: String| Failure::Usage(anyhow::anyhow!(what));
    let (lat, lon) =
        a.at.split_once(',')
            .and_then(|(la, lo)| {
                Some((
                    la.trim().parse::<f64>().ok()?,
                    lo.trim().parse::<f64>().ok()?,
                ))
            })
            .filter(|(la, lo)| la.is_finite() && lo.is_finite())
            .ok_or_else(|| {
                bad(format!(
                    "--at '{}': expected LAT,LON in degrees, e.g. 47.76,-29.29",
                    a.at
                ))
            })?;
    let over = Overrides {
        cross: Some(a.cross.to_string()),
        along: Some(a.along.to_string()),
        timing: Some(a.timing.to_string()),
        intensity: Some(a.intensity.to_string()),
        warm_bias: Some(a.warm_bias.to_string()),
        precip_type: a.precip_type.clone(),
        snow_ratio: a.snow_ratio.clone(),
        dry_air: a.dry_air,
        no_dry_air: a.no_dry_air,
        region: a.region.clone(),
        ..Default::default()
    };
    let case = load_case(plan_of(&a.read)?, &over)?;
    let members = &case.inputs.members;
    let member = match &a.member {
        None => 0,
        Some(name) => members
            .iter()
            .position(|m| &m.name == name)
            .ok_or_else(|| {
                bad(format!(
                    "--member '{name}': the case has no such member; its members are {}",
                    members
                        .iter()
                        .map(|m| m.name.as_str())
                        .collect::<Vec<_>>()
                        .join(", ")
                ))
            })?,
    };
    let case = case.group(member, 0);
    let req = trackswing::sounding::SoundingRequest {
        lat,
        lon,
        step: a.step,
        scenario: trackswing::scenario::Scenario {
            cross_km: a.cross,
            along_km: a.along,
            timing_h: a.timing,
            intensity: a.intensity,
            warm_bias_k: a.warm_bias,
        },
    };
    let s = trackswing::sounding::sounding(&case, &req).map_err(|e| stopped(e.into()))?;
    if a.json {
        println!(
            "{}",
            serde_json::to_string_pretty(&s).expect("a sounding serialises")
        );
    } else {
        println!("{s}");
    }
    Ok(())
}

/// The error and its causes, joined by ": ", leaving out a cause whose text the message already
/// holds (many of the library's errors name their cause in their own text).
fn error_text(e: &anyhow::Error) -> String {
    let mut text = String::new();
    for cause in e.chain() {
        let part = cause.to_string();
        if text.contains(&part) {
            continue;
        }
        if !text.is_empty() {
            text.push_str(": ");
        }
        text.push_str(&part);
    }
    text
}

fn main() -> ExitCode {
    let cli = Cli::parse();
    let outcome = match &cli.command {
        Command::Run(a) => run_plan(a),
        Command::Merge(a) => merge_plan(a),
        Command::Inspect(a) => commands::inspect(&a.inputs).map_err(Failure::Input),
        Command::Track(a) => commands::track(a),
        Command::TrackError(a) => cli::track_error::track_error(a),
        Command::Demo(a) => demo_case().and_then(|case| {
            run_case(
                Plan::CaseFile(&case),
                &a.common,
                Some(PathBuf::from("demo-out")),
                true,
                Mode::Layers,
            )
        }),
        Command::Report(a) => trackswing::write::report::write_report_and_list(&a.out_dir)
            .map(|p| println!("wrote {}", p.display()))
            .with_context(|| format!("writing the report for {}", a.out_dir.display()))
            .map_err(|e| {
                let missing_input = e.chain().any(|c| {
                    c.downcast_ref::<trackswing::write::report::ReportError>()
                        .is_some_and(|r| {
                            !matches!(r, trackswing::write::report::ReportError::Write(_))
                        })
                });
                if missing_input {
                    Failure::Input(e)
                } else {
                    Failure::Output(e)
                }
            }),
        Command::MakeDemo(a) => {
            let spec = trackswing::demo::spec_from(a.nx, a.ny, a.steps, a.step_hours, a.levels);
            if a.grib2 {
                trackswing::demo::grib2_case::write_case_grib2(&a.out, &spec)
            } else if a.members {
                trackswing::demo::files::write_members_case(&a.out, &spec)
            } else {
                trackswing::demo::files::write_case(&a.out, &spec)
            }
            .with_context(|| format!("writing the demo case into {}", a.out.display()))
            .map_err(Failure::Output)
        }
        Command::Sounding(a) => sounding(a),
        Command::Verify(a) => commands::verify(a),
        Command::ScoreTable => trackswing::verify::score_table::score_table(
            std::io::stdin().lock(),
            std::io::stdout().lock(),
        )
        .map_err(|e| Failure::Input(e.into())),
        Command::ThermoTable => trackswing::diagnose::thermo_table::thermo_table(
            std::io::stdin().lock(),
            std::io::stdout().lock(),
        )
        .map_err(|e| Failure::Input(e.into())),
    };
    match outcome {
        Ok(()) => ExitCode::SUCCESS,
        Err(f) => {
            let (code, e) = match f {
                Failure::Usage(e) => (2, e),
                Failure::Input(e) => (3, e),
                Failure::Output(e) => (4, e),
            };
            eprintln!("trackswing: error: {}", error_text(&e));
            ExitCode::from(code)
        }
    }
}
