//! How a log is laid out beyond the defaults of `docs/formats.md` ("Logs as labs and
//! flight software write them"): the plan's `[columns]` mapping, raw counts, decimal
//! commas and commands logged only when they change. The input builder fills it from the
//! plan and the command line; the reader applies it once, to the header, so a mapped or
//! counted column costs nothing per row.

/// Every quantity a log column can hold, by the name `[columns]` maps (`cmd_<rod>` aside).
pub const KNOWN_QUANTITIES: [&str; 21] = [
    "t",
    "bx",
    "by",
    "bz",
    "hx",
    "hy",
    "hz",
    "ix",
    "iy",
    "iz",
    "gx",
    "gy",
    "gz",
    "temp",
    "angle",
    "mount",
    "px",
    "py",
    "pz",
    "time",
    "cmd_<rod>",
];

/// True when `key` (lower case) names a quantity a `[columns]` entry may map:
/// one of [`KNOWN_QUANTITIES`] or `cmd_<rod>` with a rod name.
pub fn is_known_quantity(key: &str) -> bool {
    match key.strip_prefix("cmd_") {
        Some(rod) => !rod.is_empty() && rod != "<rod>",
        None => KNOWN_QUANTITIES.contains(&key) && key != "time",
    }
}

/// How the columns of a log are named and written.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct LogLayout {
    /// Our quantity (lower case: `bx`, `t`, `cmd_x`, `gx`) → the log's column name as
    /// written in its header (compared without case, without its unit).
    pub columns: Vec<(String, String)>,
    /// Field per count, nT, per sensor axis: the scale of field columns in raw counts
    /// (`counts` or `LSB`).
    pub nt_per_count: Option<[f64; 3]>,
    /// Field columns that carry no unit are raw counts (the plan's unit is `counts`).
    pub counts_by_default: bool,
    /// Numbers are written with a decimal comma (`1,5`); the delimiter is then `;` or tab.
    pub decimal_comma: bool,
    /// Command columns hold a value only when it changes: an empty cell repeats the last
    /// value above it.
    pub hold_commands: bool,
}

impl LogLayout {
    /// The log's column name mapped to `quantity`, if the layout maps it.
    pub fn mapped(&self, quantity: &str) -> Option<&str> {
        self.columns
            .iter()
            .find(|(q, _)| q == quantity)
            .map(|(_, h)| h.as_str())
    }

    /// The quantity mapped to a column whose name is `name` (case-insensitive).
    pub fn quantity_of(&self, name: &str) -> Option<&str> {
        self.columns
            .iter()
            .find(|(_, h)| h.trim().eq_ignore_ascii_case(name.trim()))
            .map(|(q, _)| q.as_str())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn known_quantities_include_commands_and_gyros() {
        for k in ["t", "bx", "gz", "ix", "cmd_x", "cmd_mtq1", "mount"] {
            assert!(is_known_quantity(k), "{k}");
        }
        for k in ["b", "cmd_", "time", "bw", "cmd_<rod>"] {
            assert!(!is_known_quantity(k), "{k}");
        }
    }

    #[test]
    fn mapping_is_found_both_ways_without_case() {
        let l = LogLayout {
            columns: vec![("bx".into(), "MAG_X".into())],
            ..LogLayout::default()
        };
        assert_eq!(l.mapped("bx"), Some("MAG_X"));
        assert_eq!(l.quantity_of("mag_x"), Some("bx"));
        assert_eq!(l.quantity_of("MAG_Y"), None);
    }
}
