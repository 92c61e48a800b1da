//! Heat: junction temperature through a chain of thermal resistances, heatsink sizing, the
//! power and ambient limits of a package, and pulsed loads on a Foster network.

use super::args::{above, at_least, opt, req, Args};
use super::quantity::{
    arg, difference, from_dual, out, out_temperature, si, Power, Ratio, Temperature,
    TemperatureInterval, ThermalResistance, Time,
};
use super::{Builtin, CallCtx, CallError, Doc, FieldDoc, Param, WarnRule, WarnWhen};
use crate::num::Dual;
use crate::units::Dim;
use crate::value::{Num, Value};

/// The caveat every θ-based result carries.
const THETA_CAVEAT: &str = "θJA from a datasheet holds only for the board it was measured on \
     (JESD51 test boards); on your board it may differ by a factor of two or more. Copper area, \
     airflow, neighbouring parts and altitude change it. Surfaces above about 60 °C burn on \
     touch. Confirm with the part's datasheet, by measurement and with the applicable codes.";

const JUNCTION_PARAMS: &[Param] = &[
    req("power"),
    req("ambient"),
    req("theta"),
    opt("tj_max", ""),
];

pub static JUNCTION: Builtin = Builtin {
    path: "heat.junction",
    params: JUNCTION_PARAMS,
    doc: Doc {
        summary: "The junction temperature of a part dissipating `power` through the thermal \
                  resistance `theta` to the ambient. Chain resistances with + (series) and || \
                  (parallel paths): `6 K/W + 0.4 K/W + (22 K/W || 60 K/W)`.",
        signature: "heat.junction(power, ambient, theta, tj_max?)",
        formula: "tj = ambient + power · θ\n\
                  θ = θJC + θCS + θSA for a part on a heatsink (θJA for a part on its board)",
        arguments: &[
            FieldDoc { name: "power", unit: "W", meaning: "power dissipated in the part" },
            FieldDoc { name: "ambient", unit: "°C", meaning: "temperature of the surrounding air" },
            FieldDoc { name: "theta", unit: "K/W", meaning: "thermal resistance from junction to ambient" },
            FieldDoc {
                name: "tj_max",
                unit: "°C",
                meaning: "the part's highest junction temperature (warns within 10 K of it and over it)",
            },
        ],
        fields: &[FieldDoc {
            name: "(result)",
            unit: "°C",
            meaning: "junction temperature, an absolute temperature",
        }],
        source: "The steady-state thermal-resistance model with the definitions of θJA and θJC in \
                 JEDEC JESD51-1 and JESD51-2 (θ = ΔT / P; resistances in a heat path add in series).",
        caveats: THETA_CAVEAT,
    },
    call: junction,
};

fn junction(ctx: &mut CallCtx<'_>, vals: &[Option<Value>]) -> Result<Value, CallError> {
    let a = Args::new(JUNCTION_PARAMS, vals);
    let power: Power = a.q(0)?;
    let ambient = a.temp(1)?;
    let theta: ThermalResistance = a.q(2)?;
    let tj_max = a.temp_opt(3)?;
    a.not_negative(0, &power)?;
    a.positive(2, &theta)?;
    let rise: TemperatureInterval = power * theta;
    let tj: Temperature = ambient + rise;
    if let Some(limit) = tj_max {
        let margin = difference(limit, tj);
        probe_margin(ctx, margin);
    }
    Ok(out_temperature(tj))
}

/// The two junction warnings on the margin tj_max − tj.
fn probe_margin(ctx: &mut CallCtx<'_>, margin: TemperatureInterval) {
    let value = Num::new(margin.value, Dim::TEMPERATURE);
    ctx.probe(
        "tj_near",
        value,
        WarnRule {
            when: WarnWhen::MinBelow(10.0),
            message: "the junction comes within 10 K of tj_max".into(),
            label: "margin to tj_max".into(),
        },
    );
    ctx.probe(
        "tj_over",
        value,
        WarnRule {
            when: WarnWhen::MinBelow(0.0),
            message: "the junction exceeds tj_max".into(),
            label: "margin to tj_max".into(),
        },
    );
}

