//! The invented towns of Vellamark. None is a real place; any likeness to a real name is
//! unintended.

use super::Town;

/// The demo region's towns: along the coast, across the Sallow Flats coastal plain, on the
/// Greymantle Ridge, in the Wendle Valley and on the plateau beyond, each listed south-west to
/// north-east within its part of the region.
pub fn towns() -> Vec<Town> {
    let t = |name, lat, lon| Town { name, lat, lon };
    vec![
        t("Brinmouth", 45.47, -30.43),
        t("Sallowquay", 48.30, -26.33),
        t("Vellick Head", 49.81, -22.92),
        t("Marrowby", 46.76, -29.66),
        t("Pellmarsh", 48.02, -28.76),
        t("Quenfield", 45.22, -31.59),
        t("Vessington Cross", 46.94, -30.46),
        t("Ostlemere Mills", 50.32, -24.60),
        t("Kellaring", 46.67, -31.58),
        t("Fennick Junction", 49.61, -27.06),
        t("Greymantle Gap", 48.61, -30.62),
        t("Wendle Hollow", 48.31, -32.32),
        t("Dunmerrow", 50.85, -27.61),
        t("Harlowdeep", 50.73, -31.74),
    ]
}
