//! Flight parameters from the polarity check: the rod-to-magnetometer coupling matrix
//! (nT per unit command, sensor frame, one column per rod in plan order), with the lag
//! and the blanking window, for flight-software compensation. Written as JSON, or as a
//! C header when the file name ends in `.h`; always atomically (temporary file in the
//! same folder, then renamed), so a reader never sees half a file.

use std::fmt::Write as _;
use std::path::Path;

use serde::Serialize;

use crate::check::polarity::PolarityResult;
use crate::Error;

/// Format of a parameter file.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ParamsFormat {
    /// JSON object.
    Json,
    /// C header with `static const` arrays.
    CHeader,
}

impl ParamsFormat {
    /// From the file name: `.h` is a C header, anything else JSON.
    pub fn from_path(path: &Path) -> Self {
        match path.extension().and_then(|e| e.to_str()) {
            Some(e) if e.eq_ignore_ascii_case("h") => ParamsFormat::CHeader,
            _ => ParamsFormat::Json,
        }
    }
}

/// The parameter file's content.
#[derive(Debug, Clone, Serialize)]
pub struct PolarityParams {
    /// What this is.
    pub kind: &'static str,
    /// magproof version that wrote it.
    pub magproof_version: &'static str,
    /// Frame of the coupling rows.
    pub frame: &'static str,
    /// Rod names: the matrix's columns, in plan order.
    pub rods: Vec<String>,
    /// Coupling, nT per command unit: rows = sensor x, y, z; columns = rods.
    pub coupling_nt_per_command: Vec<Vec<f64>>,
    /// 1σ of each element, same layout.
    pub coupling_sigma_nt_per_command: Vec<Vec<f64>>,
    /// Command-to-response lag, s.
    pub lag_s: f64,
    /// Longest settle time over all rods, s from command off: the shortest blanking
    /// window that covers every measured pulse. Null if none was measured.
    pub blanking_window_s: Option<f64>,
    /// Whether every rod passed the polarity check.
    pub pass: bool,
}

impl PolarityParams {
    /// From a polarity result.
    pub fn from_result(r: &PolarityResult) -> Self {
        let col = |f: &dyn Fn(usize) -> Vec<f64>| (0..3).map(f).collect::<Vec<_>>();
        Self {
            kind: "magproof torque-rod coupling",
            magproof_version: crate::VERSION,
            frame: "sensor",
            rods: r.rods.iter().map(|x| x.name.clone()).collect(),
            coupling_nt_per_command: col(&|a| {
                r.rods
                    .iter()
                    .map(|x| x.coupling_nt_per_command[a])
                    .collect()
            }),
            coupling_sigma_nt_per_command: col(&|a| {
                r.rods
                    .iter()
                    .map(|x| x.coupling_sigma_nt_per_command[a])
                    .collect()
            }),
            lag_s: r.lag_s,
            blanking_window_s: r
                .rods
                .iter()
                .filter_map(|x| x.settle_time_s)
                .reduce(f64::max),
            pass: r.pass,
        }
    }

    /// Render in a format.
    pub fn render(&self, format: ParamsFormat) -> Result<String, Error> {
        match format {
            ParamsFormat::Json => serde_json::to_string_pretty(self)
                .map(|s| s + "\n")
                .map_err(|e| Error::Internal(format!("parameters JSON: {e}"))),
            ParamsFormat::CHeader => {
                self.check_c_names()?;
                Ok(self.c_header())
            }
        }
    }

    /// Refuse two rods whose names become one C macro name (`x-1` and `x_1` both give
    /// `MAGPROOF_ROD_INDEX_X_1`): the header would define a macro twice.
    fn check_c_names(&self) -> Result<(), Error> {
        for (i, a) in self.rods.iter().enumerate() {
            if let Some(b) = self.rods[..i].iter().find(|b| c_ident(b) == c_ident(a)) {
                return Err(Error::Usage(format!(
                    "rods \"{b}\" and \"{a}\" both become the C name MAGPROOF_ROD_INDEX_{}; \
                     rename one in the plan to write a C header",
                    c_ident(a)
                )));
            }
        }
        Ok(())
    }

    fn c_header(&self) -> String {
        let n = self.rods.len();
        let mut s = String::new();
        let _ = writeln!(
            s,
            "/* Torque-rod coupling written by magproof {} — do not edit by hand. */",
            self.magproof_version
        );
        let _ = writeln!(
            s,
            "/* Rows: magnetometer sensor axes x, y, z. Columns: rods {}. */",
            self.rods.join(", ")
        );
        let _ = writeln!(
            s,
            "/* Polarity check {}. */",
            if self.pass { "passed" } else { "FAILED" }
        );
        s.push_str("#ifndef MAGPROOF_ROD_COUPLING_H\n#define MAGPROOF_ROD_COUPLING_H\n\n");
        let _ = writeln!(s, "#define MAGPROOF_ROD_COUNT {n}");
        for (i, r) in self.rods.iter().enumerate() {
            let _ = writeln!(s, "#define MAGPROOF_ROD_INDEX_{} {i}", c_ident(r));
        }
        let _ = writeln!(s, "#define MAGPROOF_ROD_LAG_S ({:e})", self.lag_s);
        if let Some(b) = self.blanking_window_s {
            let _ = writeln!(s, "#define MAGPROOF_ROD_BLANKING_WINDOW_S ({b:e})");
        }
        let matrix = |name: &str, m: &[Vec<f64>], s: &mut String| {
            let _ = writeln!(
                s,
                "\n/* nT per command unit */\nstatic const double {name}[3][{n}] = {{"
            );
            for row in m {
                let cells: Vec<String> = row.iter().map(|v| format!("{v:.9e}")).collect();
                let _ = writeln!(s, "    {{ {} }},", cells.join(", "));
            }
            s.push_str("};\n");
        };
        matrix(
            "MAGPROOF_ROD_COUPLING_NT_PER_CMD",
            &self.coupling_nt_per_command,
            &mut s,
        );
        matrix(
            "MAGPROOF_ROD_COUPLING_SIGMA_NT_PER_CMD",
            &self.coupling_sigma_nt_per_command,
            &mut s,
        );
        s.push_str("\n#endif /* MAGPROOF_ROD_COUPLING_H */\n");
        s
    }
}

fn c_ident(name: &str) -> String {
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

/// Write `text` to `path` atomically. Refuses to replace an existing file unless `force`.
/// (Kept for callers; the work is [`crate::report::atomic::write_atomic`].)
pub fn write_atomically(path: &Path, text: &str, force: bool) -> Result<(), Error> {
    crate::report::atomic::write_atomic(path, text.as_bytes(), force)
}

/// Write the coupling parameters of `result` to `path` (format from the extension).
pub fn write_polarity_params(
    result: &PolarityResult,
    path: &Path,
    force: bool,
) -> Result<(), Error> {
    let text = PolarityParams::from_result(result).render(ParamsFormat::from_path(path))?;
    write_atomically(path, &text, force)
}
