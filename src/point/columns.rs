//! The results of a list of points as flat columns, one per quantity: what the binding hands
//! to Python, either as new NumPy arrays or written straight into arrays Python planned.
//!
//! `phase`, `parity_agrees` and `methods_agree` are derived here ([`phase_of`], [`agreement`])
//! rather than in Python: after the core they are serial work, ~35 µs of NumPy calls on one
//! point.

use crate::point::engine::PointResult;
use crate::sampling::Method;
use crate::topology::indices::{agreement, phase_of, with_overlap};

/// The values of one column, in the type the binding gives a new array of it.
#[derive(Clone, Debug, PartialEq)]
pub enum Values {
    I8(Vec<i8>),
    U8(Vec<u8>),
    I32(Vec<i32>),
    F64(Vec<f64>),
    Bool(Vec<bool>),
}

impl Values {
    /// Number of values.
    pub fn len(&self) -> usize {
        match self {
            Values::I8(v) => v.len(),
            Values::U8(v) => v.len(),
            Values::I32(v) => v.len(),
            Values::F64(v) => v.len(),
            Values::Bool(v) => v.len(),
        }
    }

    /// Whether there are none.
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }

    /// The values as integers (booleans as 0/1), or None for a column of reals.
    pub fn integers(&self) -> Option<Vec<i64>> {
        match self {
            Values::I8(v) => Some(v.iter().map(|&x| x.into()).collect()),
            Values::U8(v) => Some(v.iter().map(|&x| x.into()).collect()),
            Values::I32(v) => Some(v.iter().map(|&x| x.into()).collect()),
            Values::Bool(v) => Some(v.iter().map(|&x| x.into()).collect()),
            Values::F64(_) => None,
        }
    }
}

/// One quantity over the points: shape (points, tail…), values in C order.
#[derive(Clone, Debug, PartialEq)]
pub struct Column {
    pub key: &'static str,
    pub tail: Vec<usize>,
    pub values: Values,
}

impl Column {
    /// The shape of the column's array: the number of points, then `tail`.
    pub fn shape(&self, points: usize) -> Vec<usize> {
        std::iter::once(points)
            .chain(self.tail.iter().copied())
            .collect()
    }
}

fn clamp_i32(x: usize) -> i32 {
    i32::try_from(x).unwrap_or(i32::MAX)
}

