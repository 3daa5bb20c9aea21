//! Small text helpers for messages, shared by the config, CSV and output layers (a leaf
//! module: it imports nothing from the crate).

/// `s` with control characters (newlines, tabs, NUL...) escaped, so every message is one line.
pub fn one_line(s: &str) -> std::borrow::Cow<'_, str> {
    if s.chars().any(char::is_control) {
        s.chars()
            .map(|c| {
                if c.is_control() {
                    c.escape_default().to_string()
                } else {
                    c.to_string()
                }
            })
            .collect::<String>()
            .into()
    } else {
        s.into()
    }
}

#[cfg(test)]
mod tests {
    #[test]
    fn control_characters_are_escaped_onto_one_line() {
        assert_eq!(super::one_line("a\nb\t\0"), "a\\nb\\t\\u{0}");
        assert!(matches!(
            super::one_line("plain"),
            std::borrow::Cow::Borrowed("plain")
        ));
    }
}
