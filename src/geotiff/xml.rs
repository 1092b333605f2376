//! A small, strict parser for the XML subset GDAL writes in its GDAL_METADATA tag (tag 42112),
//! and the escaping used when writing it. Malformed input is an error with a byte offset, never a
//! panic.

/// One `<Item>` of the GDAL_METADATA XML.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct Item {
    pub name: String,
    pub sample: Option<String>,
    pub role: Option<String>,
    pub domain: Option<String>,
    pub value: String,
}

/// Where and why the XML could not be parsed.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct XmlError {
    pub offset: usize,
    pub what: String,
}

/// Escapes text for an XML attribute or element (the five predefined entities).
pub(crate) fn escape(s: &str, out: &mut String) {
    for c in s.chars() {
        match c {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&apos;"),
            c => out.push(c),
        }
    }
}

struct Parser<'a> {
    s: &'a str,
    pos: usize,
}

impl<'a> Parser<'a> {
    fn err(&self, what: impl Into<String>) -> XmlError {
        XmlError {
            offset: self.pos,
            what: what.into(),
        }
    }

    fn rest(&self) -> &'a str {
        &self.s[self.pos..]
    }

    /// Skips whitespace, comments and processing instructions (`<?xml ...?>`).
    fn skip_misc(&mut self) -> Result<(), XmlError> {
        loop {
            let trimmed = self.rest().trim_start();
            self.pos = self.s.len() - trimmed.len();
            let close = if trimmed.starts_with("<?") {
                "?>"
            } else if trimmed.starts_with("<!--") {
                "-->"
            } else {
                return Ok(());
            };
            let end = trimmed
                .find(close)
                .ok_or_else(|| self.err("unterminated comment"))?;
            self.pos += end + close.len();
        }
    }

    fn eat(&mut self, lit: &str) -> bool {
        let hit = self.rest().starts_with(lit);
        if hit {
            self.pos += lit.len();
        }
        hit
    }

    /// Parses attributes up to `>` or `/>`; returns them and whether the element was empty.
    fn attributes(&mut self) -> Result<(Vec<(String, String)>, bool), XmlError> {
        let mut attrs = Vec::new();
        loop {
            self.pos = self.s.len() - self.rest().trim_start().len();
            if self.eat("/>") {
                return Ok((attrs, true));
            }
            if self.eat(">") {
                return Ok((attrs, false));
            }
            let name_len = self
                .rest()
                .find(|c: char| c.is_whitespace() || matches!(c, '=' | '>' | '/' | '<'))
                .ok_or_else(|| self.err("unterminated tag"))?;
            if name_len == 0 {
                return Err(self.err("expected an attribute name"));
            }
            let name = self.rest()[..name_len].to_string();
            self.pos += name_len;
            self.pos = self.s.len() - self.rest().trim_start().len();
            if !self.eat("=") {
                return Err(self.err(format!("attribute {name:?} has no '='")));
            }
            self.pos = self.s.len() - self.rest().trim_start().len();
            let quote = match self.rest().chars().next() {
                Some(q @ ('"' | '\'')) => q,
                _ => return Err(self.err(format!("attribute {name:?} value is not quoted"))),
            };
            self.pos += 1;
            let len = self
                .rest()
                .find(quote)
                .ok_or_else(|| self.err(format!("attribute {name:?} value is unterminated")))?;
            let start = self.pos;
            let value = unescape(&self.rest()[..len]).map_err(|(o, w)| XmlError {
                offset: start + o,
                what: w,
            })?;
            self.pos += len + 1;
            attrs.push((name, value));
        }
    }
}

/// Like [`unescape`], but keeps an `&` that does not start a valid reference.
fn unescape_lenient(s: &str) -> String {
    let mut out = String::with_capacity(s.len());
    let mut rest = s;
    while let Some(amp) = rest.find('&') {
        out.push_str(&rest[..amp]);
        let tail = &rest[amp..];
        match tail
            .find(';')
            .and_then(|semi| unescape(&tail[..=semi]).ok().map(|c| (semi, c)))
        {
            Some((semi, decoded)) => {
                out.push_str(&decoded);
                rest = &tail[semi + 1..];
            }
            None => {
                out.push('&');
                rest = &tail[1..];
            }
        }
    }
    out.push_str(rest);
    out
}

