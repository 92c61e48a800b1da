//! Regulators: the linear pass element (`reg.linear`) and the switching converter
//! (`reg.switching`).

use super::args::{above, at_least, opt, req, show, Args};
use super::quantity::{self as q, from_dual, out, record, si, Current, Power, Ratio, Voltage};
use super::{Builtin, CallCtx, CallError, Doc, FieldDoc, Param, WarnRule, WarnWhen};
use crate::num::{Dual, Interval};
use crate::units::{format_number, Dim};
use crate::value::{Num, Value};

const LINEAR_PARAMS: &[Param] = &[
    req("vin"),
    req("vout"),
    req("iout"),
    opt("iq", "0 A"),
    opt("dropout", "0 V"),
    opt("vin_max", ""),
    opt("iout_max", ""),
];

pub static LINEAR: Builtin = Builtin {
    path: "reg.linear",
    params: LINEAR_PARAMS,
    doc: Doc {
        summary: "A linear regulator (series pass element, LDO or three-terminal): the power it \
                  draws and delivers, the heat it makes, and its margin to dropout.",
        signature: "reg.linear(vin, vout, iout, iq: 0 A, dropout: 0 V, vin_max?, iout_max?)",
        formula: "headroom = vin − vout − dropout\n\
                  vo = min(vout, vin − dropout)      (in dropout the output sags)\n\
                  iin = iout + iq\n\
                  pin = vin · iin\n\
                  pout = vo · iout\n\
                  loss = (vin − vo) · iout + vin · iq\n\
                  efficiency = pout / pin",
        arguments: &[
            FieldDoc {
                name: "vin",
                unit: "V",
                meaning: "input voltage",
            },
            FieldDoc {
                name: "vout",
                unit: "V",
                meaning: "output voltage the regulator is set to",
            },
            FieldDoc {
                name: "iout",
                unit: "A",
                meaning: "load current",
            },
            FieldDoc {
                name: "iq",
                unit: "A",
                meaning: "quiescent (ground) current, drawn from the input and returned to ground",
            },
            FieldDoc {
                name: "dropout",
                unit: "V",
                meaning: "smallest input-to-output difference at which it still regulates; may be \
                          an expression of the load (`0.15 V + 1.2 Ω * iload`)",
            },
            FieldDoc {
                name: "vin_max",
                unit: "V",
                meaning: "the part's highest rated input (warns above)",
            },
            FieldDoc {
                name: "iout_max",
                unit: "A",
                meaning: "the part's rated output current (warns above)",
            },
        ],
        fields: &[
            FieldDoc {
                name: "pin",
                unit: "W",
                meaning: "power drawn from the input",
            },
            FieldDoc {
                name: "pout",
                unit: "W",
                meaning: "power delivered to the load",
            },
            FieldDoc {
                name: "loss",
                unit: "W",
                meaning: "heat dissipated in the regulator",
            },
            FieldDoc {
                name: "efficiency",
                unit: "%",
                meaning: "pout / pin",
            },
            FieldDoc {
                name: "iin",
                unit: "A",
                meaning: "input current: load plus quiescent current",
            },
            FieldDoc {
                name: "headroom",
                unit: "V",
                meaning: "input minus output minus dropout; below zero the regulator is in dropout",
            },
        ],
        source: "Ohm's law and the power balance of a series pass element: the load current flows \
                 through the pass element, the quiescent current from the input to ground.",
        caveats:
            "Where headroom falls below zero the output is taken to sag to vin − dropout with \
                  the load current unchanged; a resistive load would draw less. Dropout depends on \
                  load and temperature: take it from the part's datasheet at your load. The loss \
                  is heat in the package: check it with heat.junction, and confirm with the part's \
                  datasheet and by measurement. Surfaces above about 60 °C burn on touch.",
    },
    call: linear,
};

