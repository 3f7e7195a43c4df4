//! Dotted paths into a scenario's JSON: `converter.input.voltage`,
//! `disturbances[0].line.to`. Keys are taken literally between dots, so `reset_winding` needs
//! no quoting; `[n]` selects element n of an array.

use anyhow::{anyhow, bail, Result};
use serde_json::Value;

/// One step of a path.
#[derive(Clone, Debug, PartialEq, Eq)]
pub enum Step {
    /// Object member.
    Key(String),
    /// Array element.
    Index(usize),
}

/// A parsed path.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct JsonPath(pub Vec<Step>);

impl JsonPath {
    /// Parses `a.b[2].c`.
    pub fn parse(text: &str) -> Result<Self> {
        let mut steps = Vec::new();
        for part in text.split('.') {
            let (key, mut rest) = part.split_at(part.find('[').unwrap_or(part.len()));
            if key.is_empty() || key.contains(']') {
                bail!("path {text:?}: expected a name before '.' or '['");
            }
            steps.push(Step::Key(key.to_string()));
            while !rest.is_empty() {
                let close = rest
                    .find(']')
                    .filter(|_| rest.starts_with('['))
                    .ok_or_else(|| anyhow!("path {text:?}: expected [index] after '{key}'"))?;
                let n = rest[1..close]
                    .parse::<usize>()
                    .map_err(|_| anyhow!("path {text:?}: '{}' is not an index", &rest[1..close]))?;
                steps.push(Step::Index(n));
                rest = &rest[close + 1..];
            }
        }
        Ok(JsonPath(steps))
    }

    /// The value at the path, if present.
    pub fn get<'v>(&self, root: &'v Value) -> Option<&'v Value> {
        self.0.iter().try_fold(root, |v, step| match step {
            Step::Key(k) => v.get(k),
            Step::Index(i) => v.get(i),
        })
    }

    /// Everything up to the last step exists, and the last step fits its container: an
    /// object may gain a member (an optional field the base leaves out), an array
    /// element must exist.
    pub fn check_settable(&self, root: &Value) -> Result<()> {
        let (last, parents) = self.0.split_last().ok_or_else(|| anyhow!("empty path"))?;
        let parent = JsonPath(parents.to_vec());
        let container = parent
            .get(root)
            .ok_or_else(|| anyhow!("the base scenario has nothing at {}", parent.display()))?;
        match (last, container) {
            (Step::Key(_), Value::Object(_)) => Ok(()),
            (Step::Index(i), Value::Array(a)) if *i < a.len() => Ok(()),
            (Step::Index(i), Value::Array(a)) => {
                bail!(
                    "{} has {} elements, index {i} is past its end",
                    parent.display(),
                    a.len()
                )
            }
            _ => bail!(
                "{} is not the kind of container the path expects",
                parent.display()
            ),
        }
    }

    /// Sets the value at the path (see [`JsonPath::check_settable`]).
    pub fn set(&self, root: &mut Value, value: Value) -> Result<()> {
        self.check_settable(root)?;
        let (last, parents) = self.0.split_last().ok_or_else(|| anyhow!("empty path"))?;
        let mut node = root;
        for step in parents {
            node = match step {
                Step::Key(k) => node.get_mut(k),
                Step::Index(i) => node.get_mut(*i),
            }
            .ok_or_else(|| anyhow!("path vanished while setting"))?;
        }
        match (last, node) {
            (Step::Key(k), Value::Object(m)) => {
                m.insert(k.clone(), value);
            }
            (Step::Index(i), Value::Array(a)) => a[*i] = value,
            _ => bail!("path vanished while setting"),
        }
        Ok(())
    }

    /// The path as text.
    pub fn display(&self) -> String {
        let mut s = String::new();
        for step in &self.0 {
            match step {
                Step::Key(k) if s.is_empty() => s.push_str(k),
                Step::Key(k) => {
                    s.push('.');
                    s.push_str(k);
                }
                Step::Index(i) => s.push_str(&format!("[{i}]")),
            }
        }
        if s.is_empty() {
            s.push_str("the top level");
        }
        s
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use serde_json::json;

    #[test]
    fn parses_keys_and_indices() {
        let p = JsonPath::parse("disturbances[1].line.to").unwrap();
        assert_eq!(
            p.0,
            vec![
                Step::Key("disturbances".into()),
                Step::Index(1),
                Step::Key("line".into()),
                Step::Key("to".into())
            ]
        );
        assert_eq!(p.display(), "disturbances[1].line.to");
        for bad in ["", "a..b", "a[x]", "a[1", "a]"] {
            assert!(JsonPath::parse(bad).is_err(), "{bad:?} must be refused");
        }
    }

    #[test]
    fn sets_existing_and_new_members_but_not_missing_parents() {
        let mut v = json!({"a": {"b": 1}, "e": [{"x": 1}]});
        JsonPath::parse("a.c")
            .unwrap()
            .set(&mut v, json!(2))
            .unwrap();
        JsonPath::parse("e[0].x")
            .unwrap()
            .set(&mut v, json!(3))
            .unwrap();
        assert_eq!(v, json!({"a": {"b": 1, "c": 2}, "e": [{"x": 3}]}));
        assert!(JsonPath::parse("q.r")
            .unwrap()
            .set(&mut v, json!(0))
            .is_err());
        assert!(JsonPath::parse("e[1].x")
            .unwrap()
            .set(&mut v, json!(0))
            .is_err());
        assert!(JsonPath::parse("e[1]")
            .unwrap()
            .set(&mut v, json!(0))
            .is_err());
    }
}