const SINK_PARAMS: &[Param] = &[
    req("power"),
    req("ambient"),
    req("tj_max"),
    req("jc"),
    req("cs"),
];

pub static SINK_FOR: Builtin = Builtin {
    path: "heat.sink_for",
    params: SINK_PARAMS,
    doc: Doc {
        summary: "The largest heatsink-to-ambient thermal resistance θSA that keeps the junction \
                  at or below tj_max. Pick a heatsink whose θSA is at most the worst-case \
                  (smallest) value.",
        signature: "heat.sink_for(power, ambient, tj_max, jc, cs)",
        formula: "θSA = (tj_max − ambient) / power − θJC − θCS",
        arguments: &[
            FieldDoc { name: "power", unit: "W", meaning: "power dissipated in the part" },
            FieldDoc { name: "ambient", unit: "°C", meaning: "temperature of the air around the heatsink" },
            FieldDoc { name: "tj_max", unit: "°C", meaning: "junction temperature not to be exceeded" },
            FieldDoc { name: "jc", unit: "K/W", meaning: "θJC, junction to case, from the part's datasheet" },
            FieldDoc {
                name: "cs",
                unit: "K/W",
                meaning: "θCS, case to sink: the interface (grease, pad, insulating washer); no default",
            },
        ],
        fields: &[FieldDoc {
            name: "(result)",
            unit: "K/W",
            meaning: "largest allowed θSA; below zero no heatsink can do it",
        }],
        source: "The series thermal path θJA = θJC + θCS + θSA with the definitions of θJA and θJC \
                 in JEDEC JESD51-1 and JESD51-2.",
        caveats: "A heatsink's θSA depends on its orientation, airflow and the power it carries \
                  (its datasheet curve, not one number); θCS depends on mounting pressure and flatness. \
                  A heatsink at a live potential needs insulation and creepage distances. The \
                  heatsink surface runs hot: above about 60 °C it burns on touch. Confirm with the \
                  part's and the heatsink's datasheets, by measurement and with the applicable codes.",
    },
    call: sink_for,
};

fn sink_for(ctx: &mut CallCtx<'_>, vals: &[Option<Value>]) -> Result<Value, CallError> {
    let a = Args::new(SINK_PARAMS, vals);
    let power: Power = a.q(0)?;
    let ambient = a.temp(1)?;
    let tj_max = a.temp(2)?;
    let jc: ThermalResistance = a.q(3)?;
    let cs: ThermalResistance = a.q(4)?;
    a.positive(0, &power)?;
    a.not_negative(3, &jc)?;
    a.not_negative(4, &cs)?;
    let budget: TemperatureInterval = difference(tj_max, ambient);
    let theta_sa: ThermalResistance = budget / power - jc - cs;
    ctx.probe(
        "theta_sa",
        Num::new(theta_sa.value, Dim::THERMAL_RESISTANCE),
        WarnRule {
            when: WarnWhen::MinBelow(0.0),
            message: "no heatsink can do this: even an ideal one leaves the junction above tj_max"
                .into(),
            label: "required θSA".into(),
        },
    );
    Ok(out(theta_sa))
}

const MAX_POWER_PARAMS: &[Param] = &[req("ambient"), req("tj_max"), req("theta")];

pub static MAX_POWER: Builtin = Builtin {
    path: "heat.max_power",
    params: MAX_POWER_PARAMS,
    doc: Doc {
        summary: "The largest power a part may dissipate through `theta` at `ambient` without its \
                  junction exceeding tj_max. Design to the worst-case (smallest) value.",
        signature: "heat.max_power(ambient, tj_max, theta)",
        formula: "P = (tj_max − ambient) / θ",
        arguments: &[
            FieldDoc {
                name: "ambient",
                unit: "°C",
                meaning: "temperature of the surrounding air",
            },
            FieldDoc {
                name: "tj_max",
                unit: "°C",
                meaning: "junction temperature not to be exceeded",
            },
            FieldDoc {
                name: "theta",
                unit: "K/W",
                meaning: "thermal resistance from junction to ambient",
            },
        ],
        fields: &[FieldDoc {
            name: "(result)",
            unit: "W",
            meaning: "largest allowed dissipation",
        }],
        source: "The steady-state thermal-resistance model with the definitions of θJA and θJC in \
                 JEDEC JESD51-1 and JESD51-2.",
        caveats: THETA_CAVEAT,
    },
    call: max_power,
};

