//! Reduced-resolution copies (overviews) of a band, each half the size of the one before.
//!
//! Each overview cell is the mean of the valid cells among the 2×2 cells it covers (GDAL's
//! `AVERAGE` resampling with nodata ignored, as `gdaladdo -r average` computes for factor 2), and
//! missing only where all of them are missing, so overviews never invent values and missing
//! areas shrink by at most half a cell per level. Sizes round up (`ceil(w / 2)`), as GDAL's.

/// Sizes of the overviews of a `width × height` image in `tile`-sized tiles: halved until the
/// whole image fits one tile (as GDAL's COG driver chooses by default).
///
/// ```
/// // 1800 × 1060 with 256-pixel tiles: 900 × 530, 450 × 265, 225 × 133.
/// assert_eq!(
///     trackswing::geotiff::overview_sizes(1800, 1060, 256),
///     vec![(900, 530), (450, 265), (225, 133)]
/// );
/// ```
pub fn overview_sizes(width: usize, height: usize, tile: usize) -> Vec<(usize, usize)> {
    let mut out = Vec::new();
    let (mut w, mut h) = (width, height);
    while w > tile || h > tile {
        w = w.div_ceil(2);
        h = h.div_ceil(2);
        out.push((w, h));
    }
    out
}

/// Halves `data` (`width × height`, row-major) by 2×2 means of the cells that are not missing
/// (NaN or equal to `nodata`); NaN where all four are missing.
pub(crate) fn halve(data: &[f32], width: usize, height: usize, nodata: f64) -> Vec<f32> {
    let (w2, h2) = (width.div_ceil(2), height.div_ceil(2));
    let mut out = Vec::with_capacity(w2 * h2);
    let nodata = nodata as f32;
    for r in 0..h2 {
        for c in 0..w2 {
            let mut sum = 0f64;
            let mut n = 0u32;
            for rr in 2 * r..(2 * r + 2).min(height) {
                for cc in 2 * c..(2 * c + 2).min(width) {
                    let v = data[rr * width + cc];
                    if !v.is_nan() && v != nodata {
                        sum += f64::from(v);
                        n += 1;
                    }
                }
            }
            out.push(if n == 0 {
                f32::NAN
            } else {
                (sum / f64::from(n)) as f32
            });
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn halving_averages_valid_cells_and_rounds_sizes_up() {
        // 3 × 3 → 2 × 2: the right column and bottom row average fewer cells.
        let d = [
            1.0,
            3.0,
            5.0, //
            f32::NAN,
            -9999.0,
            7.0, //
            2.0,
            4.0,
            f32::NAN,
        ];
        let h = halve(&d, 3, 3, -9999.0);
        assert_eq!(h[0], 2.0, "mean of 1 and 3; NaN and nodata ignored");
        assert_eq!(h[1], 6.0);
        assert_eq!(h[2], 3.0);
        assert!(h[3].is_nan(), "all missing stays missing, never zero");
        assert_eq!(overview_sizes(256, 256, 256), Vec::<(usize, usize)>::new());
        assert_eq!(overview_sizes(257, 10, 256), vec![(129, 5)]);
    }
}
