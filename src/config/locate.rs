//! Turning byte offsets in a TOML text into what a person can act on: line,
//! column and the dotted key path (`message[2].signal[0].scale`).
//!
//! toml's errors carry a byte span but not the key; this scanner recovers
//! the key by following table headers and array-of-table counts up to the
//! offset. It reads only the structure a config file uses (headers, `key =`
//! lines, inline tables), which is all the locating needs.

/// 1-based line and column (in characters) of byte `offset` in `src`.
pub fn line_col(src: &str, offset: usize) -> (usize, usize) {
    let offset = offset.min(src.len());
    let before = &src[..floor_char_boundary(src, offset)];
    let line = before.matches('\n').count() + 1;
    let line_start = before.rfind('\n').map_or(0, |i| i + 1);
    let col = before[line_start..].chars().count() + 1;
    (line, col)
}

fn floor_char_boundary(s: &str, mut i: usize) -> usize {
    while i > 0 && !s.is_char_boundary(i) {
        i -= 1;
    }
    i
}

/// The dotted key path at byte `offset` of `src`.
pub fn key_path_at(src: &str, offset: usize) -> String {
    let offset = floor_char_boundary(src, offset.min(src.len()));
    let mut header_path = String::new();
    // (array header name, count so far) for every array of tables seen.
    let mut counts: Vec<(String, usize)> = Vec::new();
    let mut last_key_in_table: Option<String> = None;
    let mut value = ValueState::default();
    let mut pos = 0usize;
    for raw_line in src.split_inclusive('\n') {
        let line_end = pos + raw_line.len();
        let line = raw_line.trim_end_matches(['\n', '\r']);
        let trimmed = line.trim_start();
        let contains = offset >= pos && (offset < line_end || line_end == src.len());
        // Inside a value that spans lines (an array, an inline table, a
        // multi-line string) a line is never a header or a key: `[1500, 420],`
        // on its own line and `[[message]]` inside a string are data.
        let continued = value.open();
        value.scan(line);
        if continued {
            if contains {
                return join(&header_path, last_key_in_table.as_deref());
            }
        } else if let Some(name) = header_name(trimmed) {
            let is_array = trimmed.starts_with("[[");
            if is_array {
                let prefix = format!("{name}.");
                counts.retain(|(n, _)| !n.starts_with(&prefix));
                match counts.iter_mut().find(|(n, _)| *n == name) {
                    Some((_, c)) => *c += 1,
                    None => counts.push((name.clone(), 0)),
                }
            }
            header_path = indexed_path(&name, &counts);
            last_key_in_table = None;
            if contains {
                return header_path;
            }
        } else if let Some(keys) = line_keys(line, if contains { offset - pos } else { line.len() }) {
            if !keys.is_empty() {
                last_key_in_table = Some(keys.join("."));
            }
            if contains {
                return join(&header_path, last_key_in_table.as_deref());
            }
        } else if contains {
            return join(&header_path, last_key_in_table.as_deref());
        }
        pos = line_end;
    }
    join(&header_path, last_key_in_table.as_deref())
}

/// Whether the text so far leaves a value open across lines: brackets and
/// braces not yet closed, or a multi-line string (`"""` or `'''`).
#[derive(Default)]
struct ValueState {
    depth: i32,
    multi_line: Option<&'static str>,
}

impl ValueState {
    fn open(&self) -> bool {
        self.depth > 0 || self.multi_line.is_some()
    }

    /// Follows one line: strings, comments, brackets.
    fn scan(&mut self, line: &str) {
        let b = line.as_bytes();
        let mut i = 0;
        while i < b.len() {
            if let Some(close) = self.multi_line {
                match line[i..].find(close) {
                    Some(k) => {
                        i += k + 3;
                        self.multi_line = None;
                        continue;
                    }
                    None => return,
                }
            }
            match b[i] {
                b'#' => return,
                b'"' if line[i..].starts_with("\"\"\"") => {
                    self.multi_line = Some("\"\"\"");
                    i += 3;
                    continue;
                }
                b'\'' if line[i..].starts_with("'''") => {
                    self.multi_line = Some("'''");
                    i += 3;
                    continue;
                }
                q @ (b'"' | b'\'') => {
                    // A one-line string: skip to its closing quote.
                    i += 1;
                    while i < b.len() && b[i] != q {
                        i += if q == b'"' && b[i] == b'\\' { 2 } else { 1 };
                    }
                }
                b'[' | b'{' => self.depth += 1,
                b']' | b'}' => self.depth = (self.depth - 1).max(0),
                _ => {}
            }
            i += 1;
        }
    }
}

