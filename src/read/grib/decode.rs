//! Values of one field: Sections 5–7 decoded by the `grib` crate's pure-Rust unpackers, with the
//! bit map applied (missing points become NaN) and the values put in the grid's order.
//!
//! Data representation templates decoded (code table 5.0): 5.0 simple packing, 5.2 complex
//! packing, 5.3 complex packing with spatial differencing, 5.40 JPEG 2000, 5.41 PNG, 5.42
//! CCSDS, decoded by the `grib` crate; 5.4 IEEE floating point, which the crate does not decode
//! and which GDAL writes by default for floating-point rasters, is read here ([`ieee_values`]).
//! Run-length packing (5.200, used for radar composites, not for model fields) is refused:
//! the `grib` crate's unpacker expands runs without bound, so a damaged message could exhaust
//! memory before its length is checked. A bit map indicator of 254 ("previously defined bit map", code
//! table 6.0), which the crate does not resolve, is resolved by handing it the earlier Section 6
//! the scanner found.

use super::scan::{read_span, RawField};
use super::GribError;
use std::path::Path;

/// Data representation templates whose values can be decoded.
pub const DECODED_TEMPLATES: [u16; 7] = [0, 2, 3, 4, 40, 41, 42];

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
    let values: Vec<f32> = if s5.get(9..11) == Some(&[0, 4]) {
        ieee_values(&s5, &s6, &s7, num_points).map_err(fail)?
    } else {
        grib::Grib2SubmessageDecoder::new(num_points, s5, s6, s7)
            .map_err(|e| fail(format!("cannot set up decoding: {e}")))?
            .dispatch()
            .map_err(|e| fail(format!("cannot decode the values: {e}")))?
            .collect()
    };
    if values.len() != num_points {
        return Err(fail(format!(
            "decoded {} values but Section 3 defines {num_points} points",
            values.len()
        )));
    }
    Ok(order.iter().map(|&i| values[i as usize]).collect())
}

/// Values of a field packed as IEEE floating point (data representation template 5.4): Section
/// 5 octets 6–9 give the number of values stored and octet 12 their precision (code table 5.7:
/// 1 = 32-bit, 2 = 64-bit); Section 7 holds them big-endian from octet 6. Points a bit map
/// (Section 6 indicator 0, octets 7 on, most significant bit first) leaves out are NaN.
/// (WMO Manual on Codes, vol. I.2, GRIB2 templates 5.4 and 7.4, code tables 5.7 and 6.0.)
///
/// ```
/// use trackswing::read::grib::decode::ieee_values;
/// let mut s5 = vec![0u8; 12];
/// s5[5..9].copy_from_slice(&2u32.to_be_bytes());
/// s5[9..11].copy_from_slice(&4u16.to_be_bytes());
/// s5[11] = 1;
/// let s6 = [0, 0, 0, 7, 6, 0, 0b1010_0000];
/// let mut s7 = vec![0, 0, 0, 13, 7];
/// s7.extend(1.5f32.to_be_bytes());
/// s7.extend((-2.25f32).to_be_bytes());
/// let v = ieee_values(&s5, &s6, &s7, 3).unwrap();
/// assert_eq!(v[0], 1.5);
/// assert!(v[1].is_nan());
/// assert_eq!(v[2], -2.25);
/// ```
pub fn ieee_values(s5: &[u8], s6: &[u8], s7: &[u8], num_points: usize) -> Result<Vec<f32>, String> {
    if s5.len() < 12 || s6.len() < 6 || s7.len() < 5 {
        return Err("Sections 5–7 are too short for IEEE floating point (template 5.4)".into());
    }
    let stored = u32::from_be_bytes([s5[5], s5[6], s5[7], s5[8]]) as usize;
    let size = match s5[11] {
        1 => 4,
        2 => 8,
        p => {
            return Err(format!(
                "IEEE floating point of precision {p} (code table 5.7) is not supported"
            ))
        }
    };
    let data = &s7[5..];
    if stored > num_points || data.len() < stored * size {
        return Err(format!(
            "Section 7 holds {} octets for {stored} values of {size} octets on a grid of {num_points} points",
            data.len()
        ));
    }
    let mut values = data.chunks_exact(size).take(stored).map(|b| match b.len() {
        4 => f32::from_be_bytes([b[0], b[1], b[2], b[3]]),
        _ => f64::from_be_bytes([b[0], b[1], b[2], b[3], b[4], b[5], b[6], b[7]]) as f32,
    });
    match s6[5] {
        255 if stored == num_points => Ok(values.collect()),
        255 => Err(format!(
            "{stored} values stored without a bit map on a grid of {num_points} points"
        )),
        0 => {
            let bits = &s6[6..];
            if bits.len() * 8 < num_points {
                return Err(format!(
                    "the bit map has {} bits for {num_points} points",
                    bits.len() * 8
                ));
            }
            let present = |i: usize| bits[i / 8] & (0x80 >> (i % 8)) != 0;
            let marked = (0..num_points).filter(|&i| present(i)).count();
            if marked != stored {
                return Err(format!(
                    "the bit map marks {marked} points but {stored} values are stored"
                ));
            }
            let out: Vec<f32> = (0..num_points)
                .map(|i| {
                    if present(i) {
                        values.next().unwrap_or(f32::NAN)
                    } else {
                        f32::NAN
                    }
                })
                .collect();
            Ok(out)
        }
        other => Err(format!(
            "bit map indicator {other} (code table 6.0) with IEEE floating point"
        )),
    }
}
