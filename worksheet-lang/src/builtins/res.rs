//! Resistors: preferred values (`res.pick`), LED series resistors (`res.led`), feedback
//! dividers (`res.divider`) and power derating (`res.derate`).
//!
//! A built-in that picks a part chooses it once, from the nominal arguments, by its stated
//! rule (`CallCtx::choose`); the part's tolerance then enters the analysis as an input of
//! its own (`CallCtx::part_input`).

use super::args::{above, opt, req, show, Args};
use super::quantity::{
    self as q, difference, from_dual, out, record, si, Current, Power, Ratio, Resistance,
    Temperature, Voltage,
};
use super::series::{Rounding, Series, ALL as SERIES};
use super::{Builtin, CallCtx, CallError, Doc, FieldDoc, Param, PartLabel, WarnRule, WarnWhen};
use crate::num::Dual;
use crate::units::{format_number, Dim};
use crate::value::{Num, Value};

fn series_named(name: &str) -> &'static Series {
    // The names are those of the tables in `series`; a missing one is a programming error
    // caught by the library tests, so fall back to the first table rather than panic.
    SERIES.iter().find(|s| s.name == name).unwrap_or(&SERIES[0])
}

/// Common power ratings of resistors, W (common practice, no source).
pub const RATINGS: &[f64] = &[
    0.05,
    0.0625,
    0.1,
    0.125,
    0.25,
    1.0 / 3.0,
    0.5,
    1.0,
    2.0,
    3.0,
    5.0,
];

/// A resistor is chosen for at least twice its worst-case dissipation (common practice,
/// no source).
pub const RATING_FACTOR: f64 = 2.0;

/// The usual linear derating curve of film resistors: full rating up to 70 °C, none at
/// 155 °C (common practice, no source; the part's datasheet rules).
const KNEE_K: f64 = 273.15 + 70.0;
const ZERO_K: f64 = 273.15 + 155.0;

/// The derated share of the rating at `t` on the curve through `knee` and `zero`.
fn derate_share(t: Temperature, knee: Temperature, zero: Temperature) -> Ratio {
    let share: Ratio = difference(zero, t) / difference(zero, knee);
    q::max(q::min(share, si(1.0)), si(0.0))
}

/// The same on the default curve, for a known temperature (kelvin).
fn default_share(t: f64) -> f64 {
    ((ZERO_K - t) / (ZERO_K - KNEE_K)).clamp(0.0, 1.0)
}

fn percent(x: f64) -> String {
    format!("{} %", format_number(x * 100.0, 3))
}

/// Checks a tolerance given as a fraction.
fn check_tolerance(a: &Args<'_>, i: usize, tol: f64) -> Result<(), CallError> {
    if (0.0..1.0).contains(&tol) {
        Ok(())
    } else {
        Err(CallError::new(format!(
            "`{}` must be from 0 % to below 100 %, not {}",
            a.name(i),
            percent(tol)
        ))
        .at(i)
        .hint("for example `tolerance: 1 %`"))
    }
}

const PICK_PARAMS: &[Param] = &[
    req("value"),
    opt("series", "E24"),
    opt("mode", "\"nearest\""),
];

