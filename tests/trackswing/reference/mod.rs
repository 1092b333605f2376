//! Independent reference tools (GDAL), and a few short accessors over serde_json's `Value` for
//! reading their JSON output (`gdalinfo -json`).

pub mod gdal;

/// Path-style access to `gdalinfo -json` output: `at("metadata//units")` follows object keys
/// and array indices separated by `/` (an empty key is GDAL's default metadata domain), as a
/// JSON Pointer (RFC 6901) does.
pub trait JsonPath {
    /// The value at a `/`-separated path, `Null` where there is none.
    fn at(&self, path: &str) -> &serde_json::Value;
    /// The text of a string value.
    fn str(&self) -> Option<&str>;
    /// The value of a number.
    fn num(&self) -> Option<f64>;
    /// The elements of an array (none for anything else).
    fn arr(&self) -> &[serde_json::Value];
}

impl JsonPath for serde_json::Value {
    fn at(&self, path: &str) -> &serde_json::Value {
        static NULL: serde_json::Value = serde_json::Value::Null;
        self.pointer(&format!("/{path}")).unwrap_or(&NULL)
    }
    fn str(&self) -> Option<&str> {
        self.as_str()
    }
    fn num(&self) -> Option<f64> {
        self.as_f64()
    }
    fn arr(&self) -> &[serde_json::Value] {
        self.as_array().map_or(&[], Vec::as_slice)
    }
}