fn linear(ctx: &mut CallCtx<'_>, vals: &[Option<Value>]) -> Result<Value, CallError> {
    let a = Args::new(LINEAR_PARAMS, vals);
    let vin: Voltage = a.q(0)?;
    let vout: Voltage = a.q(1)?;
    let iout: Current = a.q(2)?;
    let iq: Current = a.q_or(3, 0.0)?;
    let dropout: Voltage = a.q_or(4, 0.0)?;
    let vin_max: Option<Voltage> = a.q_opt(5)?;
    let iout_max: Option<Current> = a.q_opt(6)?;
    a.positive(0, &vin)?;
    a.positive(1, &vout)
        .map_err(|e| e.hint("for a negative regulator enter the magnitudes of vin and vout"))?;
    a.not_negative(2, &iout)?;
    a.not_negative(3, &iq)?;
    a.not_negative(4, &dropout)?;
    if let Some(m) = &vin_max {
        a.positive(5, m)?;
    }
    if let Some(m) = &iout_max {
        a.positive(6, m)?;
    }
    // At the nominal point the design must make sense; at a worst corner vout ≥ vin is
    // merely dropout, which the headroom probe reports.
    if ctx.is_nominal() && vout.value.value() >= vin.value.value() {
        return Err(CallError::new(format!(
            "a linear regulator cannot make {} from {}: its output must be below its input",
            show(vout.value.value(), Dim::VOLTAGE),
            show(vin.value.value(), Dim::VOLTAGE)
        ))
        .at(1)
        .hint("to raise the voltage use reg.switching (a boost converter)"));
    }

    let zero_v: Voltage = si(0.0);
    let headroom = vin - vout - dropout;
    // The output: vout while regulating, vin − dropout in dropout (never below zero).
    let vo = q::min(vout, q::max(vin - dropout, zero_v));
    // vin − vo written so that each branch holds vin once (tighter interval bounds).
    let across = q::max(vin - vout, q::min(dropout, vin));
    let loss: Power = across * iout + vin * iq;
    let pout: Power = vo * iout;
    let iin: Current = iout + iq;
    let pin: Power = vin * iin;
    // efficiency = (vo / vin) · (iout / (iout + iq)), each factor in a form with every input
    // once, so that its monotonicity can be proven.
    let one: Ratio = si(1.0);
    let zero: Ratio = si(0.0);
    let conversion: Ratio = q::min(vout / vin, q::max(one - dropout / vin, zero));
    let load_share: Ratio = if iq.value.v == Interval::ZERO && iq.value.d == Interval::ZERO {
        one
    } else if iout.value.v.lo > 0.0 {
        from_dual(Dual::constant(1.0) / (Dual::constant(1.0) + (iq / iout).value))
    } else if iin.value.v.lo > 0.0 {
        iout / iin
    } else {
        return Err(CallError::new(
            "the efficiency is undefined with neither load nor quiescent current",
        )
        .at(2)
        .hint("give a load current above zero"));
    };
    let efficiency = conversion * load_share;

    ctx.probe(
        "headroom",
        Num::new(headroom.value, Dim::VOLTAGE),
        WarnRule {
            when: WarnWhen::MinBelow(0.0),
            message: "in dropout: the output sags to vin − dropout".into(),
            label: "headroom".into(),
        },
    );
    if let Some(m) = vin_max {
        ctx.probe(
            "vin_max",
            Num::new((m - vin).value, Dim::VOLTAGE),
            WarnRule {
                when: WarnWhen::MinBelow(0.0),
                message: "the input exceeds vin_max".into(),
                label: "margin to vin_max".into(),
            },
        );
    }
    if let Some(m) = iout_max {
        ctx.probe(
            "iout_max",
            Num::new((m - iout).value, Dim::CURRENT),
            WarnRule {
                when: WarnWhen::MinBelow(0.0),
                message: "the load exceeds iout_max".into(),
                label: "margin to iout_max".into(),
            },
        );
    }

    Ok(record(
        "reg.linear",
        vec![
            ("pin", out(pin), None),
            ("pout", out(pout), None),
            ("loss", out(loss), None),
            ("efficiency", out(efficiency), Some("%")),
            ("iin", out(iin), None),
            ("headroom", out(headroom), None),
        ],
    ))
}

