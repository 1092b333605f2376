//! Small HTML pieces the report's sections share: escaping, a JSON value as text, a table.

use serde_json::Value;
use std::fmt::Write as _;

/// Escapes text for HTML element content and attribute values.
///
/// ```
/// use trackswing::write::html::escape;
/// assert_eq!(escape("<script>\"a\" & 'b'"), "&lt;script&gt;&quot;a&quot; &amp; &#39;b&#39;");
/// ```
pub fn escape(s: &str) -> String {
    let mut out = String::with_capacity(s.len());
    for ch in s.chars() {
        match ch {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&#39;"),
            c => out.push(c),
        }
    }
    out
}

pub fn text_of(v: &Value) -> String {
    match v {
        Value::String(s) => s.clone(),
        Value::Null => String::new(),
        other => other.to_string(),
    }
}

pub fn table(head: &[String], rows: &[Vec<String>], id: &str, sortable: bool) -> String {
    let mut h = String::new();
    let class = if sortable { " class=\"sortable\"" } else { "" };
    let _ = write!(h, "<table id=\"{id}\"{class}><thead><tr>");
    for c in head {
        let _ = write!(h, "<th scope=\"col\">{}</th>", escape(c));
    }
    h.push_str("</tr></thead><tbody>\n");
    for r in rows {
        h.push_str("<tr>");
        for c in r {
            let _ = write!(h, "<td>{}</td>", escape(c));
        }
        h.push_str("</tr>\n");
    }
    h.push_str("</tbody></table>\n");
    h
}
