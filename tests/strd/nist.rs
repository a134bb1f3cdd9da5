//! Reader for the NIST StRD nonlinear-regression .dat format: a 60-line header whose
//! "File Format" block gives the line ranges, a table of start values with certified
//! parameters and standard deviations, the certified residual sum of squares, and the
//! data as "y x" rows.

/// One StRD dataset with its certified results.
#[derive(Debug)]
pub struct Dataset {
    /// Predictor values.
    pub x: Vec<f64>,
    /// Response values.
    pub y: Vec<f64>,
    /// "Start 1" and "Start 2".
    pub starts: [Vec<f64>; 2],
    /// Certified parameter values.
    pub certified: Vec<f64>,
    /// Certified standard deviations of the parameters.
    pub std_dev: Vec<f64>,
    /// Certified residual sum of squares.
    pub rss: f64,
    /// Certified degrees of freedom.
    pub dof: usize,
}

/// Parses a .dat file, checking it against its own header (observation count, degrees
/// of freedom, parameter count and line ranges).
pub fn parse(text: &str) -> Result<Dataset, String> {
    let lines: Vec<&str> = text.lines().collect();
    let data_range = line_range(&lines, "Data")?;
    let cert_range = line_range(&lines, "Certified Values")?;
    let labelled = |label: &str| -> Result<&str, String> {
        lines
            .iter()
            .find_map(|l| l.trim_start().strip_prefix(label))
            .map(str::trim)
            .ok_or_else(|| format!("no '{label}' line"))
    };
    let rss = number(labelled("Residual Sum of Squares:")?)?;
    let dof: usize = labelled("Degrees of Freedom:")?
        .parse()
        .map_err(|e| format!("degrees of freedom: {e}"))?;
    let observations: usize = labelled("Number of Observations:")?
        .parse()
        .map_err(|e| format!("observations: {e}"))?;

    let mut starts = [Vec::new(), Vec::new()];
    let (mut certified, mut std_dev) = (Vec::new(), Vec::new());
    for (k, line) in lines[cert_range.0 - 1..cert_range.1].iter().enumerate() {
        let Some((name, values)) = line.split_once('=') else {
            continue;
        };
        if name.trim() != format!("b{}", certified.len() + 1) {
            return Err(format!(
                "line {}: expected b{}",
                cert_range.0 + k,
                certified.len() + 1
            ));
        }
        let v = values
            .split_whitespace()
            .map(number)
            .collect::<Result<Vec<_>, _>>()?;
        let [s1, s2, c, sd] = v[..] else {
            return Err(format!("line {}: expected 4 numbers", cert_range.0 + k));
        };
        starts[0].push(s1);
        starts[1].push(s2);
        certified.push(c);
        std_dev.push(sd);
    }

    let (mut x, mut y) = (Vec::new(), Vec::new());
    for (k, line) in lines[data_range.0 - 1..data_range.1].iter().enumerate() {
        let v = line
            .split_whitespace()
            .map(number)
            .collect::<Result<Vec<_>, _>>()?;
        let [yi, xi] = v[..] else {
            return Err(format!("line {}: expected 'y x'", data_range.0 + k));
        };
        y.push(yi);
        x.push(xi);
    }
    if x.len() != observations || observations != dof + certified.len() {
        return Err(format!(
            "{} rows, header says {observations} observations, {dof} degrees of freedom \
             and {} parameters",
            x.len(),
            certified.len()
        ));
    }
    Ok(Dataset {
        x,
        y,
        starts,
        certified,
        std_dev,
        rss,
        dof,
    })
}

/// The 1-based inclusive line range "<name> (lines a to b)" of the File Format block.
fn line_range(lines: &[&str], name: &str) -> Result<(usize, usize), String> {
    let spec = lines
        .iter()
        .take(10)
        .find_map(|l| {
            let l = l
                .trim_start()
                .strip_prefix("File Format:")
                .unwrap_or(l)
                .trim();
            l.strip_prefix(name)?.trim().strip_prefix("(lines")
        })
        .ok_or_else(|| format!("no line range for '{name}'"))?;
    let mut it = spec
        .trim_end_matches(')')
        .split("to")
        .map(|s| s.trim().parse::<usize>());
    match (it.next(), it.next()) {
        (Some(Ok(a)), Some(Ok(b))) if 1 <= a && a <= b && b <= lines.len() => Ok((a, b)),
        _ => Err(format!("bad line range for '{name}': {spec}")),
    }
}

fn number(s: &str) -> Result<f64, String> {
    s.parse().map_err(|e| format!("'{s}': {e}"))
}
