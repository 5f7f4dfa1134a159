//! Names turned into safe, readable identifiers for files and calendar UIDs.

/// Lower-case ASCII letters and digits, every other run of characters turned into a single hyphen, no hyphen at
/// either end (`"Kestrel Moor / 0.6 m"` -> `"kestrel-moor-0-6-m"`).
pub fn slug(text: &str) -> String {
    let mut out = String::new();
    for c in text.chars() {
        if c.is_ascii_alphanumeric() {
            out.push(c.to_ascii_lowercase());
        } else if !out.is_empty() && !out.ends_with('-') {
            out.push('-');
        }
    }
    out.trim_end_matches('-').to_string()
}

#[cfg(test)]
mod tests {
    #[test]
    fn slugs() {
        assert_eq!(super::slug("Kestrel Moor / 0.6 m"), "kestrel-moor-0-6-m");
        assert_eq!(super::slug("  --A\nEND:VEVENT--"), "a-end-vevent");
        assert_eq!(super::slug("\u{e9}t\u{e9}"), "t");
    }
}
