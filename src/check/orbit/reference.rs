//! The reference magnitude along the orbit: IGRF-14 at every sample's Earth-fixed
//! position and time, synthesised on a grid of model nodes (every sample when the grid is
//! off) and interpolated in time between them by a cubic through the four nearest
//! nodes. The interpolation error is measured, not assumed: the full synthesis is also
//! run at the sample midway between each pair of nodes (where a cubic's error peaks) and
//! the largest difference is reported; above [`GRID_ERROR_MAX_NT`] every sample is
//! synthesised instead.

use rayon::prelude::*;
use serde::Serialize;

use crate::log::telemetry::{LoggedPositions, OrbitColumns};
use crate::physics::igrf::GaussCoefficients;
use crate::physics::orbit::{
    coefficients_for, geodetic_latitude_deg, geodetic_to_ecef_km, igrf_magnitude_ecef, Orbit,
};
use crate::Error;

/// Largest interpolation error accepted, nT (else every sample is synthesised).
pub const GRID_ERROR_MAX_NT: f64 = 1.0;

/// Default spacing of the model nodes, s (about 230 km along a low orbit).
pub const DEFAULT_GRID_S: f64 = 30.0;

/// Span of time one set of Gauss coefficients is used for, s (secular change across
/// half of it stays below 0.1 nT).
const COEFF_SPAN_S: f64 = 20_000.0;

/// Where the positions came from (`reference` in the JSON).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub enum Route {
    /// SGP4 from the plan's two-line element set.
    #[serde(rename = "tle-sgp4")]
    TleSgp4,
    /// Logged Earth-fixed positions `rx ry rz`.
    #[serde(rename = "positions-ecef")]
    PositionsEcef,
    /// Logged geodetic `lat lon alt`.
    #[serde(rename = "positions-geodetic")]
    PositionsGeodetic,
}

impl Route {
    /// The JSON word.
    pub fn word(self) -> &'static str {
        match self {
            Route::TleSgp4 => "tle-sgp4",
            Route::PositionsEcef => "positions-ecef",
            Route::PositionsGeodetic => "positions-geodetic",
        }
    }
}

/// The model along the log.
#[derive(Debug, Clone)]
pub struct ReferenceField {
    /// IGRF-14 magnitude per sample, nT.
    pub magnitude_nt: Vec<f64>,
    /// Largest interpolation error found at the check samples, nT (0: every sample
    /// synthesised).
    pub grid_error_nt: f64,
    /// Node spacing used, s (0: every sample synthesised).
    pub grid_s: f64,
    /// Sample index and geodetic latitude (deg) of each model node, for the report.
    pub node_latitude_deg: Vec<(usize, f64)>,
}

/// Earth-fixed position of sample `i`, km.
fn position_fn<'a>(
    cols: &'a OrbitColumns,
    orbit: Option<&'a Orbit>,
) -> impl Fn(usize) -> Result<[f64; 3], Error> + Sync + 'a {
    move |i| match (&cols.positions, orbit) {
        (Some(LoggedPositions::EcefKm(r)), _) => Ok([r[0][i], r[1][i], r[2][i]]),
        (Some(LoggedPositions::Geodetic(g)), _) => {
            Ok(geodetic_to_ecef_km(g[0][i], g[1][i], g[2][i]))
        }
        (None, Some(o)) => o
            .ecef_km(cols.t_unix_s[i])
            .map_err(|e| Error::Usage(format!("[orbit] tle: {e}"))),
        (None, None) => Err(Error::Internal("no positions and no orbit".into())),
    }
}

/// Node indices: the first and last sample, and every sample at least `grid_s` after
/// the previous node.
fn nodes(t: &[f64], grid_s: f64) -> Vec<usize> {
    let mut out = vec![0];
    let mut last = t[0];
    for (i, &ti) in t.iter().enumerate().skip(1) {
        if ti - last >= grid_s {
            out.push(i);
            last = ti;
        }
    }
    if *out.last().unwrap_or(&0) != t.len() - 1 {
        out.push(t.len() - 1);
    }
    out
}

/// Coefficients for each span of [`COEFF_SPAN_S`] from the first sample, at its middle.
struct Coeffs {
    t0: f64,
    sets: Vec<GaussCoefficients>,
}

impl Coeffs {
    fn new(t: &[f64]) -> Result<Self, Error> {
        let (t0, t1) = (t[0], t[t.len() - 1]);
        let n = (((t1 - t0) / COEFF_SPAN_S).floor() as usize) + 1;
        let sets = (0..n)
            .map(|k| {
                let mid = t0 + (k as f64 + 0.5) * COEFF_SPAN_S;
                coefficients_for(mid.min(t1).max(t0)).map_err(Error::from)
            })
            .collect::<Result<_, _>>()?;
        Ok(Coeffs { t0, sets })
    }
    fn at(&self, t: f64) -> &GaussCoefficients {
        let k = (((t - self.t0) / COEFF_SPAN_S).floor().max(0.0) as usize).min(self.sets.len() - 1);
        &self.sets[k]
    }
}

