//! Shards: a case's scenarios split over several runs (batch jobs, machines), each writing its
//! scenarios' totals to one file, and merged into the full set of layers.
//!
//! Scenarios share nothing in the engine (see [`crate::accumulate`]), so a shard's totals are
//! the totals the whole run gives those scenarios, bit for bit, and the merged layers are the
//! layers of one run: only `manifest.json`'s time of writing and its list of shard files differ.
//! Summaries (min/max/range, quantiles, bust scores, maps) are computed from the merged totals,
//! so the settings that only shape them (units, raster type, thresholds, the track-error prior,
//! the report) may be chosen at merge time.
//!
//! A shard file holds, in this order:
//! - the line `trackswing shard 1` (magic and version);
//! - the body: for each scenario of the shard, in band order, the cells' liquid, snow liquid,
//!   snowfall, ice-pellet liquid, freezing-rain liquid and carried water as little-endian f32,
//!   then the onset steps as little-endian u32;
//! - the header, JSON ([`Header`]): which shard, the run's key, the scenarios, the steps'
//!   valid times and the CRC-32 of the body;
//! - the header's length in bytes, little-endian u64.
//!
//! The run's key ([`run_key`]) is what decides the totals: every scenario of the case, the
//! methods, the displacement taper, the grid and the SHA-256 of every model input (terrain,
//! steps, track). A merge recomputes it from its own case and refuses shards whose key differs,
//! naming the part that does, so shards of different inputs or settings never mix. It also
//! refuses a scenario given twice or missing, and a file whose length or body CRC does not match
//! its header (a copy cut short or damaged).

use crate::accumulate::Totals;
use crate::case::Case;
use crate::engine::{self, Computed, EngineError, Prepared, RunResult, ShardUsed, Timings};
use crate::progress::Progress;
use crate::read::StepLayout;
use crate::scenario::Scenario;
use chrono::{DateTime, Utc};
use rayon::prelude::*;
use sha2::{Digest, Sha256};
use std::io::{BufReader, BufWriter, Read, Seek, SeekFrom, Write};
use std::path::{Path, PathBuf};

pub mod ensemble;
pub mod select;
pub use select::Shard;

/// The first line of a shard file.
pub const MAGIC: &[u8] = b"trackswing shard 1\n";

/// Why shards could not be written or merged.
#[derive(Debug, thiserror::Error)]
pub enum ShardError {
    /// The run itself.
    #[error(transparent)]
    Engine(#[from] EngineError),
    /// A file could not be read or written.
    #[error("{path}: {source}")]
    Io {
        /// The file.
        path: PathBuf,
        /// The cause.
        source: std::io::Error,
    },
    /// A model input could not be read for its hash.
    #[error("{path}: reading it for the run's key: {source}")]
    Input {
        /// The file.
        path: PathBuf,
        /// The cause.
        source: std::io::Error,
    },
    /// A file is not a shard file, or is damaged.
    #[error("{path}: {what}")]
    Format {
        /// The file.
        path: PathBuf,
        /// What is wrong.
        what: String,
    },
    /// A shard was computed from other inputs or settings than the merge's case.
    #[error("{path}: this shard's {part} differ from the case being merged ({detail}); run the shard again with the same case file, inputs and options")]
    Mismatch {
        /// The shard file.
        path: PathBuf,
        /// Which part of the run's key differs.
        part: String,
        /// The two values, shortened.
        detail: String,
    },
    /// The shards do not hold every scenario exactly once.
    #[error("{0}")]
    Coverage(String),
    /// The merged totals would not fit in memory.
    #[error("the merge holds the totals of all {scenarios} scenarios × {cells} cells, about {need_mib} MiB, but only {avail_mib} MiB of memory is available: merge on a machine with more memory")]
    TooBig {
        /// Estimated need, MiB.
        need_mib: u64,
        /// Available, MiB.
        avail_mib: u64,
        /// Scenarios.
        scenarios: usize,
        /// Cells.
        cells: usize,
    },
}

/// The header of a shard file.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Header {
    /// Which shard, `K/N`.
    pub shard: String,
    /// What decides the totals ([`run_key`]).
    pub run: serde_json::Value,
    /// Band indices (0-based, in the case's scenario order) of the scenarios in the body.
    pub scenarios: Vec<usize>,
    /// Cells per scenario.
    pub cells: usize,
    /// Per scenario of the body: cell-steps outside the grid, steps not covered by the model,
    /// cell-steps a method could not diagnose.
    pub counts: Vec<[u64; 3]>,
    /// Valid time of every step, RFC 3339.
    pub valid_times: Vec<String>,
    /// The modelled low centre (lon, lat) at every step, where the track covers it.
    pub centres: Vec<Option<[f64; 2]>>,
    /// The isobaric levels found in the steps, Pa.
    pub levels_pa: Vec<f64>,
    /// Seconds the shard's engine spent waiting for input and computing.
    pub timings_s: [f64; 2],
    /// CRC-32 (ISO-HDLC, as zlib and PNG compute it) of the body: finds a copy cut short or a
    /// damaged byte at memory speed.
    pub body_crc32: u32,
}

