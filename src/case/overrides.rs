//! Overrides: `KEY=VALUE` changes to a case (`deepdry check|run CASE --set KEY=VALUE`,
//! and the library's way to vary a parameter for benchmarks, verification, ensembles and
//! fits).
//!
//! An override is applied to the parsed case tree before the case is read, so its value
//! passes exactly the checks a value in the file passes, and an error about it names it:
//! `--set soils.sand.van_genuchten.n=0.9: must be > 1`.
//!
//! - KEY is a dotted path as in the case file: `time.end_year`,
//!   `soils.sandy_loam.van_genuchten.n`. An element of an array (an array of tables such
//!   as `[[layers]]` or boundary periods, or a plain array) is addressed by its position
//!   in brackets, counted from 1 as in error messages: `layers[2].soil`,
//!   `surface[1].temperature_C`, `output.times_year[3]`.
//! - VALUE is a TOML value: `1.7`, `2e4`, `true`, `"kinetic"` (strings in quotes),
//!   `[1, 10, 100]`, `{ mean = 15.0, amplitude = 5.0, period_year = 1.0 }`.
//! - A key absent from the file is added (tables on its path are created as needed); a
//!   key present is replaced. Overrides apply in order, so a later one wins.

use super::tree::{convert_item, suggest, Entry, Kind, Node, Span};
use crate::error::Error;
use std::fmt;

/// One step of a key path.
#[derive(Debug, Clone, PartialEq, Eq)]
enum Seg {
    Key(String),
    /// Position in an array, counted from 1.
    Index(usize),
}

/// One change to a case: set a key to a TOML value, or remove a key.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Override {
    segs: Vec<Seg>,
    /// The key path written canonically (`layers[2].soil`), as in error messages.
    path: String,
    /// The TOML value; `None` removes the key.
    value: Option<String>,
}

/// Prefix under which a value is parsed (`v = VALUE`): spans are shifted by its length.
const PREFIX: &str = "v = ";

const KEY_HELP: &str = "KEY is a dotted path as in the case file (e.g. soils.sand.van_genuchten.n), \
                        with [k] for the k-th element of an array, counted from 1 (e.g. layers[2].soil)";

impl Override {
    /// Parses `KEY=VALUE` (the argument of `--set`).
    pub fn parse(arg: &str) -> Result<Override, Error> {
        match arg.split_once('=') {
            Some((key, value)) => Override::set(key, value),
            None => Err(Error::input(format!(
                "--set {arg}: expected KEY=VALUE, e.g. time.end_year=2e4"
            ))),
        }
    }

    /// Sets `key` (a dotted path) to `value` (TOML text).
    pub fn set(key: &str, value: &str) -> Result<Override, Error> {
        let value = value.trim();
        let shown = format!("{}={value}", key.trim());
        let (segs, path) = parse_key(key.trim()).map_err(|m| bad(&shown, m))?;
        parse_value(&path, value, 0).map_err(|m| bad(&shown, m))?;
        Ok(Override {
            segs,
            path,
            value: Some(value.to_string()),
        })
    }

    /// Removes `key` (a dotted path) from the case when it is there.
    pub fn remove(key: &str) -> Result<Override, Error> {
        let (segs, path) = parse_key(key.trim()).map_err(|m| bad(key, m))?;
        Ok(Override {
            segs,
            path,
            value: None,
        })
    }

    /// The key path, written as in error messages (`layers[2].soil`).
    pub fn path(&self) -> &str {
        &self.path
    }

    /// The value as given (TOML text); empty for a removal.
    pub fn value_text(&self) -> &str {
        self.value.as_deref().unwrap_or("")
    }

