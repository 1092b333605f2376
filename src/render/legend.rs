//! The one table of amounts and words that every output reads: the default decision thresholds
//! per unit, the colour classes built on the thresholds a run uses (the PNG maps' legends and the
//! `fill` of the GeoJSON snowfall bands), and the words for percentiles and threshold
//! probabilities (maps, layer descriptions, manifest and report).
//!
//! The breaks of every amount legend are the run's own snowfall thresholds (the user's decision
//! thresholds from `[output] thresholds`, else the defaults here), then three steps of a third of
//! the last threshold above it. The classes do not depend on the field drawn, so one amount has
//! one colour on every map and in every GIS layer of a run.

use super::ramp::{self, Ramp};
use super::Rgb;
use crate::units::Units;

/// Default snowfall thresholds, cm: round amounts roughly doubling (1, 2, 5 per decade), chosen
/// for this tool, not taken from any published product.
pub const DEFAULT_SNOW_CM: [f64; 6] = [1.0, 2.0, 5.0, 10.0, 20.0, 50.0];
/// Default snowfall thresholds, inches: the same 1–2–5 progression.
pub const DEFAULT_SNOW_IN: [f64; 6] = [0.5, 1.0, 2.0, 5.0, 10.0, 20.0];
/// Default ice-accretion thresholds, mm (a quarter and a half inch of ice, about 6 and 12 mm,
/// are widely used damage criteria, common practice).
pub const DEFAULT_ICE_MM: [f64; 5] = [1.0, 2.5, 6.0, 12.0, 25.0];
/// Default ice-accretion thresholds, inches (common practice, as for mm).
pub const DEFAULT_ICE_IN: [f64; 5] = [0.05, 0.1, 0.25, 0.5, 1.0];

/// Steps of a third of the last threshold drawn above it.
const STEPS_ABOVE: usize = 3;

/// The default snowfall thresholds in a unit.
pub fn default_snow_thresholds(units: Units) -> Vec<f64> {
    match units {
        Units::Metric => DEFAULT_SNOW_CM.to_vec(),
        Units::Us => DEFAULT_SNOW_IN.to_vec(),
    }
}

/// The default ice-accretion thresholds in a unit.
pub fn default_ice_thresholds(units: Units) -> Vec<f64> {
    match units {
        Units::Metric => DEFAULT_ICE_MM.to_vec(),
        Units::Us => DEFAULT_ICE_IN.to_vec(),
    }
}

/// A threshold as written in labels, band descriptions and column names: `2.5`, `10`.
pub fn threshold_text(v: f64) -> String {
    format!("{v}")
}

// One literal for the words, so the captions below can be built at compile time.
macro_rules! p90_title {
    () => {
        "P90 snowfall under the track-error prior"
    };
}
macro_rules! p90_meaning {
    () => {
        "1 in 10 scenarios, by prior weight, gives more"
    };
}
/// Title of the P90 snowfall map.
pub const P90_TITLE: &str = p90_title!();
/// What P90 means, in words.
pub const P90_MEANING: &str = p90_meaning!();
/// The P90 map's caption in the report.
pub const P90_CAPTION: &str = concat!(p90_title!(), ": ", p90_meaning!(), ".");

/// The short label of a threshold probability (band descriptions): `P(snowfall ≥ 10 cm)`.
pub fn probability_label(what: &str, threshold: f64, unit: &str) -> String {
    format!("P({what} ≥ {} {unit})", threshold_text(threshold))
}

/// A threshold probability in words: `probability of 10 cm or more of snowfall`.
pub fn probability_words(what: &str, threshold: f64, unit: &str) -> String {
    format!(
        "probability of {} {unit} or more of {what}",
        threshold_text(threshold)
    )
}

/// Colour classes of a map or a set of polygons.
#[derive(Clone, Debug, PartialEq)]
pub struct Classes {
    /// Class k holds values in [bounds[k−1], bounds[k]) (or (…, …] when `upper_inclusive`).
    pub bounds: Vec<f64>,
    /// One colour per class.
    pub colours: Vec<Rgb>,
    /// One label per class.
    pub labels: Vec<String>,
    /// Whether a value equal to a bound falls in the class below it.
    pub upper_inclusive: bool,
}

impl Classes {
    /// The class of a value.
    pub fn of(&self, v: f64) -> usize {
        self.bounds
            .iter()
            .filter(|b| {
                if self.upper_inclusive {
                    v > **b
                } else {
                    v >= **b
                }
            })
            .count()
    }
}

/// `#rrggbb` of a colour, as GIS styles and HTML write it.
pub fn hex(c: Rgb) -> String {
    format!("#{:02x}{:02x}{:02x}", c[0], c[1], c[2])
}