/// The SHA-256 of a file, hex. Kept for the rest of the process (keyed by path, length and
/// modification time): a merge hashes the model inputs for the run's key and again for the
/// manifest, gigabytes for a continental case.
pub fn sha256_of(path: &Path) -> std::io::Result<String> {
    type Seen = std::collections::HashMap<(PathBuf, u64, Option<std::time::SystemTime>), String>;
    static SEEN: std::sync::Mutex<Option<Seen>> = std::sync::Mutex::new(None);
    let mut f = std::fs::File::open(path)?;
    let meta = f.metadata()?;
    let key = (path.to_path_buf(), meta.len(), meta.modified().ok());
    let seen = |key: &_| -> Option<String> {
        let lock = SEEN.lock().unwrap_or_else(|e| e.into_inner());
        lock.as_ref().and_then(|m| m.get(key).cloned())
    };
    if let Some(h) = seen(&key) {
        return Ok(h);
    }
    let mut h = Sha256::new();
    std::io::copy(&mut f, &mut h)?;
    let hex = format!("{:x}", h.finalize());
    SEEN.lock()
        .unwrap_or_else(|e| e.into_inner())
        .get_or_insert_with(Default::default)
        .insert(key, hex.clone());
    Ok(hex)
}

/// What decides a run's totals: every scenario (cross, along, timing, intensity, warm bias), the
/// methods, the taper, the grid and the SHA-256 of the model inputs (hashed in parallel).
pub fn run_key(case: &Case, prepared: &Prepared) -> Result<serde_json::Value, ShardError> {
    let m = &case.member();
    let mut listed: Vec<(&str, &Path)> = vec![("terrain", &m.terrain)];
    listed.extend(m.steps.iter().map(|s| ("step", s.as_path())));
    if let Some(t) = &m.track {
        listed.push(("track", t));
    }
    let inputs = listed
        .par_iter()
        .map(|&(role, p)| {
            sha256_of(p)
                .map(|h| serde_json::json!([role, h]))
                .map_err(|source| ShardError::Input {
                    path: p.to_path_buf(),
                    source,
                })
        })
        .collect::<Result<Vec<_>, _>>()?;
    let g = &prepared.source.statics().grid;
    let scenarios: Vec<[f64; 5]> = prepared
        .scenarios
        .iter()
        .map(|s| {
            [
                s.cross_km,
                s.along_km,
                s.timing_h,
                s.intensity,
                s.warm_bias_k,
            ]
        })
        .collect();
    let ratio = match case.physics.methods.slr {
        crate::diagnose::SlrMethod::Fixed(r) => Some(r),
        _ => None,
    };
    Ok(serde_json::json!({
        "scenarios": scenarios,
        "methods": {
            "precip_type": case.physics.methods.ptype.name(),
            "snow_ratio": case.physics.methods.slr.name(),
            "fixed_ratio": ratio,
            "lapse_rate_k_per_m": case.physics.methods.lapse_rate_k_per_m,
            "dry_air": case.physics.methods.dry_air,
        },
        "taper": case.physics.taper,
        "grid": {
            "nx": g.nx,
            "ny": g.ny,
            "geotransform": g.georef.geotransform,
            "crs": g.georef.crs.proj_string(),
        },
        "model_inputs": inputs,
        "member": m.name,
    }))
}

