//! The sample type of the GeoTIFF layers, as the case and `--raster-type` choose it (a leaf
//! module: the case reads it without depending on the writers).

/// Sample type of the GeoTIFF layers.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "lowercase")]
pub enum RasterType {
    /// IEEE Float32 with nodata −9999.
    Float32,
    /// Int16 with a per-layer scale factor (GDAL scale/offset), nodata −32768.
    Int16,
}

impl RasterType {
    /// Parses `float32` or `int16`.
    pub fn parse(s: &str) -> Option<Self> {
        match s.trim().to_ascii_lowercase().as_str() {
            "float32" => Some(Self::Float32),
            "int16" => Some(Self::Int16),
            _ => None,
        }
    }
}
