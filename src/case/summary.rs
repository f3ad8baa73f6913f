//! The text printed by `deepdry check`: what the case file says, in the file's units.

use super::schedules::{
    describe, fmt_g, Quantity, GEOTHERMAL_FLUX, HEAD, HEAT_FLUX, RELATIVE_HUMIDITY, RESISTANCE,
    TEMPERATURE, WATER_FLUX,
};
use crate::model::*;
use crate::props::conductivity::FaceAveraging;
use crate::props::constants::{CELSIUS_ZERO, SECONDS_PER_YEAR};
use crate::props::retention::DryEnd;
use crate::props::thermal::ThermalConductivity;
use crate::props::vapor::Enhancement;
use crate::schedule::Schedule;
use std::fmt::Write;

/// `s` with control characters (ESC, NUL, line breaks, …) escaped, so that text from a
/// case file cannot forge lines or terminal sequences in what deepdry prints.
pub fn printable(s: &str) -> String {
    s.chars()
        .map(|c| {
            if c.is_control() {
                c.escape_default().to_string()
            } else {
                c.to_string()
            }
        })
        .collect()
}

/// A duration [s] in years.
fn yr(t: f64) -> String {
    fmt_g(t / SECONDS_PER_YEAR)
}

/// The year of model time `t` [s since the start year, set by the summary's guard].
fn year_of(t: f64) -> String {
    fmt_g(super::schedules::epoch() + t / SECONDS_PER_YEAR)
}

fn celsius(t: f64) -> String {
    format!("{} °C", fmt_g(t - CELSIUS_ZERO))
}

/// A schedule in file units with its breakpoints in years.
fn sched(s: &Schedule, q: &Quantity) -> String {
    let text = describe(&q.from_si(s), q.unit);
    let bp = s.breakpoints();
    if bp.is_empty() {
        return text;
    }
    let mut list: Vec<String> = bp.iter().take(8).map(|&t| year_of(t)).collect();
    if bp.len() > 8 {
        list.push(format!("… ({} in all)", bp.len()));
    }
    format!("{text} [breakpoints at year {}]", list.join(", "))
}

fn surface_bc(bc: &SurfaceBc) -> String {
    let heat = match &bc.heat {
        SurfaceHeat::Temperature(s) => format!("temperature {}", sched(s, &TEMPERATURE)),
        SurfaceHeat::Flux(s) => format!("heat flux (down) {}", sched(s, &HEAT_FLUX)),
    };
    let water = match &bc.water {
        SurfaceWater::Head(s) => format!("head {}", sched(s, &HEAD)),
        SurfaceWater::Flux { flux, ponding_head } => format!(
            "water flux (down) {}, ponding limit {} m",
            sched(flux, &WATER_FLUX),
            fmt_g(*ponding_head)
        ),
        SurfaceWater::Atmosphere {
            relative_humidity,
            resistance,
        } => format!(
            "open to the air, relative humidity {}, {}",
            sched(relative_humidity, &RELATIVE_HUMIDITY),
            match resistance {
                None => "no boundary-layer resistance".to_string(),
                Some(r) => format!("boundary-layer resistance {}", sched(r, &RESISTANCE)),
            }
        ),
        SurfaceWater::Pond {
            inflow,
            max_depth,
            air,
        } => format!(
            "water applied (ponds on the surface when the soil cannot take it) {}, {}{}",
            sched(inflow, &WATER_FLUX),
            match max_depth {
                None => "no runoff".to_string(),
                Some(d) => format!("runoff above {} m of ponding", fmt_g(*d)),
            },
            match air {
                None => String::new(),
                Some((rh, r)) => format!(
                    "; vapour exchange with air of relative humidity {}, boundary-layer \
                     resistance {} (standing water evaporates through it alone)",
                    sched(rh, &RELATIVE_HUMIDITY),
                    sched(r, &RESISTANCE),
                ),
            }
        ),
        SurfaceWater::NoFlow => "no flow".to_string(),
    };
    format!("{heat}; {water}")
}

