//! TIFF differencing predictors applied before Deflate, one image row of one plane at a time.
//!
//! - Predictor 2, horizontal differencing (TIFF 6.0, Section 14): each sample is replaced by its
//!   difference from the sample to its left, modulo 2^16 for 16-bit samples.
//! - Predictor 3, floating point (Adobe, TIFF Technical Note 3, 2005): the bytes of the row's
//!   samples are regrouped most significant byte first (all first bytes of the row, then all
//!   second bytes, ...) and the resulting byte sequence is then horizontally differenced modulo
//!   256. The regrouping is defined in big-endian order whatever the file's byte order, which is
//!   what libtiff and the `tiff` crate decode.
//!
//! Planar files have one sample per pixel in each plane, so the differencing stride is 1.

/// Appends the predictor-3 encoding of one row of f32 samples (`4 * row.len()` bytes) to `out`.
pub(crate) fn float_predict_row(row: &[f32], out: &mut Vec<u8>) {
    let n = row.len();
    let start = out.len();
    out.resize(start + 4 * n, 0);
    let bytes = &mut out[start..];
    for (i, v) in row.iter().enumerate() {
        for (k, b) in v.to_bits().to_be_bytes().into_iter().enumerate() {
            bytes[k * n + i] = b;
        }
    }
    for i in (1..bytes.len()).rev() {
        bytes[i] = bytes[i].wrapping_sub(bytes[i - 1]);
    }
}

/// Appends the predictor-2 encoding of one row of i16 samples (`2 * row.len()` bytes, native byte
/// order, as the `tiff` crate writes the file header in native order) to `out`.
pub(crate) fn horizontal_predict_row_i16(row: &[i16], out: &mut Vec<u8>) {
    let mut left = 0i16;
    for &v in row {
        out.extend_from_slice(&v.wrapping_sub(left).to_ne_bytes());
        left = v;
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Inverse of [`float_predict_row`], written from TIFF Technical Note 3 independently of the
    /// encoder: undo differencing, then gather byte k of sample i from position k*n + i.
    fn float_unpredict_row(bytes: &[u8]) -> Vec<f32> {
        let mut acc = bytes.to_vec();
        for i in 1..acc.len() {
            acc[i] = acc[i].wrapping_add(acc[i - 1]);
        }
        let n = acc.len() / 4;
        (0..n)
            .map(|i| {
                f32::from_bits(u32::from_be_bytes([
                    acc[i],
                    acc[n + i],
                    acc[2 * n + i],
                    acc[3 * n + i],
                ]))
            })
            .collect()
    }

    #[test]
    fn float_predictor_known_vector() {
        // IEEE 754: 1.0f32 = 0x3F800000, 2.0f32 = 0x40000000 (IEEE 754-2008, binary32).
        // Regrouped MSB first (TIFF TN3): [3F 40 | 80 00 | 00 00 | 00 00];
        // differenced mod 256: [3F, 40-3F=01, 80-40=40, 00-80=80, 0, 0, 0, 0].
        let mut out = Vec::new();
        float_predict_row(&[1.0, 2.0], &mut out);
        assert_eq!(out, [0x3F, 0x01, 0x40, 0x80, 0, 0, 0, 0]);
    }

    #[test]
    fn float_predictor_known_vector_negative() {
        // -2.0f32 = 0xC0000000, 0.5f32 = 0x3F000000 (IEEE 754 binary32).
        // Regrouped: [C0 3F | 00 00 | 00 00 | 00 00]; differenced: [C0, 3F-C0=7F, 00-3F=C1, 0...].
        let mut out = Vec::new();
        float_predict_row(&[-2.0, 0.5], &mut out);
        assert_eq!(out, [0xC0, 0x7F, 0xC1, 0, 0, 0, 0, 0]);
    }

    #[test]
    fn float_predictor_round_trips_edge_values() {
        let row = [
            0.0,
            -0.0,
            f32::MIN_POSITIVE,
            f32::MAX,
            -9999.0,
            1.0e-40,
            f32::INFINITY,
            273.15,
        ];
        let mut out = vec![0xAA];
        float_predict_row(&row, &mut out);
        assert_eq!(out[0], 0xAA, "must append, not overwrite");
        let back = float_unpredict_row(&out[1..]);
        let bits = |v: &[f32]| v.iter().map(|x| x.to_bits()).collect::<Vec<_>>();
        assert_eq!(bits(&back), bits(&row));
    }

    #[test]
    fn horizontal_predictor_known_vector() {
        // TIFF 6.0 Section 14: differences from the left neighbour, first sample unchanged,
        // wrapping modulo 2^16: -32768 - 101 wraps to 32667, 32767 - (-32768) wraps to -1.
        let mut out = Vec::new();
        horizontal_predict_row_i16(&[100, 103, 101, -32768, 32767], &mut out);
        let diffs: Vec<i16> = out
            .chunks(2)
            .map(|c| i16::from_ne_bytes([c[0], c[1]]))
            .collect();
        assert_eq!(diffs, [100, 3, -2, 32667, -1]);
    }
}
