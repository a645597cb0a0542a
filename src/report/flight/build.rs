//! Assembling [`FlightParams`] from the results that measured something
//! ([`FlightPart`]), the plan's identity and mounting, and the inputs' hashes.

use nalgebra::{Matrix3, Vector3};

use super::blanking::rod_window;
use super::{
    clean, FlightParams, Identity, InputHash, MagCalibration, MagnetometerParams, RodParams,
    Source, TestVector, LAYOUT, ORDER_OF_OPERATIONS, PREFIX, UNNAMED_MAGNETOMETER,
};
use crate::check::calibrate::CalibrationResult;
use crate::check::polarity::{PolarityResult, SensorChoice};
use crate::check::{FlightPart, Verdict};
use crate::log::Plan;
use crate::Error;

/// What the parameters are assembled from.
#[derive(Debug, Clone)]
pub struct FlightSources<'a> {
    /// The plan (identity, mounting, part serials), when there is one.
    pub plan: Option<&'a Plan>,
    /// The results that contribute, in run order.
    pub parts: Vec<FlightPart<'a>>,
    /// The verdict the parameters rest on (a closeout: the worst of its steps).
    pub verdict: Verdict,
    /// Every input file with its SHA-256.
    pub inputs: Vec<InputHash>,
    /// When, UTC ISO 8601.
    pub generated_at: String,
}

fn rows(m: &Matrix3<f64>) -> [[f64; 3]; 3] {
    std::array::from_fn(|i| std::array::from_fn(|j| clean(m[(i, j)])))
}

fn matrix(r: &[[f64; 3]; 3]) -> Matrix3<f64> {
    Matrix3::from_fn(|i, j| r[i][j])
}

fn cleaned(v: [f64; 3]) -> [f64; 3] {
    v.map(clean)
}

/// The only part of one kind, or a refusal naming the kind when a run has two.
fn only<'a, T>(
    parts: &[FlightPart<'a>],
    pick: impl Fn(&FlightPart<'a>) -> Option<&'a T>,
    what: &str,
) -> Result<Option<&'a T>, Error> {
    let found: Vec<&T> = parts.iter().filter_map(pick).collect();
    match found.len() {
        0 | 1 => Ok(found.first().copied()),
        n => Err(Error::Usage(format!(
            "the run has {n} {what} results for one magnetometer; flight parameters take \
             one (run the others on their own)"
        ))),
    }
}

impl FlightParams {
    /// Assemble the parameters; refuses a run that measured nothing flight software
    /// applies, and a calibration whose W maps into a frame the plan does not relate to
    /// the body.
    pub fn assemble(src: &FlightSources<'_>) -> Result<Self, Error> {
        let cal = only(
            &src.parts,
            |p| match p {
                FlightPart::Calibration(c) => Some(*c),
                _ => None,
            },
            "calibrate",
        )?;
        let pol = only(
            &src.parts,
            |p| match p {
                FlightPart::Polarity(r) => Some(*r),
                _ => None,
            },
            "polarity",
        )?;
        if cal.is_none() && pol.is_none() {
            return Err(Error::Usage(
                "no flight parameters: the run has no calibrate or polarity result".into(),
            ));
        }
        let plan_mag = src.plan.and_then(|p| p.magnetometer.as_ref());
        let (s2b, s2b_source) = match plan_mag {
            Some(m) => (m.sensor_to_body, Source::Plan),
            None => (Matrix3::identity(), Source::Assumed),
        };
        let mut notes = Vec::new();
        if s2b_source == Source::Assumed {
            notes.push(
                "no [magnetometer] sensor_to_body in the plan: the sensor frame is taken as \
                 the body frame (identity)"
                    .to_string(),
            );
        }
        let calibration = cal
            .map(|c| mag_calibration(c, &s2b, &mut notes))
            .transpose()?;
        let (coupling, coupling_sigma) = coupling_at_magnetometer(pol, &mut notes);
        let mag = MagnetometerParams {
            // The magnetometer in use: a named `[[magnetometer]]` entry, or the plan's one.
            name: plan_mag
                .and_then(|m| m.name.clone())
                .unwrap_or_else(|| UNNAMED_MAGNETOMETER.to_string()),
            serial: plan_mag.and_then(|m| m.serial.clone()),
            calibration,
            sensor_to_body: rows(&s2b),
            sensor_to_body_source: s2b_source,
            rod_coupling_nt_per_command: coupling,
            rod_coupling_sigma_nt_per_command: coupling_sigma,
        };
        let rods = pol.map(|p| rod_params(p, src.plan)).unwrap_or_default();
        let blanking_window_s = overall_blanking(&rods, &mut notes);
        notes.push(
            "gyro bias and scale: not measured by any check of this run (the gyros list is \
             empty)"
                .to_string(),
        );
        let mut params = FlightParams {
            layout: LAYOUT,
            prefix: PREFIX,
            identity: identity(src),
            verdict: src.verdict,
            verdict_passed: src.verdict == Verdict::Pass,
            order_of_operations: ORDER_OF_OPERATIONS.to_vec(),
            rod_order: rods.iter().map(|r| r.name.clone()).collect(),
            magnetometers: vec![mag],
            rods,
            blanking_window_s,
            rod_lag_s: pol.map(|p| clean(p.lag_s)),
            gyros: Vec::new(),
            notes,
            test_vectors: Vec::new(),
        };
        if let Some(c) = cal {
            params.test_vectors = test_vectors(&params, c, &s2b);
        }
        Ok(params)
    }

