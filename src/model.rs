//! The validated description of one run, in SI units.
//!
//! `case::load` turns a TOML case file into a [`Model`]; the solver consumes only this.
//! Times are seconds, depths metres (positive downward), temperatures kelvin, heads metres,
//! fluxes positive downward.

use crate::mesh::Mesh;
use crate::props::conductivity::FaceAveraging;
use crate::props::retention::{Retention, RetentionLaw};
use crate::props::thermal::ThermalConductivity;
use crate::props::vapor::{Diffusivity, Enhancement};
use crate::schedule::Schedule;

/// One soil (a named material).
#[derive(Debug, Clone)]
pub struct Soil {
    pub name: String,
    /// Retention law θ(h) (with the optional dry-end extension folded in) and its
    /// matching relative conductivity Kr(h).
    pub retention: Retention,
    /// Saturated hydraulic conductivity at the reference temperature [m s⁻¹].
    pub saturated_conductivity: f64,
    /// Thermal conductivity law λ(θl) [W m⁻¹ K⁻¹].
    pub thermal: ThermalConductivity,
    /// Volumetric heat capacity of the solid per unit bulk volume, (1−φ) ρs cs [J m⁻³ K⁻¹].
    pub solid_heat_capacity: f64,
    /// Enhancement factor η(θl) on the thermal vapour flux.
    pub enhancement: Enhancement,
    /// Specific storage Ss [m⁻¹]: water stored per bulk volume per metre of positive
    /// pressure head (compression of water and matrix), so that a saturated cell stores
    /// θs + Ss·h (0: incompressible).
    pub specific_storage: f64,
}

/// A layer: a depth interval filled with one soil.
#[derive(Debug, Clone)]
pub struct Layer {
    pub name: String,
    /// Index into `Model::soils`.
    pub soil: usize,
    /// Top and bottom depth [m].
    pub top: f64,
    pub bottom: f64,
}

/// How the vapour density is determined.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum VaporMode {
    /// rv = rveq(T, h) everywhere (an algebraic row).
    Equilibrium,
    /// ∂(θa rv)/∂t + ∂jv/∂z = b (rveq − rv), with rate coefficient b [s⁻¹].
    Kinetic { rate: f64 },
}

/// Physics switches and parameters common to all soils.
#[derive(Debug, Clone)]
pub struct Physics {
    pub vapor_mode: VaporMode,
    /// Binary diffusivity of water vapour in air.
    pub diffusivity: Diffusivity,
    /// Total gas pressure of the pore air [Pa] (for the diffusivity).
    pub air_pressure: f64,
    /// Gain factor of the thermal liquid flux (Nimmo & Miller 1986); `None` disables it.
    pub thermal_liquid_gain: Option<f64>,
    /// Scale K with the viscosity of water: K(h,T) = Kr Ks μ(Tref)/μ(T).
    pub viscosity_correction: bool,
    /// Temperature at which Ks was measured [K].
    pub reference_temperature: f64,
    /// Face averaging of the hydraulic conductivity.
    pub face_conductivity: FaceAveraging,
    /// Liquid content of a cell as the average over a hydrostatic head profile within
    /// it (`[mesh] cell_average_retention`), for water tables and capillary fringes
    /// that move through cells; false: θ at the centre head.
    pub cell_average_retention: bool,
}

/// Surface heat condition.
#[derive(Debug, Clone)]
pub enum SurfaceHeat {
    /// Prescribed surface temperature Ts(t) [K].
    Temperature(Schedule),
    /// Prescribed heat flux into the soil, positive downward [W m⁻²].
    Flux(Schedule),
}

