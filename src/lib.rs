//! trackswing: how much a winter storm's snowfall depends on where its low tracks.
//!
//! The pipeline, one module per stage, in order:
//! [`read`] (fields, track, towns) → [`shift`] (storm-relative displacement of the fields per
//! scenario) → [`diagnose`] (precipitation type and snow-to-liquid ratio per column) →
//! [`accumulate`] (per-scenario running totals) → [`summarise`] (min/max/range, towns) →
//! [`write`] (GeoTIFF, GeoJSON, CSV, manifest, quicklook maps drawn with [`render`], and the
//! HTML report). After the storm, [`verify`] scores a finished run's scenarios against observed
//! storm totals. [`engine`] drives the stages over the time steps and is the one place where
//! work runs in parallel; [`shard`] splits its scenarios over several runs and merges them. [`sounding`] shows one cell's profile and what every method makes of
//! it.
//!
//! Decision support for trained forecasters: not an official forecast or warning. Defer to the
//! national weather service and local emergency management.

pub mod accumulate;
pub mod case;
pub mod demo;
pub mod diagnose;
pub mod engine;
pub mod geotiff;
pub mod grid;
pub mod progress;
pub mod read;
pub mod render;
pub mod scenario;
pub mod shard;
pub mod shift;
pub mod sounding;
pub mod summarise;
pub mod track_error;
pub mod units;
pub mod verify;
pub mod write;

/// The caution every output and help text carries.
pub const CAUTION: &str =
    "Decision support for trained forecasters only: not an official forecast or \
warning. Defer to the national weather service and local emergency management.";