pub static PICK: Builtin = Builtin {
    path: "res.pick",
    params: PICK_PARAMS,
    doc: Doc {
        summary: "The preferred value of an IEC 60063 series for a computed value, rounded to \
                  the nearest one or up or down. The picked part's tolerance (the series' usual \
                  one: E24 5 %, E96 1 %) becomes an input of the worst case.",
        signature: "res.pick(value, series: E24, mode: \"nearest\" | \"up\" | \"down\")",
        formula:
            "nearest: the preferred value v with the smallest |ln(v / value)| (a tie goes up)\n\
                  up: the smallest preferred value ≥ value\n\
                  down: the largest preferred value ≤ value\n\
                  preferred values: the series' table × 10^k for every decade k",
        arguments: &[
            FieldDoc {
                name: "value",
                unit: "Ω (or F)",
                meaning: "the value wanted; the pick is made from its nominal value",
            },
            FieldDoc {
                name: "series",
                unit: "",
                meaning: "E3, E6, E12, E24, E48, E96 or E192",
            },
            FieldDoc {
                name: "mode",
                unit: "",
                meaning: "\"nearest\", \"up\" or \"down\"",
            },
        ],
        fields: &[FieldDoc {
            name: "(result)",
            unit: "as `value`",
            meaning: "the preferred value, with the series' usual tolerance",
        }],
        source: "IEC 60063 preferred-number series, as its tables print them (E3–E24 and E192's \
                 9.20 differ from the rounding formula). Tolerances: IEC 60063's association of \
                 series and tolerance (E6 20 %, E12 10 %, E24 5 %, E48 2 %, E96 1 %, E192 0.5 %); \
                 E3, \"above 20 %\" there, is taken as ±40 %.",
        caveats:
            "The tolerance is the series' usual one; a part bought tighter or looser than that \
                  needs its own `± …` written after the result. Temperature coefficient and \
                  ageing are not included.",
    },
    call: pick,
};

fn pick(ctx: &mut CallCtx<'_>, vals: &[Option<Value>]) -> Result<Value, CallError> {
    let a = Args::new(PICK_PARAMS, vals);
    let n = match a.value(0) {
        Some(Value::Num(n)) if !n.abs => *n,
        Some(Value::Num(_)) => {
            return Err(CallError::new(
                "`value` must be a component value, not an absolute temperature",
            )
            .at(0))
        }
        Some(other) => {
            return Err(CallError::new(format!(
                "`value` must be a number, but this is {}",
                other.type_name()
            ))
            .at(0))
        }
        None => return Err(CallError::new("`value` is required").at(0)),
    };
    let series = a.series_or(1, series_named("E24"))?;
    let mode = a.word_or(2, "nearest", &["nearest", "up", "down"])?;
    let rounding = Rounding::from_name(mode).unwrap_or(Rounding::Nearest);
    let x = n.x.value();
    if ctx.is_nominal() && !(x > 0.0 && x.is_finite()) {
        return Err(
            CallError::new(format!("`value` must be positive, not {}", show(x, n.dim))).at(0),
        );
    }
    let v = ctx.choose("value", || {
        series.pick(x, rounding).ok_or_else(|| {
            CallError::new(format!("no preferred value for {}", show(x, n.dim))).at(0)
        })
    })?;
    let tol = series.tolerance;
    let label = PartLabel {
        name: series.name,
        between: " ",
        value: v,
        dim: n.dim,
        tolerance: tol,
    };
    let part = ctx.part_input("value", label, v, v * (1.0 - tol), v * (1.0 + tol), n.dim);
    Ok(Value::Num(Num::new(part, n.dim)))
}

const LED_PARAMS: &[Param] = &[
    req("supply"),
    req("vf"),
    req("current"),
    opt("count", "1"),
    opt("series", "E24"),
    opt("tolerance", "5 %"),
    opt("rule", "\"nominal\""),
    opt("ambient", "25 °C"),
];