    /// Applies the override to the case tree; `k` is its position in the list (values
    /// it brings carry it, so that errors about them name the override).
    pub(crate) fn apply(&self, root: &mut Node, k: usize) -> Result<(), Error> {
        let whole = Span::Set(k, 0..self.value_text().len());
        let mut new = match &self.value {
            Some(v) => Some(parse_value(&self.path, v, k).map_err(|m| bad(&self.to_string(), m))?),
            None => None,
        };
        let mut node = root;
        let mut walked = String::new();
        let last = self.segs.len() - 1;
        for (i, seg) in self.segs.iter().enumerate() {
            let what = node.kind.type_name();
            let is_array = matches!(node.kind, Kind::Array(_));
            match seg {
                Seg::Key(key) => {
                    let Kind::Table(entries) = &mut node.kind else {
                        return Err(self.err(if is_array {
                            format!(
                                "{walked} is an array; address one of its elements as {walked}[k] (k counted from 1)"
                            )
                        } else {
                            format!("{walked} is {what}, not a table")
                        }));
                    };
                    let pos = entries.iter().position(|e| e.key == *key);
                    if i == last {
                        match (pos, new.take()) {
                            (Some(p), Some(v)) => {
                                entries[p].node = v;
                                entries[p].key_span = whole;
                            }
                            (None, Some(v)) => entries.push(Entry {
                                key: key.clone(),
                                key_span: whole,
                                node: v,
                            }),
                            (Some(p), None) => {
                                entries.remove(p);
                            }
                            (None, None) => {}
                        }
                        return Ok(());
                    }
                    let p = match pos {
                        Some(p) => p,
                        None if self.value.is_none() => return Ok(()),
                        None => {
                            if matches!(self.segs.get(i + 1), Some(Seg::Index(_))) {
                                return Err(self.err(format!(
                                    "{} is not in the case; set the whole array, e.g. --set '{0}=[…]'",
                                    join(&walked, key)
                                )));
                            }
                            // A new table on the way: refuse a likely typo of one present.
                            let keys: Vec<&str> = entries.iter().map(|e| e.key.as_str()).collect();
                            if let Some(close) = suggest(key, &keys) {
                                return Err(self.err(format!(
                                    "{}: no such key in the case; did you mean `{close}`?",
                                    join(&walked, key)
                                )));
                            }
                            entries.push(Entry {
                                key: key.clone(),
                                key_span: whole.clone(),
                                node: Node {
                                    kind: Kind::Table(Vec::new()),
                                    span: whole.clone(),
                                },
                            });
                            entries.len() - 1
                        }
                    };
                    walked = join(&walked, key);
                    node = &mut entries[p].node;
                }
                Seg::Index(j) => {
                    let Kind::Array(items) = &mut node.kind else {
                        return Err(self.err(format!("{walked} is {what}, not an array")));
                    };
                    if *j > items.len() {
                        return Err(self.err(format!(
                            "{walked} has {} element{}; [k] counts from 1",
                            items.len(),
                            if items.len() == 1 { "" } else { "s" }
                        )));
                    }
                    if i == last {
                        match new.take() {
                            Some(v) => items[j - 1] = v,
                            None => {
                                items.remove(j - 1);
                            }
                        }
                        return Ok(());
                    }
                    walked = format!("{walked}[{j}]");
                    node = &mut items[j - 1];
                }
            }
        }
        Ok(())
    }

    fn err(&self, msg: impl fmt::Display) -> Error {
        bad(&self.to_string(), msg)
    }
}

impl fmt::Display for Override {
    /// `KEY=VALUE`, or `KEY (removed)`.
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match &self.value {
            Some(v) => write!(f, "{}={v}", self.path),
            None => write!(f, "{} (removed)", self.path),
        }
    }
}

impl std::str::FromStr for Override {
    type Err = Error;
    fn from_str(s: &str) -> Result<Override, Error> {
        Override::parse(s)
    }
}

fn bad(shown: &str, msg: impl fmt::Display) -> Error {
    Error::input(format!("--set {shown}: {msg}"))
}

fn join(path: &str, key: &str) -> String {
    if path.is_empty() {
        key.to_string()
    } else {
        format!("{path}.{key}")
    }
}

