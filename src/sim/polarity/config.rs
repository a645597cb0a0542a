//! Settings of a simulated polarity test: the rods as planned and as really built and
//! wired, the schedule, the sensor and the disturbances.

use nalgebra::{Matrix3, Vector3};

/// One simulated rod: what the plan says about it and how it is really built and wired.
#[derive(Debug, Clone)]
pub struct SimRod {
    /// Name (log column `cmd_<name>`).
    pub name: String,
    /// Positive dipole direction for a positive command, body frame (B), unit vector.
    pub axis_body: Vector3<f64>,
    /// Rod centre, body frame (B), m.
    pub position_m: Vector3<f64>,
    /// Nominal dipole per command unit, A·m² (written to the plan).
    pub dipole_per_command_am2: f64,
    /// Rod length, m (written to the plan).
    pub length_m: f64,
    /// True dipole over nominal (1 = as designed, 0 = dead rod).
    pub gain: f64,
    /// Wired backwards: a positive command gives a negative dipole.
    pub reversed: bool,
    /// Remanent dipole once the rod is off after a pulse, A·m² (along the axis, sign of
    /// the last pulse); while the rod is driven its dipole is set by the command alone.
    pub remanent_am2: f64,
}

/// Settings of a simulated polarity test.
#[derive(Debug, Clone)]
pub struct PolarityConfig {
    /// The rods, in plan order.
    pub rods: Vec<SimRod>,
    /// Two rods (indices) whose command lines drive each other's coils.
    pub swapped: Option<(usize, usize)>,
    /// Sensor position, body frame (B), m.
    pub sensor_position_m: Vector3<f64>,
    /// Sensor mounting: `v_b = sensor_to_body · v_s`.
    pub sensor_to_body: Matrix3<f64>,
    /// Write the sensor as a `[probe]` instead of `[magnetometer]` in the plan.
    pub as_probe: bool,
    /// Sample rate, Hz.
    pub sample_rate_hz: f64,
    /// Pulse length, s.
    pub pulse_s: f64,
    /// Quiet gap before each pulse, s.
    pub gap_s: f64,
    /// Number of (+, −) pulse pairs per rod.
    pub cycles: usize,
    /// Command amplitude, command units.
    pub command: f64,
    /// Command-to-dipole pure delay, s.
    pub lag_s: f64,
    /// First-order rise/fall time constant of the rod's dipole, s (0 = instant).
    pub rise_time_s: f64,
    /// Ambient field, sensor frame (S), nT.
    pub ambient_nt: Vector3<f64>,
    /// Linear drift, sensor frame, nT/s.
    pub drift_nt_per_s: Vector3<f64>,
    /// Amplitude of a slow sinusoidal wander on every axis, nT.
    pub wander_nt: f64,
    /// Period of the wander, s.
    pub wander_period_s: f64,
    /// White noise σ per axis, nT.
    pub noise_nt: f64,
    /// Angle limit written to the plan, deg (`None`: no `[limits]`).
    pub angle_max_deg: Option<f64>,
    /// When given, every rod is a uniformly magnetised cylinder of this radius (m) and
    /// its length at every distance (a finite-rod world); `None`: point dipoles.
    pub finite_rod_radius_m: Option<f64>,
}

impl Default for PolarityConfig {
    /// Three rods in the lower bay of an invented 3U-class vehicle, sensor on the top deck.
    fn default() -> Self {
        let rod = |name: &str, axis: [f64; 3], pos: [f64; 3]| SimRod {
            name: name.into(),
            axis_body: Vector3::from(axis),
            position_m: Vector3::from(pos),
            dipole_per_command_am2: 0.2,
            length_m: 0.06,
            gain: 1.0,
            reversed: false,
            remanent_am2: 0.002,
        };
        Self {
            rods: vec![
                rod("x", [1.0, 0.0, 0.0], [0.0, 0.04, 0.0]),
                rod("y", [0.0, 1.0, 0.0], [0.04, 0.0, 0.0]),
                rod("z", [0.0, 0.0, 1.0], [-0.03, -0.03, 0.02]),
            ],
            swapped: None,
            sensor_position_m: Vector3::new(0.02, 0.015, 0.21),
            sensor_to_body: Matrix3::identity(),
            as_probe: false,
            sample_rate_hz: 50.0,
            pulse_s: 1.0,
            gap_s: 1.5,
            cycles: 2,
            command: 1.0,
            lag_s: 0.03,
            rise_time_s: 0.02,
            ambient_nt: Vector3::new(18_500.0, -4_200.0, -41_000.0),
            drift_nt_per_s: Vector3::new(0.8, -0.5, 0.3),
            finite_rod_radius_m: None,
            wander_nt: 15.0,
            wander_period_s: 40.0,
            noise_nt: 3.0,
            angle_max_deg: Some(30.0),
        }
    }
}
