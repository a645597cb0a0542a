//! Column names and units of a sweep-log header: the unit written as `bx [uT]`,
//! `bx (uT)` or, where unambiguous, `bx_uT`; our own names (`bx`, `cmd_x`, `gx`) or the
//! log's own names mapped by the plan's `[columns]`; and each quantity's units with
//! their factor to the internal unit (nT, s, rad, m, A, rad/s).

use super::column_kind::{ColumnKind, TimeUnit};
use super::layout::LogLayout;
use super::units::FieldUnit;

/// A header cell split into its name and the unit written with it.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(super) struct Split<'a> {
    /// The name without its unit.
    pub name: &'a str,
    /// The unit in brackets or parentheses.
    pub unit: Option<&'a str>,
}

/// Split `bx [uT]` or `bx (uT)` into (`bx`, `uT`); a name without either is whole.
pub(super) fn split_unit(raw: &str) -> Result<Split<'_>, String> {
    for (open, close) in [('[', ']'), ('(', ')')] {
        match raw.find(open) {
            None => {
                if raw.contains(close) {
                    return Err(format!("a \"{close}\" without its \"{open}\""));
                }
            }
            Some(at) => {
                let rest = &raw[at + 1..];
                let end = rest
                    .find(close)
                    .ok_or_else(|| format!("the unit's \"{open}\" is not closed by \"{close}\""))?;
                if !rest[end + 1..].trim().is_empty() {
                    return Err(format!("text after the unit's \"{close}\""));
                }
                return Ok(Split {
                    name: raw[..at].trim(),
                    unit: Some(rest[..end].trim()),
                });
            }
        }
    }
    Ok(Split {
        name: raw,
        unit: None,
    })
}

/// Our own name of a quantity (lower case) as a column kind, or `None`.
pub(super) fn builtin_kind(name: &str) -> Option<ColumnKind> {
    let axis = |s: &str| match s.as_bytes().get(1) {
        Some(b'x') => 0,
        Some(b'y') => 1,
        _ => 2,
    };
    Some(match name {
        "t" | "time" => ColumnKind::Time(TimeUnit::Seconds),
        "bx" | "by" | "bz" => ColumnKind::Field(axis(name)),
        "hx" | "hy" | "hz" => ColumnKind::Applied(axis(name)),
        "ix" | "iy" | "iz" => ColumnKind::Current(axis(name)),
        "gx" | "gy" | "gz" => ColumnKind::Gyro(axis(name)),
        "px" | "py" | "pz" => ColumnKind::Probe(axis(name)),
        "temp" => ColumnKind::Temperature,
        "angle" => ColumnKind::Angle,
        "mount" | "position" => ColumnKind::Mount,
        "i" | "current" => ColumnKind::RodCurrent,
        _ => ColumnKind::Command(name.strip_prefix("cmd_")?.to_string()),
    })
}

/// The column's kind and the factor from its unit to the internal unit.
///
/// A field column in raw counts (`counts`, `LSB`, or no unit when the plan's unit is
/// counts) takes the layout's `nt_per_count` for its axis, and is refused without it.
pub(super) fn scale_for(
    kind: ColumnKind,
    unit: Option<&str>,
    default_unit: FieldUnit,
    layout: &LogLayout,
) -> Result<(ColumnKind, f64), String> {
    let unknown = |what: &str, expected: &str| {
        format!(
            "unknown {what} unit \"{}\" (expected {expected})",
            unit.unwrap_or("")
        )
    };
    let deg = std::f64::consts::PI / 180.0;
    let scale = match &kind {
        ColumnKind::Time(_) => {
            let u = match unit {
                None | Some("s") => TimeUnit::Seconds,
                Some("ms") => TimeUnit::Milliseconds,
                Some(u) if u.eq_ignore_ascii_case("unix") => TimeUnit::Unix,
                Some(_) => return Err(unknown("time", "s, ms or unix")),
            };
            return Ok((ColumnKind::Time(u), 1.0));
        }
        ColumnKind::Field(axis) => {
            let counts = match unit {
                None => layout.counts_by_default,
                Some(u) => is_counts(u),
            };
            if counts {
                let per = layout.nt_per_count.ok_or_else(|| {
                    "the field is in raw counts: give [magnetometer] nt_per_count in the plan \
                     (nT per count, one number or one per axis)"
                        .to_string()
                })?;
                per[*axis]
            } else {
                field_scale(unit, default_unit)?
            }
        }
        ColumnKind::Applied(_) => {
            if unit.is_some_and(is_counts) {
                return Err(
                    "the applied field cannot be in raw counts; give it in a field unit".into(),
                );
            }
            field_scale(unit, default_unit)?
        }
        ColumnKind::Current(_) | ColumnKind::RodCurrent => match unit {
            None | Some("A") => 1.0,
            Some("mA") => 1e-3,
            Some(_) => return Err(unknown("current", "A or mA")),
        },
        ColumnKind::Gyro(_) => match unit {
            None | Some("deg/s") | Some("°/s") | Some("dps") => deg,
            Some("rad/s") => 1.0,
            Some(_) => return Err(unknown("angular rate", "deg/s or rad/s")),
        },
        ColumnKind::Probe(_) => match unit {
            None | Some("m") => 1.0,
            Some("cm") => 1e-2,
            Some("mm") => 1e-3,
            Some(_) => return Err(unknown("length", "m, cm or mm")),
        },
        ColumnKind::Temperature => match unit {
            None | Some("C") | Some("°C") | Some("degC") => 1.0,
            Some(_) => return Err(unknown("temperature", "°C")),
        },
        ColumnKind::Angle => match unit {
            None | Some("deg") | Some("°") => deg,
            Some("rad") => 1.0,
            Some(_) => return Err(unknown("angle", "deg or rad")),
        },
        ColumnKind::Mount | ColumnKind::Command(_) | ColumnKind::Ignored => 1.0,
    };
    Ok((kind, scale))
}

