//! The line a pattern's spots lie on: the pair of bright candidates whose line gathers
//! the most flux-weighted support (an exhaustive RANSAC over the brightest candidates),
//! then a total-least-squares line through its members. Stray glints and room light off
//! that line are left out here.

use super::FindError;
use super::blobs::Blob;
use crate::fit::line::{Line2, tls_line};
use nalgebra::Vector2;

/// Spots on one line.
#[derive(Debug, Clone)]
pub struct PatternAxis {
    /// The fitted line, px.
    pub line: Line2,
    /// Indices into the candidate list of the blobs on the line.
    pub members: Vec<usize>,
}

/// How far off the line a member may lie: a fraction of its own size plus a floor, so
/// large blurred spots and small sharp ones are treated alike.
fn tolerance(blob: &Blob) -> f64 {
    (0.75 * blob.radius_px).max(4.0)
}

/// Finds the line through the candidates that holds the most flux, considering pairs
/// among the `max_pairs_from` brightest. `anchor` (the brightest blob, usually the zero
/// order) must be on the line when given.
pub fn pattern_axis(
    blobs: &[Blob],
    anchor: Option<usize>,
    max_pairs_from: usize,
) -> Result<PatternAxis, FindError> {
    if blobs.len() < 2 {
        return Err(FindError::NoPattern(format!(
            "found {} bright spot{}; a grating pattern needs the zero order and at least one \
             other order in the frame",
            blobs.len(),
            if blobs.len() == 1 { "" } else { "s" }
        )));
    }
    let k = blobs.len().min(max_pairs_from);
    let score_line = |a: Vector2<f64>, b: Vector2<f64>| -> (f64, Vec<usize>) {
        let d = b - a;
        let len = d.norm();
        if len < 1e-9 {
            return (0.0, Vec::new());
        }
        let n = Vector2::new(-d.y, d.x) / len;
        let mut members = Vec::new();
        let mut score = 0.0;
        for (i, blob) in blobs.iter().enumerate() {
            if (blob.centroid - a).dot(&n).abs() <= tolerance(blob) {
                members.push(i);
                // √flux so that one huge blob cannot outweigh a row of orders.
                score += blob.flux.max(0.0).sqrt();
            }
        }
        (score, members)
    };
    let mut best: (f64, Vec<usize>) = (0.0, Vec::new());
    for i in 0..k {
        for j in (i + 1)..k {
            if let Some(a) = anchor {
                if i != a && j != a {
                    continue;
                }
            }
            let (score, members) = score_line(blobs[i].centroid, blobs[j].centroid);
            if members.len() >= 2 && score > best.0 {
                best = (score, members);
            }
        }
    }
    if best.1.len() < 2 {
        return Err(FindError::NoPattern(
            "no two bright spots line up; is this a grating pattern?".into(),
        ));
    }
    let pts: Vec<_> = best.1.iter().map(|&i| blobs[i].centroid).collect();
    let w: Vec<_> = best
        .1
        .iter()
        .map(|&i| blobs[i].flux.max(0.0).sqrt())
        .collect();
    let line = tls_line(&pts, &w).map_err(|e| FindError::NoPattern(e.to_string()))?;
    Ok(PatternAxis {
        line,
        members: best.1,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn blob(x: f64, y: f64, flux: f64) -> Blob {
        Blob {
            centroid: Vector2::new(x, y),
            peak: 1.0,
            flux,
            bbox: (0, 0, 0, 0),
            radius_px: 5.0,
            clipped_fraction: 0.0,
        }
    }

    #[test]
    fn orders_on_a_slanted_line_beat_a_bright_glint_and_a_lamp() {
        let mut blobs = vec![blob(500.0, 300.0, 1e4)];
        for m in [-3.0, -2.0, -1.0, 1.0, 2.0, 3.0] {
            blobs.push(blob(
                500.0 + 120.0 * m,
                300.0 + 12.0 * m,
                2e3 / m * m.signum(),
            ));
        }
        blobs.push(blob(520.0, 100.0, 8e3)); // glint off the line
        blobs.push(blob(900.0, 700.0, 9e3)); // a lamp
        let axis = pattern_axis(&blobs, Some(0), 12).unwrap();
        assert_eq!(axis.members.len(), 7);
        assert!(!axis.members.contains(&7) && !axis.members.contains(&8));
        assert!((axis.line.direction.y / axis.line.direction.x - 0.1).abs() < 1e-9);
    }

    #[test]
    fn a_lone_spot_is_no_pattern() {
        assert!(pattern_axis(&[blob(1.0, 1.0, 5.0)], None, 10).is_err());
    }
}
