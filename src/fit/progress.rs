//! `DIR/fit-progress.json`: the state of a fit after its last accepted iteration, written
//! atomically (a temporary file, flushed, then renamed over the old one), from which
//! `deepdry fit FIT.toml --out DIR --restart` continues exactly as the fit would have gone
//! on.
//!
//! It carries three FNV-1a hashes that tie it to its fit: of the fit file's content that
//! fixes the iteration's path (rtol and every parameter's key, initial value, bounds and
//! `log`; not `max_iterations`, so a fit stopped at its iteration limit can be continued
//! with a higher one, and not the file paths, so the folder may move), of the case text
//! and of the observation file's bytes. A restart against anything else is refused.
//! Numbers are written in Rust's shortest round-trip form, so the state read back is
//! bitwise the state written.

use super::fitting::{json_num, json_str, FitFile};
use super::lm::{LmState, STOP_REASONS};
use crate::error::{Error, Result};
use std::fmt::Write as _;
use std::io::Write as _;
use std::path::{Path, PathBuf};

/// The file name in the fit's output folder.
pub const PROGRESS_FILE: &str = "fit-progress.json";
const FORMAT: &str = "deepdry-fit-progress-1";
/// Refused beyond this size (the residuals of the largest observation file fit easily).
const MAX_BYTES: u64 = 256 << 20;

/// What ties a progress file to its fit.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct FitIdentity {
    pub fit_hash: String,
    pub case_hash: String,
    pub observations_hash: String,
}

fn fnv1a(bytes: &[u8]) -> String {
    let mut h: u64 = 0xcbf2_9ce4_8422_2325;
    for b in bytes {
        h ^= *b as u64;
        h = h.wrapping_mul(0x0100_0000_01b3);
    }
    format!("fnv1a64:{h:016x}")
}

impl FitIdentity {
    /// The identity of `fit` with its case text and observation file bytes.
    pub fn new(fit: &FitFile, case_text: &str, observations: &[u8]) -> FitIdentity {
        let mut s = format!("rtol {:?}\n", fit.rtol);
        for p in &fit.parameters {
            let _ = writeln!(
                s,
                "{:?} {:?} {:?} {:?} {}",
                p.key, p.spec.initial, p.spec.min, p.spec.max, p.spec.log
            );
        }
        FitIdentity {
            fit_hash: fnv1a(s.as_bytes()),
            case_hash: fnv1a(case_text.as_bytes()),
            observations_hash: fnv1a(observations),
        }
    }
}

fn nums(v: &[f64]) -> String {
    v.iter()
        .map(|x| json_num(*x))
        .collect::<Vec<_>>()
        .join(", ")
}

/// The progress file's text.
pub fn to_json(fit: &FitFile, id: &FitIdentity, st: &LmState, parameters: &[f64]) -> String {
    let keys: Vec<String> = fit.parameters.iter().map(|p| json_str(&p.key)).collect();
    let mut s = String::from("{\n");
    let _ = writeln!(s, "  \"format\": {},", json_str(FORMAT));
    let _ = writeln!(s, "  \"fit_hash\": {},", json_str(&id.fit_hash));
    let _ = writeln!(s, "  \"case_hash\": {},", json_str(&id.case_hash));
    let _ = writeln!(
        s,
        "  \"observations_hash\": {},",
        json_str(&id.observations_hash)
    );
    let _ = writeln!(s, "  \"keys\": [{}],", keys.join(", "));
    let _ = writeln!(s, "  \"parameters\": [{}],", nums(parameters));
    let _ = writeln!(s, "  \"x\": [{}],", nums(&st.x));
    let _ = writeln!(s, "  \"objective\": {},", json_num(st.objective));
    let _ = writeln!(s, "  \"lambda\": {},", json_num(st.lambda));
    let _ = writeln!(s, "  \"iterations\": {},", st.iterations);
    let _ = writeln!(s, "  \"evaluations\": {},", st.evaluations);
    let _ = writeln!(
        s,
        "  \"stop\": {},",
        st.stop.map_or("null".to_string(), json_str)
    );
    let _ = writeln!(s, "  \"residuals\": [{}]", nums(&st.residuals));
    s.push_str("}\n");
    s
}