/// Rounds to two significant figures (class bounds beyond the thresholds stay readable).
fn two_figures(v: f64) -> f64 {
    if v <= 0.0 {
        return v;
    }
    let p = 10f64.powf(v.log10().floor() - 1.0);
    (v / p).round() * p
}

/// Amount classes on `thresholds` (increasing, not empty): below the first, between thresholds,
/// and three steps of a third of the last threshold each (to two figures) above it.
fn amount_classes(thresholds: &[f64], unit: &str, ramp: &Ramp) -> Classes {
    let mut bounds = thresholds.to_vec();
    let last = *bounds.last().expect("thresholds are never empty");
    for k in 1..=STEPS_ABOVE {
        bounds.push(two_figures(last * (1.0 + k as f64 / 3.0)));
    }
    bounds.dedup();
    let t = |v: f64| threshold_text((v * 100.0).round() / 100.0);
    let mut labels = vec![format!("under {} {unit}", t(bounds[0]))];
    for w in bounds.windows(2) {
        labels.push(format!("{} – {} {unit}", t(w[0]), t(w[1])));
    }
    labels.push(format!(
        "{} {unit} or more",
        t(*bounds.last().expect("not empty"))
    ));
    Classes {
        colours: ramp.classes(labels.len()),
        bounds,
        labels,
        upper_inclusive: false,
    }
}

/// Snowfall amounts (as modelled, P90, the GeoJSON bands) on the run's thresholds.
pub fn snow_classes(thresholds: &[f64], unit: &str) -> Classes {
    amount_classes(thresholds, unit, &ramp::snow())
}

/// Snowfall range over the offsets, on the same breaks as the amounts.
pub fn spread_classes(thresholds: &[f64], unit: &str) -> Classes {
    amount_classes(thresholds, unit, &ramp::spread())
}

/// Liquid amounts (precipitation, ice accretion, water lost to dry air) on the run's ice
/// thresholds, in the liquid unit.
pub fn liquid_classes(thresholds: &[f64], unit: &str) -> Classes {
    amount_classes(thresholds, unit, &ramp::liquid())
}

/// Shares and probabilities (0–1): under 10 %, then steps of 20 % to 90 % and over.
pub fn share_classes() -> Classes {
    let bounds = vec![0.1, 0.3, 0.5, 0.7, 0.9];
    let mut labels = vec!["under 10 %".to_string()];
    for w in bounds.windows(2) {
        labels.push(format!("{:.0} – {:.0} %", w[0] * 100.0, w[1] * 100.0));
    }
    labels.push("90 % or more".into());
    Classes {
        colours: ramp::share().classes(labels.len()),
        bounds,
        labels,
        upper_inclusive: false,
    }
}

/// Changes per distance (the sensitivities, `unit` e.g. `cm per 50 km`): less and more on the
/// first four snowfall thresholds each way, around a neutral class for smaller changes.
pub fn change_classes(thresholds: &[f64], unit: &str) -> Classes {
    let steps: Vec<f64> = thresholds.iter().take(4).copied().collect();
    let mut bounds: Vec<f64> = steps.iter().rev().map(|t| -t).collect();
    bounds.extend(steps.iter().copied());
    let t = |v: f64| threshold_text((v * 100.0).round() / 100.0);
    let mut labels = vec![format!("less by {} {unit} or more", t(-bounds[0]))];
    for w in bounds.windows(2) {
        labels.push(if w[0] < 0.0 && w[1] > 0.0 {
            format!("within ±{} {unit}", t(w[1]))
        } else if w[1] <= 0.0 {
            format!("less by {} – {} {unit}", t(-w[1]), t(-w[0]))
        } else {
            format!("more by {} – {} {unit}", t(w[0]), t(w[1]))
        });
    }
    labels.push(format!(
        "more by {} {unit} or more",
        t(*bounds.last().expect("not empty"))
    ));
    let k = steps.len();
    // Less: the flip ramp from dark to light; more: the snow ramp from light to dark.
    let mut colours: Vec<Rgb> = ramp::flip().classes(k + 1).into_iter().take(k).collect();
    colours.push([236, 236, 232]);
    colours.extend(ramp::snow().classes(k + 1).into_iter().skip(1));
    Classes {
        colours,
        bounds,
        labels,
        upper_inclusive: false,
    }
}