fn max_power(ctx: &mut CallCtx<'_>, vals: &[Option<Value>]) -> Result<Value, CallError> {
    let a = Args::new(MAX_POWER_PARAMS, vals);
    let ambient = a.temp(0)?;
    let tj_max = a.temp(1)?;
    let theta: ThermalResistance = a.q(2)?;
    a.positive(2, &theta)?;
    let p: Power = difference(tj_max, ambient) / theta;
    ctx.probe(
        "power",
        Num::new(p.value, Dim::POWER),
        WarnRule {
            when: WarnWhen::MinBelow(0.0),
            message: "the ambient exceeds tj_max: the part may dissipate nothing".into(),
            label: "allowed power".into(),
        },
    );
    Ok(out(p))
}

const MAX_AMBIENT_PARAMS: &[Param] = &[req("power"), req("tj_max"), req("theta")];

pub static MAX_AMBIENT: Builtin = Builtin {
    path: "heat.max_ambient",
    params: MAX_AMBIENT_PARAMS,
    doc: Doc {
        summary: "The highest ambient temperature at which a part dissipating `power` through \
                  `theta` keeps its junction at or below tj_max. Design to the worst-case \
                  (lowest) value.",
        signature: "heat.max_ambient(power, tj_max, theta)",
        formula: "ambient = tj_max − power · θ",
        arguments: &[
            FieldDoc {
                name: "power",
                unit: "W",
                meaning: "power dissipated in the part",
            },
            FieldDoc {
                name: "tj_max",
                unit: "°C",
                meaning: "junction temperature not to be exceeded",
            },
            FieldDoc {
                name: "theta",
                unit: "K/W",
                meaning: "thermal resistance from junction to ambient",
            },
        ],
        fields: &[FieldDoc {
            name: "(result)",
            unit: "°C",
            meaning: "highest allowed ambient, an absolute temperature",
        }],
        source: "The steady-state thermal-resistance model with the definitions of θJA and θJC in \
                 JEDEC JESD51-1 and JESD51-2.",
        caveats: THETA_CAVEAT,
    },
    call: max_ambient,
};

fn max_ambient(_ctx: &mut CallCtx<'_>, vals: &[Option<Value>]) -> Result<Value, CallError> {
    let a = Args::new(MAX_AMBIENT_PARAMS, vals);
    let power: Power = a.q(0)?;
    let tj_max = a.temp(1)?;
    let theta: ThermalResistance = a.q(2)?;
    a.not_negative(0, &power)?;
    a.positive(2, &theta)?;
    let rise: TemperatureInterval = power * theta;
    Ok(out_temperature(tj_max - rise))
}

const PULSE_PARAMS: &[Param] = &[
    req("power"),
    req("duration"),
    req("network"),
    opt("period", ""),
    opt("base", "0 W"),
];

