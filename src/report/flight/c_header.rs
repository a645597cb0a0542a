//! The C header of [`FlightParams`]: every name starts with [`PREFIX`]; each array comes
//! as `double` and as `float` (`_F` suffix); per-magnetometer arrays are indexed by
//! `PREFIX_MAG_INDEX_<NAME>`, per-rod arrays by `PREFIX_ROD_INDEX_<NAME>`. An array
//! whose numbers were not measured is left out (using it fails to compile) and a
//! comment says why. C99; compiles warning-free with `-Wall -Wextra -pedantic`.

use std::fmt::Write as _;

use super::{FlightParams, PREFIX};
use crate::Error;

/// A name as a C identifier part: ASCII letters and digits upper-cased, anything else `_`.
pub fn c_ident(name: &str) -> String {
    name.chars()
        .map(|c| {
            if c.is_ascii_alphanumeric() {
                c.to_ascii_uppercase()
            } else {
                '_'
            }
        })
        .collect()
}

/// Refuse two names that become one C name (`x-1` and `x_1`): the header would define a
/// macro twice.
fn check_unique(what: &str, names: &[String]) -> Result<(), Error> {
    for (i, a) in names.iter().enumerate() {
        if let Some(b) = names[..i].iter().find(|b| c_ident(b) == c_ident(a)) {
            return Err(Error::Usage(format!(
                "{what}s \"{b}\" and \"{a}\" both become the C name {PREFIX}_{}_INDEX_{}; \
                 rename one in the plan to write a C header",
                what.to_ascii_uppercase(),
                c_ident(a)
            )));
        }
    }
    Ok(())
}

/// Text inside a C comment: cannot close it early.
pub(super) fn comment(s: &str) -> String {
    s.replace("*/", "* /").replace(['\n', '\r'], " ")
}

/// A C string literal.
fn string(s: &str) -> String {
    let mut out = String::from("\"");
    for c in s.chars() {
        match c {
            '"' => out.push_str("\\\""),
            '\\' => out.push_str("\\\\"),
            c if c.is_control() => out.push(' '),
            c => out.push(c),
        }
    }
    out.push('"');
    out
}

/// A `double` literal (shortest text that reads back to the same double).
fn lit_d(v: f64) -> Result<String, Error> {
    if !v.is_finite() {
        return Err(Error::Internal(format!("non-finite flight parameter {v}")));
    }
    Ok(format!("{:e}", super::clean(v)))
}

/// A `float` literal (the value rounded to the nearest float).
fn lit_f(v: f64) -> Result<String, Error> {
    lit_d(v)?;
    Ok(format!("{:e}f", super::clean(v) as f32))
}

/// Nested braces of numbers, each formatted by `lit`.
#[derive(Clone)]
pub(super) enum Nest {
    Leaf(f64),
    List(Vec<Nest>),
}

impl Nest {
    pub(super) fn v3(v: &[f64; 3]) -> Nest {
        Nest::List(v.iter().map(|x| Nest::Leaf(*x)).collect())
    }
    pub(super) fn m3(m: &[[f64; 3]; 3]) -> Nest {
        Nest::List(m.iter().map(Nest::v3).collect())
    }
    fn render(&self, lit: fn(f64) -> Result<String, Error>) -> Result<String, Error> {
        match self {
            Nest::Leaf(v) => lit(*v),
            Nest::List(items) => {
                let parts = items
                    .iter()
                    .map(|i| i.render(lit))
                    .collect::<Result<Vec<_>, _>>()?;
                Ok(format!("{{ {} }}", parts.join(", ")))
            }
        }
    }
}

/// `static const double NAME[dims] = …;` and its `float` twin `NAME_F`.
pub(super) fn arrays(
    s: &mut String,
    doc: &str,
    name: &str,
    dims: &str,
    data: &Nest,
) -> Result<(), Error> {
    let _ = writeln!(s, "/* {} */", comment(doc));
    let _ = writeln!(
        s,
        "static const double {PREFIX}_{name}{dims} {PREFIX}_UNUSED = {};",
        data.render(lit_d)?
    );
    let _ = writeln!(
        s,
        "static const float {PREFIX}_{name}_F{dims} {PREFIX}_UNUSED = {};\n",
        data.render(lit_f)?
    );
    Ok(())
}