pub static LED: Builtin = Builtin {
    path: "res.led",
    params: LED_PARAMS,
    doc: Doc {
        summary: "The series resistor for a string of `count` LEDs: the preferred value, the \
                  current and power it gives with every tolerance, and the power rating to buy.",
        signature: "res.led(supply, vf, current, count: 1, series: E24, tolerance: 5 %, \
                    rule: \"nominal\", ambient: 25 °C)",
        formula: "V_R = supply − count · vf\n\
                  rule \"nominal\": r = the smallest preferred value ≥ V_R / current (nominal values)\n\
                  rule \"worst\":   r = the smallest preferred value ≥ max(V_R) / (current · (1 − tolerance))\n\
                  I = V_R / r,   P = V_R² / r\n\
                  rating = the smallest common rating ≥ 2 · max(P) / derating(ambient)",
        arguments: &[
            FieldDoc { name: "supply", unit: "V", meaning: "supply voltage across the string and resistor" },
            FieldDoc { name: "vf", unit: "V", meaning: "forward voltage of one LED at the target current" },
            FieldDoc { name: "current", unit: "A", meaning: "target LED current, not to be exceeded" },
            FieldDoc { name: "count", unit: "", meaning: "LEDs in series" },
            FieldDoc { name: "series", unit: "", meaning: "preferred-number series for r" },
            FieldDoc { name: "tolerance", unit: "%", meaning: "tolerance of the resistor" },
            FieldDoc {
                name: "rule",
                unit: "",
                meaning: "\"nominal\": the nominal current stays at or under `current`; \"worst\": the worst-case current does",
            },
            FieldDoc { name: "ambient", unit: "°C", meaning: "air temperature around the resistor, for derating" },
        ],
        fields: &[
            FieldDoc { name: "r", unit: "Ω", meaning: "the chosen preferred value, with its tolerance" },
            FieldDoc { name: "current", unit: "A", meaning: "LED current with all tolerances" },
            FieldDoc { name: "power", unit: "W", meaning: "power in the resistor with all tolerances" },
            FieldDoc {
                name: "rating",
                unit: "W",
                meaning: "smallest common rating (1/20 … 5 W) at least twice the worst-case power after derating",
            },
        ],
        source: "Ohm's law on the voltage left across the resistor (supply minus the LEDs' forward \
                 voltage: common practice, no source). Ratings 1/20, 1/16, 1/10, 1/8, 1/4, 1/3, 1/2, \
                 1, 2, 3, 5 W, the rule of twice the dissipation and the linear derating from 70 °C \
                 to zero at 155 °C: common practice, no source.",
        caveats: "vf varies from part to part and falls as the LED warms (about −2 mV/K): give it a \
                  range from the datasheet. When little voltage is left across the resistor the \
                  current depends strongly on vf; use a current source instead. Check the \
                  resistor's own derating curve in its datasheet. A resistor near its rating runs \
                  hot: above about 60 °C it burns on touch.",
    },
    call: led,
};