fn join(header: &str, key: Option<&str>) -> String {
    match (header.is_empty(), key) {
        (true, Some(k)) => k.to_string(),
        (false, Some(k)) => format!("{header}.{k}"),
        (_, None) => header.to_string(),
    }
}

/// `message.signal` with the current array indices: `message[2].signal[0]`.
fn indexed_path(name: &str, counts: &[(String, usize)]) -> String {
    let mut out = String::new();
    let mut prefix = String::new();
    for (i, part) in name.split('.').enumerate() {
        if i > 0 {
            prefix.push('.');
            out.push('.');
        }
        prefix.push_str(part);
        out.push_str(part);
        if let Some((_, c)) = counts.iter().find(|(n, _)| *n == prefix) {
            out.push_str(&format!("[{c}]"));
        }
    }
    out
}

/// The table name of a `[a.b]` or `[[a.b]]` header line.
fn header_name(trimmed: &str) -> Option<String> {
    if !trimmed.starts_with('[') {
        return None;
    }
    let inner = trimmed.trim_start_matches('[');
    let end = inner.find(']')?;
    let name: String = inner[..end].split('.').map(|p| p.trim().trim_matches('"')).collect::<Vec<_>>().join(".");
    Some(name)
}

/// Keys assigned on this line before byte `upto`: the line's key, then the
/// keys of inline tables it opens (`a = { b = 1, c = ` gives `a`, `c`).
/// `None` when the line assigns nothing (a comment, an array continuation).
fn line_keys(line: &str, upto: usize) -> Option<Vec<String>> {
    let bytes = line.as_bytes();
    let upto = upto.min(bytes.len());
    let mut keys: Vec<String> = Vec::new();
    let mut depth_stack: Vec<usize> = Vec::new(); // key count at each `{`
    let mut i = 0;
    let mut token_start: Option<usize> = None;
    let mut in_str: Option<u8> = None;
    let mut first_assign_seen = false;
    while i < upto {
        let b = bytes[i];
        if let Some(q) = in_str {
            if b == b'\\' && q == b'"' {
                i += 2;
                continue;
            }
            if b == q {
                in_str = None;
            }
            i += 1;
            continue;
        }
        match b {
            b'#' => break,
            b'"' | b'\'' => {
                if token_start.is_none() {
                    token_start = Some(i);
                }
                in_str = Some(b);
            }
            b'=' => {
                if let Some(s) = token_start {
                    let key = line[s..i].trim().trim_matches(|c| c == '"' || c == '\'').to_string();
                    keys.push(key);
                    first_assign_seen = true;
                }
                token_start = None;
            }
            b'{' => {
                depth_stack.push(keys.len());
                token_start = None;
            }
            b'}' => {
                if let Some(n) = depth_stack.pop() {
                    keys.truncate(n);
                }
                token_start = None;
            }
            b',' => {
                // A finished `k = v` inside an inline table: drop `k`.
                if let Some(&n) = depth_stack.last()
                    && keys.len() > n
                {
                    keys.truncate(n);
                }
                token_start = None;
            }
            b' ' | b'\t' => {}
            b'[' | b']' => token_start = None,
            _ => {
                if token_start.is_none() {
                    token_start = Some(i);
                }
            }
        }
        i += 1;
    }
    if !first_assign_seen {
        // Check the part after `upto` for the first assignment: an offset that
        // points at the key itself (unknown field) comes before its `=`.
        if let Some(eq) = line.find('=') {
            let key = line[..eq].trim();
            if !key.is_empty() && !key.starts_with('#') && !key.contains(['{', '[', ',']) {
                return Some(vec![key.trim_matches(|c| c == '"' || c == '\'').to_string()]);
            }
        }
        // A line that starts with a bare key but has no `=` (a typo such as
        // `bitrate 500000`): the key is its first word. Array continuations
        // start with a digit, a quote or a bracket, so they are not taken.
        let t = line.trim_start();
        if t.starts_with(|c: char| c.is_ascii_alphabetic() || c == '_') {
            let word: String =
                t.chars().take_while(|c| c.is_ascii_alphanumeric() || *c == '_' || *c == '-' || *c == '.').collect();
            if word != "true" && word != "false" && word != "inf" && word != "nan" {
                return Some(vec![word]);
            }
        }
        return None;
    }
    Some(keys)
}