/// Runs shard `shard` of a case on `threads` threads and writes its file into `folder`
/// ([`write_shard`]). Returns the run (scenarios outside the shard have empty totals) and the
/// file.
pub fn run_and_write(
    case: &Case,
    threads: usize,
    progress: &dyn Progress,
    shard: Shard,
    folder: &Path,
) -> Result<(RunResult, PathBuf), ShardError> {
    run_and_write_as(case, threads, progress, shard, folder, &file_name(shard))
}

/// [`run_and_write`] into the file `name` of `folder`.
pub fn run_and_write_as(
    case: &Case,
    threads: usize,
    progress: &dyn Progress,
    shard: Shard,
    folder: &Path,
    name: &str,
) -> Result<(RunResult, PathBuf), ShardError> {
    let prepared = engine::prepare(case, progress)?;
    let count = prepared.scenarios.len();
    if shard.index >= count {
        return Err(ShardError::Coverage(format!(
            "shard {} holds no scenario: the case has {count} scenario{}, so use at most {count} shards",
            shard.label(),
            if count == 1 { "" } else { "s" }
        )));
    }
    let key = run_key(case, &prepared)?;
    let r = engine::run_prepared(case, prepared, threads, progress, Some(shard))?;
    let path = write_shard_as(folder, name, shard, key, &r)?;
    Ok((r, path))
}

/// Where the shards of a run go when no folder is named: beside the output folder, `OUT.shards`.
pub fn default_folder(out_dir: &Path) -> PathBuf {
    let mut name = out_dir
        .file_name()
        .map(|n| n.to_os_string())
        .unwrap_or_else(|| "out".into());
    name.push(".shards");
    out_dir.with_file_name(name)
}

/// The file name of shard `s`: `shard-K-of-N.bin`.
pub fn file_name(s: Shard) -> String {
    format!("shard-{}-of-{}.bin", s.index + 1, s.count)
}

/// Writes the scenarios of `shard` from `r` into `folder` (created if need be), through a
/// temporary file renamed into place: a failed write leaves no shard file. Refuses to replace a
/// file that is not a shard file. Returns the file written.
pub fn write_shard(
    folder: &Path,
    shard: Shard,
    key: serde_json::Value,
    r: &RunResult,
) -> Result<PathBuf, ShardError> {
    write_shard_as(folder, &file_name(shard), shard, key, r)
}

/// [`write_shard`] into the file `name` of `folder`.
pub fn write_shard_as(
    folder: &Path,
    name: &str,
    shard: Shard,
    key: serde_json::Value,
    r: &RunResult,
) -> Result<PathBuf, ShardError> {
    let io = |path: &Path| {
        let path = path.to_path_buf();
        move |source| ShardError::Io { path, source }
    };
    std::fs::create_dir_all(folder).map_err(io(folder))?;
    let path = folder.join(name);
    if path.exists() && !starts_with_magic(&path) {
        return Err(ShardError::Format {
            path,
            what: "exists and is not a shard file; not replaced".into(),
        });
    }
    let tmp = folder.join(format!(".{name}.partial-{}", std::process::id()));
    let written = write_to(&tmp, shard, key, r).map_err(io(&tmp));
    let done = written.and_then(|()| std::fs::rename(&tmp, &path).map_err(io(&path)));
    if done.is_err() {
        let _ = std::fs::remove_file(&tmp);
    }
    done.map(|()| path)
}

