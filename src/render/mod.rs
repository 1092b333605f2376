//! Raster drawing for the quicklook maps: an RGB canvas with anti-aliased lines, discs and
//! text, encoded as PNG. Pure Rust: `png` for encoding, `ab_glyph` for text in DejaVu Sans
//! (shipped in assets/fonts under its own free licence).
//!
//! Coordinates are pixels with (0, 0) the top-left corner of the top-left pixel; a pixel's
//! centre is at (x + 0.5, y + 0.5).

pub mod legend;
pub mod ramp;
pub mod text;

pub use ramp::Rgb;

/// An RGB image.
#[derive(Clone, Debug)]
pub struct Canvas {
    /// Width, px.
    pub width: usize,
    /// Height, px.
    pub height: usize,
    px: Vec<Rgb>,
    /// Scratch coverage buffer for strokes (so a polyline's joints are not painted twice).
    mask: Vec<f32>,
}

impl Canvas {
    /// A canvas filled with `bg`.
    pub fn new(width: usize, height: usize, bg: Rgb) -> Self {
        Self {
            width,
            height,
            px: vec![bg; width * height],
            mask: vec![0.0; width * height],
        }
    }

    /// The colour of a pixel.
    pub fn get(&self, x: usize, y: usize) -> Rgb {
        self.px[y * self.width + x]
    }

    /// Sets a pixel (ignored outside the canvas).
    pub fn set(&mut self, x: i64, y: i64, c: Rgb) {
        if x >= 0 && y >= 0 && (x as usize) < self.width && (y as usize) < self.height {
            self.px[y as usize * self.width + x as usize] = c;
        }
    }

    /// Blends `c` over a pixel with opacity `a` (0–1).
    pub fn blend(&mut self, x: i64, y: i64, c: Rgb, a: f32) {
        if a <= 0.0 || x < 0 || y < 0 || x as usize >= self.width || y as usize >= self.height {
            return;
        }
        let a = a.min(1.0);
        let p = &mut self.px[y as usize * self.width + x as usize];
        for k in 0..3 {
            p[k] = (p[k] as f32 + a * (c[k] as f32 - p[k] as f32)).round() as u8;
        }
    }

    /// Fills the rectangle [x0, x1) × [y0, y1).
    pub fn fill_rect(&mut self, x0: i64, y0: i64, x1: i64, y1: i64, c: Rgb) {
        for y in y0.max(0)..y1.min(self.height as i64) {
            for x in x0.max(0)..x1.min(self.width as i64) {
                self.px[y as usize * self.width + x as usize] = c;
            }
        }
    }

    /// A rectangle outline `w` px wide, inside [x0, x1) × [y0, y1).
    pub fn stroke_rect(&mut self, x0: i64, y0: i64, x1: i64, y1: i64, w: i64, c: Rgb) {
        self.fill_rect(x0, y0, x1, y0 + w, c);
        self.fill_rect(x0, y1 - w, x1, y1, c);
        self.fill_rect(x0, y0, x0 + w, y1, c);
        self.fill_rect(x1 - w, y0, x1, y1, c);
    }

    /// Strokes a polyline `width` px wide in colour `c` at opacity `alpha`, anti-aliased, with
    /// round joins; pixels outside `clip` ([x0, y0, x1, y1]) are left alone. Coverage is
    /// accumulated as a maximum first, so overlapping segments of one line do not darken.
    pub fn polyline(&mut self, pts: &[(f64, f64)], width: f64, c: Rgb, alpha: f32, clip: [f64; 4]) {
        if pts.len() < 2 {
            return;
        }
        let r = width / 2.0;
        let pad = r + 1.0;
        let mut bb = [
            f64::INFINITY,
            f64::INFINITY,
            f64::NEG_INFINITY,
            f64::NEG_INFINITY,
        ];
        for p in pts {
            bb = [
                bb[0].min(p.0),
                bb[1].min(p.1),
                bb[2].max(p.0),
                bb[3].max(p.1),
            ];
        }
        let x0 = (bb[0] - pad).max(clip[0]).max(0.0).floor() as usize;
        let y0 = (bb[1] - pad).max(clip[1]).max(0.0).floor() as usize;
        let x1 = ((bb[2] + pad).min(clip[2]).ceil().max(0.0) as usize).min(self.width);
        let y1 = ((bb[3] + pad).min(clip[3]).ceil().max(0.0) as usize).min(self.height);
        if x0 >= x1 || y0 >= y1 {
            return;
        }
        for seg in pts.windows(2) {
            let (a, b) = (seg[0], seg[1]);
            let sx0 = ((a.0.min(b.0) - pad).floor().max(x0 as f64)) as usize;
            let sy0 = ((a.1.min(b.1) - pad).floor().max(y0 as f64)) as usize;
            let sx1 = ((a.0.max(b.0) + pad).ceil().max(0.0) as usize).min(x1);
            let sy1 = ((a.1.max(b.1) + pad).ceil().max(0.0) as usize).min(y1);
            let (dx, dy) = (b.0 - a.0, b.1 - a.1);
            let len2 = dx * dx + dy * dy;
            for y in sy0..sy1 {
                for x in sx0..sx1 {
                    let (px, py) = (x as f64 + 0.5, y as f64 + 0.5);
                    let t = if len2 > 0.0 {
                        (((px - a.0) * dx + (py - a.1) * dy) / len2).clamp(0.0, 1.0)
                    } else {
                        0.0
                    };
                    let d = (px - a.0 - t * dx).hypot(py - a.1 - t * dy);
                    let cov = (r + 0.5 - d).clamp(0.0, 1.0) as f32;
                    let m = &mut self.mask[y * self.width + x];
                    if cov > *m {
                        *m = cov;
                    }
                }
            }
        }
        for y in y0..y1 {
            for x in x0..x1 {
                let m = std::mem::take(&mut self.mask[y * self.width + x]);
                if m > 0.0 {
                    self.blend(x as i64, y as i64, c, m * alpha);
                }
            }
        }
    }

