//! Output units: how millimetres and kilometres are shown (metric or US customary).

/// Output units.
#[derive(Clone, Copy, Debug, PartialEq, serde::Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Units {
    /// Snowfall in cm, liquid in mm.
    Metric,
    /// Snowfall and liquid in inches.
    Us,
}

impl Units {
    /// Parses `metric` or `us`.
    pub fn parse(s: &str) -> Option<Self> {
        match s.trim().to_ascii_lowercase().as_str() {
            "metric" => Some(Self::Metric),
            "us" => Some(Self::Us),
            _ => None,
        }
    }
    /// Converts snow depth from mm to the output unit.
    pub fn snow(&self, mm: f32) -> f32 {
        match self {
            Self::Metric => mm / 10.0,
            Self::Us => mm / 25.4,
        }
    }
    /// Converts liquid depth from mm (kg m⁻²) to the output unit.
    pub fn liquid(&self, mm: f32) -> f32 {
        match self {
            Self::Metric => mm,
            Self::Us => mm / 25.4,
        }
    }
    /// Unit of snow depth.
    pub fn snow_unit(&self) -> &'static str {
        match self {
            Self::Metric => "cm",
            Self::Us => "in",
        }
    }
    /// Unit of liquid depth.
    pub fn liquid_unit(&self) -> &'static str {
        match self {
            Self::Metric => "mm",
            Self::Us => "in",
        }
    }
    /// A distance as the outputs write it: km in metric; in US units the miles follow in
    /// brackets, since offsets are set in km (1 mi = 1.609344 km, the international mile).
    ///
    /// ```
    /// use trackswing::units::Units;
    /// assert_eq!(Units::Metric.distance(40.0), "40 km");
    /// assert_eq!(Units::Us.distance(40.0), "40 km (25 mi)");
    /// assert_eq!(Units::Us.distance(7.5), "7.5 km (4.7 mi)");
    /// ```
    pub fn distance(&self, km: f64) -> String {
        let text = |v: f64, digits: usize| {
            let s = format!("{v:.digits$}");
            if s.contains('.') {
                s.trim_end_matches('0').trim_end_matches('.').to_string()
            } else {
                s
            }
        };
        let k = text(km, 3);
        match self {
            Self::Metric => format!("{k} km"),
            Self::Us => {
                let mi = km / 1.609_344;
                let digits = if mi.abs() < 10.0 { 1 } else { 0 };
                format!("{k} km ({} mi)", text(mi, digits))
            }
        }
    }
    /// Converts a snow depth in the output unit to mm.
    pub fn snow_to_mm(&self, v: f64) -> f64 {
        match self {
            Self::Metric => v * 10.0,
            Self::Us => v * 25.4,
        }
    }
    /// Converts a liquid (or ice) depth in the output unit to mm.
    pub fn liquid_to_mm(&self, v: f64) -> f64 {
        match self {
            Self::Metric => v,
            Self::Us => v * 25.4,
        }
    }
}
