//! The declarations of the key registry ([`super::keys`]), section by section in config order.
//! Units are spelled one way everywhere: "W m-2", "W m-2 K-1", "ppm", "K", "degC", "degree",
//! "km", "K km-1", "m", "J m-2 K-1", "year", "day", "1".

use super::keys::{albedo_set, insolation_set, set_co2, Default, Fast, Forms, Key, Range, Section};
use super::validate::{MAX_BANDS, MIN_YEARS};

const fn whole(name: &'static str, default: i64, lo: f64, hi: f64) -> Key {
    Key::whole(name, Default::Number(default as f64), lo, hi)
}

const SPACING: &[&str] = &["linear", "log"];

const TOP: &[Key] = &[Key::text("title", "\"icefold scenario\"")];

const GRID: &[Key] = &[
    Key::choice("grid.domain", "hemisphere", &["hemisphere", "globe"]),
    whole("grid.bands", 90, 1.0, MAX_BANDS as f64),
    Key::choice("grid.spacing", "equal_area", &["equal_area", "equal_angle"]),
];

const INSOLATION: &[Key] = &[
    Key::choice(
        "insolation.kind",
        "legendre",
        &["legendre", "annual_mean", "seasonal"],
    ),
    Key::number("insolation.solar_constant", "W m-2", 1361.0, Range::Above(0.0))
        .label("Solar constant S0 (W m⁻²)")
        .varies()
        .set(|s, v| {
            s.insolation.solar_constant = v;
            Ok(())
        })
        .fast(Fast::SolarConstant),
    // Insolation must stay non-negative: 1 + s2 P2 >= 0 for P2 in [-1/2, 1].
    Key::derived(
        "insolation.s2",
        "1",
        "-(5/8) P2(cos obliquity)",
        Range::Closed(-1.0, 2.0),
    )
    .kinds(&["legendre"])
    .set(insolation_set::s2),
    Key::number(
        "insolation.obliquity_deg",
        "degree",
        23.44,
        Range::Closed(0.0, 180.0),
    )
    .label("Obliquity (°)")
    .set(|s, v| {
        s.insolation.obliquity = v.to_radians();
        Ok(())
    }),
    Key::number("insolation.eccentricity", "1", 0.0, Range::Closed(0.0, 0.9))
        .label("Eccentricity")
        .set(|s, v| {
            s.insolation.eccentricity = v;
            Ok(())
        }),
    Key::number(
        "insolation.perihelion_deg",
        "degree",
        0.0,
        Range::Closed(-360.0, 360.0),
    )
    .label("Longitude of perihelion (°)"),
];

const ALBEDO: &[Key] = &[
    Key::choice("albedo.kind", "step", &["step", "smooth", "ramp"]),
    Key::number("albedo.ice_free", "1", 0.3, Range::Closed(0.0, 1.0))
        .label("Ice-free albedo")
        .set(albedo_set::ice_free),
    Key::number("albedo.ice_free_p2", "1", 0.0, Range::Closed(-1.0, 1.0))
        .label("Ice-free albedo, P2 part")
        .set(albedo_set::ice_free_p2),
    Key::number("albedo.ice", "1", 0.62, Range::Closed(0.0, 1.0))
        .label("Ice albedo")
        .set(|s, v| {
            s.albedo.ice = v;
            Ok(())
        }),
    Key::number(
        "albedo.freeze_temperature_c",
        "degC",
        -10.0,
        Range::Closed(-273.0, 1000.0),
    )
    .label("Freezing temperature (°C)")
    .set(albedo_set::freeze),
    // Resolved for every kind (the step albedo ignores it), so kept valid with each.
    Key::number("albedo.width_k", "K", 5.0, Range::Above(0.0))
        .label("Albedo transition width (K)")
        .set(albedo_set::width),
];

// The keys of each OLR kind are declared beside its physics (`physics::longwave::KINDS`).
const LONGWAVE: &[Key] = &[Key::choice(
    "longwave.kind",
    "linear",
    crate::physics::longwave::NAMES,
)];

const GREENHOUSE: &[Key] = &[
    Key::number("greenhouse.co2_ppm", "ppm", 280.0, Range::Above(0.0))
        .label("CO₂ (ppm)")
        .varies()
        .set(|s, v| {
            set_co2(s, 0, v);
            Ok(())
        })
        .fast(Fast::Co2),
    Key::number("greenhouse.reference_co2_ppm", "ppm", 280.0, Range::Above(0.0))
        .label("Reference CO₂ (ppm)")
        .varies()
        .set(|s, v| {
            set_co2(s, 1, v);
            Ok(())
        }),
    Key::number("greenhouse.log_coefficient_wm2", "W m-2", 5.35, Range::Any)
        .label("CO₂ forcing coefficient (W m⁻²)")
        .varies()
        .set(|s, v| {
            set_co2(s, 2, v);
            Ok(())
        }),
];

