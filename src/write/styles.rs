//! GIS styles beside every raster: a QGIS layer style (`.qml`) and an OGC Styled Layer
//! Descriptor (`.sld`, SLD 1.0.0 `RasterSymbolizer` with an interval `ColorMap`) with the
//! classes, colours and labels of the PNG maps ([`crate::render::legend`], one source for
//! both), so a GIS opens the layers in colour rather than in grey.
//!
//! Which classes a raster gets follows its units: snow depth the snowfall classes (a range or
//! spread the spread classes on the same breaks), liquid the liquid classes on the ice
//! thresholds, 0–1 the share classes, km the flip-distance classes, a change per distance the
//! change classes. The style colours band 1 (for a stack, its first scenario or threshold; the
//! GIS lets the user pick another band with the same classes). Class bounds: the maps put a
//! value equal to a bound in the class above it; SLD intervals do the same; QGIS's discrete
//! ramp puts it in the class below (values exactly on a bound only).

use super::{write_text_atomic, Kind, WriteError, Written};
use crate::render::legend::{self, hex, Classes};
use crate::units::Units;
use std::path::Path;

/// What the classes are built on.
pub struct StyleSettings<'a> {
    /// Output units.
    pub units: Units,
    /// Snowfall thresholds, output snow units.
    pub snow_thresholds: &'a [f64],
    /// Ice thresholds, output liquid units.
    pub ice_thresholds: &'a [f64],
    /// The farthest track offset, km (the flip-distance classes run to it).
    pub far_km: f64,
}

/// The classes of a raster, from its file name and units; `None` for a raster without a
/// continuous value to colour.
pub fn classes_for(file: &str, units: &str, s: &StyleSettings) -> Option<Classes> {
    let (su, lu) = (s.units.snow_unit(), s.units.liquid_unit());
    if units == su {
        if file == "snowfall_range.tif" || file.starts_with("snowfall_spread") {
            return Some(legend::spread_classes(s.snow_thresholds, su));
        }
        return Some(legend::snow_classes(s.snow_thresholds, su));
    }
    if units == lu {
        return Some(legend::liquid_classes(s.ice_thresholds, lu));
    }
    if units == "1" {
        return Some(legend::share_classes());
    }
    if units == "km" {
        return Some(legend::distance_classes(s.far_km, s.units));
    }
    if units.starts_with(su) && units.contains(" per ") {
        return Some(legend::change_classes(s.snow_thresholds, units));
    }
    None
}

/// The XML-escaped text.
fn xml(s: &str) -> String {
    s.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
        .replace('"', "&quot;")
}

/// A QGIS layer style: a single-band pseudocolour renderer with a discrete ramp, one item per
/// class (its upper bound; the last class open).
pub fn qml(c: &Classes) -> String {
    let mut items = String::new();
    for (k, (colour, label)) in c.colours.iter().zip(&c.labels).enumerate() {
        let value = c
            .bounds
            .get(k)
            .map_or_else(|| "inf".to_string(), |b| format!("{b}"));
        items.push_str(&format!(
            "          <item value=\"{value}\" color=\"{}\" alpha=\"255\" label=\"{}\"/>\n",
            hex(*colour),
            xml(label)
        ));
    }
    let (lo, hi) = (
        c.bounds.first().copied().unwrap_or(0.0),
        c.bounds.last().copied().unwrap_or(1.0),
    );
    format!(
        "<!DOCTYPE qgis PUBLIC 'http://mrcc.com/qgis.dtd' 'SYSTEM'>\n<qgis styleCategories=\"Symbology\" version=\"3.28\">\n  <pipe>\n    <rasterrenderer type=\"singlebandpseudocolor\" band=\"1\" opacity=\"1\" alphaBand=\"-1\" classificationMin=\"{lo}\" classificationMax=\"{hi}\">\n      <rastershader>\n        <colorrampshader colorRampType=\"DISCRETE\" classificationMode=\"1\" clip=\"0\">\n{items}        </colorrampshader>\n      </rastershader>\n    </rasterrenderer>\n  </pipe>\n</qgis>\n"
    )
}

/// An OGC SLD 1.0.0 style: a raster symbolizer on band 1 with an interval colour map, one
/// entry per class (its upper bound; the last class open).
pub fn sld(name: &str, title: &str, c: &Classes) -> String {
    let mut entries = String::new();
    for (k, (colour, label)) in c.colours.iter().zip(&c.labels).enumerate() {
        let quantity = c
            .bounds
            .get(k)
            .map_or_else(|| "1e30".to_string(), |b| format!("{b}"));
        entries.push_str(&format!(
            "              <ColorMapEntry color=\"{}\" quantity=\"{quantity}\" label=\"{}\" opacity=\"1\"/>\n",
            hex(*colour),
            xml(label)
        ));
    }
    format!(
        "<?xml version=\"1.0\" encoding=\"UTF-8\"?>\n<StyledLayerDescriptor version=\"1.0.0\" xmlns=\"http://www.opengis.net/sld\" xmlns:ogc=\"http://www.opengis.net/ogc\" xmlns:xsi=\"http://www.w3.org/2001/XMLSchema-instance\" xsi:schemaLocation=\"http://www.opengis.net/sld http://schemas.opengis.net/sld/1.0.0/StyledLayerDescriptor.xsd\">\n  <NamedLayer>\n    <Name>{}</Name>\n    <UserStyle>\n      <Title>{}</Title>\n      <FeatureTypeStyle>\n        <Rule>\n          <RasterSymbolizer>\n            <ChannelSelection>\n              <GrayChannel>\n                <SourceChannelName>1</SourceChannelName>\n              </GrayChannel>\n            </ChannelSelection>\n            <ColorMap type=\"intervals\">\n{entries}            </ColorMap>\n          </RasterSymbolizer>\n        </Rule>\n      </FeatureTypeStyle>\n    </UserStyle>\n  </NamedLayer>\n</StyledLayerDescriptor>\n",
        xml(name),
        xml(title)
    )
}