/// Every quantity of `res`, in the order the binding returns them. The lattice and parity
/// columns are there only when every point has that result.
pub fn columns(res: &[PointResult], dim: usize, method: Method) -> Vec<Column> {
    let col = |key, tail: &[usize], values| Column {
        key,
        tail: tail.to_vec(),
        values,
    };
    let i8s = |f: &dyn Fn(&PointResult) -> i8| Values::I8(res.iter().map(f).collect());
    let f64s = |f: &dyn Fn(&PointResult) -> f64| Values::F64(res.iter().map(f).collect());
    let i32s = |f: &dyn Fn(&PointResult) -> i32| Values::I32(res.iter().map(f).collect());
    let flat_i8 =
        |f: &dyn Fn(&PointResult) -> Vec<i8>| Values::I8(res.iter().flat_map(f).collect());
    let mut out = vec![
        col("nu0", &[], i8s(&|r| r.nu0)),
        col("nu", &[3], flat_i8(&|r| r.nu.to_vec())),
        col("nu0_by_axis", &[3], flat_i8(&|r| r.nu0_by_axis.to_vec())),
        col(
            "phase",
            &[],
            i8s(&|r| with_overlap(phase_of(dim, r.nu0, r.nu), r.gap_indirect)),
        ),
        col(
            "z2_plane",
            &[3, 2],
            flat_i8(&|r| r.z2_plane.iter().flatten().copied().collect()),
        ),
        col("gap_direct", &[], f64s(&|r| r.gap_direct)),
        col("gap_indirect", &[], f64s(&|r| r.gap_indirect)),
        col("bandwidth", &[], f64s(&|r| r.bandwidth)),
        col("gap_floor", &[], f64s(&|r| r.gap_floor)),
        col("gap_proven", &[], f64s(&|r| r.gap_proven)),
        col("max_step", &[], f64s(&|r| r.max_step)),
        col("min_clearance", &[], f64s(&|r| r.min_clearance)),
        col(
            "gap_kappa",
            &[dim],
            Values::F64(
                res.iter()
                    .flat_map(|r| r.gap_kappa[..dim].to_vec())
                    .collect(),
            ),
        ),
        col(
            "converged",
            &[],
            Values::Bool(res.iter().map(|r| r.converged).collect()),
        ),
        col(
            "reason",
            &[],
            Values::U8(res.iter().map(|r| r.reason).collect()),
        ),
        col("lines_used", &[], i32s(&|r| r.lines_used as i32)),
        col(
            "loop_points_used",
            &[],
            i32s(&|r| r.loop_points_used as i32),
        ),
    ];
    let lattice: Option<Vec<_>> = res.iter().map(|r| r.lattice.as_ref()).collect();
    if let Some(l) = lattice.filter(|l| !l.is_empty()) {
        let flat = |f: &dyn Fn(usize) -> Vec<i8>| Values::I8((0..l.len()).flat_map(f).collect());
        out.push(col(
            "nu0_lattice",
            &[],
            Values::I8(l.iter().map(|x| x.indices.nu0).collect()),
        ));
        out.push(col("nu_lattice", &[3], flat(&|i| l[i].indices.nu.to_vec())));
        out.push(col(
            "z2_plane_lattice",
            &[3, 2],
            flat(&|i| l[i].indices.z2_plane.iter().flatten().copied().collect()),
        ));
        out.push(col(
            "lattice_reason",
            &[],
            Values::U8(l.iter().map(|x| x.indices.reason).collect()),
        ));
        if method == Method::Both {
            // (the lattice indices against the headline, Wilson-loop ones)
            out.push(col(
                "methods_agree",
                &[],
                Values::I8(
                    res.iter()
                        .zip(&l)
                        .map(|(w, x)| agreement(dim, (w.nu0, w.nu), (x.indices.nu0, x.indices.nu)))
                        .collect(),
                ),
            ));
        }
        out.push(col(
            "lattice_max_field",
            &[],
            Values::F64(l.iter().map(|x| x.max_field).collect()),
        ));
        out.push(col(
            "lattice_min_link",
            &[],
            Values::F64(l.iter().map(|x| x.min_link).collect()),
        ));
        out.push(col(
            "lattice_mesh",
            &[2],
            Values::I32(
                l.iter()
                    // (a locally refined mesh may reach 2^24 × the base spacing: the uniform
                    // equivalent of a large base then passes i32, and is clamped)
                    .flat_map(|x| [clamp_i32(x.mesh.0), clamp_i32(x.mesh.1)])
                    .collect(),
            ),
        ));
        out.push(col(
            "lattice_points",
            &[],
            Values::I32(l.iter().map(|x| clamp_i32(x.points)).collect()),
        ));
    }
    let parity: Option<Vec<_>> = res.iter().map(|r| r.parity.as_ref()).collect();
    if let Some(p) = parity.filter(|p| !p.is_empty()) {
        out.push(col(
            "nu0_parity",
            &[],
            Values::I8(p.iter().map(|x| x.nu0).collect()),
        ));
        out.push(col(
            "nu_parity",
            &[3],
            Values::I8(p.iter().flat_map(|x| x.nu).collect()),
        ));
        out.push(col(
            "parity_reason",
            &[],
            Values::U8(p.iter().map(|x| x.reason).collect()),
        ));
        out.push(col(
            "parity_agrees",
            &[],
            Values::I8(
                res.iter()
                    .zip(&p)
                    .map(|(w, x)| agreement(dim, (x.nu0, x.nu), (w.nu0, w.nu)))
                    .collect(),
            ),
        ));
        let ntrim = 1usize << dim;
        out.push(col(
            "odd_count",
            &[ntrim],
            Values::I32(p.iter().flat_map(|x| x.odd_count.iter().copied()).collect()),
        ));
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::point::engine::LatticeSummary;
    use crate::topology::indices::{phase, Indices};
    use crate::topology::parity::ParityResult;

    fn point(nu0: i8, nu: [i8; 3]) -> PointResult {
        PointResult {
            nu0,
            nu,
            z2_plane: [[1, 0], [0, 1], [1, 1]],
            nu0_by_axis: [nu0; 3],
            gap_direct: 0.5,
            gap_indirect: 0.25,
            gap_kappa: [0.1, 0.2, 0.3],
            bandwidth: 4.0,
            gap_floor: 1e-3,
            converged: true,
            reason: 0,
            lines_used: 41,
            loop_points_used: 40,
            search_evaluations: 0,
            gap_proven: f64::NAN,
            proof_evaluations: 0,
            max_step: 0.1,
            min_clearance: 0.2,
            parity: None,
            lattice: None,
        }
    }

    fn by_key<'a>(cols: &'a [Column], key: &str) -> &'a Column {
        cols.iter().find(|c| c.key == key).unwrap()
    }

    #[test]
    fn every_column_holds_points_times_tail_values() {
        let mut res = vec![point(1, [0, 0, 0]), point(0, [1, 0, 1]), point(-1, [-1; 3])];
        for r in &mut res {
            r.parity = Some(ParityResult {
                nu0: 1,
                nu: [0, 0, 0],
                reason: 0,
                odd_count: vec![2, 0, 0, 0, 0, 0, 0, 0],
            });
            r.lattice = Some(LatticeSummary {
                indices: Indices {
                    nu0: 1,
                    nu: [0, 0, 0],
                    z2_plane: [[0, 1]; 3],
                    nu0_by_axis: [1; 3],
                    reason: 0,
                },
                max_field: 0.3,
                min_link: 0.9,
                mesh: (12, 8),
                points: 300,
            });
        }
        let cols = columns(&res, 3, Method::Both);
        for c in &cols {
            let want: usize = c.shape(res.len()).iter().product();
            assert_eq!(c.values.len(), want, "{}", c.key);
        }
        let phases = &by_key(&cols, "phase").values;
        assert_eq!(
            phases,
            &Values::I8(vec![phase::STRONG, phase::WEAK, phase::UNDEFINED])
        );
        // C order: point, then the tail
        assert_eq!(
            by_key(&cols, "z2_plane").values,
            Values::I8([1, 0, 0, 1, 1, 1].repeat(3))
        );
        assert_eq!(
            by_key(&cols, "methods_agree").values,
            Values::I8(vec![1, 0, -1])
        );
        assert_eq!(
            by_key(&cols, "parity_agrees").values,
            Values::I8(vec![1, 0, -1])
        );
        assert_eq!(
            by_key(&cols, "lattice_mesh").values,
            Values::I32([12, 8].repeat(3))
        );
    }

    #[test]
    fn lattice_and_parity_columns_only_where_every_point_has_them() {
        let mut res = vec![point(1, [0, 0, 0]), point(1, [0, 0, 0])];
        res[0].parity = Some(ParityResult {
            nu0: 1,
            nu: [0, 0, 0],
            reason: 0,
            odd_count: vec![0; 4],
        });
        let keys: Vec<_> = columns(&res, 2, Method::Wilson)
            .iter()
            .map(|c| c.key)
            .collect();
        assert!(!keys.contains(&"nu0_parity") && !keys.contains(&"nu0_lattice"));
        assert_eq!(
            by_key(&columns(&res, 2, Method::Wilson), "gap_kappa").tail,
            [2]
        );
        assert!(columns(&[], 3, Method::Both)
            .iter()
            .all(|c| c.values.is_empty() && !c.key.contains("parity")));
    }

    #[test]
    fn integers_of_every_integer_column_none_for_reals() {
        assert_eq!(Values::Bool(vec![true, false]).integers(), Some(vec![1, 0]));
        assert_eq!(Values::U8(vec![7]).integers(), Some(vec![7]));
        assert_eq!(Values::I8(vec![-1]).integers(), Some(vec![-1]));
        assert_eq!(Values::F64(vec![0.5]).integers(), None);
    }
}