/// Flip-distance classes: steps of 25, 50 or 100 km up to the farthest offset.
pub fn distance_classes(max_km: f64, units: Units) -> Classes {
    let step = if max_km <= 150.0 {
        25.0
    } else if max_km <= 400.0 {
        50.0
    } else {
        100.0
    };
    let n = ((max_km / step).ceil() as usize).clamp(1, 12);
    let bounds: Vec<f64> = (1..n).map(|k| k as f64 * step).collect();
    let mut labels = Vec::new();
    let mut lo = 0.0;
    for k in 0..n {
        let hi = (k + 1) as f64 * step;
        labels.push(match (k, units) {
            (0, _) => format!("within {}", units.distance(hi)),
            (_, Units::Metric) => format!("{lo:.0} – {hi:.0} km"),
            (_, Units::Us) => format!(
                "{lo:.0} – {hi:.0} km ({:.0} – {:.0} mi)",
                lo / 1.609_344,
                hi / 1.609_344
            ),
        });
        lo = hi;
    }
    Classes {
        colours: ramp::flip().classes(n),
        bounds,
        labels,
        upper_inclusive: true,
    }
}

/// Codes of the dominant-source map: the source with at least half of a cell's snowfall
/// variance, none, or no spread at all.
pub const SOURCE_CODES: [(f32, &str); 5] = [
    (0.0, "no single source has half the spread"),
    (1.0, "which model is right (between members)"),
    (2.0, "how liquid turns into snow (between methods)"),
    (3.0, "where the low tracks (track offsets)"),
    (4.0, "no spread: every scenario agrees"),
];

/// Classes of the dominant-source map: four distinct hues of equal lightness (OKLCh), so no
/// source reads as more alarming than another.
pub fn source_classes() -> Classes {
    let colours = [
        (0.80, 0.0, 0.0),
        (0.72, 0.13, 300.0),
        (0.72, 0.13, 145.0),
        (0.72, 0.13, 45.0),
        (0.97, 0.0, 0.0),
    ]
    .iter()
    .map(|&(l, c, h)| ramp::to_rgb_in_gamut(ramp::oklab_from_lch(l, c, h)))
    .collect();
    Classes {
        bounds: vec![0.5, 1.5, 2.5, 3.5],
        colours,
        labels: SOURCE_CODES.iter().map(|(_, w)| w.to_string()).collect(),
        upper_inclusive: false,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn every_source_code_has_its_own_class_colour_and_label() {
        let c = source_classes();
        assert_eq!(c.colours.len(), SOURCE_CODES.len());
        assert_eq!(c.labels.len(), SOURCE_CODES.len());
        for (k, (code, words)) in SOURCE_CODES.iter().enumerate() {
            assert_eq!(c.of(*code as f64), k);
            assert_eq!(&c.labels[k], words);
        }
        for i in 0..c.colours.len() {
            for j in 0..i {
                assert_ne!(c.colours[i], c.colours[j]);
            }
        }
    }

    #[test]
    fn classes_follow_the_thresholds() {
        let c = snow_classes(&[2.5, 5.0, 10.0], "cm");
        // 10 → 13, 17, 20 added (thirds of 10, two figures).
        assert_eq!(c.bounds, [2.5, 5.0, 10.0, 13.0, 17.0, 20.0]);
        assert_eq!(c.labels[0], "under 2.5 cm");
        assert_eq!(c.labels[3], "10 – 13 cm");
        assert_eq!(c.labels.last().unwrap(), "20 cm or more");
        assert_eq!(c.colours.len(), c.labels.len());
        assert_eq!(c.of(0.0), 0);
        assert_eq!(c.of(2.5), 1);
        assert_eq!(c.of(99.0), 6);
        let d = distance_classes(100.0, Units::Metric);
        assert_eq!(
            d.labels,
            ["within 25 km", "25 – 50 km", "50 – 75 km", "75 – 100 km"]
        );
        // US units: the miles follow (25 km = 15.5 mi, 50 km = 31 mi, 75 km = 47 mi).
        let d = distance_classes(100.0, Units::Us);
        assert_eq!(d.labels[0], "within 25 km (16 mi)");
        assert_eq!(d.labels[1], "25 – 50 km (16 – 31 mi)");
        assert_eq!(d.of(25.0), 0);
        assert_eq!(d.of(25.1), 1);
        assert_eq!(d.of(100.0), 3);
    }

    #[test]
    fn words_and_hex() {
        assert_eq!(
            probability_label("snowfall", 10.0, "cm"),
            "P(snowfall ≥ 10 cm)"
        );
        assert_eq!(
            probability_words("snowfall", 0.5, "in"),
            "probability of 0.5 in or more of snowfall"
        );
        // sRGB #ff8000 from its channels.
        assert_eq!(hex([255, 128, 0]), "#ff8000");
    }
}
