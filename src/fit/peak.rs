//! Sub-sample extrema of sampled curves.

/// Vertex of the parabola through (−1, a), (0, b), (1, c): the offset from the middle
/// sample and the value there. None when the three points are collinear or the vertex
/// falls outside [−1, 1] (no extremum between the neighbours).
pub fn parabolic_vertex(a: f64, b: f64, c: f64) -> Option<(f64, f64)> {
    let denom = a - 2.0 * b + c;
    if denom == 0.0 || !denom.is_finite() {
        return None;
    }
    let offset = 0.5 * (a - c) / denom;
    if offset.abs() > 1.0 {
        return None;
    }
    Some((offset, b - 0.25 * (a - c) * offset))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn vertex_of_an_exact_parabola() {
        // y = 2 − 3(x − 0.3)²  sampled at −1, 0, 1.
        let f = |x: f64| 2.0 - 3.0 * (x - 0.3).powi(2);
        let (off, val) = parabolic_vertex(f(-1.0), f(0.0), f(1.0)).unwrap();
        assert!((off - 0.3).abs() < 1e-12 && (val - 2.0).abs() < 1e-12);
        assert!(parabolic_vertex(1.0, 2.0, 3.0).is_none());
    }
}
