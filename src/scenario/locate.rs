//! Where a field is in the file: the line and column of the value at a dotted path
//! (`converter.reset.rcd_clamp.diode.r_on`, `disturbances[0].line.to`), so an error found after
//! parsing still points the editor at the spot.
//!
//! A small scanner over text already known to be well-formed JSON; it reads only as far
//! as the path needs.

/// 1-based line and column (characters) of the value at `path`, if present.
pub fn locate(text: &str, path: &str) -> Option<(usize, usize)> {
    let mut s = Scanner {
        b: text.as_bytes(),
        at: 0,
    };
    for step in steps(path)? {
        s.space();
        match step {
            Step::Key(key) => s.member(&key)?,
            Step::Index(k) => s.element(k)?,
        }
    }
    s.space();
    let before = text.get(..s.at)?;
    let line = before.matches('\n').count() + 1;
    let column = before.rsplit('\n').next().map_or(0, |l| l.chars().count()) + 1;
    Some((line, column))
}

enum Step {
    Key(String),
    Index(usize),
}

fn steps(path: &str) -> Option<Vec<Step>> {
    let mut out = Vec::new();
    for part in path.split('.') {
        let (key, rest) = part.split_once('[').unwrap_or((part, ""));
        if !key.is_empty() {
            out.push(Step::Key(key.to_string()));
        }
        for index in rest.split('[').filter(|r| !r.is_empty()) {
            out.push(Step::Index(index.trim_end_matches(']').parse().ok()?));
        }
    }
    Some(out)
}

struct Scanner<'a> {
    b: &'a [u8],
    at: usize,
}

impl Scanner<'_> {
    fn peek(&self) -> Option<u8> {
        self.b.get(self.at).copied()
    }

    fn space(&mut self) {
        while self.peek().is_some_and(|c| c.is_ascii_whitespace()) {
            self.at += 1;
        }
    }

    fn eat(&mut self, c: u8) -> Option<()> {
        self.space();
        (self.peek()? == c).then(|| self.at += 1)
    }

    /// Moves to the value of `key` in the object here.
    fn member(&mut self, key: &str) -> Option<()> {
        self.eat(b'{')?;
        loop {
            self.space();
            if self.peek()? == b'}' {
                return None;
            }
            let name = self.string()?;
            self.eat(b':')?;
            self.space();
            if name == key {
                return Some(());
            }
            self.skip_value()?;
            self.eat(b',')?;
        }
    }

    /// Moves to element `k` of the array here.
    fn element(&mut self, k: usize) -> Option<()> {
        self.eat(b'[')?;
        for _ in 0..k {
            self.space();
            self.skip_value()?;
            self.eat(b',')?;
        }
        Some(())
    }

    /// Reads a string, escapes decoded only as far as comparing keys needs.
    fn string(&mut self) -> Option<String> {
        self.eat(b'"')?;
        let start = self.at;
        while self.peek()? != b'"' {
            self.at += if self.peek()? == b'\\' { 2 } else { 1 };
        }
        let raw = std::str::from_utf8(self.b.get(start..self.at)?).ok()?;
        self.at += 1;
        Some(raw.replace("\\\"", "\"").replace("\\\\", "\\"))
    }

    fn skip_value(&mut self) -> Option<()> {
        match self.peek()? {
            b'"' => self.string().map(|_| ()),
            open @ (b'{' | b'[') => {
                let close = if open == b'{' { b'}' } else { b']' };
                self.at += 1;
                loop {
                    self.space();
                    match self.peek()? {
                        c if c == close => {
                            self.at += 1;
                            return Some(());
                        }
                        b',' | b':' => self.at += 1,
                        _ => self.skip_value()?,
                    }
                }
            }
            _ => {
                while self
                    .peek()
                    .is_some_and(|c| !matches!(c, b',' | b'}' | b']') && !c.is_ascii_whitespace())
                {
                    self.at += 1;
                }
                Some(())
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::locate;

    #[test]
    fn finds_nested_keys_and_array_elements() {
        let text = "{\n  \"a\": { \"b\": [1, {\"c\": \"x,y\"}] },\n  \"d\": 5\n}";
        assert_eq!(locate(text, "d"), Some((3, 8)));
        assert_eq!(locate(text, "a.b[1].c"), Some((2, 25)));
        assert_eq!(locate(text, "a.b[0]"), Some((2, 16)));
        assert_eq!(locate(text, "a.missing"), None);
    }
}