// The keys of each transport kind are declared beside its physics (`physics::transport::KINDS`).
const TRANSPORT: &[Key] = &[Key::choice(
    "transport.kind",
    "diffusive",
    crate::physics::transport::NAMES,
)];

const HEAT_CAPACITY: &[Key] = &[
    Key::number(
        "heat_capacity.value",
        "J m-2 K-1",
        4.0e8,
        Range::AboveUpTo(0.0, 1e12),
    ),
    Key::derived(
        "heat_capacity.mixed_layer_depth_m",
        "m",
        "(none)",
        Range::AboveUpTo(0.0, 1e4),
    ),
    Key::number(
        "heat_capacity.land_value",
        "J m-2 K-1",
        1.0e7,
        Range::AboveUpTo(0.0, 1e12),
    ),
    // One number or a list of one per band.
    Key::number("heat_capacity.land_fraction", "1", 0.0, Range::Closed(0.0, 1.0)),
];

const INITIAL: &[Key] = &[
    Key::number(
        "initial.temperature_c",
        "degC",
        15.0,
        Range::Closed(-272.0, 1500.0),
    ),
    Key::number("initial.temperature_p2_k", "K", 0.0, Range::Closed(-500.0, 500.0)),
    Key::number("initial.temperature_p1_k", "K", 0.0, Range::Closed(-500.0, 500.0)),
];

const TIME: &[Key] = &[
    Key::number("time.years", "year", 100.0, Range::Closed(MIN_YEARS, 1e9)),
    Key::derived(
        "time.output_every_years",
        "year",
        "1",
        Range::Closed(MIN_YEARS, 1e9),
    ),
    Key::choice("time.method", "implicit", &["implicit", "dopri5", "dop853"]),
    Key::derived(
        "time.step_days",
        "day",
        "(adaptive)",
        Range::AboveUpTo(0.0, 365.25e6),
    ),
    Key::number("time.tolerance", "K", 1e-2, Range::AboveUpTo(0.0, 100.0)),
    Key::derived(
        "time.max_step_years",
        "year",
        "min(years, 1000)",
        Range::AtLeast(MIN_YEARS),
    ),
    Key::flag("time.stiffness_check", true),
    whole("time.max_steps", 50_000_000, 1.0, 9.2e18),
    Key::choice(
        "time.output",
        "instant",
        &["instant", "every_step", "annual_mean"],
    ),
];

const FORCING: &[Key] = &[
    Key::number("forcing.constant_wm2", "W m-2", 0.0, Range::Closed(-1e4, 1e4))
        .label("Additive forcing (W m⁻²)")
        .varies()
        .set(|s, v| {
            s.extra_wm2 = v;
            Ok(())
        })
        .fast(Fast::ConstantForcing),
    Key::number("forcing.solar_scale", "1", 1.0, Range::Closed(0.0, 100.0))
        .label("Solar scale (1)")
        .varies()
        .set(|s, v| {
            s.solar_scale = v;
            Ok(())
        })
        .fast(Fast::SolarScale),
    Key::text("forcing.file", "(none)"),
    Key::choice("forcing.interpolation", "linear", &["linear", "step"]),
    Key::choice("forcing.outside", "error", &["error", "hold"]),
    Key::text("forcing.pieces", "(none)"),
];

const EQUILIBRIUM: &[Key] = &[
    Key::number("equilibrium.tolerance_wm2", "W m-2", 1e-9, Range::Above(0.0)),
    whole("equilibrium.max_iterations", 100, 1.0, 100_000.0),
    Key::flag("equilibrium.sensitivity", false),
];

const OUTPUT: &[Key] = &[whole(
    "output.deflate_level",
    super::spec::DEFAULT_DEFLATE_LEVEL as i64,
    0.0,
    super::spec::MAX_DEFLATE_LEVEL as f64,
)];

