//! Report writers: terminal, JSON, HTML with SVG plots, flight parameters.

pub mod flight_params;