/// Writes the progress file into `dir` atomically.
pub fn write(dir: &Path, text: &str) -> Result<PathBuf> {
    let path = dir.join(PROGRESS_FILE);
    let tmp = dir.join(format!("{PROGRESS_FILE}.tmp"));
    let mut f = std::fs::File::create(&tmp).map_err(|e| Error::io(&tmp, e))?;
    f.write_all(text.as_bytes())
        .and_then(|_| f.sync_all())
        .map_err(|e| Error::io(&tmp, e))?;
    drop(f);
    std::fs::rename(&tmp, &path).map_err(|e| Error::io(&path, e))?;
    Ok(path)
}

/// A JSON value (the subset the progress file uses).
#[derive(Debug, Clone, PartialEq)]
enum Json {
    Null,
    Bool(bool),
    Num(f64),
    Str(String),
    Arr(Vec<Json>),
    Obj(Vec<(String, Json)>),
}

struct Parser<'a> {
    b: &'a [u8],
    i: usize,
}

impl Parser<'_> {
    fn ws(&mut self) {
        while self.i < self.b.len() && matches!(self.b[self.i], b' ' | b'\n' | b'\r' | b'\t') {
            self.i += 1;
        }
    }
    fn err<T>(&self, what: &str) -> std::result::Result<T, String> {
        Err(format!("{what} at byte {}", self.i))
    }
    fn eat(&mut self, c: u8) -> std::result::Result<(), String> {
        self.ws();
        if self.b.get(self.i) == Some(&c) {
            self.i += 1;
            Ok(())
        } else {
            self.err(&format!("expected `{}`", c as char))
        }
    }
    fn value(&mut self, depth: usize) -> std::result::Result<Json, String> {
        if depth > 8 {
            return self.err("nested too deep");
        }
        self.ws();
        match self.b.get(self.i) {
            None => self.err("unexpected end"),
            Some(b'{') => {
                self.i += 1;
                let mut o = Vec::new();
                self.ws();
                if self.b.get(self.i) == Some(&b'}') {
                    self.i += 1;
                    return Ok(Json::Obj(o));
                }
                loop {
                    self.ws();
                    let k = match self.value(depth + 1)? {
                        Json::Str(k) => k,
                        _ => return self.err("expected a key"),
                    };
                    self.eat(b':')?;
                    o.push((k, self.value(depth + 1)?));
                    self.ws();
                    match self.b.get(self.i) {
                        Some(b',') => self.i += 1,
                        Some(b'}') => {
                            self.i += 1;
                            return Ok(Json::Obj(o));
                        }
                        _ => return self.err("expected `,` or `}`"),
                    }
                }
            }
            Some(b'[') => {
                self.i += 1;
                let mut a = Vec::new();
                self.ws();
                if self.b.get(self.i) == Some(&b']') {
                    self.i += 1;
                    return Ok(Json::Arr(a));
                }
                loop {
                    a.push(self.value(depth + 1)?);
                    self.ws();
                    match self.b.get(self.i) {
                        Some(b',') => self.i += 1,
                        Some(b']') => {
                            self.i += 1;
                            return Ok(Json::Arr(a));
                        }
                        _ => return self.err("expected `,` or `]`"),
                    }
                }
            }
            Some(b'"') => {
                self.i += 1;
                let mut s = String::new();
                loop {
                    match self.b.get(self.i) {
                        None => return self.err("unterminated string"),
                        Some(b'"') => {
                            self.i += 1;
                            return Ok(Json::Str(s));
                        }
                        Some(b'\\') => {
                            let c = match self.b.get(self.i + 1) {
                                Some(b'"') => '"',
                                Some(b'\\') => '\\',
                                Some(b'/') => '/',
                                Some(b'n') => '\n',
                                Some(b't') => '\t',
                                Some(b'u') => {
                                    let hex = self
                                        .b
                                        .get(self.i + 2..self.i + 6)
                                        .and_then(|h| std::str::from_utf8(h).ok())
                                        .and_then(|h| u32::from_str_radix(h, 16).ok())
                                        .and_then(char::from_u32);
                                    match hex {
                                        Some(c) => {
                                            self.i += 4;
                                            c
                                        }
                                        None => return self.err("bad \\u escape"),
                                    }
                                }
                                _ => return self.err("bad escape"),
                            };
                            s.push(c);
                            self.i += 2;
                        }
                        Some(_) => {
                            let start = self.i;
                            while self.i < self.b.len() && !matches!(self.b[self.i], b'"' | b'\\') {
                                self.i += 1;
                            }
                            match std::str::from_utf8(&self.b[start..self.i]) {
                                Ok(t) => s.push_str(t),
                                Err(_) => return self.err("not UTF-8"),
                            }
                        }
                    }
                }
            }
            Some(_) => {
                let start = self.i;
                while self.i < self.b.len()
                    && matches!(self.b[self.i], b'-' | b'+' | b'.' | b'e' | b'E' | b'0'..=b'9' | b'a'..=b'z')
                {
                    self.i += 1;
                }
                let t = std::str::from_utf8(&self.b[start..self.i]).unwrap_or("");
                match t {
                    "null" => Ok(Json::Null),
                    "true" => Ok(Json::Bool(true)),
                    "false" => Ok(Json::Bool(false)),
                    _ if !t.is_empty()
                        && t.bytes().all(|c| {
                            matches!(c, b'-' | b'+' | b'.' | b'e' | b'E' | b'0'..=b'9')
                        }) =>
                    {
                        match t.parse::<f64>() {
                            Ok(x) if x.is_finite() => Ok(Json::Num(x)),
                            _ => {
                                self.i = start;
                                self.err("not a finite number")
                            }
                        }
                    }
                    _ => {
                        self.i = start;
                        self.err("expected a value")
                    }
                }
            }
        }
    }
}

