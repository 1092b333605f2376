//! Values of one field: Sections 5–7 decoded by the `grib` crate's pure-Rust unpackers, with the
//! bit map applied (missing points become NaN) and the values put in the grid's order.
//!
//! Data representation templates decoded (code table 5.0): 5.0 simple packing, 5.2 complex
//! packing, 5.3 complex packing with spatial differencing, 5.40 JPEG 2000, 5.41 PNG, 5.42
//! CCSDS. Run-length packing (5.200, used for radar composites, not for model fields) is refused:
//! the `grib` crate's unpacker expands runs without bound, so a damaged message could exhaust
//! memory before its length is checked. A bit map indicator of 254 ("previously defined bit map", code
//! table 6.0), which the crate does not resolve, is resolved by handing it the earlier Section 6
//! the scanner found.

use super::scan::{read_span, RawField};
use super::GribError;
use std::path::Path;

/// Data representation templates whose values can be decoded.
pub const DECODED_TEMPLATES: [u16; 6] = [0, 2, 3, 40, 41, 42];

/// Name of a data representation template (code table 5.0).
pub fn packing_name(t: u16) -> &'static str {
    match t {
        0 => "simple packing",
        1 => "matrix simple packing",
        2 => "complex packing",
        3 => "complex packing and spatial differencing",
        4 => "IEEE floating point",
        40 => "JPEG 2000",
        41 => "PNG",
        42 => "CCSDS",
        50 | 51 => "spectral",
        61 => "simple packing with logarithm pre-processing",
        200 => "run length packing",
        _ => "a template this reader does not know",
    }
}

/// Decodes `raw` from `path` and returns its values in the order `order` gives (see
/// [`super::gridspec::Placement`]).
pub fn decode(
    path: &Path,
    raw: &RawField,
    num_points: usize,
    order: &[u32],
) -> Result<Vec<f32>, GribError> {
    let io = |source| GribError::Io {
        path: path.to_path_buf(),
        source,
    };
    let mut f = std::fs::File::open(path).map_err(io)?;
    let s5 = read_span(&mut f, raw.sect5).map_err(io)?;
    let s6 = read_span(&mut f, raw.bitmap.unwrap_or(raw.sect6)).map_err(io)?;
    let s7 = read_span(&mut f, raw.sect7).map_err(io)?;
    let fail = |what: String| GribError::Field {
        path: path.to_path_buf(),
        message: raw.message,
        field: raw.field,
        what,
    };
    let decoder = grib::Grib2SubmessageDecoder::new(num_points, s5, s6, s7)
        .map_err(|e| fail(format!("cannot set up decoding: {e}")))?;
    let values: Vec<f32> = decoder
        .dispatch()
        .map_err(|e| fail(format!("cannot decode the values: {e}")))?
        .collect();
    if values.len() != num_points {
        return Err(fail(format!(
            "decoded {} values but Section 3 defines {num_points} points",
            values.len()
        )));
    }
    Ok(order.iter().map(|&i| values[i as usize]).collect())
}