/// The header text; refuses names that collide as C names.
pub fn render(p: &FlightParams) -> Result<String, Error> {
    let mags: Vec<String> = p.magnetometers.iter().map(|m| m.name.clone()).collect();
    check_unique("mag", &mags)?;
    check_unique("rod", &p.rod_order)?;
    let mut s = String::new();
    preamble(&mut s, p);
    let guard = format!("{PREFIX}_FLIGHT_PARAMS_H");
    let _ = writeln!(s, "#ifndef {guard}\n#define {guard}\n");
    let _ = writeln!(
        s,
        "#if defined(__GNUC__)\n#define {PREFIX}_UNUSED __attribute__((unused))\n#else\n\
         #define {PREFIX}_UNUSED\n#endif\n"
    );
    identity(&mut s, p);
    magnetometers(&mut s, p)?;
    super::c_named::named_blocks(&mut s, p)?;
    rods(&mut s, p)?;
    let _ = writeln!(
        s,
        "/* Gyro bias and scale: none measured by this run. */\n#define {PREFIX}_GYRO_COUNT 0\n"
    );
    test_vectors(&mut s, p)?;
    let _ = writeln!(s, "#endif /* {guard} */");
    super::c_named::refuse_duplicate_names(&s)?;
    Ok(s)
}

fn preamble(s: &mut String, p: &FlightParams) {
    let id = &p.identity;
    let _ = writeln!(
        s,
        "/* Flight parameters, layout {}: written by {} at {}; do not edit by hand.",
        p.layout, id.generated_by, id.generated_at
    );
    let _ = writeln!(
        s,
        " * Article {} build {}{}{}.",
        comment(id.serial.as_deref().unwrap_or("(no plan)")),
        comment(id.build.as_deref().unwrap_or("-")),
        id.operator
            .as_deref()
            .map_or(String::new(), |o| format!(", operator {}", comment(o))),
        id.facility
            .as_deref()
            .map_or(String::new(), |f| format!(", facility {}", comment(f))),
    );
    let _ = writeln!(s, " * Inputs (SHA-256):");
    for i in &id.inputs {
        let _ = writeln!(s, " *   {} {} {}", i.role, i.sha256, comment(&i.path));
    }
    let _ = writeln!(
        s,
        " * Apply per magnetometer m, in this order (MAG_ arrays indexed [m], rods [r]):"
    );
    for step in &p.order_of_operations {
        let _ = writeln!(s, " *   {}", comment(step));
    }
    let _ = writeln!(
        s,
        " *   Blank every magnetometer for {PREFIX}_ROD_BLANKING_WINDOW_S after any rod \
         command change."
    );
    for n in &p.notes {
        let _ = writeln!(s, " * Note: {}", comment(n));
    }
    s.push_str(" */\n");
    if !p.verdict_passed {
        let _ = writeln!(
            s,
            "/* WARNING: the verdict is {}: these parameters were written on request and \
             must not fly without review. */",
            p.verdict
        );
    }
}

fn identity(s: &mut String, p: &FlightParams) {
    let id = &p.identity;
    let opt = |v: &Option<String>| string(v.as_deref().unwrap_or(""));
    let _ = writeln!(s, "#define {PREFIX}_LAYOUT {}", string(p.layout));
    let _ = writeln!(s, "#define {PREFIX}_SERIAL {}", opt(&id.serial));
    let _ = writeln!(s, "#define {PREFIX}_BUILD {}", opt(&id.build));
    let _ = writeln!(
        s,
        "#define {PREFIX}_GENERATED_AT {}",
        string(&id.generated_at)
    );
    let _ = writeln!(s, "#define {PREFIX}_TOOL {}", string(&id.generated_by));
    let _ = writeln!(
        s,
        "/* 1 when the verdict passed, 0 when it did not ({}). */\n#define {PREFIX}_VERDICT_PASSED {}\n",
        p.verdict,
        u8::from(p.verdict_passed)
    );
}