    /// The body-frame field these parameters give for magnetometer `m`'s raw reading
    /// `raw_nt` (sensor frame, nT) with rod commands `commands` at temperature `temp_c`,
    /// following [`ORDER_OF_OPERATIONS`]. `None` when `m` has no calibration.
    pub fn apply(
        &self,
        m: usize,
        raw_nt: [f64; 3],
        commands: &[f64],
        temp_c: f64,
    ) -> Option<[f64; 3]> {
        let mag = self.magnetometers.get(m)?;
        let cal = mag.calibration.as_ref()?;
        let mut b1 = Vector3::from(raw_nt);
        if let Some(k) = &mag.rod_coupling_nt_per_command {
            for (row, cmd) in k.iter().zip(commands) {
                b1 -= Vector3::from(*row) * *cmd;
            }
        }
        let c = Vector3::from(cal.hard_iron_nt)
            + Vector3::from(cal.temp_slope_nt_per_c) * (temp_c - cal.temp_ref_c);
        let b2 = matrix(&cal.soft_iron) * (b1 - c);
        Some((matrix(&mag.sensor_to_body) * b2).into())
    }
}

/// Rows of the coupling and of its 1σ per rod, when the polarity check measured them at
/// the flight magnetometer (not at the external probe).
type Coupling = (Option<Vec<[f64; 3]>>, Option<Vec<[f64; 3]>>);

fn coupling_at_magnetometer(pol: Option<&PolarityResult>, notes: &mut Vec<String>) -> Coupling {
    match pol {
        Some(p) if p.sensor == SensorChoice::Magnetometer => (
            Some(
                p.rods
                    .iter()
                    .map(|r| cleaned(r.coupling_nt_per_command))
                    .collect(),
            ),
            Some(
                p.rods
                    .iter()
                    .map(|r| cleaned(r.coupling_sigma_nt_per_command))
                    .collect(),
            ),
        ),
        Some(_) => {
            notes.push(
                "the polarity check used the external [probe]: the rods' coupling at the \
                 flight magnetometer was not measured and is not given"
                    .to_string(),
            );
            (None, None)
        }
        None => (None, None),
    }
}

/// The largest of the rods' windows; `None` (with a note) when a rod has none.
fn overall_blanking(rods: &[RodParams], notes: &mut Vec<String>) -> Option<f64> {
    if rods.is_empty() {
        return None;
    }
    let w = rods
        .iter()
        .map(|r| r.blanking.as_ref().and_then(|b| b.window_s))
        .collect::<Option<Vec<f64>>>()
        .and_then(|w| w.into_iter().reduce(f64::max));
    if w.is_none() {
        notes.push(
            "no blanking window: a rod's pulses did not settle often enough to give one \
             (see rods[].blanking)"
                .to_string(),
        );
    }
    w
}

fn identity(src: &FlightSources<'_>) -> Identity {
    let article = src.plan.and_then(|p| p.article.as_ref());
    Identity {
        serial: article.map(|a| a.serial.clone()),
        build: article.map(|a| a.build.clone()),
        operator: article.and_then(|a| a.operator.clone()),
        facility: article.and_then(|a| a.facility.clone()),
        generated_at: src.generated_at.clone(),
        generated_by: format!("magproof {}", crate::VERSION),
        inputs: src.inputs.clone(),
    }
}