fn bottom_bc(bc: &BottomBc) -> String {
    let water = match &bc.water {
        BottomWater::WaterTable(s) => format!("water table, head {}", sched(s, &HEAD)),
        BottomWater::FreeDrainage => "free drainage".to_string(),
        BottomWater::NoFlow => "no flow".to_string(),
    };
    let heat = match &bc.heat {
        BottomHeat::Temperature(s) => format!("temperature {}", sched(s, &TEMPERATURE)),
        BottomHeat::GeothermalFlux(s) => {
            format!("geothermal flux (up) {}", sched(s, &GEOTHERMAL_FLUX))
        }
    };
    format!("{water}; {heat}")
}

fn periods<T>(out: &mut String, p: &Periods<T>, show: fn(&T) -> String) {
    for (start, bc) in &p.periods {
        let when = if start.is_finite() {
            format!("from year {}", year_of(*start))
        } else {
            "from the start".to_string()
        };
        let _ = writeln!(out, "  {when}: {}", show(bc));
    }
}

fn soil(s: &Soil) -> String {
    let law = s.retention.law.describe(fmt_g);
    let dry = match &s.retention.dry_end {
        Some(DryEnd::FayerSimmons { oven_dry_head }) => {
            format!(", Fayer–Simmons dry end to {} m", fmt_g(*oven_dry_head))
        }
        None => String::new(),
    };
    let thermal = match &s.thermal {
        ThermalConductivity::Constant { value } => {
            format!("thermal conductivity {} W/(m K)", fmt_g(*value))
        }
        ThermalConductivity::Campbell { a, b, c, d, e } => format!(
            "thermal conductivity Campbell A {}, B {}, C {}, D {}, E {}",
            fmt_g(*a),
            fmt_g(*b),
            fmt_g(*c),
            fmt_g(*d),
            fmt_g(*e)
        ),
        ThermalConductivity::Johansen {
            dry,
            saturated,
            fine,
        } => format!(
            "thermal conductivity Johansen dry {} / saturated {} W/(m K), {} texture",
            fmt_g(*dry),
            fmt_g(*saturated),
            if *fine { "fine" } else { "coarse" }
        ),
    };
    let enh = match &s.enhancement {
        Enhancement::None => "none".to_string(),
        Enhancement::Constant(x) => fmt_g(*x),
        Enhancement::Cass { clay_fraction } => {
            format!(
                "Cass et al. (1984), clay fraction {}",
                fmt_g(*clay_fraction)
            )
        }
    };
    let storage = if s.specific_storage > 0.0 {
        format!("; specific storage {} 1/m", fmt_g(s.specific_storage))
    } else {
        String::new()
    };
    format!(
        "{law}{dry}; Ks {} m/s; {thermal}; solid heat capacity {} J/(m³ K); enhancement {enh}{storage}",
        fmt_g(s.saturated_conductivity),
        fmt_g(s.solid_heat_capacity)
    )
}