fn starts_with_magic(path: &Path) -> bool {
    let mut head = vec![0u8; MAGIC.len()];
    std::fs::File::open(path)
        .and_then(|mut f| f.read_exact(&mut head))
        .is_ok()
        && head == MAGIC
}

fn write_to(
    path: &Path,
    shard: Shard,
    key: serde_json::Value,
    r: &RunResult,
) -> std::io::Result<()> {
    let mut out = BufWriter::with_capacity(1 << 20, std::fs::File::create(path)?);
    out.write_all(MAGIC)?;
    let mut hash = crc32fast::Hasher::new();
    let mut buf: Vec<u8> = Vec::with_capacity(1 << 18);
    let mut put = |bytes: &mut Vec<u8>, out: &mut BufWriter<std::fs::File>| {
        hash.update(&bytes[..]);
        let r = out.write_all(bytes);
        bytes.clear();
        r
    };
    let held: Vec<usize> = (0..r.scenarios.len()).filter(|&i| shard.holds(i)).collect();
    for &i in &held {
        let t = &r.totals[i];
        for a in t.f32_arrays() {
            for chunk in a.chunks(1 << 16) {
                chunk
                    .iter()
                    .for_each(|v| buf.extend_from_slice(&v.to_le_bytes()));
                put(&mut buf, &mut out)?;
            }
        }
        for chunk in t.onset.chunks(1 << 16) {
            chunk
                .iter()
                .for_each(|v| buf.extend_from_slice(&v.to_le_bytes()));
            put(&mut buf, &mut out)?;
        }
    }
    let header = Header {
        shard: shard.label(),
        run: key,
        counts: held
            .iter()
            .map(|&i| {
                let t = &r.totals[i];
                [t.outside, t.uncovered_steps as u64, t.undefined]
            })
            .collect(),
        scenarios: held,
        cells: r.grid.len(),
        valid_times: r.valid_times.iter().map(time_text).collect(),
        centres: r.centres.iter().map(|c| c.map(|(a, b)| [a, b])).collect(),
        levels_pa: r.layout.levels_pa.clone(),
        timings_s: [r.timings.read_s, r.timings.compute_s],
        body_crc32: hash.finalize(),
    };
    let json = serde_json::to_vec(&header).map_err(std::io::Error::other)?;
    out.write_all(&json)?;
    out.write_all(&(json.len() as u64).to_le_bytes())?;
    out.into_inner().map_err(|e| e.into_error())?.sync_all()
}

fn time_text(t: &DateTime<Utc>) -> String {
    t.to_rfc3339_opts(chrono::SecondsFormat::AutoSi, true)
}

/// Reads a shard file's header, checking the magic line and the file's length.
pub fn read_header(path: &Path) -> Result<Header, ShardError> {
    let bad = |what: String| ShardError::Format {
        path: path.to_path_buf(),
        what,
    };
    let io = |source| ShardError::Io {
        path: path.to_path_buf(),
        source,
    };
    let mut f = std::fs::File::open(path).map_err(io)?;
    let len = f.metadata().map_err(io)?.len();
    if !starts_with_magic(path) {
        return Err(bad(format!(
            "not a trackswing shard file (expected it to begin with {:?})",
            String::from_utf8_lossy(MAGIC).trim_end()
        )));
    }
    let min = MAGIC.len() as u64 + 8;
    if len < min {
        return Err(bad(format!(
            "{len} bytes: cut short (a shard file ends with its header)"
        )));
    }
    f.seek(SeekFrom::End(-8)).map_err(io)?;
    let mut n = [0u8; 8];
    f.read_exact(&mut n).map_err(io)?;
    let header_len = u64::from_le_bytes(n);
    if header_len > len - min {
        return Err(bad(format!(
            "header length {header_len} does not fit in the file's {len} bytes: cut short or damaged"
        )));
    }
    f.seek(SeekFrom::End(-8 - header_len as i64)).map_err(io)?;
    let mut json = vec![0u8; header_len as usize];
    f.read_exact(&mut json).map_err(io)?;
    let h: Header = serde_json::from_slice(&json)
        .map_err(|e| bad(format!("header: {e} (cut short or damaged)")))?;
    let body = len - min - header_len;
    let want = h.scenarios.len() as u64 * h.cells as u64 * 4 * 7;
    if body != want {
        return Err(bad(format!(
            "body of {body} bytes, expected {want} ({} scenarios × {} cells × 7 values of 4 bytes): cut short or damaged",
            h.scenarios.len(),
            h.cells
        )));
    }
    if h.counts.len() != h.scenarios.len() {
        return Err(bad(format!(
            "header: {} counts for {} scenarios",
            h.counts.len(),
            h.scenarios.len()
        )));
    }
    Ok(h)
}

