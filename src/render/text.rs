//! Text on the canvas: DejaVu Sans (Bitstream Vera licence, see
//! assets/fonts/DejaVuSans-LICENSE.txt) rasterised by `ab_glyph`, with kerning and an optional
//! light halo so labels stay readable over any colour.

use super::{Canvas, Rgb};
use ab_glyph::{Font, FontRef, PxScale, ScaleFont};
use std::sync::OnceLock;

static FONT_BYTES: &[u8] = include_bytes!("../../assets/fonts/DejaVuSans.ttf");

fn font() -> &'static FontRef<'static> {
    static FONT: OnceLock<FontRef<'static>> = OnceLock::new();
    FONT.get_or_init(|| FontRef::try_from_slice(FONT_BYTES).expect("the shipped font parses"))
}

/// Width of `text` at `size` px, in px.
pub fn width(text: &str, size: f32) -> f64 {
    let f = font().as_scaled(PxScale::from(size));
    let mut w = 0.0;
    let mut prev = None;
    for ch in text.chars() {
        let id = f.glyph_id(ch);
        if let Some(p) = prev {
            w += f.kern(p, id);
        }
        w += f.h_advance(id);
        prev = Some(id);
    }
    w as f64
}

/// Height of a line of text at `size` px (ascent + descent), px.
pub fn line_height(size: f32) -> f64 {
    let f = font().as_scaled(PxScale::from(size));
    (f.ascent() - f.descent()) as f64
}

/// Draws `text` with its top-left corner at (x, y); returns its width.
pub fn draw(c: &mut Canvas, x: f64, y: f64, size: f32, colour: Rgb, text: &str) -> f64 {
    let f = font().as_scaled(PxScale::from(size));
    let baseline = y as f32 + f.ascent();
    let mut pen = x as f32;
    let mut prev = None;
    for ch in text.chars() {
        let id = f.glyph_id(ch);
        if let Some(p) = prev {
            pen += f.kern(p, id);
        }
        let g = id.with_scale_and_position(PxScale::from(size), ab_glyph::point(pen, baseline));
        if let Some(o) = font().outline_glyph(g) {
            let b = o.px_bounds();
            o.draw(|gx, gy, cov| {
                c.blend(
                    b.min.x as i64 + gx as i64,
                    b.min.y as i64 + gy as i64,
                    colour,
                    cov,
                );
            });
        }
        pen += f.h_advance(id);
        prev = Some(id);
    }
    pen as f64 - x
}

/// Draws `text` over a soft halo of `halo` colour (for labels over the map).
pub fn draw_with_halo(
    c: &mut Canvas,
    x: f64,
    y: f64,
    size: f32,
    colour: Rgb,
    halo: Rgb,
    text: &str,
) -> f64 {
    for (dx, dy) in [
        (-1.5, 0.0),
        (1.5, 0.0),
        (0.0, -1.5),
        (0.0, 1.5),
        (-1.0, -1.0),
        (1.0, -1.0),
        (-1.0, 1.0),
        (1.0, 1.0),
    ] {
        draw(c, x + dx, y + dy, size, halo, text);
    }
    draw(c, x, y, size, colour, text)
}

/// Splits `text` into lines no wider than `max_width` px at `size` (a word longer than the
/// width gets a line of its own).
pub fn wrap(text: &str, size: f32, max_width: f64) -> Vec<String> {
    let mut lines = Vec::new();
    let mut line = String::new();
    for word in text.split_whitespace() {
        let candidate = if line.is_empty() {
            word.to_string()
        } else {
            format!("{line} {word}")
        };
        if width(&candidate, size) <= max_width || line.is_empty() {
            line = candidate;
        } else {
            lines.push(std::mem::take(&mut line));
            line = word.to_string();
        }
    }
    if !line.is_empty() {
        lines.push(line);
    }
    lines
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn text_inks_inside_its_measured_box() {
        let mut c = Canvas::new(200, 40, [255, 255, 255]);
        let w = draw(&mut c, 10.0, 5.0, 20.0, [0, 0, 0], "Snow 12 cm");
        assert!((w - width("Snow 12 cm", 20.0)).abs() < 1e-3);
        assert!(w > 80.0 && w < 140.0, "{w}");
        let mut inked = 0;
        for y in 0..40 {
            for x in 0..200 {
                if c.get(x, y)[0] < 128 {
                    inked += 1;
                    assert!(
                        (x as f64) >= 9.0 && (x as f64) <= 11.0 + w,
                        "ink at {x},{y}"
                    );
                    assert!(
                        y >= 5 && (y as f64) <= 5.0 + line_height(20.0),
                        "ink at {x},{y}"
                    );
                }
            }
        }
        assert!(inked > 100, "{inked}");
    }

    #[test]
    fn wrapping_keeps_every_word_within_the_width() {
        let t = "decision support for trained forecasters, not an official forecast or warning";
        let lines = wrap(t, 12.0, 150.0);
        assert!(lines.len() >= 3);
        assert_eq!(lines.join(" "), t);
        assert!(lines.iter().all(|l| width(l, 12.0) <= 150.0));
    }
}
