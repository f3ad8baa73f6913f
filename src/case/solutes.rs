//! The `[[solutes]]` array of tables: one table per dissolved solute. Keys, units and
//! ranges are documented in `docs/case-file.md` (section "Solutes").

use super::build::{num, opt_num};
use super::csvfile::{self, Header};
use super::schedules::{self, fmt_g, CONCENTRATION, DEPOSITION};
use super::tree::Table;
use crate::error::Error;
use crate::model::{Solute, SoluteBottom, SoluteInitial, SoluteSurface};

type R<T> = Result<T, Error>;

/// Keys of one solute table.
pub const SOLUTE_KEYS: &[&str] = &[
    "name",
    "free_diffusivity_m2_per_s",
    "dispersivity_m",
    "deposition_g_per_m2_per_year",
    "inflow_concentration_g_per_m3",
    "bottom_concentration_g_per_m3",
    "bottom_zero_gradient",
    "initial_concentration_g_per_m3",
    "initial_csv",
    "initial_steady",
    "root_uptake_fraction",
    "solubility_g_per_m3",
    "recharge_depth_m",
    "osmotic_ions",
    "molar_mass_g_per_mol",
];

/// Most solutes a case may carry (each adds a linear solve per step and its datasets).
pub const MAX_SOLUTES: usize = 16;

/// Reads the optional `[[solutes]]` array (absent: no solutes).
pub fn read_solutes(root: &Table, depth: f64) -> R<Vec<Solute>> {
    let Some(v) = root.get("solutes") else {
        return Ok(Vec::new());
    };
    let items = v
        .array()
        .map_err(|_| v.err("expected an array of tables [[solutes]], one per solute"))?;
    if items.len() > MAX_SOLUTES {
        return Err(v.err(format!(
            "{} solutes; at most {MAX_SOLUTES} are allowed",
            items.len()
        )));
    }
    let mut out: Vec<Solute> = Vec::with_capacity(items.len());
    for item in &items {
        let t = item.table(SOLUTE_KEYS)?;
        let s = read_solute(&t, depth)?;
        if out.iter().any(|o| o.name == s.name) {
            let v = t.get("name").unwrap_or_else(|| item.clone());
            return Err(v.err(format!(
                "solute `{}` is named twice; names must be unique",
                s.name
            )));
        }
        out.push(s);
    }
    Ok(out)
}

/// Whether `name` can name datasets: 1–32 characters, lower-case letters, digits and `_`,
/// starting with a letter.
fn valid_name(name: &str) -> bool {
    let mut chars = name.chars();
    matches!(chars.next(), Some(c) if c.is_ascii_lowercase())
        && name.len() <= 32
        && chars.all(|c| c.is_ascii_lowercase() || c.is_ascii_digit() || c == '_')
}