/// The summary: layers, mesh, soils, physics, boundary conditions, initial state, time,
/// output and checkpoints.
pub fn summary(m: &Model) -> String {
    let _epoch = super::schedules::EpochGuard::set(m.time.epoch_year);
    let mut out = String::new();
    let o = &mut out;
    let _ = writeln!(o, "Case: {}", printable(&m.title));
    if !m.overrides.is_empty() {
        let _ = writeln!(o, "Overrides: {}", printable(&m.overrides.join(", ")));
    }
    let (lo, hi) = m.mesh.width_range();
    let _ = writeln!(
        o,
        "Column: {} m deep, {} cells, smallest {} m, largest {} m",
        fmt_g(m.mesh.depth()),
        m.mesh.n_cells(),
        fmt_g(lo),
        fmt_g(hi)
    );
    if m.physics.cell_average_retention {
        let _ = writeln!(
            o,
            "  liquid content of each cell averaged over a hydrostatic head profile within it (cell_average_retention)"
        );
    }
    for note in m.notes() {
        let _ = writeln!(o, "  note: {note}");
    }
    let _ = writeln!(o, "Layers:");
    for (i, l) in m.layers.iter().enumerate() {
        let cells = m
            .mesh
            .centers
            .iter()
            .filter(|&&z| z >= l.top && z < l.bottom)
            .count();
        let _ = writeln!(
            o,
            "  {}. {}: soil {}, {} to {} m ({cells} cells)",
            i + 1,
            printable(&l.name),
            printable(&m.soils[l.soil].name),
            fmt_g(l.top),
            fmt_g(l.bottom)
        );
    }
    let _ = writeln!(o, "Soils:");
    for s in &m.soils {
        let _ = writeln!(o, "  {}: {}", printable(&s.name), soil(s));
    }
    let p = &m.physics;
    let d = &p.diffusivity;
    let _ = writeln!(
        o,
        "Physics: vapour {}; diffusivity {} m²/s (T/{} K)^{} ({} Pa/p); air pressure {} Pa; \
         thermal liquid flux {}; viscosity correction of K {}; face averaging of K {}",
        match p.vapor_mode {
            VaporMode::Equilibrium => "in equilibrium".to_string(),
            VaporMode::Kinetic { rate } => format!("kinetic, rate {} 1/s", fmt_g(rate)),
        },
        fmt_g(d.d0),
        fmt_g(d.t0),
        fmt_g(d.exponent),
        fmt_g(d.p0),
        fmt_g(p.air_pressure),
        match p.thermal_liquid_gain {
            None => "off".to_string(),
            Some(g) => format!("on, gain {}", fmt_g(g)),
        },
        if p.viscosity_correction {
            format!("on (Ks at {})", celsius(p.reference_temperature))
        } else {
            "off".to_string()
        },
        match p.face_conductivity {
            FaceAveraging::Arithmetic => "arithmetic",
            FaceAveraging::Geometric => "geometric",
            FaceAveraging::Harmonic => "harmonic",
            FaceAveraging::Upstream => "upstream",
        }
    );
    let _ = writeln!(o, "Surface:");
    periods(o, &m.surface, surface_bc);
    let _ = writeln!(o, "Bottom:");
    periods(o, &m.bottom, bottom_bc);
    let linear = |ts: f64, g: f64| {
        format!(
            "{} at the surface, gradient {} K/m ({} at the bottom)",
            celsius(ts),
            fmt_g(g),
            celsius(ts + g * m.mesh.depth())
        )
    };
    let init = match &m.initial {
        InitialState::Hydrostatic {
            surface_temperature,
            gradient,
        } => format!(
            "hydrostatic above the water table; {}",
            linear(*surface_temperature, *gradient)
        ),
        InitialState::Steady {
            surface,
            bottom,
            surface_temperature,
            gradient,
        } => format!(
            "steady state under surface {{{}}} and bottom {{{}}} (values at the start); first guess {}",
            surface_bc(surface),
            bottom_bc(bottom),
            linear(*surface_temperature, *gradient)
        ),
        InitialState::Periodic {
            surface,
            bottom,
            surface_temperature,
            gradient,
            spin_up,
        } => format!(
            "periodic steady state under surface {{{}}} and bottom {{{}}} repeated every {} yr (their forcing over the first period), within {} (relative) in at most {} periods; from the steady state under their period means, first guess {}",
            surface_bc(surface),
            bottom_bc(bottom),
            fmt_g(spin_up.period / SECONDS_PER_YEAR),
            fmt_g(spin_up.tolerance),
            spin_up.max_periods,
            linear(*surface_temperature, *gradient)
        ),
        InitialState::Profile {
            depth, moisture, ..
        } => format!(
            "profile table, {} rows from {} to {} m, {}",
            depth.len(),
            fmt_g(depth.first().copied().unwrap_or(0.0)),
            fmt_g(depth.last().copied().unwrap_or(0.0)),
            match moisture {
                ProfileMoisture::Head(_) => "head",
                ProfileMoisture::LiquidContent(_) => "liquid content",
            }
        ),
    };
    let _ = writeln!(o, "Initial state: {init}");
    let t = &m.time;
    let _ = writeln!(
        o,
        "Time: year {} to {}; first step {} yr, steps {} to {} yr; {}; at most {} Newton \
         iterations (tolerance {}); cumulative balance within {} of the throughput; rtol {}, \
         atol {} K, {} m, {} kg/m³",
        year_of(t.start),
        year_of(t.end),
        yr(t.dt_initial),
        yr(t.dt_min),
        yr(t.dt_max),
        match t.method {
            Method::BackwardEuler => "backward Euler".to_string(),
            Method::Bdf { max_order } => format!("BDF up to order {max_order}"),
        },
        t.max_newton,
        fmt_g(t.newton_tolerance),
        fmt_g(t.balance_tolerance),
        fmt_g(t.rtol),
        fmt_g(t.atol_temperature),
        fmt_g(t.atol_head),
        fmt_g(t.atol_vapor)
    );
    if t.lean_memory {
        let _ = writeln!(
            o,
            "Memory: lean (no evaluations with derivatives kept between Newton iterations: about 0.7 kB of arrays per cell instead of 1.2 kB, at 2 to 3 times the run time)"
        );
    }
    if let Some(c) = &t.cycle_skipping {
        let most = c.max_jump_periods;
        let how = if c.implicit {
            format!("an implicit jump (BDF2 on the envelope through the previous jump's start, backward Euler for the first; solved by trial periods on the steps of one recorded period) of up to {most} periods while its estimated error (the landing against the quadratic through the two points and the period after the newest, or ½ m × the change of the drift over the jump where that allows a longer jump; for the first jump the latter) is")
        } else {
            format!("a jump of up to {most} periods along the drift of the last one while its estimated error (½ m (m + 1) × the change of the drift between periods) is")
        };
        let _ = writeln!(
            o,
            "Cycle skipping: forcing period {} yr from year {}; {} whole periods integrated, then {how} within rtol {} and the case's atol; snapshots, checkpoint times and the end are always integrated (a jump never reaches them); the forcing was checked to repeat with this period",
            fmt_g(c.period / crate::props::constants::SECONDS_PER_YEAR),
            year_of(t.start),
            c.exact_periods,
            fmt_g(c.tolerance)
        );
    }
    let snaps = &m.output.snapshot_times;
    let _ = writeln!(
        o,
        "Output: {} snapshot times (year {} to {}) in {}; series record every {} step(s)",
        snaps.len(),
        year_of(snaps.first().copied().unwrap_or(t.end)),
        year_of(snaps.last().copied().unwrap_or(t.end)),
        m.output.folder.display(),
        m.output.series_every
    );
    let c = &m.checkpoint;
    let mut when = Vec::new();
    if let Some(e) = c.every {
        when.push(format!("every {} simulated years", yr(e)));
    }
    if let Some(w) = c.wall_every {
        when.push(format!("every {} wall-clock minutes", fmt_g(w / 60.0)));
    }
    when.push("at the end".to_string());
    let _ = writeln!(
        o,
        "Checkpoints: {}; keep the newest {}",
        when.join(", "),
        c.keep
    );
    vegetation(o, m);
    solutes(o, m);
    out
}

