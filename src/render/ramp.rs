//! Colour ramps computed in OKLab (Ottosson 2020, "A perceptual color space for image
//! processing"), a space in which equal steps look about equally different and lightness `L`
//! is perceived lightness. Each ramp is a list of our own control points in OKLCh (lightness,
//! chroma, hue); colours between them are interpolated in OKLab, and a colour outside the sRGB
//! gamut keeps its lightness and hue and loses chroma until it fits. The control points'
//! lightness changes monotonically, so every ramp reads in order even in greyscale.

/// An sRGB colour, 8 bits per channel.
pub type Rgb = [u8; 3];

fn srgb_to_linear(c: f64) -> f64 {
    if c <= 0.04045 {
        c / 12.92
    } else {
        ((c + 0.055) / 1.055).powf(2.4)
    }
}

fn linear_to_srgb(c: f64) -> f64 {
    if c <= 0.003_130_8 {
        12.92 * c
    } else {
        1.055 * c.powf(1.0 / 2.4) - 0.055
    }
}

/// OKLab (L, a, b) of an sRGB colour (channels 0–1), Ottosson (2020) matrices M1 and M2.
///
/// ```
/// // W3C web-platform-tests css-color/oklab-001: sRGB #008000 is oklab(51.975% −0.1403 0.10768).
/// let [l, a, b] = trackswing::render::ramp::oklab_from_srgb([0.0, 128.0 / 255.0, 0.0]);
/// assert!((l - 0.51975).abs() < 5e-5 && (a + 0.1403).abs() < 5e-5 && (b - 0.10768).abs() < 5e-5);
/// ```
pub fn oklab_from_srgb(rgb: [f64; 3]) -> [f64; 3] {
    let [r, g, b] = rgb.map(srgb_to_linear);
    let l = (0.412_221_470_8 * r + 0.536_332_536_3 * g + 0.051_445_992_9 * b).cbrt();
    let m = (0.211_903_498_2 * r + 0.680_699_545_1 * g + 0.107_396_956_6 * b).cbrt();
    let s = (0.088_302_461_9 * r + 0.281_718_837_6 * g + 0.629_978_700_5 * b).cbrt();
    [
        0.210_454_255_3 * l + 0.793_617_785_0 * m - 0.004_072_046_8 * s,
        1.977_998_495_1 * l - 2.428_592_205_0 * m + 0.450_593_709_9 * s,
        0.025_904_037_1 * l + 0.782_771_766_2 * m - 0.808_675_766_0 * s,
    ]
}

/// sRGB (channels, possibly outside 0–1) of an OKLab colour: the inverse of
/// [`oklab_from_srgb`].
pub fn srgb_from_oklab(lab: [f64; 3]) -> [f64; 3] {
    let [ll, a, b] = lab;
    let l = (ll + 0.396_337_777_4 * a + 0.215_803_757_3 * b).powi(3);
    let m = (ll - 0.105_561_345_8 * a - 0.063_854_172_8 * b).powi(3);
    let s = (ll - 0.089_484_177_5 * a - 1.291_485_548_0 * b).powi(3);
    [
        4.076_741_662_1 * l - 3.307_711_591_3 * m + 0.230_969_929_2 * s,
        -1.268_438_004_6 * l + 2.609_757_401_1 * m - 0.341_319_396_5 * s,
        -0.004_196_086_3 * l - 0.703_418_614_7 * m + 1.707_614_701_0 * s,
    ]
    .map(linear_to_srgb)
}

/// OKLab from lightness, chroma and hue (degrees).
pub fn oklab_from_lch(l: f64, c: f64, h_deg: f64) -> [f64; 3] {
    let h = h_deg.to_radians();
    [l, c * h.cos(), c * h.sin()]
}

/// The sRGB colour nearest an OKLab colour at the same lightness and hue: chroma is reduced
/// (bisection) until every channel is within 0–1.
pub fn to_rgb_in_gamut(lab: [f64; 3]) -> Rgb {
    let inside = |c: [f64; 3]| c.iter().all(|v| (-1e-9..=1.0 + 1e-9).contains(v));
    let mut rgb = srgb_from_oklab(lab);
    if !inside(rgb) {
        let (mut lo, mut hi) = (0.0, 1.0);
        for _ in 0..30 {
            let mid = 0.5 * (lo + hi);
            let c = srgb_from_oklab([lab[0], lab[1] * mid, lab[2] * mid]);
            if inside(c) {
                lo = mid;
            } else {
                hi = mid;
            }
        }
        rgb = srgb_from_oklab([lab[0], lab[1] * lo, lab[2] * lo]);
    }
    rgb.map(|v| (v.clamp(0.0, 1.0) * 255.0).round() as u8)
}

/// A ramp of OKLab control points, sampled on 0…1.
#[derive(Clone, Debug)]
pub struct Ramp {
    stops: Vec<[f64; 3]>,
}

impl Ramp {
    /// A ramp through OKLCh control points (lightness 0–1, chroma, hue in degrees).
    pub fn from_lch(points: &[(f64, f64, f64)]) -> Self {
        Self {
            stops: points
                .iter()
                .map(|&(l, c, h)| oklab_from_lch(l, c, h))
                .collect(),
        }
    }

