//! GDAL's metadata conventions in TIFF: the GDAL_METADATA XML (tag 42112) and the textual
//! nodata value (tag 42113), as GDAL's GTiff driver writes and reads them.
//!
//! The XML is `<GDALMetadata>` holding `<Item name="..." [sample="i"] [role="..."]>text</Item>`
//! elements: items without `sample` belong to the dataset, `sample` is the 0-based band, and the
//! roles `description`, `scale` and `offset` carry the band description and value scaling.
//! Items with a `domain` attribute belong to non-default metadata domains and are skipped.
//! Item *values* are XML-escaped twice (names once), as GDAL's GTiff driver does.

use super::xml::{escape, Item};

/// What one band contributes to the XML.
pub(crate) struct BandItems<'a> {
    pub description: &'a str,
    pub metadata: &'a [(String, String)],
    pub scale_offset: Option<(f64, f64)>,
}

/// Metadata of a file, split by owner.
#[derive(Debug, Clone, PartialEq, Default)]
pub(crate) struct SplitMetadata {
    pub dataset: Vec<(String, String)>,
    pub descriptions: Vec<String>,
    pub band_metadata: Vec<Vec<(String, String)>>,
    pub scale: Vec<Option<f64>>,
    pub offset: Vec<Option<f64>>,
}

/// Formats a number so that it parses back to the same `f64` (shortest round-trip digits),
/// with an exponent only for very small or large magnitudes.
pub(crate) fn format_number(v: f64) -> String {
    if v.is_nan() {
        "nan".into()
    } else if v != 0.0 && v.is_finite() && !(1e-4..1e16).contains(&v.abs()) {
        format!("{v:e}")
    } else {
        format!("{v}")
    }
}

/// Parses a number as GDAL writes it, including `nan` and `inf`.
pub(crate) fn parse_number(s: &str) -> Option<f64> {
    let t = s.trim().trim_end_matches('\0');
    match t.to_ascii_lowercase().as_str() {
        "nan" | "-nan" => Some(f64::NAN),
        "inf" | "+inf" | "infinity" => Some(f64::INFINITY),
        "-inf" | "-infinity" => Some(f64::NEG_INFINITY),
        _ => t.parse().ok(),
    }
}

/// A metadata key GDAL can store: non-empty, no `=` (GDAL keeps items as `KEY=VALUE`), no
/// control characters. Returns why not, if not.
pub(crate) fn check_key(key: &str) -> Option<&'static str> {
    if key.is_empty() {
        Some("key is empty")
    } else if key.contains('=') {
        Some("key contains '=' which GDAL uses to separate key and value")
    } else if key.chars().any(char::is_control) {
        Some("key contains a control character")
    } else {
        None
    }
}

/// Builds the GDAL_METADATA XML, or `None` when there is nothing to record. Dataset items come
/// first, then per band its items, description, offset and scale, in input order.
pub(crate) fn build_xml(dataset: &[(String, String)], bands: &[BandItems]) -> Option<String> {
    let mut xml = String::from("<GDALMetadata>\n");
    let mut any = false;
    let mut item = |name: &str, sample: Option<usize>, role: Option<&str>, value: &str| {
        any = true;
        xml.push_str("  <Item name=\"");
        escape(name, &mut xml);
        xml.push('"');
        if let Some(i) = sample {
            xml.push_str(&format!(" sample=\"{i}\""));
        }
        if let Some(r) = role {
            xml.push_str(&format!(" role=\"{r}\""));
        }
        xml.push('>');
        // GDAL escapes item values once itself before its XML writer escapes them again, and
        // unescapes twice on read; doing the same keeps '&', '<', '>' and quotes intact there.
        let mut once = String::new();
        escape(value, &mut once);
        escape(&once, &mut xml);
        xml.push_str("</Item>\n");
    };
    for (k, v) in dataset {
        item(k, None, None, v);
    }
    for (i, b) in bands.iter().enumerate() {
        for (k, v) in b.metadata {
            item(k, Some(i), None, v);
        }
        if !b.description.is_empty() {
            item("DESCRIPTION", Some(i), Some("description"), b.description);
        }
        if let Some((scale, offset)) = b.scale_offset {
            item("OFFSET", Some(i), Some("offset"), &format_number(offset));
            item("SCALE", Some(i), Some("scale"), &format_number(scale));
        }
    }
    xml.push_str("</GDALMetadata>\n");
    any.then_some(xml)
}

