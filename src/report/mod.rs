//! Report writers: terminal, JSON, HTML with SVG plots, flight parameters.

/// Flight-software parameters (JSON, C header) from a calibration.
pub mod flight_params;