/// The vegetation periods: potential transpiration, roots, stress heads.
fn vegetation(o: &mut String, m: &Model) {
    use crate::case::vegetation::TRANSPIRATION;
    use crate::model::RootShape;
    if !m.has_plants() {
        return;
    }
    let _ = writeln!(o, "Vegetation:");
    for (start, veg) in &m.vegetation.periods {
        let when = if start.is_finite() {
            format!("from year {}", year_of(*start))
        } else {
            "at the start".to_string()
        };
        let what = match veg {
            None => "no plants".to_string(),
            Some(v) => {
                let roots = match &v.roots {
                    RootShape::Uniform { depth } => format!("uniform to {} m", fmt_g(*depth)),
                    RootShape::Linear { depth } => {
                        format!("falling linearly to 0 at {} m", fmt_g(*depth))
                    }
                    RootShape::Asymptotic { beta, depth } => format!(
                        "asymptotic (Jackson et al. 1996) with β = {} to {} m",
                        fmt_g(*beta),
                        fmt_g(*depth)
                    ),
                    RootShape::Table { depth, .. } => format!("table of {} rows", depth.len()),
                };
                let [h1, h2, h3, h4] = v.stress_heads;
                format!(
                    "potential transpiration {}; roots {roots}; water stress (Feddes) none wetter than {} m, full from {} to {} m, none drier than {} m",
                    sched(&v.transpiration, &TRANSPIRATION),
                    fmt_g(h1),
                    fmt_g(h2),
                    fmt_g(h3),
                    fmt_g(h4)
                )
            }
        };
        let _ = writeln!(o, "  {when}: {what}");
    }
}