/// The model magnitude at every sample of the log. `grid_s = 0` synthesises every sample.
pub fn reference_field(
    cols: &OrbitColumns,
    orbit: Option<&Orbit>,
    grid_s: f64,
) -> Result<ReferenceField, Error> {
    let t = &cols.t_unix_s;
    let n = t.len();
    let coeffs = Coeffs::new(t)?;
    let pos = position_fn(cols, orbit);
    let exact = |i: usize| -> Result<(f64, f64), Error> {
        let r = pos(i)?;
        Ok((
            igrf_magnitude_ecef(coeffs.at(t[i]), r),
            geodetic_latitude_deg(r),
        ))
    };
    if grid_s <= 0.0 || n < 8 {
        return full(n, &exact);
    }
    let idx = nodes(t, grid_s);
    let at_nodes: Vec<(f64, f64)> = idx
        .par_iter()
        .map(|&i| exact(i))
        .collect::<Result<_, _>>()?;
    let mut mag = vec![0.0; n];
    mag.par_chunks_mut(4096).enumerate().for_each(|(c, out)| {
        let mut seg = idx.partition_point(|&k| k <= c * 4096).saturating_sub(1);
        for (j, m) in out.iter_mut().enumerate() {
            let i = c * 4096 + j;
            while seg + 1 < idx.len() && idx[seg + 1] <= i {
                seg += 1;
            }
            *m = interpolate(t, &idx, &at_nodes, seg, i);
        }
    });
    // Check samples: midway between consecutive nodes.
    let checks: Vec<usize> = idx
        .windows(2)
        .filter(|w| w[1] > w[0] + 1)
        .map(|w| (w[0] + w[1]) / 2)
        .collect();
    let err = checks
        .par_iter()
        .map(|&i| exact(i).map(|(e, _)| (e - mag[i]).abs()))
        .try_reduce(|| 0.0, |a, b| Ok(a.max(b)))?;
    if err > GRID_ERROR_MAX_NT {
        return full(n, &exact);
    }
    Ok(ReferenceField {
        magnitude_nt: mag,
        grid_error_nt: err,
        grid_s,
        node_latitude_deg: idx.iter().zip(&at_nodes).map(|(&i, v)| (i, v.1)).collect(),
    })
}

fn full(
    n: usize,
    exact: &(dyn Fn(usize) -> Result<(f64, f64), Error> + Sync),
) -> Result<ReferenceField, Error> {
    let both: Vec<(f64, f64)> = (0..n)
        .into_par_iter()
        .map(exact)
        .collect::<Result<_, _>>()?;
    let step = (n / 5000).max(1);
    Ok(ReferenceField {
        magnitude_nt: both.iter().map(|b| b.0).collect(),
        grid_error_nt: 0.0,
        grid_s: 0.0,
        node_latitude_deg: (0..n).step_by(step).map(|i| (i, both[i].1)).collect(),
    })
}

/// Cubic (Lagrange) through the four nodes around sample `i`, in time; fewer at the ends.
fn interpolate(t: &[f64], idx: &[usize], v: &[(f64, f64)], seg: usize, i: usize) -> f64 {
    if idx[seg] == i {
        return v[seg].0;
    }
    let last = idx.len() - 1;
    let (mut lo, mut hi) = (seg.saturating_sub(1), (seg + 2).min(last));
    if hi - lo < 3 {
        if lo == 0 {
            hi = 3.min(last);
        } else {
            lo = hi.saturating_sub(3);
        }
    }
    let x = t[i];
    let mut sum = 0.0;
    for a in lo..=hi {
        let mut l = 1.0;
        for b in lo..=hi {
            if a != b {
                l *= (x - t[idx[b]]) / (t[idx[a]] - t[idx[b]]);
            }
        }
        sum += l * v[a].0;
    }
    sum
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn nodes_cover_the_ends_and_the_spacing() {
        let t: Vec<f64> = (0..100).map(f64::from).collect();
        assert_eq!(nodes(&t, 30.0), vec![0, 30, 60, 90, 99]);
        let gap = [0.0, 1.0, 2.0, 100.0, 101.0];
        assert_eq!(nodes(&gap, 30.0), vec![0, 3, 4]);
    }

    #[test]
    fn cubic_is_exact_for_a_cubic() {
        let t: Vec<f64> = (0..10).map(|k| f64::from(k) * 1.5).collect();
        let f = |x: f64| 2.0 - x + 0.5 * x * x - 0.01 * x * x * x;
        let idx = vec![0, 3, 6, 9];
        let v: Vec<(f64, f64)> = idx.iter().map(|&i| (f(t[i]), 0.0)).collect();
        for i in 0..10 {
            let seg = idx.partition_point(|&k| k <= i) - 1;
            assert!((interpolate(&t, &idx, &v, seg.min(2), i) - f(t[i])).abs() < 1e-9);
        }
    }
}
