//! `[align_test]` (docs/alignment.md): the turntable alignment test's mounts and,
//! when a reference probe measured it, the steady field in the table frame.

use nalgebra::Vector3;
use serde::Deserialize;

use super::parse::Validator;
use super::raw::RawMount;
use super::types::Mount;
use crate::log::error::PlanError;
use crate::screen::plausible::MAX_FIELD_NT;

/// `[align_test]` as written.
#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawAlignTest {
    pub(super) field_table_nt: Option<[f64; 3]>,
    #[serde(default)]
    pub(super) mount: Vec<RawMount>,
}

/// `[align_test]`.
#[derive(Debug, Clone)]
pub struct AlignTest {
    /// Mounts of the article on the turntable, each with its body → table rotation at
    /// heading zero.
    pub mounts: Vec<Mount>,
    /// The steady field in the table frame (L, +z up), nT, as a reference probe measured
    /// it; decides the field's sign (and so the sensor's handedness) when given.
    pub field_table_nt: Option<Vector3<f64>>,
}

impl Validator<'_> {
    /// The mounts of a `[[<section>.mount]]` list: labels plain, unique and not "none",
    /// rotations proper.
    pub(super) fn mounts(
        &self,
        section: &str,
        raw: Vec<RawMount>,
    ) -> Result<Vec<Mount>, PlanError> {
        let mut mounts: Vec<Mount> = Vec::new();
        for (i, m) in raw.into_iter().enumerate() {
            let label = m.label.trim().to_string();
            let key = format!("{section}.mount[{i}]");
            if label.is_empty() || label.eq_ignore_ascii_case("none") {
                return Err(self.invalid(
                    &format!("{key}.label"),
                    "must be a label other than empty or \"none\" (those mark article-absent rows)"
                        .into(),
                ));
            }
            self.plain_text(&format!("{key}.label"), &label)?;
            if mounts.iter().any(|o| o.label == label) {
                return Err(self.invalid(
                    &format!("{key}.label"),
                    format!("mount \"{label}\" is listed twice"),
                ));
            }
            mounts.push(Mount {
                label,
                body_to_table: self
                    .rotation(&format!("{key}.body_to_table"), Some(&m.body_to_table))?,
            });
        }
        Ok(mounts)
    }

    pub(super) fn align_test(&self, a: RawAlignTest) -> Result<AlignTest, PlanError> {
        let mounts = self.mounts("align_test", a.mount)?;
        if mounts.is_empty() {
            return Err(self.invalid(
                "align_test",
                "needs at least one [[align_test.mount]] (label, body_to_table); two with \
                 different body axes up see every rotation"
                    .into(),
            ));
        }
        let field_table_nt = match a.field_table_nt {
            None => None,
            Some(f) => {
                let v = self.vec3("align_test.field_table_nt", f)?;
                if v.norm() > MAX_FIELD_NT || v.norm() == 0.0 {
                    return Err(self.invalid(
                        "align_test.field_table_nt",
                        format!("must be a field of 0 < |F| ≤ {MAX_FIELD_NT} nT"),
                    ));
                }
                Some(v)
            }
        };
        Ok(AlignTest {
            mounts,
            field_table_nt,
        })
    }
}