    /// The OKLab colour at `t` in 0…1 (clamped).
    pub fn lab(&self, t: f64) -> [f64; 3] {
        let n = self.stops.len() - 1;
        let x = t.clamp(0.0, 1.0) * n as f64;
        let k = (x.floor() as usize).min(n.saturating_sub(1));
        let f = x - k as f64;
        let (a, b) = (self.stops[k], self.stops[(k + 1).min(n)]);
        [0, 1, 2].map(|i| a[i] + f * (b[i] - a[i]))
    }

    /// The sRGB colour at `t`.
    pub fn rgb(&self, t: f64) -> Rgb {
        to_rgb_in_gamut(self.lab(t))
    }

    /// `n` evenly spaced colours from one end to the other.
    pub fn classes(&self, n: usize) -> Vec<Rgb> {
        (0..n)
            .map(|k| {
                self.rgb(if n > 1 {
                    k as f64 / (n - 1) as f64
                } else {
                    0.5
                })
            })
            .collect()
    }
}

/// Snow amounts: near-white through ice blue and slate to deep violet (lightness 0.97 → 0.28).
pub fn snow() -> Ramp {
    Ramp::from_lch(&[
        (0.97, 0.012, 240.0),
        (0.87, 0.055, 225.0),
        (0.75, 0.095, 222.0),
        (0.63, 0.115, 248.0),
        (0.51, 0.135, 278.0),
        (0.39, 0.125, 302.0),
        (0.28, 0.095, 318.0),
    ])
}

/// Spread of the outcome: pale sand through amber to deep brick (lightness 0.96 → 0.32).
pub fn spread() -> Ramp {
    Ramp::from_lch(&[
        (0.96, 0.025, 95.0),
        (0.85, 0.085, 80.0),
        (0.73, 0.13, 60.0),
        (0.60, 0.15, 40.0),
        (0.46, 0.14, 25.0),
        (0.32, 0.10, 15.0),
    ])
}

/// Flip distance, near (dark plum) to far (pale green-grey) (lightness 0.30 → 0.90).
pub fn flip() -> Ramp {
    Ramp::from_lch(&[
        (0.27, 0.11, 350.0),
        (0.45, 0.15, 5.0),
        (0.60, 0.13, 45.0),
        (0.74, 0.10, 95.0),
        // The far end stays a clear green (not near-white), so the farthest class reads apart
        // from the pale neutral of "no flip within the offsets run".
        (0.84, 0.08, 145.0),
    ])
}

/// Liquid amounts: pale aqua through teal to deep blue-green (lightness 0.96 → 0.32).
pub fn liquid() -> Ramp {
    Ramp::from_lch(&[
        (0.96, 0.02, 190.0),
        (0.84, 0.06, 185.0),
        (0.70, 0.09, 190.0),
        (0.56, 0.10, 200.0),
        (0.43, 0.09, 215.0),
        (0.32, 0.07, 230.0),
    ])
}

/// Shares and probabilities: pale grey-green to deep green (lightness 0.96 → 0.35).
pub fn share() -> Ramp {
    Ramp::from_lch(&[
        (0.96, 0.01, 130.0),
        (0.82, 0.07, 135.0),
        (0.66, 0.11, 145.0),
        (0.50, 0.11, 155.0),
        (0.35, 0.08, 165.0),
    ])
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn white_and_black_are_the_ends_of_lightness() {
        // Ottosson (2020): white is L = 1, a = b = 0 (to the precision of the published
        // matrices); black is 0.
        let w = oklab_from_srgb([1.0, 1.0, 1.0]);
        assert!(
            (w[0] - 1.0).abs() < 1e-4 && w[1].abs() < 1e-4 && w[2].abs() < 1e-4,
            "{w:?}"
        );
        assert_eq!(oklab_from_srgb([0.0, 0.0, 0.0]), [0.0, 0.0, 0.0]);
        let back = srgb_from_oklab(oklab_from_srgb([0.2, 0.5, 0.8]));
        for (x, y) in back.iter().zip([0.2, 0.5, 0.8]) {
            assert!((x - y).abs() < 1e-6);
        }
    }

    #[test]
    fn ramps_have_monotone_lightness_after_gamut_mapping() {
        for (name, ramp, rising) in [
            ("snow", snow(), false),
            ("spread", spread(), false),
            ("flip", flip(), true),
        ] {
            let l: Vec<f64> = (0..=64)
                .map(|k| {
                    let c = ramp.rgb(k as f64 / 64.0);
                    oklab_from_srgb(c.map(|v| v as f64 / 255.0))[0]
                })
                .collect();
            for w in l.windows(2) {
                let step = if rising { w[1] - w[0] } else { w[0] - w[1] };
                // 8-bit rounding moves L by at most ~0.003.
                assert!(step > -0.004, "{name}: lightness {w:?} not monotone");
            }
            let span = (l[0] - l[64]).abs();
            assert!(span > 0.55, "{name}: lightness span {span}");
        }
    }
}
