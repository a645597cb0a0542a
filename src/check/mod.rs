//! Checks: each turns a log and a plan into a result with a verdict (DESIGN §2).

pub mod calibrate;
pub mod closeout;
pub mod dipole;
pub mod polarity;