const SWITCHING_PARAMS: &[Param] = &[
    req("vin"),
    req("vout"),
    req("iout"),
    req("efficiency"),
    opt("iq", "0 A"),
];

pub static SWITCHING: Builtin = Builtin {
    path: "reg.switching",
    params: SWITCHING_PARAMS,
    doc: Doc {
        summary: "A switching converter (buck, boost, buck-boost) described by its efficiency: \
                  the power it draws, the heat it makes and its input current. Rails cascade by \
                  using one stage's `iin` as the next stage's `iout`.",
        signature: "reg.switching(vin, vout, iout, efficiency, iq: 0 A)",
        formula: "pout = vout · iout\n\
                  pin = pout / η + vin · iq\n\
                  loss = pin − pout = pout · (1/η − 1) + vin · iq\n\
                  iin = pin / vin",
        arguments: &[
            FieldDoc { name: "vin", unit: "V", meaning: "input voltage" },
            FieldDoc { name: "vout", unit: "V", meaning: "output voltage" },
            FieldDoc { name: "iout", unit: "A", meaning: "load current" },
            FieldDoc {
                name: "efficiency",
                unit: "%",
                meaning: "η, the converter's efficiency at this load and input (from its datasheet curves)",
            },
            FieldDoc {
                name: "iq",
                unit: "A",
                meaning: "supply current not covered by η (e.g. a controller's own supply), drawn from the input",
            },
        ],
        fields: &[
            FieldDoc { name: "pin", unit: "W", meaning: "power drawn from the input" },
            FieldDoc { name: "pout", unit: "W", meaning: "power delivered to the load" },
            FieldDoc { name: "loss", unit: "W", meaning: "heat dissipated in the converter" },
            FieldDoc { name: "iin", unit: "A", meaning: "average input current" },
        ],
        source: "The power balance of a converter with efficiency η = pout / pin (conservation of energy).",
        caveats: "Efficiency varies strongly with load, input voltage and temperature; a single \
                  figure holds only near the operating point it was read at, so give it a range. \
                  The input current is an average: the peak and ripple currents are larger. \
                  Confirm with the part's datasheet and by measurement.",
    },
    call: switching,
};

fn switching(_ctx: &mut CallCtx<'_>, vals: &[Option<Value>]) -> Result<Value, CallError> {
    let a = Args::new(SWITCHING_PARAMS, vals);
    let vin: Voltage = a.q(0)?;
    let vout: Voltage = a.q(1)?;
    let iout: Current = a.q(2)?;
    let eta: Ratio = a.q(3)?;
    let iq: Current = a.q_or(4, 0.0)?;
    a.positive(0, &vin)?;
    a.positive(1, &vout)
        .map_err(|e| e.hint("for a negative or inverting rail enter the magnitudes"))?;
    a.not_negative(2, &iout)?;
    a.not_negative(4, &iq)?;
    let e = eta.value.v;
    if !at_least(1.0, e.hi) {
        return Err(CallError::new(format!(
            "an efficiency above 100 % is impossible, but `efficiency` reaches {} %",
            format_number(e.hi * 100.0, 3)
        ))
        .at(3)
        .hint("write efficiencies in percent: `efficiency: 88 %`"));
    }
    if !above(e.lo, 0.0) {
        return Err(CallError::new(format!(
            "`efficiency` must be above 0 %, but it reaches {} %",
            format_number(e.lo * 100.0, 3)
        ))
        .at(3));
    }

    let one: Ratio = si(1.0);
    let pout: Power = vout * iout;
    let loss: Power = pout * (one / eta - one) + vin * iq;
    let pin: Power = pout / eta + vin * iq;
    let iin: Current = pout / (eta * vin) + iq;

    Ok(record(
        "reg.switching",
        vec![
            ("pin", out(pin), None),
            ("pout", out(pout), None),
            ("loss", out(loss), None),
            ("iin", out(iin), None),
        ],
    ))
}
