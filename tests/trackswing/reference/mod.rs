//! Independent reference tools (GDAL) and the small JSON reader for their output.

pub mod gdal;
pub mod json;