/// Reads a shard file's totals (one per scenario of its header), checking the body's SHA-256.
pub fn read_totals(path: &Path, h: &Header) -> Result<Vec<Totals>, ShardError> {
    let io = |source| ShardError::Io {
        path: path.to_path_buf(),
        source,
    };
    let mut f = BufReader::with_capacity(1 << 20, std::fs::File::open(path).map_err(io)?);
    f.seek(SeekFrom::Start(MAGIC.len() as u64)).map_err(io)?;
    let mut hash = crc32fast::Hasher::new();
    let mut buf = vec![0u8; 4 * h.cells];
    let mut out = Vec::with_capacity(h.scenarios.len());
    for c in &h.counts {
        let mut t = Totals::new(0);
        let mut f32s = || -> Result<Vec<f32>, ShardError> {
            f.read_exact(&mut buf).map_err(io)?;
            hash.update(&buf);
            Ok(buf
                .chunks_exact(4)
                .map(|b| f32::from_le_bytes([b[0], b[1], b[2], b[3]]))
                .collect())
        };
        t.liquid = f32s()?;
        t.snow_liquid = f32s()?;
        t.snowfall = f32s()?;
        t.ice_pellets = f32s()?;
        t.freezing_rain = f32s()?;
        t.carried = f32s()?;
        f.read_exact(&mut buf).map_err(io)?;
        hash.update(&buf);
        t.onset = buf
            .chunks_exact(4)
            .map(|b| u32::from_le_bytes([b[0], b[1], b[2], b[3]]))
            .collect();
        t.outside = c[0];
        t.uncovered_steps = c[1] as u32;
        t.undefined = c[2];
        out.push(t);
    }
    let got = hash.finalize();
    if got != h.body_crc32 {
        return Err(ShardError::Format {
            path: path.to_path_buf(),
            what: format!(
                "the body's CRC-32 is {got:08x}, the header says {:08x}: damaged (copy it again)",
                h.body_crc32
            ),
        });
    }
    Ok(out)
}

/// The first part of two keys that differs, with both values shortened.
fn key_difference(
    mine: &serde_json::Value,
    theirs: &serde_json::Value,
) -> Option<(String, String)> {
    let short = |v: Option<&serde_json::Value>| {
        let s = v.map_or("absent".to_string(), |v| v.to_string());
        if s.chars().count() > 160 {
            format!("{}…", s.chars().take(160).collect::<String>())
        } else {
            s
        }
    };
    match (mine.as_object(), theirs.as_object()) {
        (Some(a), Some(b)) => a
            .keys()
            .chain(b.keys().filter(|k| !a.contains_key(*k)))
            .find(|k| a.get(*k) != b.get(*k))
            .map(|k| {
                let (x, y) = (a.get(k), b.get(k));
                let detail = match (x.and_then(|v| v.as_array()), y.and_then(|v| v.as_array())) {
                    (Some(x), Some(y)) => {
                        let i = x.iter().zip(y).take_while(|(p, q)| p == q).count();
                        format!(
                            "the shard lists {} and the case {}; the first difference is item {}: shard {}, case {}",
                            y.len(),
                            x.len(),
                            i + 1,
                            short(y.get(i)),
                            short(x.get(i))
                        )
                    }
                    _ => match (x.and_then(|v| v.as_object()), y.and_then(|v| v.as_object())) {
                        (Some(x), Some(y)) => x
                            .keys()
                            .chain(y.keys().filter(|k| !x.contains_key(*k)))
                            .filter(|k| x.get(*k) != y.get(*k))
                            .map(|k| {
                                format!("{k}: shard {}, case {}", short(y.get(k)), short(x.get(k)))
                            })
                            .collect::<Vec<_>>()
                            .join("; "),
                        _ => format!("shard: {}; case: {}", short(y), short(x)),
                    },
                };
                let detail = if k == "scenarios" {
                    format!("{detail}; each as cross km, along km, timing h, intensity, warm bias K")
                } else {
                    detail
                };
                (k.replace('_', " "), detail)
            }),
        _ => (mine != theirs).then(|| ("run".into(), String::new())),
    }
}

