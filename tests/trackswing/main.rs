//! Integration tests: the engine on synthetic cases, the binary on the demo and on bad input.

mod aligned;
mod atomic;
mod bad_input;
mod coverage;
mod decisions;
mod demo;
mod engine;
mod fuzz;
mod gdal_source;
mod geotiff_gdal;
mod grib;
mod legend;
mod members;
mod model_folder;
mod not_computed;
mod physics;
mod reference;
mod region;
mod report;
mod rerun;
mod scenario_count;
mod shards;
mod support;
mod timing;
mod towns;
mod usage;