/// The calibration with W in the sensor frame. A cage run with `[cage] article_to_cage`
/// gave W into the body frame: it is carried back through the plan's `sensor_to_body`
/// (W_sensor = sensor_to_bodyᵀ · W_body), so that step 4 reproduces the measured mapping.
fn mag_calibration(
    c: &CalibrationResult,
    s2b: &Matrix3<f64>,
    notes: &mut Vec<String>,
) -> Result<MagCalibration, Error> {
    let w = matrix(&c.soft_iron);
    let w_sensor = match c.soft_iron_frame {
        "sensor" => w,
        "body" => {
            notes.push(
                "the cage calibration measured the mounting (its W maps into the body frame); \
                 W is given here in the sensor frame through the plan's sensor_to_body, so \
                 steps 3 and 4 together reproduce the measured mapping"
                    .to_string(),
            );
            s2b.transpose() * w
        }
        other => {
            return Err(Error::Usage(format!(
                "the calibration's W maps into the {other} frame, which the plan does not \
                 relate to the body: add [cage] article_to_cage to the plan to write flight \
                 parameters"
            )))
        }
    };
    let (slope, tref) = match &c.temperature {
        Some(t) => (t.slope_nt_per_c, t.reference_c),
        None => ([0.0; 3], 0.0),
    };
    Ok(MagCalibration {
        method: serde_json::to_value(c.method)
            .ok()
            .and_then(|v| v.as_str().map(String::from))
            .unwrap_or_default(),
        log: c.log.clone(),
        hard_iron_nt: cleaned(c.hard_iron_nt),
        hard_iron_sigma_nt: cleaned(c.hard_iron_sigma_nt),
        soft_iron: rows(&w_sensor),
        temp_slope_nt_per_c: cleaned(slope),
        temp_ref_c: clean(tref),
        residual_rms_nt: c.residual_rms_nt,
        verdict: c.verdict,
    })
}

/// Each rod: measured dipole per command (signed along its axis, from the coupling and
/// the expected field per A·m²), and its blanking window.
fn rod_params(p: &PolarityResult, plan: Option<&Plan>) -> Vec<RodParams> {
    p.rods
        .iter()
        .map(|r| {
            let plan_rod = plan.and_then(|pl| pl.rods.iter().find(|x| x.name == r.name));
            let sign = if Vector3::from(r.coupling_nt_per_command)
                .dot(&Vector3::from(r.expected_nt_per_am2))
                < 0.0
            {
                -1.0
            } else {
                1.0
            };
            let m = r.dipole_per_command_am2;
            RodParams {
                name: r.name.clone(),
                serial: plan_rod.and_then(|x| x.serial.clone()),
                axis_body: plan_rod.map_or([0.0; 3], |x| cleaned(x.axis_body.into())),
                dipole_per_command_am2: clean(sign * m),
                // |m| ∝ |coupling|, whose 1σ along its direction is |coupling| / snr.
                dipole_per_command_sigma_am2: if r.snr > 0.0 { m / r.snr } else { f64::NAN },
                nominal_dipole_per_command_am2: plan_rod.and_then(|x| x.dipole_per_command_am2),
                polarity: r.verdict.as_str().to_string(),
                blanking: rod_window(&p.pulses, &r.name),
            }
        })
        .collect()
}