fn magnetometers(s: &mut String, p: &FlightParams) -> Result<(), Error> {
    let m = p.magnetometers.len();
    let _ = writeln!(s, "#define {PREFIX}_MAG_COUNT {m}");
    for (k, mag) in p.magnetometers.iter().enumerate() {
        let _ = writeln!(
            s,
            "#define {PREFIX}_MAG_INDEX_{} {k} /* serial {} */",
            c_ident(&mag.name),
            comment(mag.serial.as_deref().unwrap_or("not given"))
        );
    }
    s.push('\n');
    let cals: Option<Vec<_>> = p
        .magnetometers
        .iter()
        .map(|x| x.calibration.as_ref())
        .collect();
    match cals {
        Some(cals) => {
            let list = |f: &dyn Fn(usize) -> Nest| Nest::List((0..cals.len()).map(f).collect());
            arrays(
                s,
                "Hard iron c, sensor frame, nT.",
                "MAG_HARD_IRON_NT",
                &format!("[{m}][3]"),
                &list(&|k| Nest::v3(&cals[k].hard_iron_nt)),
            )?;
            arrays(
                s,
                "Soft-iron correction W, row-major, dimensionless, sensor frame.",
                "MAG_SOFT_IRON",
                &format!("[{m}][3][3]"),
                &list(&|k| Nest::m3(&cals[k].soft_iron)),
            )?;
            arrays(
                s,
                "Hard-iron temperature slope, sensor frame, nT per deg C (zero: not measured).",
                "MAG_TEMP_SLOPE_NT_PER_C",
                &format!("[{m}][3]"),
                &list(&|k| Nest::v3(&cals[k].temp_slope_nt_per_c)),
            )?;
            arrays(
                s,
                "Temperature the hard iron refers to, deg C.",
                "MAG_TEMP_REF_C",
                &format!("[{m}]"),
                &list(&|k| Nest::Leaf(cals[k].temp_ref_c)),
            )?;
        }
        None => {
            let _ = writeln!(
                s,
                "/* No calibration in this run: {PREFIX}_MAG_HARD_IRON_NT and \
                 {PREFIX}_MAG_SOFT_IRON are not defined. */\n"
            );
        }
    }
    let s2b = Nest::List(
        p.magnetometers
            .iter()
            .map(|x| Nest::m3(&x.sensor_to_body))
            .collect(),
    );
    let sources: Vec<String> = p
        .magnetometers
        .iter()
        .map(|x| format!("{}: {:?}", x.name, x.sensor_to_body_source).to_lowercase())
        .collect();
    arrays(
        s,
        &format!(
            "Rotation sensor -> body, row-major (source: {}).",
            sources.join(", ")
        ),
        "MAG_SENSOR_TO_BODY",
        &format!("[{m}][3][3]"),
        &s2b,
    )?;
    Ok(())
}

fn rods(s: &mut String, p: &FlightParams) -> Result<(), Error> {
    let n = p.rods.len();
    let _ = writeln!(s, "#define {PREFIX}_ROD_COUNT {n}");
    if n == 0 {
        let _ = writeln!(
            s,
            "/* No polarity check in this run: rod coupling, dipoles and the blanking \
             window are not defined. */\n"
        );
        return Ok(());
    }
    for (k, r) in p.rods.iter().enumerate() {
        let _ = writeln!(
            s,
            "#define {PREFIX}_ROD_INDEX_{} {k} /* serial {} */",
            c_ident(&r.name),
            comment(r.serial.as_deref().unwrap_or("not given"))
        );
    }
    if let Some(lag) = p.rod_lag_s {
        let _ = writeln!(
            s,
            "/* Command-to-response delay, s. */\n#define {PREFIX}_ROD_LAG_S ({})",
            lit_d(lag)?
        );
    }
    match p.blanking_window_s {
        Some(w) => {
            let _ = writeln!(
                s,
                "/* Blanking window after a rod command change, s: the {}th percentile of \
                 the per-pulse settle times (slowest rod). */\n#define {PREFIX}_ROD_BLANKING_WINDOW_S ({})",
                super::BLANKING_PERCENTILE,
                lit_d(w)?
            );
        }
        None => {
            let _ = writeln!(
                s,
                "/* No blanking window: see the JSON file's rods[].blanking. */"
            );
        }
    }
    s.push('\n');
    arrays(
        s,
        "Measured dipole per command unit along the rod's axis_body, A m^2 (negative: reversed).",
        "ROD_DIPOLE_AM2_PER_CMD",
        &format!("[{n}]"),
        &Nest::List(
            p.rods
                .iter()
                .map(|r| Nest::Leaf(r.dipole_per_command_am2))
                .collect(),
        ),
    )?;
    let axes = Nest::List(p.rods.iter().map(|r| Nest::v3(&r.axis_body)).collect());
    arrays(
        s,
        "Positive dipole direction of each rod, body frame (the plan's).",
        "ROD_AXIS_BODY",
        &format!("[{n}][3]"),
        &axes,
    )?;
    coupling_arrays(s, p)
}