/// Assigns items to the dataset or to one of `bands` bands. Errors (with the reason) on a
/// `sample` that is not a band index of this file or an unparsable scale/offset.
pub(crate) fn split_items(items: Vec<Item>, bands: usize) -> Result<SplitMetadata, String> {
    let mut m = SplitMetadata {
        descriptions: vec![String::new(); bands],
        band_metadata: vec![Vec::new(); bands],
        scale: vec![None; bands],
        offset: vec![None; bands],
        ..SplitMetadata::default()
    };
    for it in items {
        if it.domain.as_deref().is_some_and(|d| !d.is_empty()) {
            continue;
        }
        let Some(sample) = it.sample else {
            if it.role.is_none() {
                m.dataset.push((it.name, it.value));
            }
            continue;
        };
        let band: usize = sample
            .trim()
            .parse()
            .map_err(|_| format!("item {:?} has sample={sample:?}, not a band index", it.name))?;
        if band >= bands {
            return Err(format!(
                "item {:?} refers to sample {band} but the image has {bands} band(s)",
                it.name
            ));
        }
        let number = |v: &str| {
            parse_number(v).ok_or_else(|| format!("band {band} {}: {v:?} is not a number", it.name))
        };
        match it.role.as_deref() {
            None => m.band_metadata[band].push((it.name, it.value)),
            Some("description") => m.descriptions[band] = it.value,
            Some("scale") => m.scale[band] = Some(number(&it.value)?),
            Some("offset") => m.offset[band] = Some(number(&it.value)?),
            Some(_) => {}
        }
    }
    Ok(m)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::geotiff::xml::parse_xml;

    fn kv(k: &str, v: &str) -> (String, String) {
        (k.to_string(), v.to_string())
    }

    #[test]
    fn xml_round_trips_with_escaping() {
        let meta = [kv("units", "kg m-2 <&> \"q\" 'a' °"), kv("empty", "")];
        let bands = [
            BandItems {
                description: "swing & spread",
                metadata: &meta,
                scale_offset: None,
            },
            BandItems {
                description: "",
                metadata: &[],
                scale_offset: Some((0.01, -5.0)),
            },
        ];
        let xml = build_xml(&[kv("source", "a<b")], &bands).unwrap();
        assert!(xml.contains("<Item name=\"DESCRIPTION\" sample=\"0\" role=\"description\">swing &amp;amp; spread</Item>"),
            "values are escaped twice, as GDAL 3.6 writes them (checked with gdal_translate): {xml}");
        assert!(xml.contains("<Item name=\"SCALE\" sample=\"1\" role=\"scale\">0.01</Item>"));
        let m = split_items(parse_xml(&xml).unwrap(), 2).unwrap();
        assert_eq!(m.dataset, [kv("source", "a<b")]);
        assert_eq!(m.descriptions, ["swing & spread", ""]);
        assert_eq!(m.band_metadata, [meta.to_vec(), vec![]]);
        assert_eq!((m.scale[1], m.offset[1]), (Some(0.01), Some(-5.0)));
        assert_eq!((m.scale[0], m.offset[0]), (None, None));
    }

    #[test]
    fn parser_accepts_gdal_variants() {
        // Forms seen in GDAL output: XML declaration, single quotes, self-closing items,
        // numeric references, non-default domains (skipped), unknown roles (skipped).
        let xml = "<?xml version=\"1.0\"?>\n<GDALMetadata >\n<!-- c -->\n  <Item name='A' sample='0'>x&#x41;&#66;</Item>\
                   <Item name=\"E\" sample=\"0\"/><Item name=\"S\" domain=\"IMAGE_STRUCTURE\">v</Item>\
                   <Item name=\"C\" sample=\"0\" role=\"colorinterp\">gray</Item></GDALMetadata >\n";
        let m = split_items(parse_xml(xml).unwrap(), 1).unwrap();
        assert_eq!(m.band_metadata[0], [kv("A", "xAB"), kv("E", "")]);
        assert!(m.dataset.is_empty());
        assert!(build_xml(
            &[],
            &[BandItems {
                description: "",
                metadata: &[],
                scale_offset: None
            }]
        )
        .is_none());
    }

    #[test]
    fn malformed_xml_is_an_error_not_a_panic() {
        let cases = [
            "",
            "<GDAL",
            "<GDALMetadata><Item name=\"a\">x",
            "<GDALMetadata><Item name=a>x</Item></GDALMetadata>",
            "<GDALMetadata><Item name=\"a\">&bogus;</Item></GDALMetadata>",
            "<GDALMetadata><Item name=\"a\">&#xD800;</Item></GDALMetadata>",
            "<GDALMetadata><Item sample=\"0\">x</Item></GDALMetadata>",
            "<GDALMetadata><Foo/></GDALMetadata>",
            "<GDALMetadata><Item name=\"a\">x<b/></Item></GDALMetadata>",
            "<GDALMetadata><Item name=\"a\" sample=\"0\"",
            "<!-- never closed",
        ];
        for c in cases {
            assert!(parse_xml(c).is_err(), "accepted {c:?}");
        }
        let bad_band =
            parse_xml("<GDALMetadata><Item name=\"a\" sample=\"3\">x</Item></GDALMetadata>")
                .unwrap();
        assert!(split_items(bad_band, 2).unwrap_err().contains("sample 3"));
        let bad_scale = parse_xml("<GDALMetadata><Item name=\"SCALE\" sample=\"0\" role=\"scale\">z</Item></GDALMetadata>").unwrap();
        assert!(split_items(bad_scale, 1).is_err());
    }

    #[test]
    fn numbers_round_trip() {
        for v in [
            -9999.0,
            0.0,
            0.01,
            1.0e-7,
            3.0e38,
            -3.4028234663852886e38,
            273.15,
        ] {
            assert_eq!(parse_number(&format_number(v)), Some(v), "{v}");
        }
        assert_eq!(format_number(-9999.0), "-9999");
        assert!(parse_number("nan").unwrap().is_nan());
        assert_eq!(parse_number(" -9999\0"), Some(-9999.0));
        assert_eq!(parse_number("abc"), None);
        assert!(check_key("a=b").is_some());
        assert_eq!(check_key("swing_km"), None);
    }
}