/// Surface moisture condition.
#[derive(Debug, Clone)]
pub enum SurfaceWater {
    /// Prescribed pressure head hs(t) [m].
    Head(Schedule),
    /// Prescribed liquid flux into the soil q(t), positive downward [m s⁻¹]; infiltration
    /// is limited so that the surface head never exceeds `ponding_head` [m].
    Flux { flux: Schedule, ponding_head: f64 },
    /// Liquid water applied to the surface q(t) ≥ 0 [m s⁻¹] (rain, flood water), all of it
    /// entering the surface store: what the soil does not take ponds on the surface (the
    /// ponding depth is the head above the top cell's hydrostatic surface value, see
    /// [`SURFACE_STORE`] in `physics`), infiltrates later, and runs off above
    /// `max_depth` [m] (None: no limit). With `air` (relative humidity [-], boundary-layer
    /// resistance [s m⁻¹]), vapour is exchanged with the air: standing water evaporates
    /// through the resistance alone, bare soil through the resistance and the top
    /// half-cell in series.
    Pond {
        inflow: Schedule,
        max_depth: Option<f64>,
        air: Option<(Schedule, Schedule)>,
    },
    /// No liquid flux; vapour exchange with air of relative humidity `relative_humidity(t)`
    /// [-] at the surface temperature, either fixed at the surface (`resistance` None) or
    /// through a boundary-layer resistance [s m⁻¹].
    Atmosphere {
        relative_humidity: Schedule,
        resistance: Option<Schedule>,
    },
    /// No liquid and no vapour flux.
    NoFlow,
}

/// Boundary conditions at the land surface over one period.
#[derive(Debug, Clone)]
pub struct SurfaceBc {
    pub heat: SurfaceHeat,
    pub water: SurfaceWater,
}

impl SurfaceBc {
    /// Every schedule of the condition with what it is (heat first, then water), for
    /// the walks over the forcing: breakpoints, the cycle-skipping check.
    pub fn schedules(&self) -> impl Iterator<Item = (&'static str, &Schedule)> {
        let heat = match &self.heat {
            SurfaceHeat::Temperature(s) => ("the surface temperature", s),
            SurfaceHeat::Flux(s) => ("the surface heat flux", s),
        };
        let water = match &self.water {
            SurfaceWater::Head(s) => [Some(("the surface head", s)), None, None],
            SurfaceWater::Flux { flux, .. } => [Some(("the surface water flux", flux)), None, None],
            SurfaceWater::Atmosphere {
                relative_humidity,
                resistance,
            } => [
                Some(("the air's relative humidity", relative_humidity)),
                resistance.as_ref().map(|r| ("the surface resistance", r)),
                None,
            ],
            SurfaceWater::Pond { inflow, air, .. } => [
                Some(("the water applied to the surface", inflow)),
                air.as_ref()
                    .map(|(rh, _)| ("the air's relative humidity", rh)),
                air.as_ref().map(|(_, r)| ("the surface resistance", r)),
            ],
            SurfaceWater::NoFlow => [None, None, None],
        };
        std::iter::once(Some(heat)).chain(water).flatten()
    }
}

/// Bottom heat condition.
#[derive(Debug, Clone)]
pub enum BottomHeat {
    /// Prescribed temperature Tb(t) [K].
    Temperature(Schedule),
    /// Geothermal heat flux entering from below, positive **upward** [W m⁻²].
    GeothermalFlux(Schedule),
}

/// Bottom moisture condition.
#[derive(Debug, Clone)]
pub enum BottomWater {
    /// Prescribed head hb(t) [m] (0 at the water table; hb < 0 for a table below the column),
    /// with rv = rveq at the boundary.
    WaterTable(Schedule),
    /// Unit gradient: ql = K(h), no vapour flux.
    FreeDrainage,
    /// No liquid and no vapour flux.
    NoFlow,
}

#[derive(Debug, Clone)]
pub struct BottomBc {
    pub heat: BottomHeat,
    pub water: BottomWater,
}

impl BottomBc {
    /// Every schedule of the condition with what it is (heat first, then water).
    pub fn schedules(&self) -> impl Iterator<Item = (&'static str, &Schedule)> {
        let heat = match &self.heat {
            BottomHeat::Temperature(s) => ("the bottom temperature", s),
            BottomHeat::GeothermalFlux(s) => ("the geothermal heat flux", s),
        };
        let water = match &self.water {
            BottomWater::WaterTable(s) => Some(("the bottom head", s)),
            BottomWater::FreeDrainage | BottomWater::NoFlow => None,
        };
        std::iter::once(Some(heat)).chain([water]).flatten()
    }
}