fn is_counts(unit: &str) -> bool {
    unit.eq_ignore_ascii_case("counts") || unit.eq_ignore_ascii_case("lsb")
}

fn field_scale(unit: Option<&str>, default_unit: FieldUnit) -> Result<f64, String> {
    match unit {
        None => Ok(default_unit.to_nt_factor()),
        Some(u) => u
            .parse::<FieldUnit>()
            .map(FieldUnit::to_nt_factor)
            .map_err(|e| format!("{e}, or counts")),
    }
}

/// True when `unit` is one `kind` accepts (for `name_unit` suffixes).
fn accepts(kind: &ColumnKind, unit: &str) -> bool {
    let layout = LogLayout {
        nt_per_count: Some([1.0; 3]),
        ..LogLayout::default()
    };
    !matches!(kind, ColumnKind::Mount | ColumnKind::Command(_))
        && scale_for(kind.clone(), Some(unit), FieldUnit::Nanotesla, &layout).is_ok()
}

/// What a header cell holds: its kind, and the unit written with it.
pub(super) struct Resolved<'a> {
    pub kind: ColumnKind,
    pub unit: Option<&'a str>,
}

/// Resolve a header cell (trimmed, unquoted) against the layout's mapping and our own
/// names. A mapped name wins; a name of ours whose quantity the mapping gives to another
/// column is ignored. `name_unit` is read as a unit suffix only when `name` is a
/// quantity and `unit` one of its units; `bx_raw` and the like (a field axis with a
/// suffix that is no unit) are refused, not ignored.
pub(super) fn resolve<'a>(raw: &'a str, layout: &LogLayout) -> Result<Resolved<'a>, String> {
    let split = split_unit(raw)?;
    let suffix = match split.unit {
        None => split.name.rsplit_once('_'),
        Some(_) => None,
    };
    // The mapping first: the whole name, then the name without a unit suffix.
    if let Some(q) = layout.quantity_of(split.name) {
        let kind = builtin_kind(q).unwrap_or(ColumnKind::Ignored);
        return Ok(Resolved {
            kind,
            unit: split.unit,
        });
    }
    if let Some((stem, unit)) = suffix {
        if let Some(kind) = layout.quantity_of(stem).and_then(builtin_kind) {
            if accepts(&kind, unit) {
                return Ok(Resolved {
                    kind,
                    unit: Some(unit),
                });
            }
        }
    }
    let taken = |k: &ColumnKind| layout.mapped(&k.quantity()).is_some();
    let lname = split.name.to_lowercase();
    if let Some(kind) = builtin_kind(&lname) {
        let kind = if taken(&kind) {
            ColumnKind::Ignored
        } else {
            kind
        };
        return Ok(Resolved {
            kind,
            unit: split.unit,
        });
    }
    if let Some((stem, unit)) = suffix {
        let lstem = stem.to_lowercase();
        if let Some(kind) = builtin_kind(&lstem).filter(|k| !matches!(k, ColumnKind::Command(_))) {
            if taken(&kind) {
                return Ok(Resolved {
                    kind: ColumnKind::Ignored,
                    unit: None,
                });
            }
            if accepts(&kind, unit) {
                return Ok(Resolved {
                    kind,
                    unit: Some(unit),
                });
            }
            if kind.is_axis() {
                return Err(format!(
                    "\"{lstem}\" with the suffix \"{unit}\", which is not one of its units; \
                     write the unit as \"{lstem} [unit]\", or map the column in the plan's \
                     [columns] if it holds another quantity"
                ));
            }
        }
    }
    Ok(Resolved {
        kind: ColumnKind::Ignored,
        unit: None,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn kind(raw: &str, layout: &LogLayout) -> Result<(ColumnKind, Option<String>), String> {
        resolve(raw, layout).map(|r| (r.kind, r.unit.map(String::from)))
    }

    #[test]
    fn units_in_brackets_parentheses_and_suffixes() {
        let l = LogLayout::default();
        for raw in ["bx [nT]", "bx (nT)", "bx_nT", "BX (nT)"] {
            assert_eq!(
                kind(raw, &l).unwrap(),
                (ColumnKind::Field(0), Some("nT".into())),
                "{raw}"
            );
        }
        assert_eq!(
            kind("t_ms", &l).unwrap(),
            (ColumnKind::Time(TimeUnit::Seconds), Some("ms".into()))
        );
        assert_eq!(
            kind("gz_rad/s", &l).unwrap(),
            (ColumnKind::Gyro(2), Some("rad/s".into()))
        );
        // A rod named like a unit stays a rod.
        assert_eq!(
            kind("cmd_x_mA", &l).unwrap(),
            (ColumnKind::Command("x_ma".into()), None)
        );
        // Not a quantity of ours: ignored.
        assert_eq!(kind("temp_board", &l).unwrap(), (ColumnKind::Ignored, None));
        assert_eq!(kind("rssi_dBm", &l).unwrap(), (ColumnKind::Ignored, None));
    }

    #[test]
    fn a_field_axis_with_a_suffix_that_is_no_unit_is_refused() {
        let e = kind("bx_raw", &LogLayout::default()).unwrap_err();
        assert!(e.contains("not one of its units"), "{e}");
    }

    #[test]
    fn mapping_wins_and_our_name_it_replaces_is_ignored() {
        let l = LogLayout {
            columns: vec![
                ("bx".into(), "MAG_X".into()),
                ("cmd_x".into(), "MTQ1_CMD".into()),
            ],
            ..LogLayout::default()
        };
        assert_eq!(
            kind("MAG_X [uT]", &l).unwrap(),
            (ColumnKind::Field(0), Some("uT".into()))
        );
        assert_eq!(
            kind("mag_x_uT", &l).unwrap(),
            (ColumnKind::Field(0), Some("uT".into()))
        );
        assert_eq!(
            kind("MTQ1_CMD", &l).unwrap(),
            (ColumnKind::Command("x".into()), None)
        );
        assert_eq!(kind("bx", &l).unwrap(), (ColumnKind::Ignored, None));
    }

    #[test]
    fn counts_need_a_scale_per_axis() {
        let mut l = LogLayout::default();
        let e = scale_for(ColumnKind::Field(1), Some("LSB"), FieldUnit::Nanotesla, &l);
        assert!(e.unwrap_err().contains("nt_per_count"));
        l.nt_per_count = Some([0.5, 0.25, 2.0]);
        let (_, s) = scale_for(
            ColumnKind::Field(1),
            Some("counts"),
            FieldUnit::Nanotesla,
            &l,
        )
        .unwrap();
        assert_eq!(s.to_bits(), 0.25f64.to_bits());
        l.counts_by_default = true;
        let (_, s) = scale_for(ColumnKind::Field(2), None, FieldUnit::Nanotesla, &l).unwrap();
        assert_eq!(s.to_bits(), 2.0f64.to_bits());
        assert!(scale_for(
            ColumnKind::Applied(0),
            Some("counts"),
            FieldUnit::Nanotesla,
            &l
        )
        .is_err());
    }

    #[test]
    fn currents_and_rates_convert() {
        let l = LogLayout::default();
        let (_, s) =
            scale_for(ColumnKind::Current(0), Some("mA"), FieldUnit::Nanotesla, &l).unwrap();
        assert_eq!(s.to_bits(), 1e-3f64.to_bits());
        let (_, s) = scale_for(ColumnKind::Gyro(0), None, FieldUnit::Nanotesla, &l).unwrap();
        assert!((s - std::f64::consts::PI / 180.0).abs() < 1e-18);
        assert!(scale_for(ColumnKind::Current(0), Some("V"), FieldUnit::Nanotesla, &l).is_err());
    }
}
