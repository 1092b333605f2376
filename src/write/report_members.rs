//! The report's section on the members and method combinations of a several-member case, read
//! from `manifest.json`'s `ensemble` object: who was blended, with which weight and track, and
//! how far each member's low was moved onto the members' mean track.

use super::html::{table, text_of};
use serde_json::Value;

/// The section's HTML, or `None` for a run of one member with one method combination.
pub fn members_section(manifest: &Value) -> Option<String> {
    let e = manifest.get("ensemble")?;
    let members = e["members"].as_array()?;
    // The largest move onto the mean track, per member (km), when the members were aligned.
    let moved: Vec<Option<f64>> = (0..members.len())
        .map(|k| {
            e["alignment"]["displacement_km"].get(k).and_then(|d| {
                d["east_north_km"].as_array().map(|steps| {
                    steps
                        .iter()
                        .filter_map(|s| Some(s[0].as_f64()?.hypot(s[1].as_f64()?)))
                        .fold(0.0, f64::max)
                })
            })
        })
        .collect();
    let rows: Vec<Vec<String>> = members
        .iter()
        .zip(&moved)
        .map(|(m, d)| {
            vec![
                text_of(&m["name"]),
                m["weight"]
                    .as_f64()
                    .map_or(String::new(), |w| format!("{w:.3}")),
                text_of(&m["files"]),
                if m["track"].is_null() {
                    "none".into()
                } else {
                    text_of(&m["track"])
                },
                d.map_or_else(|| "not aligned".into(), |d| format!("{d:.0}")),
            ]
        })
        .collect();
    let mut h = String::from("<section><h2>Members and methods</h2><p class=\"note\">Every member runs with every method combination and every track offset; a scenario weighs member weight × method weight × track-error prior. The weighted summaries blend them all; the layers of the run as issued are the first member's with the first methods.</p>\n");
    h.push_str(&table(
        &[
            "Member".into(),
            "Weight".into(),
            "Files".into(),
            "Track".into(),
            "Largest move onto the mean track (km)".into(),
        ],
        &rows,
        "members",
        false,
    ));
    if let Some(options) = e["method_options"].as_array() {
        let rows: Vec<Vec<String>> = options
            .iter()
            .map(|o| {
                vec![
                    text_of(&o["precip_type"]),
                    text_of(&o["snow_ratio"]),
                    o["weight"]
                        .as_f64()
                        .map_or(String::new(), |w| format!("{w:.3}")),
                ]
            })
            .collect();
        h.push_str(&table(
            &[
                "Precipitation type".into(),
                "Snow ratio".into(),
                "Weight".into(),
            ],
            &rows,
            "methods",
            false,
        ));
    }
    if e["alignment"].is_null() {
        h.push_str("<p class=\"note\">The members were not aligned on a mean track; the reason is listed under Not computed.</p>\n");
    }
    h.push_str("</section>\n");
    Some(h)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_section_lists_members_weights_tracks_and_their_largest_move() {
        let m = serde_json::json!({"ensemble": {
            "members": [
                {"name": "a", "weight": 0.25, "files": 3, "track": "a.csv"},
                {"name": "b", "weight": 0.75, "files": 3, "track": null}
            ],
            "method_options": [{"precip_type": "energy-area", "snow_ratio": "fixed", "weight": 1.0}],
            "alignment": {"displacement_km": [
                {"east_north_km": [[3.0, 4.0], [6.0, 8.0]]},
                {"east_north_km": [[-1.0, 0.0], null]}
            ]}
        }});
        let h = members_section(&m).unwrap();
        // √(6² + 8²) = 10 km, the larger of member a's two moves.
        for want in [
            "<td>a</td><td>0.250</td><td>3</td><td>a.csv</td><td>10</td>",
            "<td>b</td><td>0.750</td><td>3</td><td>none</td><td>1</td>",
            "energy-area",
        ] {
            assert!(h.contains(want), "{want} in {h}");
        }
        assert!(members_section(&serde_json::json!({})).is_none());
    }
}