/// A boundary condition that may change kind at given times. Periods are sorted by `start`;
/// the first period applies from the start of the run (its `start` is −∞).
#[derive(Debug, Clone)]
pub struct Periods<T> {
    pub periods: Vec<(f64, T)>,
}

impl<T> Periods<T> {
    pub fn single(value: T) -> Self {
        Periods {
            periods: vec![(f64::NEG_INFINITY, value)],
        }
    }
    /// The period in force at time `t` [s]: the last one whose start is ≤ t.
    pub fn at(&self, t: f64) -> &T {
        let mut chosen = &self.periods[0].1;
        for (start, v) in &self.periods {
            if *start <= t {
                chosen = v;
            }
        }
        chosen
    }
    /// Times at which the condition changes kind [s].
    pub fn switch_times(&self) -> impl Iterator<Item = f64> + '_ {
        self.periods.iter().map(|p| p.0).filter(|t| t.is_finite())
    }
}

/// How the run starts.
// `Steady` carries two boundary sets; one value per run, so its size does not matter.
#[allow(clippy::large_enum_variant)]
#[derive(Debug, Clone)]
pub enum InitialState {
    /// Hydrostatic head above the bottom water table (h = hb − (L − z)) and a linear
    /// temperature profile T = surface_temperature + gradient·z.
    Hydrostatic {
        surface_temperature: f64,
        /// [K m⁻¹], positive when warmer at depth.
        gradient: f64,
    },
    /// The steady state under the given boundary conditions (held at their values at the
    /// start time), found by pseudo-transient continuation from the hydrostatic state.
    Steady {
        surface: SurfaceBc,
        bottom: BottomBc,
        /// Hydrostatic/linear first guess.
        surface_temperature: f64,
        gradient: f64,
    },
    /// The periodic steady state: the state at the start time that one period of the
    /// given boundary conditions (their forcing over [start, start + period], repeated)
    /// brings back to itself, found by shooting from the steady state under the
    /// conditions' period means (see [`crate::sim::initial::periodic_steady_state`]).
    Periodic {
        surface: SurfaceBc,
        bottom: BottomBc,
        /// Hydrostatic/linear first guess of the mean steady state.
        surface_temperature: f64,
        gradient: f64,
        spin_up: PeriodicSpinUp,
    },
    /// A profile table interpolated linearly onto the cell centres.
    Profile {
        depth: Vec<f64>,
        temperature: Vec<f64>,
        moisture: ProfileMoisture,
    },
}

/// The settings of the periodic steady state (`[initial] state = "periodic"`).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct PeriodicSpinUp {
    /// The forcing period [s].
    pub period: f64,
    /// The largest correction accepted as converged, measured by the run's error tests
    /// with this relative tolerance (1 = the correction's size equals the tolerance).
    pub tolerance: f64,
    /// Most periods integrated before giving up.
    pub max_periods: usize,
}

#[derive(Debug, Clone)]
pub enum ProfileMoisture {
    /// Pressure head [m].
    Head(Vec<f64>),
    /// Liquid content [m³ m⁻³], converted to head through the retention law.
    LiquidContent(Vec<f64>),
}

/// How many repetitions of the surface cycle make a run long enough for
/// [`Model::periodic_exchange_note`] (our own threshold: against rtol 1e-6, the water
/// taken from the water table by `cases/harrow-dunes.toml` is within 0.1 % after 10
/// annual cycles at rtol 1e-3 and 1e-4, off by up to 0.6 % after 100 and 1.8 % after
/// 1 000).
pub const MANY_CYCLES: f64 = 100.0;