/// Merges shard files into the run they are part of: checks each against the case's key and
/// that together they hold every scenario once, then reads their totals. The engine's timings
/// are the shards' sums.
pub fn assemble(
    case: &Case,
    progress: &dyn Progress,
    paths: &[PathBuf],
) -> Result<RunResult, ShardError> {
    let record = crate::progress::Record::new(progress);
    let mut r = assemble_recorded(case, &record, paths)?;
    r.warnings = record.into_warnings();
    Ok(r)
}

/// [`assemble`], its warnings going through `progress`.
fn assemble_recorded(
    case: &Case,
    progress: &dyn Progress,
    paths: &[PathBuf],
) -> Result<RunResult, ShardError> {
    if paths.is_empty() {
        return Err(ShardError::Coverage("no shard files to merge".to_string()));
    }
    let prepared = engine::prepare(case, progress)?;
    let key = run_key(case, &prepared)?;
    let headers = paths
        .iter()
        .map(|p| read_header(p))
        .collect::<Result<Vec<_>, _>>()?;
    let scenarios: &[Scenario] = &prepared.scenarios;
    let mut owner: Vec<Option<&Path>> = vec![None; scenarios.len()];
    let first = &headers[0];
    for (p, h) in paths.iter().zip(&headers) {
        if let Some((part, detail)) = key_difference(&key, &h.run) {
            return Err(ShardError::Mismatch {
                path: p.clone(),
                part,
                detail,
            });
        }
        let same = |what: &str, ok: bool| {
            if ok {
                Ok(())
            } else {
                Err(ShardError::Mismatch {
                    path: p.clone(),
                    part: what.into(),
                    detail: format!("than {}", paths[0].display()),
                })
            }
        };
        same(
            "set of steps (valid times)",
            h.valid_times == first.valid_times,
        )?;
        same("track positions", h.centres == first.centres)?;
        same("isobaric levels", h.levels_pa == first.levels_pa)?;
        for &i in &h.scenarios {
            let Some(slot) = owner.get_mut(i) else {
                return Err(ShardError::Format {
                    path: p.clone(),
                    what: format!(
                        "scenario {i} does not exist ({} scenarios)",
                        scenarios.len()
                    ),
                });
            };
            if let Some(other) = slot {
                return Err(ShardError::Coverage(format!(
                    "scenario {} is in both {} and {}: give each shard once",
                    scenarios[i].label(),
                    other.display(),
                    p.display()
                )));
            }
            *slot = Some(p);
        }
    }
    let missing: Vec<String> = owner
        .iter()
        .zip(scenarios)
        .filter(|(o, _)| o.is_none())
        .map(|(_, s)| s.label())
        .collect();
    if !missing.is_empty() {
        let shown: Vec<&str> = missing.iter().take(5).map(String::as_str).collect();
        return Err(ShardError::Coverage(format!(
            "the shards hold {} of {} scenarios; missing: {}{} (a shard that did not finish, or a shard file not given)",
            scenarios.len() - missing.len(),
            scenarios.len(),
            shown.join("; "),
            if missing.len() > shown.len() { "; …" } else { "" }
        )));
    }
    let valid_times = first
        .valid_times
        .iter()
        .map(|t| {
            DateTime::parse_from_rfc3339(t)
                .map(|t| t.with_timezone(&Utc))
                .map_err(|e| ShardError::Format {
                    path: paths[0].clone(),
                    what: format!("valid time {t:?}: {e}"),
                })
        })
        .collect::<Result<Vec<_>, _>>()?;
    let n = prepared.source.statics().grid.len();
    if let Err((need, avail)) = engine::fits_in_memory(n, scenarios.len()) {
        return Err(ShardError::TooBig {
            need_mib: need >> 20,
            avail_mib: avail >> 20,
            scenarios: scenarios.len(),
            cells: n,
        });
    }
    let mut totals: Vec<Option<Totals>> = vec![None; scenarios.len()];
    let mut timings = Timings::default();
    for (p, h) in paths.iter().zip(&headers) {
        if h.cells != n {
            return Err(ShardError::Mismatch {
                path: p.clone(),
                part: "grid".into(),
                detail: format!("{} cells against {n}", h.cells),
            });
        }
        timings.read_s += h.timings_s[0];
        timings.compute_s += h.timings_s[1];
    }
    // Shards are read side by side: each file's CRC and conversion run on their own thread.
    let read = paths
        .par_iter()
        .zip(&headers)
        .map(|(p, h)| read_totals(p, h))
        .collect::<Result<Vec<_>, _>>()?;
    for (h, ts) in headers.iter().zip(read) {
        for (i, t) in h.scenarios.iter().zip(ts) {
            totals[*i] = Some(t);
        }
    }
    let totals: Vec<Totals> = totals
        .into_iter()
        .map(|t| t.expect("coverage checked"))
        .collect();
    let computed = Computed {
        totals,
        valid_times,
        centres: first
            .centres
            .iter()
            .map(|c| c.map(|[a, b]| (a, b)))
            .collect(),
        layout: StepLayout::new(first.levels_pa.clone()),
        timings,
        shards: paths
            .iter()
            .zip(&headers)
            .map(|(p, h)| ShardUsed {
                file: p.display().to_string(),
                shard: h.shard.clone(),
                body_crc32: format!("{:08x}", h.body_crc32),
            })
            .collect(),
    };
    Ok(RunResult::assemble(case, prepared, computed, progress))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn every_scenario_is_in_exactly_one_shard() {
        for count in 1..9 {
            for i in 0..100 {
                let holders = (0..count)
                    .filter(|&index| Shard { index, count }.holds(i))
                    .count();
                assert_eq!(holders, 1, "scenario {i}, {count} shards");
            }
            // Interleaved: each shard holds ⌊100/N⌋ or ⌈100/N⌉ scenarios.
            for index in 0..count {
                let held = (0..100)
                    .filter(|&i| Shard { index, count }.holds(i))
                    .count();
                assert!(held == 100 / count || held == 100_usize.div_ceil(count));
            }
        }
    }

    #[test]
    fn a_key_difference_names_the_part_and_the_first_item() {
        let case = serde_json::json!({"scenarios": [[0.0], [10.0], [20.0]], "methods": {"dry_air": true, "precip_type": "energy-area"}});
        let shard = serde_json::json!({"scenarios": [[0.0], [10.0], [20.0]], "methods": {"dry_air": false, "precip_type": "energy-area"}});
        let (part, detail) = key_difference(&case, &shard).unwrap();
        assert_eq!(part, "methods");
        assert_eq!(detail, "dry_air: shard false, case true");
        let shard = serde_json::json!({"scenarios": [[0.0], [15.0]], "methods": {"dry_air": true, "precip_type": "energy-area"}});
        let (part, detail) = key_difference(&case, &shard).unwrap();
        assert_eq!(part, "scenarios");
        assert!(detail.starts_with("the shard lists 2 and the case 3; the first difference is item 2: shard [15.0], case [10.0]"), "{detail}");
        assert_eq!(key_difference(&case, &case), None);
    }
}
