//! Elevations at junctions from scattered survey points: the nearest point, or inverse distance
//! weighting over the k nearest points (Shepard, D., 1968, "A two-dimensional interpolation
//! function for irregularly-spaced data", Proceedings of the 1968 23rd ACM National Conference,
//! pp. 517-524: weights 1/d^p with p = 2, the value of a point itself where d = 0).

use rstar::primitives::GeomWithData;
use rstar::RTree;

/// Shepard's exponent: 2, the value his paper uses and the usual choice.
pub const IDW_POWER: f64 = 2.0;

/// A distance below which a query point is taken to be on a survey point (its value is used as
/// it is, as Shepard's definition requires at d = 0), in coordinate units: far below any survey
/// accuracy.
const SAME_POINT: f64 = 1e-9;

/// Survey points indexed for nearest-neighbour queries.
pub struct ElevationPoints {
    tree: RTree<GeomWithData<[f64; 2], f64>>,
}

impl ElevationPoints {
    /// Points (x, y, value).
    pub fn new(points: &[(f64, f64, f64)]) -> Self {
        ElevationPoints {
            tree: RTree::bulk_load(
                points
                    .iter()
                    .map(|&(x, y, z)| GeomWithData::new([x, y], z))
                    .collect(),
            ),
        }
    }

    /// The value of the point nearest to (x, y); `None` without points.
    pub fn nearest(&self, x: f64, y: f64) -> Option<f64> {
        self.tree.nearest_neighbor(&[x, y]).map(|p| p.data)
    }

    /// Shepard's inverse-distance weighted value over the `k` nearest points (k ≥ 1).
    pub fn idw(&self, x: f64, y: f64, k: usize) -> Option<f64> {
        let mut num = 0.0;
        let mut den = 0.0;
        for p in self.tree.nearest_neighbor_iter(&[x, y]).take(k.max(1)) {
            let [px, py] = *p.geom();
            let d = ((px - x).powi(2) + (py - y).powi(2)).sqrt();
            if d < SAME_POINT {
                return Some(p.data);
            }
            let w = 1.0 / d.powf(IDW_POWER);
            num += w * p.data;
            den += w;
        }
        (den > 0.0).then(|| num / den).filter(|v| v.is_finite())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn idw_by_hand() {
        // Two points at distances 1 and 2: weights 1 and 1/4, value (10·1 + 20·0.25)/1.25 = 12
        // (Shepard 1968, eq. for p = 2; worked by hand).
        let pts = ElevationPoints::new(&[(1.0, 0.0, 10.0), (-2.0, 0.0, 20.0), (50.0, 0.0, 99.0)]);
        let v = pts.idw(0.0, 0.0, 2).expect("a value");
        assert!((v - 12.0).abs() < 1e-12, "{v}");
        // On a point: its own value.
        assert_eq!(pts.idw(1.0, 0.0, 3), Some(10.0));
        assert_eq!(pts.nearest(40.0, 1.0), Some(99.0));
        assert_eq!(ElevationPoints::new(&[]).idw(0.0, 0.0, 3), None);
    }
}
