//! The invented towns of Vellamark. None is a real place; any likeness to a real name is
//! unintended.

use super::Town;

/// The demo region's towns: along the coast, across the Sallow Flats coastal plain, on the
/// Greymantle Ridge, in the Wendle Valley and on the plateau beyond, each listed south-west to
/// north-east within its part of the region.
pub fn towns() -> Vec<Town> {
    let t = |name, lat, lon| Town { name, lat, lon };
    vec![
        t("Brinmouth", 45.32, -30.14),
        t("Sallowquay", 48.50, -26.59),
        t("Vellick Head", 49.83, -22.93),
        t("Marrowby", 46.69, -29.54),
        t("Pellmarsh", 48.60, -27.63),
        t("Quenfield", 45.06, -31.75),
        t("Vessington Cross", 47.76, -29.29),
        t("Ostlemere Mills", 50.24, -24.16),
        t("Kellaring", 46.51, -31.28),
        t("Fennick Junction", 49.84, -27.34),
        t("Greymantle Gap", 48.48, -30.41),
        t("Wendle Hollow", 48.25, -32.19),
        t("Dunmerrow", 50.99, -27.79),
        t("Harlowdeep", 50.66, -31.64),
    ]
}