fn led(ctx: &mut CallCtx<'_>, vals: &[Option<Value>]) -> Result<Value, CallError> {
    let a = Args::new(LED_PARAMS, vals);
    let supply: Voltage = a.q(0)?;
    let vf: Voltage = a.q(1)?;
    let target: Current = a.q(2)?;
    let count = a.exact_or(3, 1.0)?;
    let series = a.series_or(4, series_named("E24"))?;
    let tol = a.exact_or(5, 0.05)?;
    let rule = a.word_or(6, "nominal", &["nominal", "worst"])?;
    let ambient = a.temp_or(7, 273.15 + 25.0)?;
    a.positive(0, &supply)?;
    a.positive(1, &vf)?;
    a.positive(2, &target)?;
    if !((1.0..=1000.0).contains(&count) && count.fract() == 0.0) {
        return Err(CallError::new(format!(
            "`count` must be a whole number of LEDs, not {count}"
        ))
        .at(3));
    }
    check_tolerance(&a, 5, tol)?;

    let n: Ratio = si(count);
    let across: Voltage = supply - vf * n;
    let across_nom = across.value.value();
    let supply_nom = supply.value.value();
    if ctx.is_nominal() && across_nom <= 0.0 {
        return Err(CallError::new(format!(
            "the supply ({}) does not exceed the LEDs' forward voltage ({} × {})",
            show(supply_nom, Dim::VOLTAGE),
            count,
            show(vf.value.value(), Dim::VOLTAGE)
        ))
        .at(0)
        .hint("use fewer LEDs in series or a higher supply"));
    }
    // The worst case of the voltage across the resistor and of the ambient, for the choices
    // made by a worst-case rule: from the evaluator's argument ranges where known.
    let hi = |i: usize, nominal: f64| ctx.arg_range(i).map_or(nominal, |r| r.hi);
    let lo = |i: usize, nominal: f64| ctx.arg_range(i).map_or(nominal, |r| r.lo);
    let across_max = hi(0, supply_nom) - count * lo(1, vf.value.value());
    let ambient_max = hi(7, ambient.value.value());
    let target_nom = target.value.value();

    let r_nom = ctx.choose("r", || {
        let need = match rule {
            "worst" => across_max / (target_nom * (1.0 - tol)),
            _ => across_nom / target_nom,
        };
        series.pick(need, Rounding::Up).ok_or_else(|| {
            CallError::new(format!(
                "no preferred value at or above {}",
                show(need, Dim::RESISTANCE)
            ))
            .at(2)
        })
    })?;
    let rating = ctx.choose("rating", || {
        let share = default_share(ambient_max);
        if share <= 0.0 {
            return Err(CallError::new("at an ambient of 155 °C or more a resistor may dissipate nothing").at(7));
        }
        let p_max = across_max.max(0.0).powi(2) / (r_nom * (1.0 - tol));
        let need = RATING_FACTOR * p_max / share;
        RATINGS.iter().copied().find(|&w| w >= need * (1.0 - 1e-9)).ok_or_else(|| {
            CallError::new(format!(
                "the resistor needs a rating of {} (twice its worst-case power after derating), more than 5 W",
                show(need, Dim::POWER)
            ))
            .at(2)
            .hint("drive the LEDs from a current source or a switching LED driver")
        })
    })?;

    let label = PartLabel {
        name: "r",
        between: " = ",
        value: r_nom,
        dim: Dim::RESISTANCE,
        tolerance: tol,
    };
    let r: Resistance = from_dual(ctx.part_input(
        "r",
        label,
        r_nom,
        r_nom * (1.0 - tol),
        r_nom * (1.0 + tol),
        Dim::RESISTANCE,
    ));
    // Below zero the string does not conduct at all.
    let drive = q::max(across, si(0.0));
    let current: Current = drive / r;
    let power: Power = drive * drive / r;

    let share = derate_share(ambient, si_temperature(KNEE_K), si_temperature(ZERO_K));
    if !above(share.value.v.lo, 0.0) {
        return Err(CallError::new(
            "at an ambient of 155 °C or more a resistor may dissipate nothing",
        )
        .at(7));
    }
    let allowed: Power = from_dual::<uom::si::power::Dimension>(Dual::constant(rating)) * share;
    let load: Ratio = power / allowed;
    let load_num = Num::new(load.value, Dim::NONE);
    let load_label = "resistor load (power ÷ derated rating)";
    ctx.probe(
        "load_half",
        load_num,
        WarnRule {
            when: WarnWhen::MaxAbove(1.0 / RATING_FACTOR),
            message: "the resistor dissipates more than half its derated rating (it is chosen for twice its dissipation)".into(),
            label: load_label.into(),
        },
    );
    ctx.probe(
        "load_over",
        load_num,
        WarnRule {
            when: WarnWhen::MaxAbove(1.0),
            message: "the resistor dissipates more than its derated rating".into(),
            label: load_label.into(),
        },
    );
    ctx.probe(
        "across",
        Num::new(across.value, Dim::VOLTAGE),
        WarnRule {
            when: WarnWhen::MinBelow(0.0),
            message: "the LEDs may not light: the supply falls below their forward voltage".into(),
            label: "voltage across the resistor".into(),
        },
    );
    if rule == "worst" {
        ctx.probe(
            "current",
            Num::new((target - current).value, Dim::CURRENT),
            WarnRule {
                when: WarnWhen::MinBelow(0.0),
                message: "the worst-case current exceeds `current`".into(),
                label: "margin to the target current".into(),
            },
        );
    }
    // When little voltage is left across the resistor, the LEDs' forward voltage sets the
    // current (a quarter of the supply: common practice, no source).
    if across_nom < 0.25 * supply_nom {
        let per_step = count * 0.1 / across_nom;
        ctx.warn(format!(
            "only {} of the {} supply is left across the resistor: the current changes by {} for each 0.1 V \
             change of {} forward voltage; consider a current source",
            show(across_nom, Dim::VOLTAGE),
            show(supply_nom, Dim::VOLTAGE),
            percent(per_step),
            if count > 1.0 { "each LED's" } else { "the LED's" }
        ));
    }

    Ok(record(
        "res.led",
        vec![
            ("r", out(r), None),
            ("current", out(current), None),
            ("power", out(power), None),
            (
                "rating",
                Value::Num(Num::constant(rating, Dim::POWER)),
                None,
            ),
        ],
    ))
}

