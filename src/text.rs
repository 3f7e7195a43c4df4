//! Echoing what a person typed back to them: a value is shown whole up to a length a
//! terminal line holds, and shortened past it, so one pasted megabyte cannot bury the
//! message that names it.

/// Longest word echoed whole, characters (about one terminal line).
pub const ECHO_MAX: usize = 80;
/// Characters kept of a longer word.
const ECHO_KEEP: usize = 60;

/// `text` with every whitespace-separated word longer than [`ECHO_MAX`] characters cut
/// to its first [`ECHO_KEEP`], marked with `…` and its full length. A closing quote or
/// backtick the word ended with is kept, so quoting still reads.
pub fn shorten(text: &str) -> String {
    if text.chars().count() <= ECHO_MAX {
        return text.to_string();
    }
    let mut out = String::with_capacity(text.len().min(4 * ECHO_MAX));
    let mut word = String::new();
    for c in text.chars() {
        if c.is_whitespace() {
            out.push_str(&shorten_word(&word));
            word.clear();
            out.push(c);
        } else {
            word.push(c);
        }
    }
    out.push_str(&shorten_word(&word));
    out
}

/// Longest file path echoed whole (Linux PATH_MAX): a path is only useful whole.
const PATH_MAX: usize = 4096;

fn shorten_word(word: &str) -> String {
    let n = word.chars().count();
    // An unquoted word with a slash is a file path the message names, not a value.
    let path = word.contains('/') && !word.contains(['"', '`', '\'']);
    if n <= ECHO_MAX || (path && n <= PATH_MAX) {
        return word.to_string();
    }
    let kept: String = word.chars().take(ECHO_KEEP).collect();
    let close = match word.chars().last() {
        Some(c @ ('"' | '`' | '\'')) => c.to_string(),
        _ => String::new(),
    };
    format!("{kept}…{close} ({n} characters)")
}

/// The messages of an error and its causes, outermost first, each shortened. A cause
/// whose text the message before it already contains is left out: an error that shows
/// its source in its own message and also returns it as its source would otherwise be
/// printed twice.
pub fn causes(error: &anyhow::Error) -> Vec<String> {
    let mut out: Vec<String> = Vec::new();
    for cause in error.chain() {
        let text = cause.to_string();
        if out.last().is_some_and(|prev| prev.contains(&text)) {
            continue;
        }
        out.push(shorten(&text));
    }
    if let Some(hint) = out.last().and_then(|m| storage_hint(m)) {
        out.push(hint.to_string());
    }
    out
}

/// [`causes`] on one line, joined by ": ", for summaries and result tables.
pub fn one_line(error: &anyhow::Error) -> String {
    causes(error).join(": ")
}

/// Operating-system reports of no room to write: ENOSPC (28) and EFBIG (27), as the
/// standard library and the HDF5 library word them.
const NO_ROOM: [&str; 6] = [
    "os error 28",
    "os error 27",
    "errno = 28",
    "errno = 27",
    "No space left",
    "File too large",
];

/// What to do about a failure to write for want of room, if `message` is one.
pub fn storage_hint(message: &str) -> Option<&'static str> {
    NO_ROOM.iter().any(|m| message.contains(m)).then_some(
        "no room to write: the disk is full or a file-size limit (ulimit -f, quota) was \
         reached; free space or choose another --out",
    )
}

/// The message of a caught panic (a `&str` or `String` payload), for reports.
pub fn panic_text(panic: &(dyn std::any::Any + Send)) -> String {
    panic
        .downcast_ref::<&str>()
        .map(|s| s.to_string())
        .or_else(|| panic.downcast_ref::<String>().cloned())
        .unwrap_or_else(|| "(no message)".into())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_cause_repeated_in_its_parent_message_is_shown_once() {
        let inner = std::io::Error::other("disk full");
        let outer = anyhow::Error::new(inner)
            .context("engine: disk full")
            .context("writing out/x/waveforms.h5");
        assert_eq!(
            causes(&outer),
            vec!["writing out/x/waveforms.h5", "engine: disk full"]
        );
        assert_eq!(
            one_line(&outer),
            "writing out/x/waveforms.h5: engine: disk full"
        );
    }

    #[test]
    fn a_long_file_path_is_kept_whole() {
        let path = format!("/{}/waveforms.h5", "d".repeat(100));
        assert_eq!(
            shorten(&format!("writing {path}: no room")),
            format!("writing {path}: no room")
        );
    }

    #[test]
    fn short_text_is_unchanged() {
        let t = "converter.input.voltage: \"24 Q\" is not a valid voltage";
        assert_eq!(shorten(t), t);
    }

    #[test]
    fn a_long_word_keeps_its_head_its_closing_quote_and_its_length() {
        let long = format!("name = \"{}\" is not allowed", "x".repeat(1_000_000));
        let s = shorten(&long);
        // 60 kept characters: the opening quote and 59 x's.
        assert!(
            s.starts_with(&format!("name = \"{}…\"", "x".repeat(59))),
            "{s}"
        );
        assert!(s.contains("(1000002 characters) is not allowed"), "{s}");
        assert!(s.chars().count() < 120, "{s}");
    }
}
