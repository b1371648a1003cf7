//! A small well-formedness checker for the HTML and SVG the report writes: balanced tags,
//! quoted attributes, escaped text. Enough to catch a writer that forgets to close or escape
//! something; not a full HTML parser.

const VOID: [&str; 14] = [
    "area", "base", "br", "col", "embed", "hr", "img", "input", "link", "meta", "param", "source",
    "track", "wbr",
];

/// A small markup checker: every element closed in order (void elements and `/>` allowed),
/// every attribute value quoted, every `&` an entity, no stray `<`. Returns the element names
/// in document order.
pub fn check_markup(doc: &str) -> Result<Vec<String>, String> {
    let b = doc.as_bytes();
    let mut stack: Vec<String> = Vec::new();
    let mut seen = Vec::new();
    let mut i = 0;
    let at =
        |i: usize| format!("byte {i}: …{}…", &doc[i.saturating_sub(40)..(i + 40).min(doc.len())]);
    while i < b.len() {
        match b[i] {
            b'<' => {
                if doc[i..].starts_with("<!--") {
                    i += doc[i..].find("-->").ok_or_else(|| at(i))? + 3;
                    continue;
                }
                if doc[i..].starts_with("<!DOCTYPE") || doc[i..].starts_with("<?xml") {
                    i += doc[i..].find('>').ok_or_else(|| at(i))? + 1;
                    continue;
                }
                let end = i + doc[i..].find('>').ok_or_else(|| at(i))?;
                let tag = &doc[i + 1..end];
                if let Some(name) = tag.strip_prefix('/') {
                    let open = stack
                        .pop()
                        .ok_or_else(|| format!("close {name} with nothing open, {}", at(i)))?;
                    if open != name.trim() {
                        return Err(format!("</{name}> closes <{open}>, {}", at(i)));
                    }
                } else {
                    let self_closing = tag.ends_with('/');
                    let tag = tag.trim_end_matches('/');
                    let (name, mut rest) = tag.split_once(char::is_whitespace).unwrap_or((tag, ""));
                    if name.is_empty() || !name.chars().all(|c| c.is_ascii_alphanumeric()) {
                        return Err(format!("bad element name {name:?}, {}", at(i)));
                    }
                    // Attributes: name="value" only.
                    loop {
                        rest = rest.trim_start();
                        if rest.is_empty() {
                            break;
                        }
                        let eq = rest.find('=').ok_or_else(|| {
                            format!("attribute without value in <{name}>, {}", at(i))
                        })?;
                        let an = &rest[..eq];
                        if an.is_empty()
                            || !an
                                .chars()
                                .all(|c| c.is_ascii_alphanumeric() || c == '-' || c == ':')
                        {
                            return Err(format!("bad attribute name {an:?}, {}", at(i)));
                        }
                        let v = &rest[eq + 1..];
                        if !v.starts_with('"') {
                            return Err(format!("unquoted attribute {an} in <{name}>, {}", at(i)));
                        }
                        let close = v[1..].find('"').ok_or_else(|| at(i))?;
                        if v[1..1 + close].contains('<') {
                            return Err(format!("'<' inside attribute {an}, {}", at(i)));
                        }
                        rest = &v[close + 2..];
                    }
                    seen.push(name.to_string());
                    if name == "style" || name == "script" {
                        let close = format!("</{name}>");
                        let body_end = end + doc[end..].find(&close).ok_or_else(|| at(i))?;
                        i = body_end + close.len();
                        continue;
                    }
                    if !self_closing && !VOID.contains(&name) {
                        stack.push(name.to_string());
                    }
                }
                i = end + 1;
            }
            b'&' => {
                let semi = doc[i..].find(';').ok_or_else(|| format!("bare &, {}", at(i)))?;
                let ent = &doc[i + 1..i + semi];
                let ok = (ent.starts_with('#')
                    && ent[1..].chars().all(|c| c.is_ascii_digit())
                    && ent.len() > 1)
                    || (!ent.is_empty()
                        && ent.len() < 8
                        && ent.chars().all(|c| c.is_ascii_alphabetic()));
                if !ok {
                    return Err(format!("bad entity &{ent};, {}", at(i)));
                }
                i += semi + 1;
            }
            b'>' => return Err(format!("stray '>', {}", at(i))),
            _ => i += 1,
        }
    }
    if let Some(open) = stack.pop() {
        return Err(format!("<{open}> never closed"));
    }
    Ok(seen)
}

#[test]
fn markup_checker_catches_mistakes() {
    assert!(check_markup("<p><b>x</b></p>").is_ok());
    assert!(check_markup("<p><b>x</p></b>").is_err());
    assert!(check_markup("<p class=x>y</p>").is_err());
    assert!(check_markup("<p>a & b</p>").is_err());
    assert!(check_markup("<p>unclosed").is_err());
    assert!(check_markup("<br><svg><line x1=\"0\"/></svg>").is_ok());
}
