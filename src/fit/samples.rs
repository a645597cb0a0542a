//! Field readings as the fits read them: a slice of 3-vectors, or the log's three field
//! columns read in place.
//!
//! A sweep log holds the field as three columns (`bx`, `by`, `bz`). Copying a
//! million-row log into a vector of 3-vectors before a fit costs 24 MB written and paged
//! in; the long-log fits take [`FieldColumns`] instead and read each sample where it is.

use nalgebra::Vector3;

/// Readings of the field, sensor frame, nT, addressed by sample index.
pub trait FieldSamples: Sync {
    /// Number of samples.
    fn len(&self) -> usize;

    /// True when there is no sample.
    fn is_empty(&self) -> bool {
        self.len() == 0
    }

    /// Sample `i` (`i < len()`).
    fn at(&self, i: usize) -> Vector3<f64>;

    /// The samples as one slice, when they are stored that way.
    fn as_slice(&self) -> Option<&[Vector3<f64>]> {
        None
    }

    /// The samples as a vector of 3-vectors (a copy).
    fn to_vec(&self) -> Vec<Vector3<f64>> {
        (0..self.len()).map(|i| self.at(i)).collect()
    }
}

/// A slice of 3-vectors, or anything that holds one (a `Vec`).
impl<T: AsRef<[Vector3<f64>]> + Sync + ?Sized> FieldSamples for T {
    fn len(&self) -> usize {
        self.as_ref().len()
    }

    #[inline]
    fn at(&self, i: usize) -> Vector3<f64> {
        self.as_ref()[i]
    }

    fn as_slice(&self) -> Option<&[Vector3<f64>]> {
        Some(self.as_ref())
    }

    fn to_vec(&self) -> Vec<Vector3<f64>> {
        self.as_ref().to_vec()
    }
}

/// Three equally long columns `[x, y, z]` read as 3-vectors.
#[derive(Debug, Clone, Copy)]
pub struct FieldColumns<'a> {
    x: &'a [f64],
    y: &'a [f64],
    z: &'a [f64],
}

impl<'a> FieldColumns<'a> {
    /// The columns `[x, y, z]`; `None` unless they have the same length.
    pub fn new(columns: [&'a [f64]; 3]) -> Option<Self> {
        let [x, y, z] = columns;
        (x.len() == y.len() && y.len() == z.len()).then_some(FieldColumns { x, y, z })
    }
}

impl FieldSamples for FieldColumns<'_> {
    fn len(&self) -> usize {
        self.x.len()
    }

    #[inline]
    fn at(&self, i: usize) -> Vector3<f64> {
        Vector3::new(self.x[i], self.y[i], self.z[i])
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn columns_read_as_the_vectors_they_hold() {
        let v: Vec<Vector3<f64>> = (0..5)
            .map(|i| Vector3::new(i as f64, 10.0 * i as f64, -(i as f64)))
            .collect();
        let (x, y, z): (Vec<f64>, Vec<f64>, Vec<f64>) = (
            v.iter().map(|b| b.x).collect(),
            v.iter().map(|b| b.y).collect(),
            v.iter().map(|b| b.z).collect(),
        );
        let cols = FieldColumns::new([&x, &y, &z]).unwrap();
        assert_eq!(FieldSamples::len(&cols), 5);
        assert_eq!(FieldSamples::to_vec(&cols), v);
        assert!(cols.as_slice().is_none());
        assert_eq!(FieldSamples::as_slice(&v), Some(v.as_slice()));
        assert!(FieldColumns::new([&x, &y, &z[..4]]).is_none());
    }
}