/// The coupling of every rod at every magnetometer, or a comment saying why not.
fn coupling_arrays(s: &mut String, p: &FlightParams) -> Result<(), Error> {
    let (m, n) = (p.magnetometers.len(), p.rods.len());
    let coupling: Option<Vec<&Vec<[f64; 3]>>> = p
        .magnetometers
        .iter()
        .map(|x| x.rod_coupling_nt_per_command.as_ref())
        .collect();
    match coupling {
        Some(k) => {
            let data = Nest::List(
                k.iter()
                    .map(|rows| Nest::List(rows.iter().map(Nest::v3).collect()))
                    .collect(),
            );
            arrays(s, "Rod coupling at each magnetometer, sensor frame, nT per command unit: [mag][rod][axis].",
                "MAG_ROD_COUPLING_NT_PER_CMD", &format!("[{m}][{n}][3]"), &data)?;
        }
        None => {
            let _ = writeln!(
                s,
                "/* Rod coupling was not measured at every magnetometer: \
                 {PREFIX}_MAG_ROD_COUPLING_NT_PER_CMD is not defined. */\n"
            );
        }
    }
    Ok(())
}

fn test_vectors(s: &mut String, p: &FlightParams) -> Result<(), Error> {
    let t = p.test_vectors.len();
    let _ = writeln!(s, "/* Worked examples to check an implementation against. */\n#define {PREFIX}_TEST_COUNT {t}");
    if t == 0 {
        s.push('\n');
        return Ok(());
    }
    let _ = writeln!(
        s,
        "static const int {PREFIX}_TEST_MAG[{t}] {PREFIX}_UNUSED = {{ {} }};\n",
        p.test_vectors
            .iter()
            .map(|v| v.magnetometer.to_string())
            .collect::<Vec<_>>()
            .join(", ")
    );
    let v = &p.test_vectors;
    arrays(
        s,
        "Raw reading, sensor frame, nT.",
        "TEST_RAW_NT",
        &format!("[{t}][3]"),
        &Nest::List(v.iter().map(|x| Nest::v3(&x.raw_nt)).collect()),
    )?;
    if !p.rods.is_empty() {
        arrays(
            s,
            "Rod commands, per rod.",
            "TEST_COMMAND",
            &format!("[{t}][{}]", p.rods.len()),
            &Nest::List(
                v.iter()
                    .map(|x| Nest::List(x.commands.iter().map(|c| Nest::Leaf(*c)).collect()))
                    .collect(),
            ),
        )?;
    }
    arrays(
        s,
        "Temperature, deg C.",
        "TEST_TEMP_C",
        &format!("[{t}]"),
        &Nest::List(v.iter().map(|x| Nest::Leaf(x.temp_c)).collect()),
    )?;
    arrays(
        s,
        "The field the tool computed, body frame, nT.",
        "TEST_BODY_NT",
        &format!("[{t}][3]"),
        &Nest::List(v.iter().map(|x| Nest::v3(&x.body_nt)).collect()),
    )?;
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn literals_read_back_and_carry_the_float_suffix() {
        assert_eq!(lit_d(1250.5).unwrap(), "1.2505e3");
        assert_eq!(lit_d(-0.0).unwrap(), "0e0");
        assert_eq!(lit_f(0.1).unwrap(), "1e-1f");
        assert!(lit_d(f64::NAN).is_err());
        let x = 0.123_456_789_012_345_67_f64;
        assert_eq!(
            lit_d(x).unwrap().parse::<f64>().unwrap().to_bits(),
            x.to_bits()
        );
    }

    #[test]
    fn strings_and_comments_cannot_break_out() {
        assert_eq!(string("a\"b\\c"), "\"a\\\"b\\\\c\"");
        assert!(!comment("x*/y").contains("*/"));
    }

    #[test]
    fn colliding_names_are_refused() {
        let e = check_unique("rod", &["x-1".into(), "x_1".into()]).unwrap_err();
        assert!(e.to_string().contains("\"x-1\" and \"x_1\""), "{e}");
    }
}
