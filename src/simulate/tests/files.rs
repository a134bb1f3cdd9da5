//! Writing photos and truth files.

use crate::simulate::*;

fn assert_json_close(a: &serde_json::Value, b: &serde_json::Value) {
    use serde_json::Value;
    match (a, b) {
        (Value::Number(x), Value::Number(y)) => {
            let (x, y) = (x.as_f64().unwrap(), y.as_f64().unwrap());
            assert!((x - y).abs() <= 1e-14 * x.abs().max(y.abs()), "{x} vs {y}");
        }
        (Value::Array(x), Value::Array(y)) => {
            assert_eq!(x.len(), y.len());
            x.iter().zip(y).for_each(|(p, q)| assert_json_close(p, q));
        }
        (Value::Object(x), Value::Object(y)) => {
            assert_eq!(x.keys().collect::<Vec<_>>(), y.keys().collect::<Vec<_>>());
            x.values()
                .zip(y.values())
                .for_each(|(p, q)| assert_json_close(p, q));
        }
        _ => assert_eq!(a, b),
    }
}

#[test]
fn files_are_written_atomically_and_never_overwritten_without_force() {
    let dir = tempfile::tempdir().unwrap();
    let cam = CameraSpec {
        width_px: 160,
        height_px: 120,
        focal_px: 160.0,
        ..CameraSpec::default()
    };
    let photo = render_grating(
        &GratingSetup::default(),
        &Scene::default(),
        &cam,
        &Effects::default(),
        9,
    )
    .unwrap();
    let path = dir.path().join("cd.jpg");
    photo.write(&path, 92, false).unwrap();
    let back = image::open(&path).unwrap();
    assert_eq!((back.width(), back.height()), (160, 120));
    let text = std::fs::read_to_string(truth_path(&path)).unwrap();
    let truth: Truth = serde_json::from_str(&text).unwrap();
    // serde_json's default float parser may be one ulp off, so compare as JSON values with
    // a relative tolerance.
    assert_json_close(
        &serde_json::to_value(&truth).unwrap(),
        &serde_json::to_value(&photo.truth).unwrap(),
    );
    assert!(matches!(
        photo.write(&path, 92, false),
        Err(SimError::Exists { .. })
    ));
    photo.write(&path, 80, true).unwrap();
    let png = dir.path().join("cd.PNG");
    photo.write(&png, 92, false).unwrap();
    assert_eq!(image::open(&png).unwrap().to_rgb8(), photo.image);
    assert!(matches!(
        photo.write(&dir.path().join("cd.gif"), 92, false),
        Err(SimError::Extension(_))
    ));
    let leftovers = std::fs::read_dir(dir.path())
        .unwrap()
        .filter(|e| {
            e.as_ref()
                .unwrap()
                .file_name()
                .to_string_lossy()
                .ends_with(".tmp")
        })
        .count();
    assert_eq!(leftovers, 0);
}
