//! The changes between two runs of one kind of check on consecutive builds of a serial
//! (the rules are in the module doc of `history` and in docs/ledger.md): every number
//! both runs carry, the soft-iron element that moved most, every rod's verdict and the
//! overall verdict.

use serde_json::Value;

use super::history::{Change, ChangeRules, Flag};
use super::quantity::{Quantity, QuantityValue};
use super::Run;

/// Append to `out` the changes from run `a` (earlier build) to run `b` (later build)
/// of the same kind, in this order: numbers (in `b`'s order), the largest soft-iron
/// element change, rod verdicts (every rod named on either side), the overall verdict.
pub(super) fn compare(a: &Run, b: &Run, rules: &ChangeRules, out: &mut Vec<Change>) {
    let pair = Pair { a, b, rules };
    if let Some(worst) = pair.numbers(out) {
        out.push(pair.soft_iron_change(worst));
    }
    pair.rod_verdicts(out);
    out.extend(pair.overall_verdict());
}

/// Two runs of one kind: `a` from the earlier build, `b` from the later.
struct Pair<'a> {
    a: &'a Run,
    b: &'a Run,
    rules: &'a ChangeRules,
}

/// The soft-iron element whose value moved most: its name (`01` for W[0][1]), its
/// values in the earlier and later build and the combined 1σ of the difference.
struct SoftIronMove {
    element: String,
    from: f64,
    to: f64,
    sigma: Option<f64>,
}

impl Pair<'_> {
    /// A change of `quantity` (in `unit`) from `from` to `to` with no difference or σ.
    fn change(&self, quantity: &str, unit: &str, (from, to): (Value, Value), flag: Flag) -> Change {
        Change {
            serial: self.b.serial.clone(),
            from_build: self.a.build.clone(),
            to_build: self.b.build.clone(),
            quantity: quantity.to_string(),
            delta: None,
            sigma: None,
            flag,
            kind: self.b.kind.clone(),
            unit: String::from(unit),
            from,
            to,
            from_run: self.a.id,
            to_run: self.b.id,
            detail: None,
        }
    }

    /// A change of a number, `to` − `from` judged against its combined 1σ.
    fn number_change(
        &self,
        quantity: &str,
        unit: &str,
        from: f64,
        to: f64,
        sigma: Option<f64>,
    ) -> Change {
        let delta = to - from;
        Change {
            delta: Some(delta),
            sigma,
            ..self.change(
                quantity,
                unit,
                (from.into(), to.into()),
                judge(delta, sigma, self.rules),
            )
        }
    }

    /// Push a change for every number of `b` that `a` carries too, except the
    /// soft-iron elements, of which the one that moved most is returned.
    fn numbers(&self, out: &mut Vec<Change>) -> Option<SoftIronMove> {
        let mut worst: Option<SoftIronMove> = None;
        for x in &self.b.quantities {
            let (
                QuantityValue::Number {
                    value: vb,
                    sigma: sb,
                },
                Some(QuantityValue::Number {
                    value: va,
                    sigma: sa,
                }),
            ) = (&x.value, find(&self.a.quantities, &x.name))
            else {
                continue;
            };
            let delta = vb - va;
            if let Some(elem) = x.name.strip_prefix("soft_iron_") {
                if worst
                    .as_ref()
                    .map_or(true, |w| delta.abs() > (w.to - w.from).abs())
                {
                    worst = Some(SoftIronMove {
                        element: elem.to_string(),
                        from: va,
                        to: *vb,
                        sigma: combine(sa, *sb),
                    });
                }
                continue;
            }
            out.push(self.number_change(&x.name, &x.unit, va, *vb, combine(sa, *sb)));
        }
        worst
    }

    /// `soft_iron_max_element`: the element that moved most, named in the detail.
    fn soft_iron_change(&self, w: SoftIronMove) -> Change {
        let detail = Some(format!(
            "element W[{}][{}]",
            &w.element[..1],
            &w.element[1..]
        ));
        Change {
            detail,
            ..self.number_change("soft_iron_max_element", "1", w.from, w.to, w.sigma)
        }
    }

    /// Push a change for every rod verdict named on either side (absent: null).
    fn rod_verdicts(&self, out: &mut Vec<Change>) {
        let (qa, qb) = (&self.a.quantities, &self.b.quantities);
        let mut rods: Vec<&str> = Vec::new();
        for q in qa.iter().chain(qb) {
            if matches!(q.value, QuantityValue::Verdict(_)) && !rods.contains(&q.name.as_str()) {
                rods.push(&q.name);
            }
        }
        for name in rods {
            let word = |v: Option<QuantityValue>| match v {
                Some(QuantityValue::Verdict(s)) => Value::String(s),
                _ => Value::Null,
            };
            let (from, to) = (word(find(qa, name)), word(find(qb, name)));
            let flag = if from == to {
                Flag::Unchanged
            } else {
                Flag::VerdictChanged
            };
            out.push(self.change(name, "", (from, to), flag));
        }
    }

    /// `<kind>_pass` when both runs carry it: a limit crossed, cleared or unchanged.
    fn overall_verdict(&self) -> Option<Change> {
        let pass_name = format!("{}_pass", self.b.kind);
        let (Some(QuantityValue::Pass(pa)), Some(QuantityValue::Pass(pb))) = (
            find(&self.a.quantities, &pass_name),
            find(&self.b.quantities, &pass_name),
        ) else {
            return None;
        };
        let flag = match (pa, pb) {
            (true, false) => Flag::LimitCrossed,
            (false, true) => Flag::LimitCleared,
            _ => Flag::Unchanged,
        };
        Some(self.change(&pass_name, "", (pa.into(), pb.into()), flag))
    }
}

/// The value of the quantity named `name`, if `q` has it.
fn find(q: &[Quantity], name: &str) -> Option<QuantityValue> {
    q.iter().find(|x| x.name == name).map(|x| x.value.clone())
}

/// Significant beyond k combined σ, within noise otherwise, unjudged without a σ.
fn judge(delta: f64, sigma: Option<f64>, rules: &ChangeRules) -> Flag {
    match sigma {
        Some(s) if delta.abs() > rules.significance_sigma() * s => Flag::Significant,
        Some(_) => Flag::WithinNoise,
        None => Flag::NoSigma,
    }
}

/// Combined 1σ of a difference of two independent estimates, √(σ₁² + σ₂²); `None`
/// when a side has none.
fn combine(a: Option<f64>, b: Option<f64>) -> Option<f64> {
    Some((a? * a? + b? * b?).sqrt())
}