/// The solutes: input, bottom, initial state, and what the mesh does to advection (the
/// numerical dispersion of upwinding, about Δz/2, against the dispersivity: the cell
/// Péclet number Δz/αL of dispersion-dominated flow; with αL = 0 molecular diffusion alone
/// limits it, and it depends on the flow).
fn solutes(o: &mut String, m: &Model) {
    use crate::case::schedules::{CONCENTRATION, DEPOSITION};
    use crate::model::{SoluteBottom, SoluteInitial, SoluteSurface};
    if m.solutes.is_empty() {
        return;
    }
    let dz_max = m.mesh.widths.iter().cloned().fold(0.0, f64::max);
    let dz_min = m.mesh.widths.iter().cloned().fold(f64::INFINITY, f64::min);
    let _ = writeln!(o, "Solutes:");
    for s in &m.solutes {
        let input = match &s.surface {
            SoluteSurface::Deposition(d) => format!("deposition {}", sched(d, &DEPOSITION)),
            SoluteSurface::Inflow(c) => {
                format!("in infiltrating water at {}", sched(c, &CONCENTRATION))
            }
        };
        let bottom = match s.bottom {
            SoluteBottom::Concentration(c) => format!("groundwater at {} g/m³", fmt_g(c)),
            SoluteBottom::ZeroGradient => "zero gradient".to_string(),
        };
        let initial = match &s.initial {
            SoluteInitial::Constant(c) => format!("{} g/m³", fmt_g(*c)),
            SoluteInitial::Profile { depth, .. } => format!("CSV profile of {} rows", depth.len()),
            SoluteInitial::Steady => "steady under the initial flow".to_string(),
        };
        let peclet = if s.dispersivity > 0.0 {
            format!(
                "cell Péclet number Δz/αL {} to {}",
                fmt_g(dz_min / s.dispersivity),
                fmt_g(dz_max / s.dispersivity)
            )
        } else {
            "no dispersivity: the cell Péclet number is q Δz/(θ Dm), set by the flow".to_string()
        };
        let _ = writeln!(
            o,
            "  {}: D0 {} m²/s at 25 °C, dispersivity {} m; {input}; bottom {bottom}; initial {initial}{}{}",
            s.name,
            fmt_g(s.free_diffusivity),
            fmt_g(s.dispersivity),
            s.solubility
                .map(|c| format!("; solubility {} g/m³", fmt_g(c)))
                .unwrap_or_default(),
            s.recharge_depth
                .map(|z| format!("; recharge estimate at {} m", fmt_g(z)))
                .unwrap_or_default(),
        );
        let _ = writeln!(
            o,
            "    upwind advection adds a numerical dispersivity of about Δz/2 = {} to {} m; {peclet}",
            fmt_g(dz_min / 2.0),
            fmt_g(dz_max / 2.0),
        );
    }
}
