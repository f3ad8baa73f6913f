//! What a run's arrays cost: each owner (the system, its kept evaluations, Newton's work
//! arrays, the linear solver, the stepper, the snapshot buffers) lists its heap arrays
//! with their allocated bytes, so that the memory per cell can be stated array by array
//! (`deepdry bench` prints the table; DEVELOPERS.md explains it).

use std::fmt::Write;

/// One heap array of a run: who holds it, its name and its allocated bytes.
#[derive(Debug, Clone, PartialEq)]
pub struct ArrayCost {
    pub owner: &'static str,
    pub array: &'static str,
    pub bytes: usize,
}

/// Appends the allocated bytes (capacity × element size) of `v` to `out`.
pub fn push<T>(out: &mut Vec<ArrayCost>, owner: &'static str, array: &'static str, v: &Vec<T>) {
    out.push(ArrayCost {
        owner,
        array,
        bytes: v.capacity() * std::mem::size_of::<T>(),
    });
}

/// The total bytes of `costs`.
pub fn total(costs: &[ArrayCost]) -> usize {
    costs.iter().map(|c| c.bytes).sum()
}

/// The arrays of `costs` in bytes per cell (of `cells`), largest first, arrays of the
/// same owner and name summed (e.g. the history points); those under 0.5 B per cell left
/// out but counted in the total.
pub fn table(costs: &[ArrayCost], cells: usize) -> String {
    let mut merged: Vec<ArrayCost> = Vec::new();
    for c in costs {
        match merged
            .iter_mut()
            .find(|m| m.owner == c.owner && m.array == c.array)
        {
            Some(m) => m.bytes += c.bytes,
            None => merged.push(c.clone()),
        }
    }
    merged.sort_by_key(|m| std::cmp::Reverse(m.bytes));
    let per = |b: usize| b as f64 / cells.max(1) as f64;
    let mut out = String::new();
    let _ = writeln!(out, "{:<22} {:<26} {:>10}", "owner", "array", "B per cell");
    for m in merged.iter().filter(|m| per(m.bytes) >= 0.5) {
        let _ = writeln!(
            out,
            "{:<22} {:<26} {:>10.1}",
            m.owner,
            m.array,
            per(m.bytes)
        );
    }
    let _ = writeln!(
        out,
        "{:<22} {:<26} {:>10.1}",
        "total",
        "",
        per(total(costs))
    );
    out
}