fn si_temperature(kelvin: f64) -> Temperature {
    from_dual(Dual::constant(kelvin))
}

const DIVIDER_PARAMS: &[Param] = &[
    req("vout"),
    req("vref"),
    opt("reference", "\"ground\""),
    opt("series", "E96"),
    opt("tolerance", "1 %"),
    opt("current", ""),
    opt("iadj", "0 A"),
];

pub static DIVIDER: Builtin = Builtin {
    path: "res.divider",
    params: DIVIDER_PARAMS,
    doc: Doc {
        summary: "A pair of preferred-value resistors that sets a regulator's output voltage: \
                  the pair with the smallest error whose divider current is near `current`, and \
                  the output it gives with the reference's and the resistors' tolerances.",
        signature: "res.divider(vout, vref, reference: \"ground\", series: E96, tolerance: 1 %, \
                    current?, iadj: 0 A)",
        formula: "reference \"ground\" (feedback pin referred to ground):\n\
                  \u{20} vout = vref · (1 + r_top / r_bottom),   current = vref / r_bottom\n\
                  reference \"output\" (three-terminal adjustable, reference between output and adjust):\n\
                  \u{20} vout = vref · (1 + r_bottom / r_top) + iadj · r_bottom,   current = vref / r_top\n\
                  search: every preferred value for the current-setting resistor with the current \
                  within [current / 2, 2 · current] (\"ground\") or [current, 2 · current] (\"output\"), \
                  each with the preferred values either side of the ideal partner; the smallest \
                  |error| wins, and between errors within 1e-9 the current closest to `current`",
        arguments: &[
            FieldDoc { name: "vout", unit: "V", meaning: "output voltage wanted" },
            FieldDoc { name: "vref", unit: "V", meaning: "the regulator's reference (feedback) voltage" },
            FieldDoc {
                name: "reference",
                unit: "",
                meaning: "\"ground\": feedback pin between r_top (to the output) and r_bottom (to ground); \
                          \"output\": reference between output and adjust, r_top from output to adjust, \
                          r_bottom from adjust to ground",
            },
            FieldDoc { name: "series", unit: "", meaning: "preferred-number series for both resistors" },
            FieldDoc { name: "tolerance", unit: "%", meaning: "tolerance of both resistors" },
            FieldDoc {
                name: "current",
                unit: "A",
                meaning: "divider current aimed at; 50 µA for \"ground\", 5 mA for \"output\" (the minimum \
                          load of such parts) when omitted (common practice, no source)",
            },
            FieldDoc {
                name: "iadj",
                unit: "A",
                meaning: "current out of the adjust pin into r_bottom (\"output\" only)",
            },
        ],
        fields: &[
            FieldDoc { name: "r_top", unit: "Ω", meaning: "resistor from the output to the feedback/adjust pin" },
            FieldDoc { name: "r_bottom", unit: "Ω", meaning: "resistor from the feedback/adjust pin to ground" },
            FieldDoc { name: "vout", unit: "V", meaning: "output voltage with vref's and the resistors' tolerances" },
            FieldDoc { name: "error", unit: "%", meaning: "vout relative to the wanted vout, minus one" },
            FieldDoc {
                name: "current",
                unit: "A",
                meaning: "divider current: through r_bottom (\"ground\") or r_top (\"output\")",
            },
        ],
        source: "The unloaded voltage divider (Ohm's law and Kirchhoff's current law at the feedback \
                 or adjust node).",
        caveats: "The feedback pin's own bias current is neglected for \"ground\"; it matters with \
                  large resistors (check current × r_top against the pin's bias current in the \
                  datasheet). vref's tolerance dominates with 1 % resistors: give it from the datasheet \
                  over temperature. A feed-forward capacitor across r_top may be needed for stability.",
    },
    call: divider,
};