    /// A filled, anti-aliased disc.
    pub fn disc(&mut self, cx: f64, cy: f64, r: f64, c: Rgb) {
        let (x0, x1) = ((cx - r - 1.0).floor() as i64, (cx + r + 1.0).ceil() as i64);
        let (y0, y1) = ((cy - r - 1.0).floor() as i64, (cy + r + 1.0).ceil() as i64);
        for y in y0..y1 {
            for x in x0..x1 {
                let d = (x as f64 + 0.5 - cx).hypot(y as f64 + 0.5 - cy);
                self.blend(x, y, c, (r + 0.5 - d).clamp(0.0, 1.0) as f32);
            }
        }
    }

    /// A filled triangle (for arrowheads), anti-aliased by 4×4 supersampling.
    pub fn triangle(&mut self, p: [(f64, f64); 3], c: Rgb) {
        let edge = |a: (f64, f64), b: (f64, f64), q: (f64, f64)| {
            (b.0 - a.0) * (q.1 - a.1) - (b.1 - a.1) * (q.0 - a.0)
        };
        let area = edge(p[0], p[1], p[2]);
        if area == 0.0 {
            return;
        }
        let xs = p.map(|q| q.0);
        let ys = p.map(|q| q.1);
        let fold = |v: [f64; 3], f: fn(f64, f64) -> f64| v[1..].iter().fold(v[0], |a, b| f(a, *b));
        let (x0, x1) = (
            fold(xs, f64::min).floor() as i64,
            fold(xs, f64::max).ceil() as i64,
        );
        let (y0, y1) = (
            fold(ys, f64::min).floor() as i64,
            fold(ys, f64::max).ceil() as i64,
        );
        for y in y0..y1 {
            for x in x0..x1 {
                let mut n = 0;
                for sy in 0..4 {
                    for sx in 0..4 {
                        let q = (
                            x as f64 + (sx as f64 + 0.5) / 4.0,
                            y as f64 + (sy as f64 + 0.5) / 4.0,
                        );
                        let w = [
                            edge(p[1], p[2], q),
                            edge(p[2], p[0], q),
                            edge(p[0], p[1], q),
                        ];
                        if w.iter().all(|v| v * area >= 0.0) {
                            n += 1;
                        }
                    }
                }
                self.blend(x, y, c, n as f32 / 16.0);
            }
        }
    }

    /// The image as PNG bytes (8-bit RGB, no metadata, so identical images give identical
    /// files).
    pub fn to_png(&self) -> Vec<u8> {
        let mut out = Vec::new();
        {
            let mut enc = png::Encoder::new(&mut out, self.width as u32, self.height as u32);
            enc.set_color(png::ColorType::Rgb);
            enc.set_depth(png::BitDepth::Eight);
            let mut w = enc.write_header().expect("PNG header into memory");
            let data: Vec<u8> = self.px.iter().flatten().copied().collect();
            w.write_image_data(&data).expect("PNG data into memory");
        }
        out
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn png_round_trips_through_the_decoder() {
        let mut c = Canvas::new(7, 5, [255, 255, 255]);
        c.set(3, 2, [10, 20, 30]);
        let bytes = c.to_png();
        let dec = png::Decoder::new(std::io::Cursor::new(bytes));
        let mut r = dec.read_info().unwrap();
        let mut buf = vec![0; r.output_buffer_size().unwrap()];
        let info = r.next_frame(&mut buf).unwrap();
        assert_eq!((info.width, info.height), (7, 5));
        assert_eq!(&buf[(2 * 7 + 3) * 3..(2 * 7 + 3) * 3 + 3], &[10, 20, 30]);
    }

    #[test]
    fn a_stroke_covers_its_width_and_nothing_far_away() {
        let mut c = Canvas::new(40, 20, [255, 255, 255]);
        c.polyline(
            &[(5.0, 10.0), (35.0, 10.0)],
            4.0,
            [0, 0, 0],
            1.0,
            [0.0, 0.0, 40.0, 20.0],
        );
        assert_eq!(c.get(20, 9), [0, 0, 0]);
        assert_eq!(c.get(20, 10), [0, 0, 0]);
        assert_eq!(c.get(20, 14), [255, 255, 255]);
        assert_eq!(c.get(20, 5), [255, 255, 255]);
        // Area of black ≈ 30 × 4 + a disc of radius 2 at the ends.
        let dark: f64 = (0..20)
            .flat_map(|y| (0..40).map(move |x| (x, y)))
            .map(|(x, y)| 1.0 - c.get(x, y)[0] as f64 / 255.0)
            .sum();
        let want = 30.0 * 4.0 + std::f64::consts::PI * 4.0;
        assert!((dark - want).abs() < 4.0, "{dark} vs {want}");
    }
}
