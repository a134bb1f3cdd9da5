//! Argument groups shared by the measuring subcommands.

use clap::Args;
use std::path::PathBuf;

/// Laser safety text shown in the help of every optical subcommand.
pub const LASER_CAUTION: &str = "\
CAUTION: never look into a laser beam or its specular reflections, including reflections \
off a grating, disc or screen. Know your laser's class (IEC 60825-1; pointers sold as \
class 2 or 3R) and keep beams below eye level. This tool measures; it does not certify: \
follow local codes and licensed practice.";

/// The photo and how to read it.
#[derive(Debug, Clone, Args)]
pub struct PhotoArgs {
    /// Photo of the pattern (JPEG, PNG or TIFF)
    #[arg(value_name = "PHOTO")]
    pub photo: PathBuf,

    /// Colour channel to measure in: r, g, b or luma [default: chosen from the photo]
    #[arg(
        long,
        value_name = "CHANNEL",
        long_help = "Colour channel to measure in: r, g, b or luma (linear luminance). By \
                     default the channel with the most pattern signal and the least clipping \
                     is chosen, and the record says why."
    )]
    pub channel: Option<String>,

    /// A bench's fixed inputs as TOML (keys are long flag names); flags override it
    #[arg(long, value_name = "FILE.toml")]
    pub setup: Option<PathBuf>,

    /// Names of the inputs that came from the setup file (set internally)
    #[arg(long = "from-setup", hide = true, value_name = "KEYS")]
    pub from_setup: Option<String>,
}

/// How pixels become millimetres on the screen: exactly one of these.
#[derive(Debug, Clone, Args)]
pub struct ScaleArgs {
    /// Rough ends of a ruler stretch in the photo, px: X1,Y1,X2,Y2
    #[arg(
        long,
        value_name = "X1,Y1,X2,Y2",
        long_help = "Rough ends of a stretch of ruler taped to the screen, in photo pixels \
                     (x right, y down): X1,Y1,X2,Y2. The tick marks along the stretch are \
                     located to a fraction of a pixel and fitted, perspective included. Lay \
                     the ruler close to and parallel with the pattern."
    )]
    pub ruler: Option<String>,

    /// Ruler tick spacing [default: 1mm]
    #[arg(long, value_name = "LENGTH", requires = "ruler")]
    pub tick: Option<String>,

    /// Ruler accuracy class after MI-008: I, II or III [default: II]
    #[arg(long = "ruler-class", value_name = "CLASS", requires = "ruler")]
    pub ruler_class: Option<String>,

    /// Two points in the photo a known length apart on the screen, px: X1,Y1,X2,Y2
    #[arg(long, value_name = "X1,Y1,X2,Y2", requires = "length")]
    pub points: Option<String>,

    /// Screen distance between the two --points
    #[arg(long, value_name = "LENGTH", requires = "points")]
    pub length: Option<String>,

    /// Graph paper as the screen: its line spacing, e.g. 1mm or 1mm±0.003mm
    #[arg(
        long,
        value_name = "PITCH",
        long_help = "Squared or graph paper used as the screen, with its line spacing (e.g. \
                     1mm, or 1mm±0.003mm). The lines crossing the pattern are counted along \
                     it, a little to one side of the spots, and fitted with the perspective and \
                     the lines' convergence, so the camera need not face the paper squarely."
    )]
    pub grid: Option<String>,

    /// A known scale in millimetres per pixel on the screen
    #[arg(long = "mm-per-px", value_name = "VALUE")]
    pub mm_per_px: Option<String>,
}

/// What to write, and where.
#[derive(Debug, Clone, Args)]
pub struct OutputArgs {
    /// Print only the JSON record on stdout (the report goes to stderr)
    #[arg(long)]
    pub json: bool,

    /// Archive folder: the photo, record, overlay and report are stored there
    #[arg(long, value_name = "DIR")]
    pub archive: Option<PathBuf>,

    /// Sample id for the record and the archive entry
    #[arg(long, value_name = "ID")]
    pub sample: Option<String>,

    /// Write a picture of the photo with every measured feature marked
    #[arg(long, value_name = "FILE.png")]
    pub overlay: Option<PathBuf>,

    /// Write a self-contained HTML report
    #[arg(long, value_name = "FILE.html")]
    pub report: Option<PathBuf>,

    /// Print the wall time of each stage on stderr
    #[arg(long)]
    pub timings: bool,

    /// Allow overwriting existing output files and archive entries
    #[arg(long)]
    pub force: bool,

    /// Also propagate by Monte Carlo (JCGM 101) with this many trials
    #[arg(long = "monte-carlo", value_name = "N")]
    pub monte_carlo: Option<usize>,
}

/// Parses "X1,Y1,X2,Y2" into two points.
pub fn parse_two_points(flag: &str, text: &str) -> Result<[f64; 4], crate::Error> {
    let parts: Vec<&str> = text.split(',').map(str::trim).collect();
    let values: Option<Vec<f64>> = parts.iter().map(|p| p.parse::<f64>().ok()).collect();
    match values {
        Some(v) if v.len() == 4 && v.iter().all(|x| x.is_finite()) => Ok([v[0], v[1], v[2], v[3]]),
        _ => Err(crate::Error::Usage(format!(
            "--{flag} takes four pixel coordinates X1,Y1,X2,Y2 (e.g. 1200,2400,2900,2420), got `{text}`"
        ))),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn two_points_parse_and_reject() {
        assert_eq!(
            parse_two_points("ruler", "1,2.5, 3,4").unwrap(),
            [1.0, 2.5, 3.0, 4.0]
        );
        assert!(parse_two_points("ruler", "1,2,3").is_err());
        assert!(parse_two_points("ruler", "1,2,3,NaN").is_err());
        assert!(parse_two_points("ruler", "a,b,c,d").is_err());
    }
}
