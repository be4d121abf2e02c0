//! A minimal XML well-formedness check for the documents seepd writes (SVG drawings, the
//! XHTML-style report): tags balanced and properly nested, attributes quoted and unique, text
//! free of bare `<`, `>` and unknown `&` entities, one root element. Used by the tests and by
//! `seepd report` to refuse to write a broken file. Not a general XML parser.

/// A minimal well-formedness check: every opened tag is closed in order, attributes are
/// `name="value"` with no `<` inside values, text has no bare `<` or unknown `&` entities.
/// Returns the element names in document order.
pub fn check_xml(doc: &str) -> Result<Vec<String>, String> {
    let mut stack: Vec<String> = Vec::new();
    let mut names = Vec::new();
    let mut rest = doc.trim_start();
    if let Some(after) = rest.strip_prefix("<?xml") {
        let end = after.find("?>").ok_or("unterminated XML declaration")?;
        rest = after[end + 2..].trim_start();
    }
    if let Some(after) = rest.strip_prefix("<!DOCTYPE") {
        let end = after.find('>').ok_or("unterminated DOCTYPE")?;
        rest = &after[end + 1..];
    }
    let mut seen_root = false;
    while !rest.is_empty() {
        let lt = rest.find('<').unwrap_or(rest.len());
        check_text(&rest[..lt])?;
        if !stack.is_empty() || rest[..lt].trim().is_empty() {
        } else {
            return Err(format!("text outside the root: {:?}", &rest[..lt]));
        }
        rest = &rest[lt..];
        if rest.is_empty() {
            break;
        }
        if let Some(after) = rest.strip_prefix("<!--") {
            let end = after.find("-->").ok_or("unterminated comment")?;
            rest = &after[end + 3..];
            continue;
        }
        let gt = rest.find('>').ok_or("unterminated tag")?;
        let tag = &rest[1..gt];
        rest = &rest[gt + 1..];
        if let Some(name) = tag.strip_prefix('/') {
            let open = stack
                .pop()
                .ok_or(format!("closing </{name}> with nothing open"))?;
            if open != name.trim() {
                return Err(format!("<{open}> closed by </{name}>"));
            }
            continue;
        }
        let (body, self_closing) = match tag.strip_suffix('/') {
            Some(b) => (b, true),
            None => (tag, false),
        };
        let name_end = body.find(char::is_whitespace).unwrap_or(body.len());
        let name = &body[..name_end];
        if name.is_empty() || !name.chars().all(|c| c.is_ascii_alphanumeric() || c == '-') {
            return Err(format!("bad tag name in <{tag}>"));
        }
        if stack.is_empty() && seen_root {
            return Err("second root element".into());
        }
        seen_root = true;
        check_attributes(&body[name_end..])?;
        names.push(name.to_string());
        if !self_closing {
            stack.push(name.to_string());
        }
    }
    if let Some(open) = stack.pop() {
        return Err(format!("<{open}> never closed"));
    }
    Ok(names)
}

fn check_text(text: &str) -> Result<(), String> {
    let mut parts = text.split('&');
    parts.next();
    for part in parts {
        let known = ["amp;", "lt;", "gt;", "quot;", "apos;"];
        if !known.iter().any(|k| part.starts_with(k)) {
            return Err(format!("bare & in {text:?}"));
        }
    }
    if text.contains('>') {
        return Err(format!("bare > in text {text:?}"));
    }
    Ok(())
}

fn check_attributes(mut attrs: &str) -> Result<(), String> {
    let mut seen = Vec::new();
    loop {
        attrs = attrs.trim_start();
        if attrs.is_empty() {
            return Ok(());
        }
        let eq = attrs
            .find('=')
            .ok_or(format!("attribute without value: {attrs}"))?;
        let name = attrs[..eq].trim();
        if name.is_empty() || name.contains(char::is_whitespace) || seen.contains(&name) {
            return Err(format!("bad or repeated attribute name {name:?}"));
        }
        seen.push(name);
        let value = attrs[eq + 1..]
            .strip_prefix('"')
            .ok_or(format!("unquoted value for {name}"))?;
        let close = value
            .find('"')
            .ok_or(format!("unterminated value for {name}"))?;
        check_text(&value[..close])?;
        if value[..close].contains('<') {
            return Err(format!("< in value of {name}"));
        }
        attrs = &value[close + 1..];
        if !attrs.is_empty() && !attrs.starts_with(char::is_whitespace) {
            return Err(format!("no space after attribute {name}"));
        }
    }
}

#[cfg(test)]
mod tests {
    use super::check_xml;

    #[test]
    fn the_checker_rejects_broken_documents() {
        assert!(check_xml(r#"<svg a="1"><g></g></svg>"#).is_ok());
        assert!(check_xml(r#"<svg><g></svg>"#).is_err());
        assert!(check_xml(r#"<svg a=1></svg>"#).is_err());
        assert!(check_xml(r#"<svg a="1" a="2"></svg>"#).is_err());
        assert!(check_xml(r#"<svg><text>a & b</text></svg>"#).is_err());
        assert!(check_xml(r#"<svg><text>a &amp; b</text></svg>"#).is_ok());
        assert!(check_xml(r#"<svg></svg><svg></svg>"#).is_err());
        assert!(check_xml(r#"<svg>"#).is_err());
        assert!(check_xml("<!DOCTYPE html>\n<html><!-- note --><p>x</p></html>").is_ok());
        assert!(check_xml("<!DOCTYPE html>\n<html><!-- note <p>x</p></html>").is_err());
    }
}