/// Writes a `.qml` and an `.sld` beside every raster of `written` that has classes, except
/// where the folder holds a file of that name trackswing did not write (`theirs`: a user's own
/// style is kept, and ours is not written). Returns what was written and the names kept.
pub fn write_styles(
    dir: &Path,
    written: &[Written],
    s: &StyleSettings,
    theirs: &[String],
) -> Result<(Vec<Written>, Vec<String>), WriteError> {
    let mut out = Vec::new();
    let mut kept = Vec::new();
    for w in written.iter().filter(|w| matches!(w.kind, Kind::Raster)) {
        let Some(c) = classes_for(&w.file, &w.units, s) else {
            continue;
        };
        let stem = w.file.trim_end_matches(".tif");
        let (qml_name, sld_name) = (format!("{stem}.qml"), format!("{stem}.sld"));
        for (file, what) in [
            (qml_name, "QGIS layer style"),
            (sld_name, "OGC SLD 1.0.0 style"),
        ] {
            if theirs.contains(&file) {
                kept.push(file);
                continue;
            }
            let text = if file.ends_with(".qml") {
                qml(&c)
            } else {
                sld(stem, &w.description, &c)
            };
            write_text_atomic(dir, &file, &text)?;
            out.push(Written {
                file,
                kind: Kind::Style,
                units: String::new(),
                description: format!(
                    "{what} for {}: the map's classes, colours and labels on band 1",
                    w.file
                ),
                bands: Vec::new(),
                sha256: Some({
                    use sha2::Digest;
                    format!("{:x}", sha2::Sha256::digest(text.as_bytes()))
                }),
            });
        }
    }
    Ok((out, kept))
}

#[cfg(test)]
mod tests {
    use super::*;

    fn settings() -> StyleSettings<'static> {
        StyleSettings {
            units: Units::Metric,
            snow_thresholds: &legend::DEFAULT_SNOW_CM,
            ice_thresholds: &legend::DEFAULT_ICE_MM,
            far_km: 60.0,
        }
    }

    /// The styles carry the maps' own classes: every colour and label of the snowfall legend
    /// in order, band 1, and each class's upper bound.
    #[test]
    fn styles_carry_the_maps_classes() {
        let c = classes_for("snowfall_p90.tif", "cm", &settings()).unwrap();
        assert_eq!(c, legend::snow_classes(&legend::DEFAULT_SNOW_CM, "cm"));
        let q = qml(&c);
        let s = sld("snowfall_p90", "P90 & co", &c);
        assert!(q.contains("band=\"1\"") && s.contains("<SourceChannelName>1</SourceChannelName>"));
        assert!(s.contains("P90 &amp; co"));
        let mut at = (0, 0);
        for (k, (colour, label)) in c.colours.iter().zip(&c.labels).enumerate() {
            let (h, l) = (hex(*colour), xml(label));
            // In order: each class after the one before.
            let iq = q[at.0..]
                .find(&format!("color=\"{h}\" alpha=\"255\" label=\"{l}\""))
                .unwrap()
                + at.0;
            let is = s[at.1..].find(&format!("color=\"{h}\"")).unwrap() + at.1;
            at = (iq + 1, is + 1);
            if let Some(b) = c.bounds.get(k) {
                assert!(
                    q[..iq].ends_with(&format!("<item value=\"{b}\" ")),
                    "class {k}"
                );
            }
        }
        assert!(q.contains("value=\"inf\"") && s.contains("quantity=\"1e30\""));
    }

    #[test]
    fn every_unit_of_the_layers_has_classes() {
        let s = settings();
        for (file, units) in [
            ("snowfall_range.tif", "cm"),
            ("liquid_baseline.tif", "mm"),
            ("prior_coverage.tif", "1"),
            ("flip_distance.tif", "km"),
            ("snowfall_sensitivity_cross.tif", "cm per 50 km"),
        ] {
            let c = classes_for(file, units, &s).unwrap();
            assert_eq!(c.colours.len(), c.labels.len(), "{file}");
            assert_eq!(c.bounds.len() + 1, c.labels.len(), "{file}");
            assert!(c.bounds.windows(2).all(|w| w[0] < w[1]), "{file}");
        }
        assert_eq!(
            classes_for("snowfall_range.tif", "cm", &s).unwrap(),
            legend::spread_classes(&legend::DEFAULT_SNOW_CM, "cm")
        );
    }
}