/// Time span and step control.
#[derive(Debug, Clone)]
pub struct TimeControl {
    /// The year model time counts from: [`time_origin_year`] of the case's start year
    /// (a whole multiple of 1e5 years near it). Every time inside the model is in
    /// seconds since this year, so a run is resolved to its own precision at any epoch
    /// (the seconds since year 0 of year 4.5e9 could not resolve a 1e-4-year interval).
    pub epoch_year: f64,
    /// Start and end of the run [s since `epoch_year`].
    pub start: f64,
    pub end: f64,
    /// First, smallest and largest step [s].
    pub dt_initial: f64,
    pub dt_min: f64,
    pub dt_max: f64,
    /// Time integrator.
    pub method: Method,
    /// Relative and absolute local-error tolerances (used by error-controlled methods).
    pub rtol: f64,
    pub atol_temperature: f64,
    pub atol_head: f64,
    pub atol_vapor: f64,
    /// Absolute local-error tolerance on the liquid content [m³ m⁻³]: the moisture error
    /// is measured in θl, and in h only where the soil is saturated (θl flat in h).
    pub atol_theta: f64,
    /// Newton iteration limit per step.
    pub max_newton: usize,
    /// Newton converges when every residual row is within this fraction of the size of
    /// the terms that make it up [-].
    pub newton_tolerance: f64,
    /// Largest cumulative water and energy balance error of the run relative to its
    /// cumulative boundary throughput [-]: Newton iterates further where a step would
    /// leave it (down to round-off).
    pub balance_tolerance: f64,
    /// Cycle skipping under periodic forcing (`[time.cycle_skipping]`); None: off.
    pub cycle_skipping: Option<CycleSkipping>,
    /// Keep no evaluations with derivatives between Newton iterations (`memory =
    /// "lean"`): less memory per cell, about twice the run time (see DEVELOPERS.md,
    /// "Memory per cell").
    pub lean_memory: bool,
}

/// Cycle skipping (envelope following, see [`crate::solve::envelope`]): whole periods
/// integrated exactly, then jumps of many periods along the measured drift.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct CycleSkipping {
    /// The forcing period [s]; period boundaries at `start + k period`.
    pub period: f64,
    /// Whole periods integrated exactly between two jumps.
    pub exact_periods: u64,
    /// Most periods one jump skips.
    pub max_jump_periods: u64,
    /// Relative tolerance of a jump's estimated error [-].
    pub tolerance: f64,
    /// Jumps by BDF2 on the envelope (`jump = "implicit"`), not by the
    /// explicit extrapolation of the last period's drift.
    pub implicit: bool,
}

/// Model time counts seconds from the start year rounded to a whole multiple of
/// [`TIME_ORIGIN_STEP_YEARS`]: within 5e4 years of the origin a second is resolved to
/// 2.4e-4 s (8e-12 yr), at any epoch. A case that starts within 5e4 years of year 0
/// keeps year 0 as its origin (so its results are those of the seconds since year 0).
pub fn time_origin_year(start_year: f64) -> f64 {
    (start_year / TIME_ORIGIN_STEP_YEARS).round() * TIME_ORIGIN_STEP_YEARS + 0.0
}

/// See [`time_origin_year`].
pub const TIME_ORIGIN_STEP_YEARS: f64 = 1.0e5;

impl TimeControl {
    /// The year of model time `t` [s since `epoch_year`].
    pub fn year(&self, t: f64) -> f64 {
        self.epoch_year + t / crate::props::constants::SECONDS_PER_YEAR
    }
    /// Model time [s since `epoch_year`] of `year`.
    pub fn seconds(&self, year: f64) -> f64 {
        (year - self.epoch_year) * crate::props::constants::SECONDS_PER_YEAR
    }
}

#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Method {
    /// Backward Euler with step control by Newton iteration counts.
    BackwardEuler,
    /// Variable-step BDF with local error control (orders 1..=max_order).
    Bdf { max_order: usize },
}

/// What is written and when.
#[derive(Debug, Clone)]
pub struct OutputControl {
    /// Folder for the results file and checkpoints.
    pub folder: std::path::PathBuf,
    /// Snapshot times [s], sorted, inside [start, end]; the end time is always included.
    pub snapshot_times: Vec<f64>,
    /// Write a series record every this many accepted steps (1 = every step).
    pub series_every: usize,
}

/// Checkpoint policy.
#[derive(Debug, Clone)]
pub struct CheckpointControl {
    /// Simulated-time interval between checkpoints [s]; `None` = only at the end.
    pub every: Option<f64>,
    /// Wall-clock interval between checkpoints [s]; `None` = never by wall clock.
    pub wall_every: Option<f64>,
    /// How many checkpoint files to keep (newest first), at least 1.
    pub keep: usize,
}