/// A saved fit state read back.
#[derive(Debug, Clone)]
pub struct Progress {
    pub identity: FitIdentity,
    pub keys: Vec<String>,
    pub state: LmState,
}

/// Reads `DIR/fit-progress.json` (one-line errors naming the file).
pub fn read(dir: &Path) -> Result<Progress> {
    let path = dir.join(PROGRESS_FILE);
    let bad = |what: &str| {
        Error::input(format!(
            "{}: not a fit progress file: {what}",
            path.display()
        ))
    };
    let meta = match std::fs::metadata(&path) {
        Ok(m) => m,
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => {
            return Err(Error::input(format!(
                "{}: no fit progress to restart from (a fit writes it after its first accepted iteration); run the fit without --restart",
                path.display()
            )))
        }
        Err(e) => return Err(Error::io(&path, e)),
    };
    if !meta.is_file() {
        return Err(bad("not a regular file"));
    }
    if meta.len() > MAX_BYTES {
        return Err(bad(&format!("larger than {} MiB", MAX_BYTES >> 20)));
    }
    let bytes = std::fs::read(&path).map_err(|e| Error::io(&path, e))?;
    let mut p = Parser { b: &bytes, i: 0 };
    let root = p.value(0).map_err(|e| bad(&e))?;
    p.ws();
    if p.i != bytes.len() {
        return Err(bad(&format!("text after the end at byte {}", p.i)));
    }
    let Json::Obj(fields) = root else {
        return Err(bad("not a JSON object"));
    };
    let get = |k: &str| {
        fields
            .iter()
            .find(|(n, _)| n == k)
            .map(|(_, v)| v)
            .ok_or_else(|| bad(&format!("`{k}` missing")))
    };
    let text = |k: &str| match get(k)? {
        Json::Str(s) => Ok(s.clone()),
        _ => Err(bad(&format!("`{k}` must be a string"))),
    };
    let number = |k: &str| match get(k)? {
        Json::Num(x) => Ok(*x),
        _ => Err(bad(&format!("`{k}` must be a finite number"))),
    };
    let count = |k: &str| {
        let x = number(k)?;
        if x >= 0.0 && x.fract() == 0.0 && x < 1e15 {
            Ok(x as usize)
        } else {
            Err(bad(&format!("`{k}` must be a whole number ≥ 0")))
        }
    };
    let numbers = |k: &str| match get(k)? {
        Json::Arr(a) => a
            .iter()
            .map(|v| match v {
                Json::Num(x) => Ok(*x),
                _ => Err(bad(&format!("`{k}` must hold finite numbers only"))),
            })
            .collect::<Result<Vec<f64>>>(),
        _ => Err(bad(&format!("`{k}` must be an array"))),
    };
    if text("format")? != FORMAT {
        return Err(bad(&format!("`format` is not \"{FORMAT}\"")));
    }
    let keys = match get("keys")? {
        Json::Arr(a) => a
            .iter()
            .map(|v| match v {
                Json::Str(s) => Ok(s.clone()),
                _ => Err(bad("`keys` must hold strings")),
            })
            .collect::<Result<Vec<String>>>()?,
        _ => return Err(bad("`keys` must be an array")),
    };
    let stop = match get("stop")? {
        Json::Null => None,
        Json::Str(s) => Some(
            *STOP_REASONS
                .iter()
                .find(|r| **r == s.as_str())
                .ok_or_else(|| bad(&format!("`stop` = \"{s}\" is not a reason a fit stops")))?,
        ),
        _ => return Err(bad("`stop` must be null or a string")),
    };
    let state = LmState {
        x: numbers("x")?,
        residuals: numbers("residuals")?,
        objective: number("objective")?,
        lambda: number("lambda")?,
        iterations: count("iterations")?,
        evaluations: count("evaluations")?,
        stop,
    };
    if state.x.len() != keys.len() {
        return Err(bad("`x` and `keys` differ in length"));
    }
    // (Finite: the reader takes no other numbers.)
    if state.lambda <= 0.0 {
        return Err(bad("`lambda` must be > 0"));
    }
    if state.objective < 0.0 || state.residuals.is_empty() {
        return Err(bad("`objective` must be ≥ 0 and `residuals` not empty"));
    }
    Ok(Progress {
        identity: FitIdentity {
            fit_hash: text("fit_hash")?,
            case_hash: text("case_hash")?,
            observations_hash: text("observations_hash")?,
        },
        keys,
        state,
    })
}

/// Checks that `p` belongs to this fit (one-line errors naming what differs).
pub fn check(p: &Progress, dir: &Path, fit: &FitFile, id: &FitIdentity) -> Result<()> {
    let path = dir.join(PROGRESS_FILE);
    let keys: Vec<&str> = fit.parameters.iter().map(|p| p.key.as_str()).collect();
    let what = if p.keys != keys || p.identity.fit_hash != id.fit_hash {
        Some(format!(
            "a different fit file (its parameters, bounds or rtol differ from {})",
            fit.path.display()
        ))
    } else if p.identity.case_hash != id.case_hash {
        Some(format!(
            "a different text of the case {}",
            fit.case.display()
        ))
    } else if p.identity.observations_hash != id.observations_hash {
        Some(format!(
            "a different observation file {}",
            fit.observations.display()
        ))
    } else {
        None
    };
    match what {
        Some(w) => Err(Error::input(format!(
            "{}: belongs to {w}; run the fit without --restart to start over",
            path.display()
        ))),
        None => Ok(()),
    }
}
