//! The one module that calls the YAML parser.
//!
//! `serde_yaml` is archived upstream; keeping every call here means a maintained fork (serde_yaml_ng,
//! serde_norway) can replace it by editing this file alone.

use serde::de::DeserializeOwned;
use std::collections::HashMap;

/// A parse failure with the position the parser reported (1-based line and column).
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct YamlError {
    pub line: Option<usize>,
    pub column: Option<usize>,
    pub message: String,
}

/// Parses `text` into `T`, refusing unknown keys where `T` says so.
pub fn from_str<T: DeserializeOwned>(text: &str) -> Result<T, YamlError> {
    serde_yaml::from_str(text).map_err(|e| {
        let loc = e.location();
        let mut message = e.to_string();
        // serde_yaml appends " at line L column C"; the position is reported separately.
        if let Some(idx) = message.find(" at line ") {
            message.truncate(idx);
        }
        YamlError {
            line: loc.as_ref().map(|l| l.line()),
            column: loc.as_ref().map(|l| l.column()),
            message,
        }
    })
}

/// The 1-based line on which the element called `name` is declared (`name: NAME` inside `elements:`),
/// found by reading the text, since the parser keeps no positions for values.
pub fn element_line(text: &str, name: &str) -> Option<usize> {
    element_line_nth(text, name, 0)
}

/// The line of the `nth` (0-based) declaration of an element called `name`, for duplicated names.
pub fn element_line_nth(text: &str, name: &str, nth: usize) -> Option<usize> {
    element_lines(text)
        .get(name)
        .and_then(|lines| lines.get(nth).copied())
}

/// Every element name declared inside `elements:` with the 1-based lines that declare it, in order,
/// from one pass over the text (looking each name up separately would read the file once per element).
pub fn element_lines(text: &str) -> HashMap<String, Vec<usize>> {
    let mut out: HashMap<String, Vec<usize>> = HashMap::new();
    let mut in_elements = false;
    for (i, line) in text.lines().enumerate() {
        let trimmed = line.trim_start();
        if !line.starts_with([' ', '\t', '-']) && !trimmed.is_empty() && !trimmed.starts_with('#') {
            in_elements = trimmed.starts_with("elements:");
        }
        if in_elements {
            let mut names = declared_names(line);
            names.dedup();
            for n in names {
                let lines = out.entry(n).or_default();
                if lines.last() != Some(&(i + 1)) {
                    lines.push(i + 1);
                }
            }
        }
    }
    out
}

/// The values written after `name:` on one line, outside comments.
fn declared_names(line: &str) -> Vec<String> {
    let code = line.split('#').next().unwrap_or("");
    let mut rest = code;
    let mut out = Vec::new();
    while let Some(pos) = rest.find("name:") {
        let before_ok = pos == 0 || {
            let c = rest.as_bytes()[pos - 1];
            c == b' ' || c == b'{' || c == b',' || c == b'-' || c == b'\t'
        };
        let after = rest[pos + 5..].trim_start();
        let value: String = after
            .trim_start_matches(['"', '\''])
            .chars()
            .take_while(|c| !matches!(c, ',' | '}' | '"' | '\'' | ' ' | '\t'))
            .collect();
        if before_ok {
            out.push(value);
        }
        rest = &rest[pos + 5..];
    }
    out
}

/// The name of the element whose declaration spans `line` (1-based), for messages about unknown keys.
pub fn element_at_line(text: &str, line: usize) -> Option<String> {
    let lines: Vec<&str> = text.lines().collect();
    let start = line.min(lines.len());
    // Walk up to the sequence item that holds this line, then read its name.
    for i in (0..start).rev() {
        let l = lines[i].trim_start();
        if let Some(name) = name_on(l) {
            return Some(name);
        }
        if l.starts_with("- ") || l == "-" {
            // the item starts here but names itself further down
            for l2 in lines.iter().skip(i + 1) {
                let t = l2.trim_start();
                if t.starts_with("- ") || !l2.starts_with([' ', '\t']) {
                    break;
                }
                if let Some(name) = name_on(t) {
                    return Some(name);
                }
            }
            return None;
        }
        if !lines[i].starts_with([' ', '\t', '-']) {
            return None;
        }
    }
    None
}

fn name_on(line: &str) -> Option<String> {
    let code = line.split('#').next().unwrap_or("");
    let pos = code.find("name:")?;
    if pos > 0 {
        let c = code.as_bytes()[pos - 1];
        if !(c == b' ' || c == b'{' || c == b',' || c == b'-' || c == b'\t') {
            return None;
        }
    }
    let value: String = code[pos + 5..]
        .trim_start()
        .trim_start_matches(['"', '\''])
        .chars()
        .take_while(|c| !matches!(c, ',' | '}' | '"' | '\'' | ' ' | '\t'))
        .collect();
    (!value.is_empty()).then_some(value)
}

#[cfg(test)]
mod tests {
    use super::*;

    const TEXT: &str = "name: x\nelements:\n  - { kind: resistor, name: r1, nodes: [a, gnd], value: 1k }\n  - kind: capacitor\n    name: c1\n    nodes: [a, gnd]\n    value: 1n\nrun: { stop: 1u }\n";

    #[test]
    fn finds_element_lines() {
        assert_eq!(element_line(TEXT, "r1"), Some(3));
        assert_eq!(element_line(TEXT, "c1"), Some(5));
        assert_eq!(element_line(TEXT, "x"), None);
        let dup = "elements:\n  - { name: r1 }\n  - { name: r2 }\n  - { name: r1 }\n";
        assert_eq!(element_line_nth(dup, "r1", 0), Some(2));
        assert_eq!(element_line_nth(dup, "r1", 1), Some(4));
        assert_eq!(element_line_nth(dup, "r1", 2), None);
        assert_eq!(element_at_line(TEXT, 3).as_deref(), Some("r1"));
        assert_eq!(element_at_line(TEXT, 7).as_deref(), Some("c1"));
        assert_eq!(element_at_line(TEXT, 4).as_deref(), Some("c1"));
    }
}