/// The whole validated run description.
#[derive(Debug, Clone)]
pub struct Model {
    pub title: String,
    /// The case file's full text, stored in results and checkpoints.
    pub case_text: String,
    /// The overrides applied to the case text (`KEY=VALUE`, in order; empty when none):
    /// the run is of the case text with these applied.
    pub overrides: Vec<String>,
    pub mesh: Mesh,
    pub soils: Vec<Soil>,
    pub layers: Vec<Layer>,
    /// Soil index for every cell.
    pub cell_soil: Vec<usize>,
    pub physics: Physics,
    pub surface: Periods<SurfaceBc>,
    pub bottom: Periods<BottomBc>,
    pub initial: InitialState,
    pub time: TimeControl,
    pub output: OutputControl,
    pub checkpoint: CheckpointControl,
    /// Dissolved solutes carried by the liquid water (empty: none).
    pub solutes: Vec<Solute>,
    /// Plants taking up water by their roots, by period (None in a period: no plants).
    pub vegetation: Periods<Option<Vegetation>>,
}

impl Model {
    /// Whether any vegetation period has plants (the run then has root water uptake and
    /// its results datasets).
    pub fn has_plants(&self) -> bool {
        self.vegetation.periods.iter().any(|p| p.1.is_some())
    }

    /// The notes for a case that will run but poorly (what `check` prints and `run` logs
    /// as warnings), in that order: [`Model::moving_table_note`],
    /// [`Model::periodic_dry_end_note`], [`Model::periodic_exchange_note`].
    pub fn notes(&self) -> impl Iterator<Item = String> {
        [
            self.moving_table_note(),
            self.periodic_dry_end_note(),
            self.periodic_exchange_note(),
        ]
        .into_iter()
        .flatten()
    }

    /// A note when a water table moves through the column's cells while the liquid
    /// content is taken at the cell centres (`[mesh] cell_average_retention` off): each
    /// cell then drains or fills at once when the table passes its centre, and the
    /// bottom flux pulses once per cell crossed. None otherwise.
    pub fn moving_table_note(&self) -> Option<String> {
        if self.physics.cell_average_retention {
            return None;
        }
        let widest = self.mesh.width_range().1;
        self.bottom
            .periods
            .iter()
            .find_map(|(_, bc)| match &bc.water {
                BottomWater::WaterTable(s) => {
                    let (lo, hi) = s.bounds();
                    (hi > lo && hi > 0.0).then(|| {
                        format!(
                        "the water table moves inside the column (bottom head from {lo} to {hi} m) \
                         through cells up to {widest} m wide with the liquid content taken at the \
                         cell centres: the bottom flux will pulse once per cell crossed; set \
                         [mesh] cell_average_retention = true (see docs/case-file.md)"
                    )
                    })
                }
                _ => None,
            })
    }

    /// The longest period [s] of the surface forcing's sinusoids (temperature or heat
    /// flux, and the air's relative humidity, in any surface period) of nonzero
    /// amplitude; None when nothing at the surface oscillates.
    pub fn surface_cycle(&self) -> Option<f64> {
        fn longest(s: &Schedule) -> Option<f64> {
            match s {
                Schedule::Sine {
                    amplitude, period, ..
                } => (*amplitude != 0.0).then_some(*period),
                Schedule::Sum(parts) => parts.iter().filter_map(longest).reduce(f64::max),
                _ => None,
            }
        }
        self.surface
            .periods
            .iter()
            .flat_map(|(_, bc)| {
                let heat = match &bc.heat {
                    SurfaceHeat::Temperature(s) | SurfaceHeat::Flux(s) => longest(s),
                };
                let air = match &bc.water {
                    SurfaceWater::Atmosphere {
                        relative_humidity, ..
                    } => longest(relative_humidity),
                    SurfaceWater::Pond {
                        air: Some((rh, _)), ..
                    } => longest(rh),
                    _ => None,
                };
                [heat, air]
            })
            .flatten()
            .reduce(f64::max)
    }