/// Decodes the five predefined XML entities and numeric character references; returns the byte
/// offset and reason on a bad reference.
fn unescape(s: &str) -> Result<String, (usize, String)> {
    let mut out = String::with_capacity(s.len());
    let mut rest = s;
    while let Some(amp) = rest.find('&') {
        out.push_str(&rest[..amp]);
        let at = s.len() - rest.len() + amp;
        let semi = rest[amp..]
            .find(';')
            .ok_or_else(|| (at, "'&' without ';'".to_string()))?;
        let entity = &rest[amp + 1..amp + semi];
        let c = match entity {
            "amp" => Some('&'),
            "lt" => Some('<'),
            "gt" => Some('>'),
            "quot" => Some('"'),
            "apos" => Some('\''),
            e => {
                let code = if let Some(hex) = e.strip_prefix("#x").or_else(|| e.strip_prefix("#X"))
                {
                    u32::from_str_radix(hex, 16).ok()
                } else if let Some(dec) = e.strip_prefix('#') {
                    dec.parse().ok()
                } else {
                    None
                };
                code.and_then(char::from_u32)
            }
        };
        out.push(c.ok_or_else(|| (at, format!("unknown entity &{entity};")))?);
        rest = &rest[amp + semi + 1..];
    }
    out.push_str(rest);
    Ok(out)
}

/// Parses GDAL_METADATA XML into its items, in document order.
pub(crate) fn parse_xml(xml: &str) -> Result<Vec<Item>, XmlError> {
    let mut p = Parser { s: xml, pos: 0 };
    p.skip_misc()?;
    if !p.eat("<GDALMetadata") {
        return Err(p.err("expected <GDALMetadata>"));
    }
    let (_, empty_root) = p.attributes()?;
    let mut items = Vec::new();
    if empty_root {
        return Ok(items);
    }
    loop {
        p.skip_misc()?;
        if p.eat("</GDALMetadata") {
            p.pos = xml.len() - p.rest().trim_start().len();
            if !p.eat(">") {
                return Err(p.err("expected '>' closing </GDALMetadata"));
            }
            return Ok(items);
        }
        let at = p.pos;
        if !p.eat("<Item")
            || !p
                .rest()
                .starts_with(|c: char| c.is_whitespace() || c == '>' || c == '/')
        {
            p.pos = at;
            return Err(p.err("expected <Item> or </GDALMetadata>"));
        }
        let (attrs, empty) = p.attributes()?;
        let value = if empty {
            String::new()
        } else {
            // Raw '<' is not allowed in XML text, so the first '<' must open the closing tag.
            let len = p
                .rest()
                .find('<')
                .ok_or_else(|| p.err("<Item> without </Item>"))?;
            let start = p.pos;
            if !p.rest()[len..].starts_with("</Item") {
                p.pos += len;
                return Err(p.err("expected </Item> (markup inside item text)"));
            }
            let v = unescape(&p.rest()[..len]).map_err(|(o, w)| XmlError {
                offset: start + o,
                what: w,
            })?;
            // Second decoding of GDAL's doubly escaped values; a '&' that starts no entity is
            // kept as is, so singly escaped files from other writers read the same.
            let v = unescape_lenient(&v);
            p.pos += len + "</Item".len();
            p.pos = xml.len() - p.rest().trim_start().len();
            if !p.eat(">") {
                return Err(p.err("expected '>' closing </Item"));
            }
            v
        };
        let mut item = Item {
            name: String::new(),
            sample: None,
            role: None,
            domain: None,
            value,
        };
        let mut has_name = false;
        for (k, v) in attrs {
            match k.as_str() {
                "name" => {
                    item.name = v;
                    has_name = true;
                }
                "sample" => item.sample = Some(v),
                "role" => item.role = Some(v),
                "domain" => item.domain = Some(v),
                _ => {}
            }
        }
        if !has_name {
            return Err(XmlError {
                offset: at,
                what: "<Item> without a name attribute".into(),
            });
        }
        items.push(item);
    }
}
