//! What a sweep log's column holds, and the unit of a numeric time column. Shared by the
//! header (which resolves names to kinds, `header.rs` with `names.rs`) and the row
//! parsers; it depends on neither, so the reader's files import each other one way.

/// Unit of a time column given as numbers.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum TimeUnit {
    /// seconds
    Seconds,
    /// milliseconds
    Milliseconds,
    /// seconds since 1970-01-01T00:00:00Z (`t [unix]`); kept as seconds after the
    /// first row, like ISO-8601 timestamps.
    Unix,
}

impl TimeUnit {
    /// Seconds per unit.
    pub fn to_seconds(self) -> f64 {
        match self {
            TimeUnit::Seconds | TimeUnit::Unix => 1.0,
            TimeUnit::Milliseconds => 1e-3,
        }
    }
}

/// What a column holds.
#[derive(Debug, Clone, PartialEq)]
pub enum ColumnKind {
    /// `t`: seconds, or ISO-8601 timestamps.
    Time(TimeUnit),
    /// `bx`, `by`, `bz` (axis 0, 1, 2): measured field, sensor frame.
    Field(usize),
    /// `hx`, `hy`, `hz`: applied reference field, cage frame.
    Applied(usize),
    /// `ix`, `iy`, `iz`: cage coil currents, A.
    Current(usize),
    /// `gx`, `gy`, `gz`: angular rate, gyro frame, rad/s.
    Gyro(usize),
    /// `temp`: °C.
    Temperature,
    /// `cmd_<rod>`: a torque-rod command.
    Command(String),
    /// `angle`: turntable angle.
    Angle,
    /// `mount`: mounting label (also `position`: a probe station's label on a rod bench).
    Mount,
    /// `i` (or `current`): a torque rod's current on the bench, A.
    RodCurrent,
    /// `px`, `py`, `pz`: probe position, table frame.
    Probe(usize),
    /// Anything else: listed once as ignored.
    Ignored,
}

impl ColumnKind {
    /// True for columns stored as numbers.
    pub fn is_numeric(&self) -> bool {
        !matches!(
            self,
            ColumnKind::Time(_) | ColumnKind::Mount | ColumnKind::Ignored
        )
    }

    /// True for one axis of a triple (`bx`, `hx`, `ix`, `gx`, `px`).
    pub fn is_axis(&self) -> bool {
        matches!(
            self,
            ColumnKind::Field(_)
                | ColumnKind::Applied(_)
                | ColumnKind::Current(_)
                | ColumnKind::Gyro(_)
                | ColumnKind::Probe(_)
        )
    }

    /// Our name of the quantity (`bx`, `cmd_x`, `t`), as `[columns]` maps it; empty for
    /// an ignored column.
    pub fn quantity(&self) -> String {
        let axis = |p: &str, a: &usize| format!("{p}{}", ["x", "y", "z"][(*a).min(2)]);
        match self {
            ColumnKind::Time(_) => "t".into(),
            ColumnKind::Field(a) => axis("b", a),
            ColumnKind::Applied(a) => axis("h", a),
            ColumnKind::Current(a) => axis("i", a),
            ColumnKind::Gyro(a) => axis("g", a),
            ColumnKind::Probe(a) => axis("p", a),
            ColumnKind::Temperature => "temp".into(),
            ColumnKind::Command(rod) => format!("cmd_{rod}"),
            ColumnKind::Angle => "angle".into(),
            ColumnKind::Mount => "mount".into(),
            ColumnKind::RodCurrent => "i".into(),
            ColumnKind::Ignored => String::new(),
        }
    }
}
