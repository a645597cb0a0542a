//! The article-present rows of a dipole log, background subtracted: the backgrounds
//! (all absent rows, and for a static map each probe position's own), then per row the
//! fit's sample and the plot's point with the background it used.

use nalgebra::Vector3;

use super::layout::Layout;
use super::{
    estimate_background, estimate_position_backgrounds, position_key_of, Background, DipoleMethod,
    DipolePoint, DipoleWarning,
};
use crate::fit::dipole::DipoleSample;
use crate::physics::frames::rotation_z;
use crate::Error;

/// The ambient field estimates of a log.
pub(super) struct Backgrounds {
    /// From every article-absent row.
    pub(super) overall: Background,
    /// Static map: each probe position's own (key of [`position_key_of`]), where it has
    /// article-absent rows.
    pub(super) local: Vec<([i64; 3], Background)>,
}

impl Backgrounds {
    /// Estimate them from the rows' times (s); refuses a log with no background
    /// segment; warns when there is a single one.
    pub(super) fn estimate(
        layout: &Layout,
        row_time_s: &[f64],
        warnings: &mut Vec<DipoleWarning>,
    ) -> Result<Self, Error> {
        let log = layout.log;
        let overall = estimate_background(row_time_s, layout.mounts, layout.b_nt, &log.lines)
            .ok_or_else(|| {
                Error::Degenerate(format!(
                    "{}: no background segment: every row has a mount label, so the ambient \
                     field cannot be told from the article's; record rows with the article \
                     away (mount empty or \"none\") before and after",
                    log.path.display()
                ))
            })?;
        if overall.segments.len() == 1 {
            warnings.push(DipoleWarning::SingleBackgroundSegment);
        }
        let local = match (layout.method, &log.probe_m) {
            (DipoleMethod::Static, Some(p)) => {
                estimate_position_backgrounds(row_time_s, layout.mounts, layout.b_nt, p, &log.lines)
            }
            _ => Vec::new(),
        };
        Ok(Backgrounds { overall, local })
    }

    /// Every background by index: 0 the overall one, j + 1 the j-th local one.
    pub(super) fn list(&self) -> Vec<&Background> {
        let mut backgrounds: Vec<&Background> = vec![&self.overall];
        backgrounds.extend(self.local.iter().map(|(_, g)| g));
        backgrounds
    }

    /// Index (as in [`Backgrounds::list`]) of the local background at probe position
    /// `probe_m` (table frame, m), if that position has one.
    fn local_index(&self, probe_m: &Vector3<f64>) -> Option<usize> {
        let key = position_key_of(probe_m);
        self.local
            .iter()
            .position(|(k, _)| *k == key)
            .map(|j| j + 1)
    }
}

/// The article-present rows, in log order.
pub(super) struct ArticleRows {
    /// Fit samples: probe position, rotation body → table, field minus background.
    pub(super) samples: Vec<DipoleSample>,
    /// Plot points (model field filled in after the fit).
    pub(super) points: Vec<DipolePoint>,
    /// Per sample, the index of its background in [`Backgrounds::list`].
    pub(super) bg_of_sample: Vec<usize>,
}

/// Every article-present row with its background subtracted. Warns of rows outside
/// their background's time span and of static-map rows with no local background (a
/// uniform ambient field assumed).
pub(super) fn article_rows(
    layout: &Layout,
    row_time_s: &[f64],
    bgs: &Backgrounds,
    warnings: &mut Vec<DipoleWarning>,
) -> Result<ArticleRows, Error> {
    let log = layout.log;
    let backgrounds = bgs.list();
    let mut rows = ArticleRows {
        samples: Vec::with_capacity(log.len()),
        points: Vec::with_capacity(log.len()),
        bg_of_sample: Vec::with_capacity(log.len()),
    };
    let (mut before, mut after, mut uniform_rows) = (0, 0, 0);
    for i in 0..log.len() {
        let (Some(&Some(k)), Some(&t), Some(line)) =
            (layout.mounts.get(i), row_time_s.get(i), log.lines.get(i))
        else {
            continue;
        };
        let rot0 = layout.body_to_table(k)?;
        let angle_rad = layout.angle_rad(i);
        let probe_m = layout.probe_m(i)?;
        let meas = log
            .field_at(i)
            .ok_or_else(|| Error::Internal(format!("row {i} has no field")))?;
        let which = match layout.method {
            DipoleMethod::Static => bgs.local_index(&probe_m).unwrap_or_else(|| {
                uniform_rows += 1;
                0
            }),
            DipoleMethod::Turntable => 0,
        };
        let this_bg = backgrounds.get(which).copied().unwrap_or(&bgs.overall);
        let (t_first, t_last) = this_bg.span_s();
        if t < t_first {
            before += 1;
        } else if t > t_last {
            after += 1;
        }
        rows.bg_of_sample.push(which);
        let measured_nt = meas - this_bg.at(t);
        rows.samples.push(DipoleSample {
            probe_m,
            body_to_table: rotation_z(angle_rad) * rot0,
            b_nt: measured_nt,
        });
        rows.points.push(DipolePoint {
            t_s: t,
            angle_rad,
            mount: k as usize,
            probe_m,
            measured_nt,
            model_nt: Vector3::zeros(),
            line,
        });
    }
    if before + after > 0 {
        warnings.push(DipoleWarning::OutsideBackground { before, after });
    }
    if uniform_rows > 0 {
        warnings.push(DipoleWarning::UniformAmbientAssumed { rows: uniform_rows });
    }
    Ok(rows)
}
