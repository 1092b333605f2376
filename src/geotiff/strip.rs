//! Encoding of one strip of one band: nodata substitution, sample packing, predictor, Deflate.
//!
//! Each strip is encoded independently into its own buffer from plain inputs, so strips can be
//! produced in any order or in parallel and still give the same bytes.

use std::io::Write;

use flate2::write::ZlibEncoder;

use super::predictor::{float_predict_row, horizontal_predict_row_i16};
use super::{SampleEncoding, DEFLATE_LEVEL};

/// Raw Int16 value reserved for nodata.
pub(crate) const INT16_NODATA: i16 = i16::MIN;

/// Why a strip could not be encoded.
#[derive(Debug)]
pub(crate) enum StripError {
    /// The value at `index` (within the strip, row-major) does not fit the Int16 packing.
    OutOfRange {
        index: usize,
        value: f32,
    },
    Io(std::io::Error),
}

/// Encodes `values` (whole rows of `width` samples, row 0 first) as a Deflate-compressed strip
/// with the predictor matching `encoding` (3 for Float32, 2 for Int16).
pub(crate) fn encode_strip(
    values: &[f32],
    width: usize,
    encoding: SampleEncoding,
    nodata: f64,
) -> Result<Vec<u8>, StripError> {
    let bytes_per_sample = match encoding {
        SampleEncoding::Float32 => 4,
        SampleEncoding::Int16Scaled { .. } => 2,
    };
    let mut predicted = Vec::with_capacity(values.len() * bytes_per_sample);
    match encoding {
        SampleEncoding::Float32 => {
            let fill = nodata as f32;
            let mut row_buf = vec![0f32; width];
            for row in values.chunks(width) {
                for (dst, &v) in row_buf.iter_mut().zip(row) {
                    *dst = if v.is_nan() { fill } else { v };
                }
                float_predict_row(&row_buf[..row.len()], &mut predicted);
            }
        }
        SampleEncoding::Int16Scaled { scale, offset } => {
            let mut row_buf = vec![0i16; width];
            for (r, row) in values.chunks(width).enumerate() {
                for (c, (dst, &v)) in row_buf.iter_mut().zip(row).enumerate() {
                    *dst = pack_int16(v, scale, offset, nodata).ok_or(StripError::OutOfRange {
                        index: r * width + c,
                        value: v,
                    })?;
                }
                horizontal_predict_row_i16(&row_buf[..row.len()], &mut predicted);
            }
        }
    }
    let mut z = ZlibEncoder::new(
        Vec::with_capacity(predicted.len() / 2),
        flate2::Compression::new(DEFLATE_LEVEL),
    );
    z.write_all(&predicted).map_err(StripError::Io)?;
    z.finish().map_err(StripError::Io)
}

/// Packs one value as raw Int16 (`raw = round((v - offset) / scale)`); NaN and `nodata` become
/// [`INT16_NODATA`]. `None` when the raw value falls outside -32767..=32767.
fn pack_int16(v: f32, scale: f64, offset: f64, nodata: f64) -> Option<i16> {
    let v = f64::from(v);
    if v.is_nan() || v == nodata {
        return Some(INT16_NODATA);
    }
    let raw = ((v - offset) / scale).round();
    if (-32767.0..=32767.0).contains(&raw) {
        Some(raw as i16)
    } else {
        None
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use flate2::read::ZlibDecoder;
    use std::io::Read;

    fn inflate(bytes: &[u8]) -> Vec<u8> {
        let mut out = Vec::new();
        ZlibDecoder::new(bytes).read_to_end(&mut out).unwrap();
        out
    }

    #[test]
    fn pack_int16_rounds_and_reserves_nodata() {
        assert_eq!(pack_int16(1.234, 0.01, 0.0, -9999.0), Some(123));
        assert_eq!(pack_int16(-0.5, 0.1, 1.0, -9999.0), Some(-15));
        assert_eq!(pack_int16(f32::NAN, 0.01, 0.0, -9999.0), Some(INT16_NODATA));
        assert_eq!(pack_int16(-9999.0, 0.01, 0.0, -9999.0), Some(INT16_NODATA));
        assert_eq!(pack_int16(327.67, 0.01, 0.0, -9999.0), Some(32767));
        assert_eq!(pack_int16(-327.68, 0.01, 0.0, -9999.0), None);
        assert_eq!(pack_int16(f32::INFINITY, 0.01, 0.0, -9999.0), None);
    }

    #[test]
    fn float_strip_is_zlib_of_predicted_rows_with_nodata_filled() {
        let values = [1.0, f32::NAN, 3.0, 4.0];
        let strip = encode_strip(&values, 2, SampleEncoding::Float32, -9999.0).unwrap();
        // RFC 1950: a zlib stream starts with CMF 0x78 (deflate, 32 KiB window).
        assert_eq!(strip[0], 0x78);
        let mut expected = Vec::new();
        float_predict_row(&[1.0, -9999.0], &mut expected);
        float_predict_row(&[3.0, 4.0], &mut expected);
        assert_eq!(inflate(&strip), expected);
    }

    #[test]
    fn int16_strip_reports_position_of_bad_value() {
        let enc = SampleEncoding::Int16Scaled {
            scale: 1.0,
            offset: 0.0,
        };
        match encode_strip(&[0.0, 1.0, 2.0, 40000.0], 2, enc, -9999.0) {
            Err(StripError::OutOfRange { index, value }) => {
                assert_eq!((index, value), (3, 40000.0));
            }
            other => panic!("expected OutOfRange, got {other:?}"),
        }
    }
}