const SWEEP: &[Key] = &[
    Key::text("sweep.control", "(required)"),
    Key::derived("sweep.from", "", "(required)", Range::Any),
    Key::derived("sweep.to", "", "(required)", Range::Any),
    whole("sweep.steps", 61, 2.0, 100_000.0),
    Key::number("sweep.settle_k_per_year", "K year-1", 1e-4, Range::Above(0.0)),
    Key::number(
        "sweep.settle_max_years",
        "year",
        20_000.0,
        Range::AtLeast(MIN_YEARS),
    ),
    Key::number("sweep.refine_relative", "1", 1e-4, Range::AboveUpTo(0.0, 0.5)),
    Key::choice("sweep.spacing", "linear", SPACING),
];

const BRANCHES: &[Key] = &[
    Key::text("branches.control", "(required)"),
    Key::derived("branches.from", "", "(required)", Range::Any),
    Key::derived("branches.to", "", "(required)", Range::Any),
    Key::number("branches.step", "1", 0.02, Range::Above(0.0)),
    Key::number("branches.max_step", "1", 0.1, Range::Above(0.0)),
    // A branch needs about 14 points per band with the step albedo's edge-balance rule.
    Key::whole(
        "branches.max_points",
        Default::Text("max(5000, 20 x grid.bands)"),
        10.0,
        1e6,
    ),
    Key::choice("branches.spacing", "linear", SPACING),
];

const ENSEMBLE: &[Key] = &[
    whole("ensemble.members", 100, 1.0, 1e7),
    whole("ensemble.seed", 1, 0.0, 9.2e18),
    Key::flag("ensemble.fields", false),
    Key::flag("ensemble.sensitivity", false),
    Key::text("ensemble.parameters", "(required)"),
];

const REGIMES: &[Key] = &[
    Key::text("regimes.control", "(required)"),
    Key::derived("regimes.from", "", "(required)", Range::Any),
    Key::derived("regimes.to", "", "(required)", Range::Any),
    whole("regimes.columns", 101, 2.0, 10_000.0),
    Key::text("regimes.row_control", "(required)"),
    Key::derived("regimes.row_from", "", "(required)", Range::Any),
    Key::derived("regimes.row_to", "", "(required)", Range::Any),
    whole("regimes.rows", 21, 2.0, 10_000.0),
    Key::number("regimes.step", "1", 0.02, Range::Above(0.0)),
    Key::number("regimes.max_step", "1", 0.1, Range::Above(0.0)),
    whole("regimes.max_points", 5000, 10.0, 1e6),
    Key::choice("regimes.spacing", "linear", SPACING),
    Key::choice("regimes.row_spacing", "linear", SPACING),
    Key::number(
        "regimes.small_cap_min_latitude_deg",
        "degree",
        super::spec::DEFAULT_SMALL_CAP_MIN_LATITUDE,
        Range::AboveUpTo(0.0, 90.0),
    ),
];

/// Every section in config order.
pub(super) const SECTIONS: &[Section] = &[
    Section {
        name: "",
        keys: TOP,
        forms: Forms::None,
    },
    Section {
        name: "grid",
        keys: GRID,
        forms: Forms::None,
    },
    Section {
        name: "insolation",
        keys: INSOLATION,
        forms: Forms::None,
    },
    Section {
        name: "albedo",
        keys: ALBEDO,
        forms: Forms::None,
    },
    Section {
        name: "longwave",
        keys: LONGWAVE,
        forms: Forms::Longwave(crate::physics::longwave::KINDS),
    },
    Section {
        name: "greenhouse",
        keys: GREENHOUSE,
        forms: Forms::None,
    },
    Section {
        name: "transport",
        keys: TRANSPORT,
        forms: Forms::Transport(crate::physics::transport::KINDS),
    },
    Section {
        name: "heat_capacity",
        keys: HEAT_CAPACITY,
        forms: Forms::None,
    },
    Section {
        name: "initial",
        keys: INITIAL,
        forms: Forms::None,
    },
    Section {
        name: "time",
        keys: TIME,
        forms: Forms::None,
    },
    Section {
        name: "forcing",
        keys: FORCING,
        forms: Forms::None,
    },
    Section {
        name: "equilibrium",
        keys: EQUILIBRIUM,
        forms: Forms::None,
    },
    Section {
        name: "output",
        keys: OUTPUT,
        forms: Forms::None,
    },
    Section {
        name: "sweep",
        keys: SWEEP,
        forms: Forms::None,
    },
    Section {
        name: "branches",
        keys: BRANCHES,
        forms: Forms::None,
    },
    Section {
        name: "ensemble",
        keys: ENSEMBLE,
        forms: Forms::None,
    },
    Section {
        name: "regimes",
        keys: REGIMES,
        forms: Forms::None,
    },
];
