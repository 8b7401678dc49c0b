//! Plane polygons given as vertex lists: whether a point lies inside, and whether a polygon
//! is usable at all. The raw-data reduction ([`crate::raw`]) checks every particle-
//! identification polygon with [`polygon_problem`] when its plan is built, then keeps or
//! drops each event by [`inside`] on its (E, ΔE) point.
//!
//! A polygon is a slice of vertices `[x, y]` in order (either sense of rotation); the last
//! vertex joins the first. Coordinates carry whatever units the caller uses (E in MeV, ΔE in
//! its own units), the same for the point and the vertices.

/// Whether the segments p1–p2 and p3–p4 cross properly, by the signs of the orientations
///     o(a, b, c) = (b_x − a_x)(c_y − a_y) − (b_y − a_y)(c_x − a_x)
/// (twice the signed area of the triangle a, b, c): they cross when p1 and p2 lie strictly
/// on opposite sides of the line p3–p4 and p3 and p4 strictly on opposite sides of p1–p2,
///     o(p3, p4, p1) · o(p3, p4, p2) < 0  and  o(p1, p2, p3) · o(p1, p2, p4) < 0.
/// Segments that only touch (an end point on the other segment) or are collinear do not
/// count. Common practice; e.g. Cormen et al., Introduction to Algorithms, §33.1 (from
/// memory).
fn segments_cross(p1: [f64; 2], p2: [f64; 2], p3: [f64; 2], p4: [f64; 2]) -> bool {
    let orient = |a: [f64; 2], b: [f64; 2], c: [f64; 2]| (b[0] - a[0]) * (c[1] - a[1]) - (b[1] - a[1]) * (c[0] - a[0]);
    let (d1, d2) = (orient(p3, p4, p1), orient(p3, p4, p2));
    let (d3, d4) = (orient(p1, p2, p3), orient(p1, p2, p4));
    (d1 * d2 < 0.0) && (d3 * d4 < 0.0)
}

/// A polygon's problem, as a short phrase for a message: fewer than 3 vertices, a vertex
/// that is not finite, or two non-adjacent edges that cross (a self-intersecting polygon,
/// whose inside the even–odd rule would split in pieces). `None` for a usable polygon.
///
/// Self-intersection is found by testing every pair of non-adjacent edges with the
/// orientation test of `segments_cross` (common practice; O(n²) in the vertex count n,
/// which is small for a hand-drawn gate). Edges that only touch are not reported.
pub fn polygon_problem(poly: &[[f64; 2]]) -> Option<String> {
    if poly.len() < 3 {
        return Some(format!("{} vertices", poly.len()));
    }
    if poly.iter().flatten().any(|v| !v.is_finite()) {
        return Some("a non-finite vertex".into());
    }
    let n = poly.len();
    for i in 0..n {
        for j in i + 1..n {
            let adjacent = j == i + 1 || (i == 0 && j == n - 1);
            if !adjacent && segments_cross(poly[i], poly[(i + 1) % n], poly[j], poly[(j + 1) % n]) {
                return Some(format!("edges {i}–{} and {j}–{} cross (self-intersecting)", i + 1, (j + 1) % n));
            }
        }
    }
    None
}

/// Whether the point (x, y) lies inside the polygon, by the even–odd (ray-crossing) rule:
/// a horizontal ray from the point towards +x crosses the boundary an odd number of times
/// exactly when the point is inside. The edge from (x_j, y_j) to (x_i, y_i) is crossed
/// when it straddles the ray's height, (y_i > y) ≠ (y_j > y), at
///     x_cross = x_i + (x_j − x_i)(y − y_i)/(y_j − y_i)  with  x < x_cross.
/// The half-open test on y counts a vertex at the ray's height once. A point exactly on
/// an edge may come out either way. Holds for any simple polygon, concave ones included;
/// check it with [`polygon_problem`] first.
/// Source: common practice (W. R. Franklin, PNPOLY, from memory).
///
/// # Panics
/// On an empty slice where overflow checks are on (debug builds; a release build returns
/// `false`); [`polygon_problem`] refuses fewer than 3 vertices, so check with it first.
pub fn inside(poly: &[[f64; 2]], x: f64, y: f64) -> bool {
    let mut c = false;
    let n = poly.len();
    let mut j = n - 1;
    for i in 0..n {
        let (pi, pj) = (poly[i], poly[j]);
        if (pi[1] > y) != (pj[1] > y) && x < (pj[0] - pi[0]) * (y - pi[1]) / (pj[1] - pi[1]) + pi[0] {
            c = !c;
        }
        j = i;
    }
    c
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A polygon's vertices.
    type Vertices = [[f64; 2]];

    const SQUARE: [[f64; 2]; 4] = [[0.0, 0.0], [2.0, 0.0], [2.0, 2.0], [0.0, 2.0]];
    /// A U: a 3 × 3 square with a notch 1 wide cut from the top down to y = 1.
    const U: [[f64; 2]; 8] =
        [[0.0, 0.0], [3.0, 0.0], [3.0, 3.0], [2.0, 3.0], [2.0, 1.0], [1.0, 1.0], [1.0, 3.0], [0.0, 3.0]];

    #[test]
    fn points_inside_and_outside() {
        let cases: [(&str, &Vertices, [f64; 2], bool); 8] = [
            ("square centre", &SQUARE, [1.0, 1.0], true),
            ("right of the square", &SQUARE, [3.0, 1.0], false),
            ("below the square", &SQUARE, [1.0, -0.5], false),
            ("far left, ray crosses both sides", &SQUARE, [-5.0, 1.0], false),
            ("U, left prong", &U, [0.5, 2.5], true),
            ("U, base under the notch", &U, [1.5, 0.5], true),
            ("U, in the concave notch", &U, [1.5, 2.0], false),
            ("U, right prong", &U, [2.5, 2.9], true),
        ];
        for (what, poly, [x, y], want) in cases {
            assert_eq!(inside(poly, x, y), want, "{what}: ({x}, {y})");
        }
    }

    #[test]
    fn polygons_are_checked() {
        let bow_tie = [[0.0, 0.0], [1.0, 1.0], [1.0, 0.0], [0.0, 1.0]];
        let cases: [(&str, &Vertices, Option<&str>); 6] = [
            ("square", &SQUARE, None),
            ("concave U", &U, None),
            ("bow tie", &bow_tie, Some("cross (self-intersecting)")),
            ("two vertices", &[[0.0, 0.0], [1.0, 0.0]], Some("2 vertices")),
            ("no vertices", &[], Some("0 vertices")),
            ("a NaN vertex", &[[0.0, 0.0], [1.0, f64::NAN], [1.0, 1.0]], Some("non-finite")),
        ];
        for (what, poly, want) in cases {
            match (polygon_problem(poly), want) {
                (None, None) => {}
                (Some(got), Some(want)) => assert!(got.contains(want), "{what}: {got}"),
                (got, want) => panic!("{what}: got {got:?}, want a problem containing {want:?}"),
            }
        }
    }
}
