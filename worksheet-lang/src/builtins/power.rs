//! Power sources: battery run time (`power.battery_hours`).

use super::args::{at_least, opt, req, Args};
use super::quantity::{from_dual, out, Charge, Current, Ratio, Time};
use super::{Builtin, CallCtx, CallError, Doc, FieldDoc, Param};
use crate::units::format_number;
use crate::value::Value;

const BATTERY_PARAMS: &[Param] = &[
    req("capacity"),
    req("current"),
    opt("peukert", "1"),
    opt("rated_hours", "20 h"),
];

pub static BATTERY_HOURS: Builtin = Builtin {
    path: "power.battery_hours",
    params: BATTERY_PARAMS,
    doc: Doc {
        summary: "The run time of a battery at a constant discharge current, by Peukert's law.",
        signature: "power.battery_hours(capacity, current, peukert: 1, rated_hours: 20 h)",
        formula: "t = H · (C / (I · H))^k\n\
                  C = capacity rated at the H-hour rate, I = current, k = Peukert's exponent \
                  (k = 1 gives t = C / I)",
        arguments: &[
            FieldDoc { name: "capacity", unit: "A·h", meaning: "rated capacity C" },
            FieldDoc { name: "current", unit: "A", meaning: "constant discharge current I" },
            FieldDoc {
                name: "peukert",
                unit: "",
                meaning: "Peukert's exponent k (1 for an ideal cell; larger for lead-acid) from the maker's data",
            },
            FieldDoc {
                name: "rated_hours",
                unit: "h",
                meaning: "H, the discharge time at which the capacity is rated (20 h is usual for lead-acid)",
            },
        ],
        fields: &[FieldDoc { name: "(result)", unit: "h", meaning: "run time t" }],
        source: "Peukert (1897), in the form referred to the rated capacity and discharge time.",
        caveats: "Peukert's law holds for a constant current at a fixed temperature; cold, age and \
                  pulsed loads shorten the run time, and the usable capacity ends at the cut-off \
                  voltage the load tolerates. Lithium cells need their safety standards (and a \
                  protection circuit); follow the cell maker's limits and the applicable codes.",
    },
    call: battery_hours,
};

fn battery_hours(ctx: &mut CallCtx<'_>, vals: &[Option<Value>]) -> Result<Value, CallError> {
    // Whatever the run time, the results of a battery carry its caution.
    ctx.hazard(crate::results::Hazard::Battery);
    let a = Args::new(BATTERY_PARAMS, vals);
    let capacity: Charge = a
        .q(0)
        .map_err(|e| e.hint("give the capacity as a charge, e.g. `2200 mAh`"))?;
    let current: Current = a.q(1)?;
    let k: Ratio = a.q_or(2, 1.0)?;
    let hours: Time = a.q_or(3, 20.0 * 3600.0)?;
    a.positive(0, &capacity)?;
    a.positive(1, &current)?;
    a.positive(3, &hours)?;
    if !at_least(k.value.v.lo, 1.0) {
        return Err(CallError::new(format!(
            "Peukert's exponent is at least 1, but `peukert` reaches {}",
            format_number(k.value.v.lo, 3)
        ))
        .at(2)
        .hint("1 for an ideal cell; take k from the battery maker's data"));
    }
    // The law is applied to the dimensionless ratio C / (I·H).
    let ratio: Ratio = capacity / (current * hours);
    let t: Time = hours * from_dual::<uom::si::ratio::Dimension>(ratio.value.powf(k.value));
    Ok(out(t))
}