    /// A note when the surface forcing repeats at least [`MANY_CYCLES`] times in the run
    /// at a relative tolerance above 2e-5: the water exchanged through the boundaries
    /// over many periods (the small net of large seasonal movements inside the column)
    /// adds up each period's integration error. Measured over 10⁴ annual cycles of
    /// `cases/harrow-dunes.toml` against rtol 1e-6: −0.8 % at rtol 1e-3, −5.6 % at 1e-4,
    /// −0.2 % at 1e-5 (README, "Periodic forcing: the water exchanged over many
    /// periods"). None otherwise.
    pub fn periodic_exchange_note(&self) -> Option<String> {
        let period = self.surface_cycle()?;
        let cycles = (self.time.end - self.time.start) / period;
        if cycles < MANY_CYCLES || self.time.rtol <= 2e-5 {
            return None;
        }
        Some(format!(
            "the surface cycle repeats {} times in this run at time.rtol = {}: the water \
             exchanged through the boundaries over many periods adds up each period's \
             integration error (over 10 000 annual cycles of cases/harrow-dunes.toml it came \
             out 0.8 % low at rtol 1e-3 and 5.6 % low at 1e-4, 0.2 % at 1e-5); for such \
             budgets set time.rtol = 1e-5 (see README, \"Periodic forcing: the water \
             exchanged over many periods\")",
            cycles.round(),
            self.time.rtol
        ))
    }

    /// A note when the surface forcing is periodic (a sinusoidal temperature or relative
    /// humidity) over a soil whose plain van Genuchten curve holds a residual content θr in
    /// the dry range: cells that the cycle dries to θr then make sharp bends in head and
    /// vapour density, and the steps that resolve them number thousands per period
    /// (`cases/annual-wave.toml`: ~2 700 per year; ~250 with the Fayer–Simmons dry end,
    /// README, "Periodic forcing"). None otherwise.
    pub fn periodic_dry_end_note(&self) -> Option<String> {
        self.surface_cycle()?;
        let soil = self.layers.iter().map(|l| &self.soils[l.soil]).find(|s| {
            s.retention.dry_end.is_none()
                && matches!(s.retention.law, RetentionLaw::VanGenuchten { theta_r, .. } if theta_r > 0.0)
        })?;
        Some(format!(
            "soil {}: plain van Genuchten keeps its residual content in the dry range under a \
             periodic surface forcing; cells that the cycle dries to it make sharp bends in head \
             and vapour density that can cost thousands of steps per period; where the soil \
             dries below its residual content, dry_end = \"fayer-simmons\" removes them (see \
             docs/case-file.md)",
            soil.name
        ))
    }

    /// Whether any surface period stores ponded water ([`SurfaceWater::Pond`]): the top
    /// cell then holds the pond in its storage in every period (so the water balance
    /// keeps it whatever the surface condition), and the run reports the ponding depth
    /// and the runoff.
    pub fn has_surface_store(&self) -> bool {
        self.surface
            .periods
            .iter()
            .any(|p| matches!(p.1.water, SurfaceWater::Pond { .. }))
    }
}

/// Plants over one period: potential transpiration, where the roots are, and how water
/// stress reduces the uptake.
#[derive(Debug, Clone)]
pub struct Vegetation {
    /// Potential transpiration Tp(t) [m of water per s].
    pub transpiration: Schedule,
    /// Fraction of the roots in each cell (sums to 1 over the column).
    pub root_fraction: Vec<f64>,
    /// How the root fractions were given (for the summary).
    pub roots: RootShape,
    /// The four heads of the water-stress reduction of Feddes et al. (1978) [m],
    /// h1 > h2 > h3 > h4: no uptake wetter than h1 (anaerobiosis), full uptake between h2
    /// and h3, linear between h1 and h2 and from h3 down to 0 at the wilting head h4.
    pub stress_heads: [f64; 4],
}

/// The root distribution as given in the case.
#[derive(Debug, Clone, PartialEq)]
pub enum RootShape {
    /// Uniform density down to `depth` [m].
    Uniform { depth: f64 },
    /// Density falling linearly to 0 at `depth` [m].
    Linear { depth: f64 },
    /// The asymptotic form of Jackson et al. (1996): the fraction of roots above depth d
    /// [cm] is 1 − β^d, cut at `depth` [m] and renormalised.
    Asymptotic { beta: f64, depth: f64 },
    /// A table of relative root density against depth (linear between rows, 0 below).
    Table { depth: Vec<f64>, density: Vec<f64> },
}