/// Worked examples: the calibration's first kept sample as the fit corrected it (rods
/// off), and the same with the measured coupling of a unit command on every rod added
/// to the raw reading (the corrected field must not change).
fn test_vectors(
    params: &FlightParams,
    c: &CalibrationResult,
    s2b: &Matrix3<f64>,
) -> Vec<TestVector> {
    let d = &c.data;
    let Some(k) = (0..d.samples_nt.len().min(d.corrected_nt.len()))
        .find(|&k| d.kept.get(k).copied().unwrap_or(true))
    else {
        return Vec::new();
    };
    let raw = d.samples_nt[k];
    let temp_c = c.temperature.as_ref().map_or(0.0, |t| t.reference_c);
    let n_rods = params.rod_order.len();
    let zero = vec![0.0; n_rods];
    // With a temperature slope the fit corrected each sample at its own temperature,
    // which the sample data do not keep: the example is then computed from the
    // parameters at the reference temperature.
    let (body, origin) = match (&c.temperature, c.soft_iron_frame) {
        (None, "sensor") => (
            s2b * d.corrected_nt[k],
            "the calibration's own corrected sample",
        ),
        (None, _) => (d.corrected_nt[k], "the calibration's own corrected sample"),
        (Some(_), _) => match params.apply(0, raw.into(), &zero, temp_c) {
            Some(b) => (Vector3::from(b), "computed from these parameters"),
            None => return Vec::new(),
        },
    };
    let line = d
        .lines
        .get(k)
        .map_or(String::new(), |l| format!(", line {l}"));
    let mut out = vec![TestVector {
        magnetometer: 0,
        raw_nt: raw.into(),
        commands: zero,
        temp_c,
        body_nt: body.into(),
        origin: format!("{origin} ({}{line}), every rod off", c.log),
    }];
    if let Some(k_rows) = &params.magnetometers[0].rod_coupling_nt_per_command {
        let with_rods = k_rows
            .iter()
            .fold(raw, |acc, row| acc + Vector3::from(*row));
        out.push(TestVector {
            magnetometer: 0,
            raw_nt: with_rods.into(),
            commands: vec![1.0; n_rods],
            temp_c,
            body_nt: body.into(),
            origin: "the first example with the measured coupling of a unit command on every \
                     rod added to the raw reading"
                .to_string(),
        });
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::check::calibrate::{run_calibrate, CalibrateOptions};
    use crate::check::{CheckInput, CheckRequest, InputOptions};
    use crate::log::plan::parse_plan;
    use crate::sim::{simulate_cage, write_cage_csv, CageConfig};
    use approx::assert_relative_eq;
    use std::path::Path;

    fn cage_result(plan: &Plan, dir: &Path) -> CalibrationResult {
        let cfg = CageConfig {
            noise_nt: 5.0,
            ..CageConfig::default()
        };
        let sim = simulate_cage(&cfg, 3).unwrap();
        let log = dir.join("cage.csv");
        write_cage_csv(&sim, std::fs::File::create(&log).unwrap()).unwrap();
        let input = CheckInput::read(&log, Some(plan), &InputOptions::default()).unwrap();
        run_calibrate(&CheckRequest::new(
            &input,
            Some(plan),
            CalibrateOptions::default(),
        ))
        .unwrap()
    }

    fn sources<'a>(plan: &'a Plan, cal: &'a CalibrationResult) -> FlightSources<'a> {
        FlightSources {
            plan: Some(plan),
            parts: vec![FlightPart::Calibration(cal)],
            verdict: Verdict::Pass,
            inputs: Vec::new(),
            generated_at: "2026-01-01T00:00:00Z".into(),
        }
    }

    #[test]
    fn a_cage_calibration_into_the_body_frame_is_reproduced_through_sensor_to_body() {
        let dir = tempfile::tempdir().unwrap();
        let plan = parse_plan(
            "[magnetometer]\nsensor_to_body = [\"+x\", \"-z\", \"+y\"]\n\
             [cage]\narticle_to_cage = [\"+y\", \"-x\", \"+z\"]\n",
            Path::new("plan.toml"),
        )
        .unwrap();
        let cal = cage_result(&plan, dir.path());
        assert_eq!(cal.soft_iron_frame, "body");
        let p = FlightParams::assemble(&sources(&plan, &cal)).unwrap();
        // Steps 1–4 give the body-frame field the cage fit itself computed, sample by
        // sample.
        for k in [0, 17, 40] {
            let raw = cal.data.samples_nt[k];
            let got = p.apply(0, raw.into(), &[], 0.0).unwrap();
            assert_relative_eq!(Vector3::from(got), cal.data.corrected_nt[k], epsilon = 1e-6);
        }
        assert_eq!(p.test_vectors.len(), 1);
        assert!(p.notes.iter().any(|n| n.contains("measured the mounting")));
    }

    #[test]
    fn a_cage_calibration_into_the_cage_frame_is_refused_by_name() {
        let dir = tempfile::tempdir().unwrap();
        let plan = parse_plan("[magnetometer]\n", Path::new("plan.toml")).unwrap();
        let cal = cage_result(&plan, dir.path());
        assert_eq!(cal.soft_iron_frame, "cage");
        let e = FlightParams::assemble(&sources(&plan, &cal)).unwrap_err();
        assert!(e.to_string().contains("article_to_cage"), "{e}");
        let none = FlightSources {
            parts: Vec::new(),
            ..sources(&plan, &cal)
        };
        assert!(FlightParams::assemble(&none).is_err());
    }
}