#[derive(Clone, Copy, PartialEq)]
enum Reference {
    Ground,
    Output,
}

/// The divider's output for a pair (SI).
fn divider_vout(reference: Reference, vref: f64, top: f64, bottom: f64, iadj: f64) -> f64 {
    match reference {
        Reference::Ground => vref * (1.0 + top / bottom),
        Reference::Output => vref * (1.0 + bottom / top) + iadj * bottom,
    }
}

/// The preferred pair (top, bottom) by the rule in the documentation.
fn divider_search(
    series: &Series,
    reference: Reference,
    vout: f64,
    vref: f64,
    target: f64,
    iadj: f64,
) -> Option<(f64, f64)> {
    let ideal = vref / target;
    let (lo, hi) = match reference {
        Reference::Ground => (ideal / 2.0, ideal * 2.0),
        Reference::Output => (ideal / 2.0, ideal),
    };
    // (top, bottom, |error|, distance of the current from the target by ratio)
    let mut best: Option<(f64, f64, f64, f64)> = None;
    for set in series.between(lo, hi) {
        let partner = match reference {
            Reference::Ground => set * (vout / vref - 1.0),
            Reference::Output => (vout - vref) / (vref / set + iadj),
        };
        for other in [
            series.pick(partner, Rounding::Down),
            series.pick(partner, Rounding::Up),
        ]
        .into_iter()
        .flatten()
        {
            let (top, bottom) = match reference {
                Reference::Ground => (other, set),
                Reference::Output => (set, other),
            };
            let err = (divider_vout(reference, vref, top, bottom, iadj) / vout - 1.0).abs();
            let off = (vref / set / target).ln().abs();
            let better = match best {
                None => true,
                Some((_, _, e, o)) => err < e - 1e-9 || ((err - e).abs() <= 1e-9 && off < o),
            };
            if better {
                best = Some((top, bottom, err, off));
            }
        }
    }
    best.map(|(t, b, _, _)| (t, b))
}