pub static PULSE: Builtin = Builtin {
    path: "heat.pulse",
    params: PULSE_PARAMS,
    doc: Doc {
        summary: "The temperature rise at the end of a rectangular power pulse, single or \
                  repeated, on a Foster thermal network `[[R1, τ1], [R2, τ2], …]` as power-device \
                  datasheets give it.",
        signature: "heat.pulse(power, duration, network, period?, base: 0 W)",
        formula: "single pulse:  ΔT = base · Σ Rᵢ + power · Σ Rᵢ (1 − e^(−t/τᵢ))\n\
                  with period T: ΔT = base · Σ Rᵢ + power · Σ Rᵢ (1 − e^(−t/τᵢ)) / (1 − e^(−T/τᵢ))\n\
                  (t = duration; the second form is the peak of the periodic steady state)",
        arguments: &[
            FieldDoc { name: "power", unit: "W", meaning: "pulse power, above the steady `base` load" },
            FieldDoc { name: "duration", unit: "s", meaning: "pulse length t" },
            FieldDoc {
                name: "network",
                unit: "[[K/W, s], …]",
                meaning: "Foster terms: thermal resistance Rᵢ and time constant τᵢ of each",
            },
            FieldDoc {
                name: "period",
                unit: "s",
                meaning: "repetition period T (at least the duration); omitted for a single pulse",
            },
            FieldDoc { name: "base", unit: "W", meaning: "steady power dissipated under the pulses" },
        ],
        fields: &[FieldDoc {
            name: "(result)",
            unit: "K",
            meaning: "temperature rise at the end of the pulse above the network's reference point",
        }],
        source: "The Foster form of the transient thermal impedance Zth(t) = Σ Rᵢ (1 − e^(−t/τᵢ)) \
                 used in power-semiconductor datasheets; the periodic peak follows by superposing \
                 the pulse train (a geometric series per term).",
        caveats: "The rise is above the network's reference point, usually the case (a junction-to-case \
                  network); add the case temperature yourself. A device's and a heatsink's Foster terms \
                  cannot simply be joined into one network: the terms have no physical nodes, so \
                  joining them needs a Cauer network. Surfaces above about 60 °C burn on touch; \
                  confirm with the part's datasheet and by measurement.",
    },
    call: pulse,
};

fn pulse(_ctx: &mut CallCtx<'_>, vals: &[Option<Value>]) -> Result<Value, CallError> {
    let a = Args::new(PULSE_PARAMS, vals);
    let power: Power = a.q(0)?;
    let duration: Time = a.q(1)?;
    let items = a.list(2)?;
    let period: Option<Time> = a.q_opt(3)?;
    let base: Power = a.q_or(4, 0.0)?;
    a.not_negative(0, &power)?;
    a.positive(1, &duration)?;
    a.not_negative(4, &base)?;
    if let Some(t) = &period {
        a.positive(3, t)?;
        if !at_least((*t - duration).value.v.lo, 0.0) {
            return Err(CallError::new("`period` must be at least `duration`")
                .at(3)
                .hint("the period runs from the start of one pulse to the start of the next"));
        }
    }
    let network = foster_terms(items)?;

    let one = Dual::constant(1.0);
    let mut z: ThermalResistance = si(0.0);
    let mut r_total: ThermalResistance = si(0.0);
    for (r, tau) in network {
        let x: Ratio = duration / tau;
        let mut share = one - (-x.value).exp();
        if let Some(t) = period {
            let y: Ratio = t / tau;
            share = share / (one - (-y.value).exp());
        }
        let share: Ratio = from_dual(share);
        z = z + r * share;
        r_total = r_total + r;
    }
    let rise: TemperatureInterval = power * z + base * r_total;
    Ok(out(rise))
}

/// The `[[R, τ], …]` terms of a Foster network.
fn foster_terms(items: &[Value]) -> Result<Vec<(ThermalResistance, Time)>, CallError> {
    let shape = || {
        CallError::new("`network` must be a list of [R, τ] pairs")
            .at(2)
            .hint("for example `[[0.2 K/W, 1 ms], [0.5 K/W, 20 ms]]`")
    };
    if items.is_empty() {
        return Err(shape());
    }
    let mut terms = Vec::with_capacity(items.len());
    for item in items {
        let Value::List(pair) = item else {
            return Err(shape());
        };
        let [r, tau] = &pair[..] else {
            return Err(shape());
        };
        let r: ThermalResistance = arg(r, "R of a network term").map_err(|e| e.at(2))?;
        let tau: Time = arg(tau, "τ of a network term").map_err(|e| e.at(2))?;
        if !at_least(r.value.v.lo, 0.0) {
            return Err(CallError::new("a network term's R must not be negative").at(2));
        }
        if !above(tau.value.v.lo, 0.0) {
            return Err(CallError::new("a network term's τ must be positive").at(2));
        }
        terms.push((r, tau));
    }
    Ok(terms)
}
