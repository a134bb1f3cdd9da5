//! Scale from two picked points a known length apart (e.g. two crossings of graph paper).

use super::{ScaleError, ScaleMethod, ScreenMap};
use nalgebra::Vector2;

/// Standard uncertainty assumed for each coordinate of a point picked by hand, px.
pub const PICK_U_PX: f64 = 0.5;

/// A uniform scale from `a` and `b` (px) lying `length_mm` apart on the screen, with the
/// relative uncertainty of the length (if given) and of picking the points.
pub fn from_points(
    a: Vector2<f64>,
    b: Vector2<f64>,
    length_mm: f64,
    length_u_rel: Option<f64>,
) -> Result<ScreenMap, ScaleError> {
    let d = (b - a).norm();
    if !(d >= 10.0) {
        return Err(ScaleError::Usage(format!(
            "the two --points are {d:.1} px apart; pick points at least 10 px apart"
        )));
    }
    if !(length_mm > 0.0 && length_mm.is_finite()) {
        return Err(ScaleError::Usage(format!(
            "--length must be > 0, got {length_mm} mm"
        )));
    }
    let mut map = ScreenMap::uniform(ScaleMethod::Points, length_mm / d)?;
    map.reference_px = 0.5 * (a + b);
    map.stretch_px = Some((a, b));
    // The distance between two points each uncertain by σ per axis is uncertain by √2·σ.
    map = map.with_component("point picking", 2f64.sqrt() * PICK_U_PX / d);
    map.assumptions.push(format!(
        "each --points coordinate picked to ±{PICK_U_PX} px (standard uncertainty)"
    ));
    if let Some(u) = length_u_rel {
        map = map.with_component("reference length", u);
    }
    Ok(map)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn points_give_length_over_distance() {
        let m = from_points(
            Vector2::new(100.0, 100.0),
            Vector2::new(400.0, 500.0),
            50.0,
            Some(1e-3),
        )
        .unwrap();
        assert!((m.mm_per_px() - 0.1).abs() < 1e-12); // 3-4-5 triangle: 500 px
        let expected = ((2f64.sqrt() * 0.5 / 500.0).powi(2) + 1e-6).sqrt();
        assert!((m.u_rel() - expected).abs() < 1e-15);
        assert!(from_points(Vector2::new(1.0, 1.0), Vector2::new(2.0, 2.0), 5.0, None).is_err());
    }
}