fn divider(ctx: &mut CallCtx<'_>, vals: &[Option<Value>]) -> Result<Value, CallError> {
    let a = Args::new(DIVIDER_PARAMS, vals);
    let vout: Voltage = a.q(0)?;
    let vref: Voltage = a.q(1)?;
    let reference = match a.word_or(2, "ground", &["ground", "output"])? {
        "output" => Reference::Output,
        _ => Reference::Ground,
    };
    let series = a.series_or(3, series_named("E96"))?;
    let tol = a.exact_or(4, 0.01)?;
    let target: Current = a.q_or(
        5,
        match reference {
            Reference::Ground => 50e-6,
            Reference::Output => 5e-3,
        },
    )?;
    let iadj: Current = a.q_or(6, 0.0)?;
    a.positive(0, &vout)?;
    a.positive(1, &vref)?;
    a.positive(5, &target)?;
    a.not_negative(6, &iadj)?;
    check_tolerance(&a, 4, tol)?;
    if reference == Reference::Ground && a.value(6).is_some() && !(iadj.value.v.hi == 0.0) {
        return Err(
            CallError::new("`iadj` applies to `reference: \"output\"` only")
                .at(6)
                .hint("a three-terminal adjustable regulator is `reference: \"output\"`"),
        );
    }
    let (vout_nom, vref_nom) = (vout.value.value(), vref.value.value());
    if ctx.is_nominal() && vout_nom <= vref_nom {
        return Err(CallError::new(format!(
            "a divider cannot make {} from a reference of {}: vout must be above vref",
            show(vout_nom, Dim::VOLTAGE),
            show(vref_nom, Dim::VOLTAGE)
        ))
        .at(0)
        .hint("at vout = vref connect the output straight to the feedback pin"));
    }
    let (target_nom, iadj_nom) = (target.value.value(), iadj.value.value());
    let search = || {
        divider_search(series, reference, vout_nom, vref_nom, target_nom, iadj_nom)
            .ok_or_else(|| CallError::new("no pair of preferred values fits").at(0))
    };
    let top_nom = ctx.choose("r_top", || search().map(|p| p.0))?;
    let bottom_nom = ctx.choose("r_bottom", || search().map(|p| p.1))?;
    let part = |ctx: &mut CallCtx<'_>, key: &'static str, v: f64| -> Resistance {
        let label = PartLabel {
            name: key,
            between: " = ",
            value: v,
            dim: Dim::RESISTANCE,
            tolerance: tol,
        };
        from_dual(ctx.part_input(
            key,
            label,
            v,
            v * (1.0 - tol),
            v * (1.0 + tol),
            Dim::RESISTANCE,
        ))
    };
    let top = part(ctx, "r_top", top_nom);
    let bottom = part(ctx, "r_bottom", bottom_nom);

    let one: Ratio = si(1.0);
    let (made, current): (Voltage, Current) = match reference {
        Reference::Ground => (vref * (one + top / bottom), vref / bottom),
        Reference::Output => (vref * (one + bottom / top) + iadj * bottom, vref / top),
    };
    let error: Ratio = made / vout - one;

    Ok(record(
        "res.divider",
        vec![
            ("r_top", out(top), None),
            ("r_bottom", out(bottom), None),
            ("vout", out(made), None),
            ("error", out(error), Some("%")),
            ("current", out(current), None),
        ],
    ))
}

const DERATE_PARAMS: &[Param] = &[
    req("rating"),
    req("temperature"),
    opt("knee", "70 °C"),
    opt("zero", "155 °C"),
];

pub static DERATE: Builtin = Builtin {
    path: "res.derate",
    params: DERATE_PARAMS,
    doc: Doc {
        summary: "The power a resistor may dissipate at a temperature, on the usual linear \
                  derating curve: full rating up to the knee, falling to zero at `zero`.",
        signature: "res.derate(rating, temperature, knee: 70 °C, zero: 155 °C)",
        formula: "allowed = rating · clamp((zero − temperature) / (zero − knee), 0, 1)",
        arguments: &[
            FieldDoc { name: "rating", unit: "W", meaning: "the resistor's rated power" },
            FieldDoc { name: "temperature", unit: "°C", meaning: "ambient temperature around the resistor" },
            FieldDoc { name: "knee", unit: "°C", meaning: "temperature up to which the full rating applies" },
            FieldDoc { name: "zero", unit: "°C", meaning: "temperature at which the allowed power reaches zero" },
        ],
        fields: &[FieldDoc { name: "(result)", unit: "W", meaning: "allowed dissipation" }],
        source: "The linear derating curve printed in resistor datasheets; the 70 °C knee and 155 °C \
                 end point are common for thick-film chip resistors (common practice, no source).",
        caveats: "Curves differ between resistor types (some knee at 125 °C, some end at 175 °C or \
                  more): use the part's datasheet. The rating assumes the datasheet's board and \
                  pad layout. A resistor at its rating runs hot: above about 60 °C it burns on touch.",
    },
    call: derate,
};

fn derate(_ctx: &mut CallCtx<'_>, vals: &[Option<Value>]) -> Result<Value, CallError> {
    let a = Args::new(DERATE_PARAMS, vals);
    let rating: Power = a.q(0)?;
    let t = a.temp(1)?;
    let knee = a.temp_or(2, KNEE_K)?;
    let zero = a.temp_or(3, ZERO_K)?;
    a.not_negative(0, &rating)?;
    if !above(difference(zero, knee).value.v.lo, 0.0) {
        return Err(CallError::new("`zero` must be above `knee`").at(3));
    }
    Ok(out(rating * derate_share(t, knee, zero)))
}