impl Vegetation {
    /// The Feddes reduction α(h) ∈ [0, 1] and dα/dh [m⁻¹].
    #[inline]
    pub fn stress(&self, h: f64) -> (f64, f64) {
        let [h1, h2, h3, h4] = self.stress_heads;
        if h >= h1 || h <= h4 {
            (0.0, 0.0)
        } else if h > h2 {
            ((h1 - h) / (h1 - h2), -1.0 / (h1 - h2))
        } else if h >= h3 {
            (1.0, 0.0)
        } else {
            ((h - h4) / (h3 - h4), 1.0 / (h3 - h4))
        }
    }
}

/// How a solute enters at the land surface.
#[derive(Debug, Clone)]
pub enum SoluteSurface {
    /// Deposition (wet and dry) onto the surface Fd(t) [g m⁻² s⁻¹]: it enters the soil
    /// whatever the water flux does (with evaporation it stays in the top cell).
    Deposition(Schedule),
    /// Concentration of the infiltrating water c_in(t) [g m⁻³]: the solute enters with
    /// the downward liquid flux only.
    Inflow(Schedule),
}

/// The solute condition at the bottom boundary.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum SoluteBottom {
    /// Groundwater of fixed concentration [g m⁻³]: it enters with upward liquid flow and
    /// exchanges by diffusion and dispersion across the boundary; outflow carries the
    /// bottom cell's concentration.
    Concentration(f64),
    /// No diffusive or dispersive flux across the boundary: the solute leaves (or enters)
    /// with the liquid flux at the bottom cell's concentration.
    ZeroGradient,
}

/// The initial solute profile.
#[derive(Debug, Clone)]
pub enum SoluteInitial {
    /// One concentration in the liquid everywhere [g m⁻³].
    Constant(f64),
    /// A table of concentration in the liquid [g m⁻³] against depth [m], interpolated
    /// linearly onto the cell centres (held constant beyond its ends).
    Profile {
        depth: Vec<f64>,
        concentration: Vec<f64>,
    },
    /// The steady profile under the flow of the initial state and the surface input at
    /// the start time.
    Steady,
}

/// One solute (e.g. chloride) dissolved in the liquid water.
#[derive(Debug, Clone)]
pub struct Solute {
    /// Name, used in dataset names (`concentration_<name>`): letters, digits, `_`.
    pub name: String,
    /// Diffusion coefficient in free water at 25 °C [m² s⁻¹]; scaled with T/μ(T)
    /// (Stokes–Einstein) and by the Millington–Quirk tortuosity in the soil.
    pub free_diffusivity: f64,
    /// Longitudinal dispersivity αL [m]: mechanical dispersion θ Dh = αL |q|.
    pub dispersivity: f64,
    pub surface: SoluteSurface,
    pub bottom: SoluteBottom,
    pub initial: SoluteInitial,
    /// Fraction of the concentration taken up with root water uptake [-] (0: excluded,
    /// as chloride); used once the model has roots.
    pub uptake_fraction: f64,
    /// Solubility limit [g m⁻³ of liquid]: above it the excess is stored as a solid that
    /// redissolves when water returns. `None`: no limit.
    pub solubility: Option<f64>,
    /// Depth [m] at which the chloride mass-balance recharge estimate Fd/c is reported.
    pub recharge_depth: Option<f64>,
    /// Osmotic effect on the vapour (None: off).
    pub osmotic: Option<Osmotic>,
}

/// The osmotic potential of a solute by van 't Hoff: π = i (c/M) R T.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Osmotic {
    /// Dissolved particles per formula unit counted in `molar_mass` (NaCl counted as
    /// chloride: 2).
    pub ions: f64,
    /// Molar mass of the solute as its concentration counts it [g mol⁻¹] (chloride:
    /// 35.45).
    pub molar_mass: f64,
}
