//! Observers of the run state: the results file (HDF5) and the diagnostics it records.

pub mod diagnostics;
pub mod h5util;
pub mod results;

/// A number for people to read, with `sig` significant digits: plain decimals from 0.001
/// to below 1e6 (`-0.08502`, `1.448`, `12346`), else scientific (`1.448e-5`, `2.04e9`);
/// `0` for zero. Round-trips are not the point (the files hold every bit).
pub fn human(x: f64, sig: usize) -> String {
    let sig = sig.max(1);
    if x == 0.0 || !x.is_finite() {
        return format!("{x}");
    }
    // Rounded to `sig` digits first, so that 9.9996 becomes 10.00, not 10.000.
    let r: f64 = format!("{x:.prec$e}", prec = sig - 1).parse().unwrap_or(x);
    let a = r.abs();
    if (1e-3..1e6).contains(&a) {
        let mut mag = a.log10().floor() as i64;
        if 10f64.powi(mag as i32 + 1) <= a {
            mag += 1;
        }
        let decimals = (sig as i64 - 1 - mag).max(0) as usize;
        format!("{r:.decimals$}")
    } else {
        format!("{x:.prec$e}", prec = sig - 1)
    }
}

/// A time in years for people to read: the shortest decimal that is the value (`-1`,
/// `50000`, `0.001`), in scientific form beyond 1e6 or below 1e-3.
pub fn years(t: f64) -> String {
    if t == 0.0 || (1e-3..1e6).contains(&t.abs()) {
        format!("{t}")
    } else {
        format!("{t:e}")
    }
}

/// The current UTC time as an ISO 8601 string (seconds resolution).
pub fn now_utc() -> String {
    let secs = std::time::SystemTime::now()
        .duration_since(std::time::UNIX_EPOCH)
        .map(|d| d.as_secs())
        .unwrap_or(0);
    let days = secs / 86_400;
    let rem = secs % 86_400;
    // Civil date from days since 1970-01-01 (Howard Hinnant's algorithm, public domain).
    let z = days as i64 + 719_468;
    let era = z.div_euclid(146_097);
    let doe = z - era * 146_097;
    let yoe = (doe - doe / 1_460 + doe / 36_524 - doe / 146_096) / 365;
    let y = yoe + era * 400;
    let doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
    let mp = (5 * doy + 2) / 153;
    let d = doy - (153 * mp + 2) / 5 + 1;
    let m = if mp < 10 { mp + 3 } else { mp - 9 };
    let y = if m <= 2 { y + 1 } else { y };
    format!(
        "{y:04}-{m:02}-{d:02}T{:02}:{:02}:{:02}Z",
        rem / 3600,
        (rem % 3600) / 60,
        rem % 60
    )
}

/// An exclusive lock on an output folder, held for the whole run: two runs writing to one
/// folder would destroy each other's results (HDF5 truncates a results file before it finds
/// it locked) and checkpoints. The lock is an advisory lock on `.deepdry.lock` in the
/// folder; the operating system releases it when the process ends, however it ends.
pub struct FolderLock {
    _file: std::fs::File,
}

impl FolderLock {
    pub const NAME: &'static str = ".deepdry.lock";

    /// Takes the lock, or fails at once with a one-line message when another process
    /// holds it.
    pub fn acquire(folder: &std::path::Path) -> crate::error::Result<FolderLock> {
        use std::io::{Read, Seek, Write};
        let path = folder.join(Self::NAME);
        let mut file = std::fs::OpenOptions::new()
            .read(true)
            .write(true)
            .create(true)
            .truncate(false)
            .open(&path)
            .map_err(|e| {
                crate::error::Error::io(&path, format!("cannot create the lock file: {e}"))
            })?;
        match file.try_lock() {
            Ok(()) => {
                let _ = file.set_len(0);
                let _ = file.seek(std::io::SeekFrom::Start(0));
                let _ = write!(file, "{}", std::process::id());
                Ok(FolderLock { _file: file })
            }
            Err(std::fs::TryLockError::WouldBlock) => {
                let mut pid = String::new();
                let _ = file.read_to_string(&mut pid);
                let pid = pid.trim();
                Err(crate::error::Error::Io(format!(
                    "{}: another deepdry run{} is writing to this folder; wait until it has stopped, or use --out for another folder",
                    folder.display(),
                    if pid.is_empty() { String::new() } else { format!(" (process {pid})") }
                )))
            }
            Err(std::fs::TryLockError::Error(e)) => Err(crate::error::Error::io(
                &path,
                format!("cannot lock the output folder: {e}"),
            )),
        }
    }
}