/// Splits `a.b[2].c` into its steps and writes it canonically.
fn parse_key(key: &str) -> Result<(Vec<Seg>, String), String> {
    let wrong = |why: &str| format!("the key {why}; {KEY_HELP}");
    if key.is_empty() {
        return Err(wrong("is empty"));
    }
    let mut segs = Vec::new();
    let mut path = String::new();
    for part in key.split('.') {
        let (name, mut rest) = part.split_at(part.find('[').unwrap_or(part.len()));
        if name.is_empty() {
            return Err(wrong(&format!("`{key}` has an empty name")));
        }
        if !name
            .chars()
            .all(|c| c.is_ascii_alphanumeric() || c == '_' || c == '-')
        {
            return Err(wrong(&format!(
                "name `{name}` has characters other than letters, digits, _ and -"
            )));
        }
        path = join(&path, name);
        segs.push(Seg::Key(name.to_string()));
        while !rest.is_empty() {
            let index = rest
                .strip_prefix('[')
                .and_then(|r| r.split_once(']'))
                .and_then(|(n, r)| Some((n.trim().parse::<usize>().ok()?, r)));
            match index {
                Some((j, r)) if j >= 1 => {
                    path = format!("{path}[{j}]");
                    segs.push(Seg::Index(j));
                    rest = r;
                }
                _ => {
                    return Err(wrong(&format!(
                        "`{part}` has a position that is not [k] with k = 1, 2, …"
                    )))
                }
            }
        }
    }
    Ok((segs, path))
}

/// The value as a case-tree node whose spans point into the value of override `k`.
fn parse_value(key: &str, value: &str, k: usize) -> Result<Node, String> {
    let hint = || {
        if !value.is_empty()
            && value
                .chars()
                .all(|c| c.is_ascii_alphanumeric() || "-_.".contains(c))
        {
            format!("; a string is written in quotes: --set '{key}=\"{value}\"'")
        } else {
            String::new()
        }
    };
    if value.is_empty() {
        return Err(
            "the value is missing; write a TOML value after =, e.g. 1.7, \"kinetic\", true, [1, 2]"
                .into(),
        );
    }
    if value.contains(['\n', '\r']) {
        return Err("the value must be on one line".into());
    }
    let text = format!("{PREFIX}{value}");
    let doc = toml_edit::ImDocument::parse(text.as_str()).map_err(|e| {
        format!(
            "not a TOML value ({}){}",
            super::tree::one_line(e.message()),
            hint()
        )
    })?;
    let table = doc.as_table();
    if table.len() != 1 {
        return Err(format!("not a single TOML value{}", hint()));
    }
    let item = table
        .get("v")
        .ok_or_else(|| format!("not a single TOML value{}", hint()))?;
    if !item.is_value() {
        return Err("not a single TOML value".into());
    }
    let shift = PREFIX.len();
    let len = value.len();
    let at = move |r: Option<std::ops::Range<usize>>| match r {
        Some(r) => Span::Set(
            k,
            r.start.saturating_sub(shift).min(len)..r.end.saturating_sub(shift).min(len),
        ),
        None => Span::Set(k, 0..len),
    };
    Ok(convert_item(item, &at))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn keys_are_dotted_with_positions_counted_from_one() {
        let o = Override::parse("layers[2].soil=\"clay\"").unwrap();
        assert_eq!(o.path(), "layers[2].soil");
        assert_eq!(
            o.segs,
            vec![
                Seg::Key("layers".into()),
                Seg::Index(2),
                Seg::Key("soil".into())
            ]
        );
        assert_eq!(o.value_text(), "\"clay\"");
        assert_eq!(o.to_string(), "layers[2].soil=\"clay\"");
        for bad in [
            "layers[0].soil=1",
            "layers[x].soil=1",
            "a..b=1",
            "a.b c=1",
            "=1",
            "a.b",
        ] {
            let e = Override::parse(bad).unwrap_err().to_string();
            assert!(e.contains("--set "), "{bad}: {e}");
        }
    }

    #[test]
    fn values_are_toml() {
        assert!(Override::parse("time.end_year=2e4").is_ok());
        assert!(Override::parse("a.b=[1, 2.5]").is_ok());
        assert!(Override::parse("a.b={ mean = 1.0 }").is_ok());
        let e = Override::parse("physics.vapor=kinetic")
            .unwrap_err()
            .to_string();
        assert!(e.contains("in quotes"), "{e}");
        let e = Override::parse("a.b=1 2").unwrap_err().to_string();
        assert!(e.contains("not a TOML value"), "{e}");
        let e = Override::parse("a.b=").unwrap_err().to_string();
        assert!(e.contains("missing"), "{e}");
    }
}
