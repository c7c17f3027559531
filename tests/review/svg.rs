//! Just enough SVG reading for the plot checks: the plots write one element a line.

/// One `<text>` element: position and content.
#[derive(Debug, Clone)]
pub struct Label {
    pub x: f64,
    pub y: f64,
    pub text: String,
}

/// An attribute's value on one element line.
pub fn attr<'a>(line: &'a str, name: &str) -> Option<&'a str> {
    let key = format!(" {name}=\"");
    let i = line.find(&key)? + key.len();
    let j = line[i..].find('"')? + i;
    Some(&line[i..j])
}

/// Every text label.
pub fn labels(svg: &str) -> Vec<Label> {
    svg.lines()
        .filter(|l| l.starts_with("<text"))
        .filter_map(|l| {
            let start = l.find('>')? + 1;
            let end = l.rfind("</text>")?;
            Some(Label {
                x: attr(l, "x")?.parse().ok()?,
                y: attr(l, "y")?.parse().ok()?,
                text: l[start..end].to_string(),
            })
        })
        .collect()
}

/// The points of every polyline drawn in `colour` (`#RRGGBB`).
pub fn polylines(svg: &str, colour: &str) -> Vec<Vec<(f64, f64)>> {
    svg.lines()
        .filter(|l| l.starts_with("<polyline") && attr(l, "stroke") == Some(colour))
        .filter_map(|l| {
            let pts = attr(l, "points")?;
            Some(
                pts.split_whitespace()
                    .filter_map(|p| {
                        let (a, b) = p.split_once(',')?;
                        Some((a.parse().ok()?, b.parse().ok()?))
                    })
                    .collect(),
            )
        })
        .collect()
}

/// A linear map from pixels to values, fitted through the numeric tick labels that share one
/// pixel row (`horizontal`: an x axis, labels at one y) or column (a y axis, labels at one x),
/// taking the group of labels nearest `near` (a y for an x axis, an x for a y axis).
pub fn axis(labels: &[Label], horizontal: bool, near: f64) -> (f64, f64) {
    let numeric: Vec<(&Label, f64)> = labels
        .iter()
        .filter_map(|l| {
            l.text
                .trim_end_matches('X')
                .parse::<f64>()
                .ok()
                .map(|v| (l, v))
        })
        .collect();
    let key = |l: &Label| if horizontal { l.y } else { l.x };
    let best = numeric
        .iter()
        .map(|(l, _)| key(l))
        .min_by(|a, b| (a - near).abs().total_cmp(&(b - near).abs()))
        .expect("numeric labels");
    let row: Vec<(f64, f64)> = numeric
        .iter()
        .filter(|(l, _)| (key(l) - best).abs() < 0.5)
        .map(|(l, v)| (if horizontal { l.x } else { l.y }, *v))
        .collect();
    assert!(row.len() >= 3, "an axis needs ticks: {row:?}");
    // Least squares value = a + b·pixel.
    let n = row.len() as f64;
    let mp = row.iter().map(|r| r.0).sum::<f64>() / n;
    let mv = row.iter().map(|r| r.1).sum::<f64>() / n;
    let b = row.iter().map(|r| (r.0 - mp) * (r.1 - mv)).sum::<f64>()
        / row.iter().map(|r| (r.0 - mp).powi(2)).sum::<f64>();
    for (p, v) in &row {
        let fit = mv + b * (p - mp);
        assert!(
            (fit - v).abs() <= (b * 1.5).abs(),
            "ticks not on a linear axis: {row:?}"
        );
    }
    (mv - b * mp, b)
}