#[cfg(test)]
mod tests {
    use super::*;

    const DOC: &str = "kind = \"signals\"\nbitrate = 500000\n\n[[message]]\nid = 1\n[[message.signal]]\nname = \"a\"\n\n[[message]]\nid = 2\n[[message.signal]]\nname = \"b\"\n[[message.signal]]\nname = \"c\"\nscale = 'x'\nopts = { lo = 1, hi = 'y' }\nlist = [\n  1,\n  2,\n]\n";

    fn at(needle: &str) -> usize {
        DOC.find(needle).unwrap()
    }

    #[test]
    fn paths_follow_array_tables() {
        assert_eq!(key_path_at(DOC, at("500000")), "bitrate");
        assert_eq!(key_path_at(DOC, at("id = 2") + 5), "message[1].id");
        assert_eq!(key_path_at(DOC, at("'x'")), "message[1].signal[1].scale");
        assert_eq!(key_path_at(DOC, at("\"a\"")), "message[0].signal[0].name");
        assert_eq!(key_path_at(DOC, at("'y'")), "message[1].signal[1].opts.hi");
        assert_eq!(key_path_at(DOC, at("  2,")), "message[1].signal[1].list");
        assert_eq!(key_path_at(DOC, at("[[message]]\nid = 2")), "message[1]");
    }

    #[test]
    fn a_key_without_equals_is_named() {
        let doc = "kind = \"signals\"\nbitrate 500000\n";
        assert_eq!(key_path_at(doc, doc.find("500000").unwrap() + 3), "bitrate");
    }

    #[test]
    fn unknown_key_offset_points_at_key() {
        let doc = "[body]\nmass_kg = 1\nfoo = 2\n";
        assert_eq!(key_path_at(doc, doc.find("foo").unwrap()), "body.foo");
    }

    // Issue 13, item 16: an array continuation line that starts with `[` was
    // taken for a table header (`[1500], [2500, 560, 7]` named the key `1500`).
    #[test]
    fn array_continuation_lines_are_not_headers() {
        let doc = "[engine]\ntorque_curve = [\n  [1500], [2500, 560, 7],\n]\nredline_rpm = 1\n";
        assert_eq!(key_path_at(doc, doc.find("[2500").unwrap()), "engine.torque_curve");
        assert_eq!(key_path_at(doc, doc.find("redline").unwrap()), "engine.redline_rpm");
    }

    // Issue 13, item 16: `[[message]]` inside a multi-line string shifted the
    // index of every message after it.
    #[test]
    fn headers_inside_multi_line_strings_are_text() {
        let doc = "[[message]]\nnote = \"\"\"\n[[message]]\n\"\"\"\n[[message]]\nid = 7\n";
        assert_eq!(key_path_at(doc, doc.find("7").unwrap()), "message[1].id");
        let doc = "[[message]]\nnote = '''\n[[message]]'''\n[[message]]\nid = 7\n";
        assert_eq!(key_path_at(doc, doc.find("7").unwrap()), "message[1].id");
    }

    #[test]
    fn line_and_column() {
        assert_eq!(line_col("ab\ncd", 0), (1, 1));
        assert_eq!(line_col("ab\ncd", 4), (2, 2));
        assert_eq!(line_col("é = 1\nx", 7), (2, 1));
    }
}