fn read_solute(t: &Table, depth: f64) -> R<Solute> {
    let name_v = t.req("name", "the solute's name, e.g. \"chloride\"")?;
    let name = name_v.str()?.to_string();
    if !valid_name(&name) {
        return Err(name_v.err(
            "must be 1 to 32 characters of lower-case letters, digits and `_`, starting with a letter (it names datasets such as concentration_<name>)",
        ));
    }
    let free_diffusivity = num(
        &t.req(
            "free_diffusivity_m2_per_s",
            "diffusion coefficient in free water at 25 °C, e.g. 2.03e-9 for chloride",
        )?,
        |d| (0.0..=1.0e-7).contains(&d),
        "must be in [0, 1e-7] m²/s (ions in water: about 1e-9 to 2e-9 m²/s)",
    )?;
    let dispersivity = opt_num(
        t,
        "dispersivity_m",
        |a| (0.0..=1.0e3).contains(&a),
        "must be in [0, 1000] m",
    )?
    .unwrap_or(0.0);
    let (key, v) = t.one_of(
        &[
            "deposition_g_per_m2_per_year",
            "inflow_concentration_g_per_m3",
        ],
        "surface input of the solute",
    )?;
    let surface = if key == "deposition_g_per_m2_per_year" {
        SoluteSurface::Deposition(schedules::read(&v, key, &DEPOSITION)?)
    } else {
        SoluteSurface::Inflow(schedules::read(&v, key, &CONCENTRATION)?)
    };
    let bottom =
        match (
            t.get("bottom_concentration_g_per_m3"),
            t.get("bottom_zero_gradient"),
        ) {
            (Some(_), Some(z)) => return Err(z.err(
                "conflicts with `bottom_concentration_g_per_m3`; give only one bottom condition",
            )),
            (Some(c), None) => SoluteBottom::Concentration(num(
                &c,
                |x| (0.0..=1.0e6).contains(&x),
                "must be in [0, 1e6] g/m³",
            )?),
            (None, Some(z)) => {
                if !z.bool()? {
                    return Err(z.err(
                    "write `bottom_zero_gradient = true`, or give bottom_concentration_g_per_m3",
                ));
                }
                SoluteBottom::ZeroGradient
            }
            (None, None) => SoluteBottom::ZeroGradient,
        };
    let initial_keys = [
        "initial_concentration_g_per_m3",
        "initial_csv",
        "initial_steady",
    ];
    let initial = if initial_keys.iter().any(|k| t.has(k)) {
        let (key, v) = t.one_of(&initial_keys, "initial solute state")?;
        match key {
            "initial_concentration_g_per_m3" => SoluteInitial::Constant(num(
                &v,
                |x| (0.0..=1.0e6).contains(&x),
                "must be in [0, 1e6] g/m³",
            )?),
            "initial_csv" => read_profile(&v, depth)?,
            _ => {
                if !v.bool()? {
                    return Err(v.err("write `initial_steady = true`, or omit the key"));
                }
                SoluteInitial::Steady
            }
        }
    } else {
        SoluteInitial::Constant(0.0)
    };
    let uptake_fraction = opt_num(
        t,
        "root_uptake_fraction",
        |f| (0.0..=1.0).contains(&f),
        "must be in [0, 1] (0: roots exclude the solute, as chloride)",
    )?
    .unwrap_or(0.0);
    let solubility = opt_num(
        t,
        "solubility_g_per_m3",
        |c| c > 0.0 && c <= 1.0e6,
        "must be in (0, 1e6] g/m³ (halite: about 3.6e5 g/m³ of water)",
    )?;
    let recharge_depth = opt_num(
        t,
        "recharge_depth_m",
        |z| z >= 0.0 && z <= depth,
        &format!("must be in [0, {}] m (inside the column)", fmt_g(depth)),
    )?;
    if recharge_depth.is_some() && !matches!(surface, SoluteSurface::Deposition(_)) {
        t.only_with("recharge_depth_m", "deposition_g_per_m2_per_year")?;
    }
    let osmotic = match t.get("osmotic_ions") {
        None => {
            t.only_with("molar_mass_g_per_mol", "osmotic_ions")?;
            None
        }
        Some(v) => {
            let ions = num(
                &v,
                |i| i == 0.0 || (1.0..=10.0).contains(&i),
                "must be 0 (no osmotic effect) or in [1, 10] (NaCl counted as chloride: 2)",
            )?;
            let molar_mass = num(
                &t.req(
                    "molar_mass_g_per_mol",
                    "molar mass of the solute as its concentration counts it, e.g. 35.45 for chloride; needed with osmotic_ions",
                )?,
                |m| m > 0.0 && m <= 1000.0,
                "must be in (0, 1000] g/mol",
            )?;
            (ions > 0.0).then_some(crate::model::Osmotic { ions, molar_mass })
        }
    };
    Ok(Solute {
        name,
        free_diffusivity,
        dispersivity,
        surface,
        bottom,
        initial,
        uptake_fraction,
        solubility,
        recharge_depth,
        osmotic,
    })
}

/// An initial profile from a CSV file with the header `depth_m,concentration_g_per_m3`.
fn read_profile(file: &super::tree::Value, depth: f64) -> R<SoluteInitial> {
    let (cols, _) = csvfile::read(
        file,
        Header::Exact(&["depth_m", "concentration_g_per_m3"]),
        "initial solute profile",
    )?;
    cols.depth_profile(depth)?;
    for (row, &c) in cols.columns[1].iter().enumerate() {
        if !(0.0..=1.0e6).contains(&c) {
            return Err(cols.err(
                row,
                format!("concentration_g_per_m3 = {c}: must be in [0, 1e6] g/m³"),
            ));
        }
    }
    Ok(SoluteInitial::Profile {
        depth: cols.columns[0].clone(),
        concentration: cols.columns[1].clone(),
    })
}
