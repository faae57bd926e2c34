//! SVG maps: units filled by class (joined, partly covered, a value class,
//! missing, ...), missing drawn as missing (a hatch, never the lowest
//! class), estimates of low coverage marked with dots, state outlines over
//! the units, labels, a legend whose counts are the summary's, a title and a
//! source line. Several panels (one per period) share one legend and one
//! projection. Coordinates are rounded to 0.1 px so the same input gives the
//! same bytes.

use std::io::Write;

use geo::MultiPolygon;

use crate::core::projection::{Frame, Inset};

/// How a class is filled.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Fill {
    /// A plain colour.
    Solid,
    /// Diagonal hatching over a pale ground: missing values.
    Hatched,
}

/// A class of units on the map.
#[derive(Debug, Clone)]
pub struct Class {
    /// Legend text.
    pub label: String,
    /// Fill colour (`#rrggbb`; the line colour of a hatch).
    pub color: String,
    /// How the fill is drawn.
    pub fill: Fill,
}

impl Class {
    /// A class filled with a plain colour.
    pub fn solid(label: impl Into<String>, color: &str) -> Class {
        Class {
            label: label.into(),
            color: color.into(),
            fill: Fill::Solid,
        }
    }

    /// A hatched class (missing values).
    pub fn hatched(label: impl Into<String>, color: &str) -> Class {
        Class {
            label: label.into(),
            color: color.into(),
            fill: Fill::Hatched,
        }
    }
}

/// One unit to draw.
pub struct Shape<'a> {
    /// Code (used for the projection inset of US units).
    pub code: String,
    /// Tooltip text.
    pub title: String,
    /// Index into the classes.
    pub class: usize,
    /// Marked with dots (an estimate of low coverage).
    pub marked: bool,
    /// Geometry in longitude/latitude.
    pub geometry: &'a MultiPolygon<f64>,
}

/// One map of a set of small multiples (or the only one).
pub struct Panel<'a> {
    /// Panel heading ("2012"); empty for a single map.
    pub title: String,
    /// Units.
    pub shapes: Vec<Shape<'a>>,
}

/// How to lay units out.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Layout {
    /// US units by state code: conterminous Albers with insets.
    UsInsets,
    /// Longitude scaled by the cosine of the middle latitude.
    Plain,
}

/// Everything but the units.
pub struct MapSpec<'a> {
    /// Title.
    pub title: String,
    /// Classes, in legend order.
    pub classes: Vec<Class>,
    /// Legend text of the dot mark, when some units may be marked.
    pub mark_label: Option<String>,
    /// Lines under the legend.
    pub notes: Vec<String>,
    /// Source line.
    pub source: String,
    /// Layout.
    pub layout: Layout,
    /// Outlines drawn over the units (states), with their codes.
    pub outlines: Vec<(String, &'a MultiPolygon<f64>)>,
    /// Labels: (code, text); placed on each panel where the unit is drawn.
    pub labels: Vec<(String, String)>,
}

const WIDTH: f64 = 960.0;
const MARGIN: f64 = 10.0;
const HEADER: f64 = 40.0;
const PANEL_TITLE: f64 = 20.0;

/// Escapes text for SVG.
pub fn escape(text: &str) -> String {
    text.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
        .replace('"', "&quot;")
}

fn ring_path(rings: &[Vec<(f64, f64)>], dx: f64, dy: f64) -> String {
    let mut d = String::new();
    for ring in rings {
        let mut last = String::new();
        let mut n = 0;
        for &(x, y) in ring {
            let p = format!("{:.1},{:.1}", x + dx, y + dy);
            if p == last {
                continue;
            }
            d.push(if n == 0 { 'M' } else { 'L' });
            d.push_str(&p);
            last = p;
            n += 1;
        }
        if n > 0 {
            d.push('Z');
        }
    }
    d
}

/// The label point of projected rings: the centroid of the largest ring.
fn label_point(rings: &[Vec<(f64, f64)>]) -> Option<(f64, f64, f64)> {
    let mut best: Option<(f64, f64, f64)> = None;
    for ring in rings {
        let (mut a, mut cx, mut cy) = (0.0, 0.0, 0.0);
        for w in ring.windows(2) {
            let cross = w[0].0 * w[1].1 - w[1].0 * w[0].1;
            a += cross;
            cx += (w[0].0 + w[1].0) * cross;
            cy += (w[0].1 + w[1].1) * cross;
        }
        if a.abs() > 0.0 && best.is_none_or(|b| a.abs() > b.2) {
            best = Some((cx / (3.0 * a), cy / (3.0 * a), a.abs()));
        }
    }
    best
}

/// Counts of each class in each panel (what the legend shows).
pub fn class_counts(panels: &[Panel<'_>], classes: usize) -> Vec<Vec<usize>> {
    panels
        .iter()
        .map(|p| {
            let mut c = vec![0; classes];
            for s in &p.shapes {
                if let Some(n) = c.get_mut(s.class) {
                    *n += 1;
                }
            }
            c
        })
        .collect()
}

/// Writes the map.
pub fn write_map(
    w: &mut dyn Write,
    panels: &[Panel<'_>],
    spec: &MapSpec<'_>,
) -> std::io::Result<()> {
    let all: Vec<&Shape<'_>> = panels.iter().flat_map(|p| p.shapes.iter()).collect();
    let mid_lat = {
        let lats: Vec<f64> = all
            .iter()
            .flat_map(|s| s.geometry.0.iter())
            .flat_map(|p| p.exterior().0.iter())
            .map(|c| c.y)
            .collect();
        if lats.is_empty() {
            0.0
        } else {
            (lats.iter().cloned().fold(f64::INFINITY, f64::min)
                + lats.iter().cloned().fold(f64::NEG_INFINITY, f64::max))
                / 2.0
        }
    };
    let project = |code: &str, lon: f64, lat: f64| -> (f64, f64) {
        match spec.layout {
            Layout::UsInsets => Inset::for_state(code.get(..2).unwrap_or("")).project(lon, lat),
            Layout::Plain => (
                lon.to_radians() * mid_lat.to_radians().cos(),
                lat.to_radians(),
            ),
        }
    };
    let rings_of = |code: &str, g: &MultiPolygon<f64>| -> Vec<Vec<(f64, f64)>> {
        g.0.iter()
            .flat_map(|p| std::iter::once(p.exterior()).chain(p.interiors()))
            .map(|ring| ring.0.iter().map(|c| project(code, c.x, c.y)).collect())
            .collect()
    };
    // One frame for every panel, fitted to the first panel's units (the
    // panels draw the same layer).
    let first: Vec<(f64, f64)> = panels
        .first()
        .map(|p| {
            p.shapes
                .iter()
                .flat_map(|s| rings_of(&s.code, s.geometry).into_iter().flatten())
                .collect()
        })
        .unwrap_or_default();
    let columns = if panels.len() > 1 { 2 } else { 1 };
    let panel_w = WIDTH / columns as f64;
    let frame = Frame::fit(&first, panel_w, WIDTH, MARGIN).unwrap_or_else(|| {
        Frame::fit(&[(0.0, 0.0), (1.0, 1.0)], panel_w, panel_w, MARGIN).unwrap()
    });
    let (_, map_h) = frame.size();
    let title_h = if panels.len() > 1 { PANEL_TITLE } else { 0.0 };
    let panel_h = map_h + title_h;
    let rows = panels.len().div_ceil(columns);
    let counts = class_counts(panels, spec.classes.len());
    let marked: Vec<usize> = panels
        .iter()
        .map(|p| p.shapes.iter().filter(|s| s.marked).count())
        .collect();
    let legend_rows = spec.classes.len() + usize::from(spec.mark_label.is_some());
    let legend_h = 22.0 * legend_rows as f64 + 16.0 * (spec.notes.len() + 1) as f64 + 20.0;
    let height = HEADER + panel_h * rows as f64 + legend_h;

    writeln!(
        w,
        r#"<svg xmlns="http://www.w3.org/2000/svg" width="{WIDTH}" height="{height:.0}" viewBox="0 0 {WIDTH} {height:.0}" font-family="sans-serif">"#
    )?;
    writeln!(w, "<defs>")?;
    for (i, c) in spec.classes.iter().enumerate() {
        if c.fill == Fill::Hatched {
            writeln!(
                w,
                r##"<pattern id="hatch{i}" patternUnits="userSpaceOnUse" width="5" height="5" patternTransform="rotate(45)"><rect width="5" height="5" fill="#f7f7f7"/><rect width="1.6" height="5" fill="{}"/></pattern>"##,
                c.color
            )?;
        }
    }
    writeln!(
        w,
        r##"<pattern id="dots" patternUnits="userSpaceOnUse" width="4" height="4"><circle cx="2" cy="2" r="0.9" fill="#000000"/></pattern>"##
    )?;
    writeln!(w, "</defs>")?;
    writeln!(w, r##"<rect width="100%" height="100%" fill="#ffffff"/>"##)?;
    writeln!(
        w,
        r#"<text x="{MARGIN}" y="26" font-size="18" font-weight="bold">{}</text>"#,
        escape(&spec.title)
    )?;
    let fill_of = |class: usize| -> String {
        match spec.classes.get(class) {
            Some(c) if c.fill == Fill::Hatched => format!("url(#hatch{class})"),
            Some(c) => c.color.clone(),
            None => "#000000".into(),
        }
    };
    for (k, panel) in panels.iter().enumerate() {
        let (ox, oy) = (
            (k % columns) as f64 * panel_w,
            HEADER + (k / columns) as f64 * panel_h,
        );
        if !panel.title.is_empty() {
            writeln!(
                w,
                r#"<text x="{:.1}" y="{:.1}" font-size="14" font-weight="bold">{}</text>"#,
                ox + MARGIN,
                oy + 14.0,
                escape(&panel.title)
            )?;
        }
        let place = |rings: Vec<Vec<(f64, f64)>>| -> Vec<Vec<(f64, f64)>> {
            rings
                .into_iter()
                .map(|r| r.into_iter().map(|(x, y)| frame.apply(x, y)).collect())
                .collect()
        };
        let (dx, dy) = (ox, oy + title_h);
        writeln!(
            w,
            r##"<g stroke="#ffffff" stroke-width="0.3" stroke-linejoin="round">"##
        )?;
        let mut label_at: Vec<(String, f64, f64)> = Vec::new();
        for s in &panel.shapes {
            let rings = place(rings_of(&s.code, s.geometry));
            let d = ring_path(&rings, dx, dy);
            writeln!(
                w,
                r#"<path fill="{}" fill-rule="evenodd" d="{d}"><title>{}</title></path>"#,
                fill_of(s.class),
                escape(&s.title)
            )?;
            if s.marked {
                writeln!(
                    w,
                    r#"<path fill="url(#dots)" fill-rule="evenodd" stroke="none" d="{d}"/>"#
                )?;
            }
            if let Some((_, text)) = spec.labels.iter().find(|(c, _)| *c == s.code) {
                if let Some((x, y, _)) = label_point(&rings) {
                    label_at.push((text.clone(), x + dx, y + dy));
                }
            }
        }
        writeln!(w, "</g>")?;
        if !spec.outlines.is_empty() {
            writeln!(
                w,
                r##"<g fill="none" stroke="#333333" stroke-width="0.7" stroke-linejoin="round">"##
            )?;
            for (code, g) in &spec.outlines {
                let rings = place(rings_of(code, g));
                writeln!(w, r#"<path d="{}"/>"#, ring_path(&rings, dx, dy))?;
            }
            writeln!(w, "</g>")?;
        }
        for (text, x, y) in label_at {
            writeln!(
                w,
                r##"<text x="{x:.1}" y="{y:.1}" font-size="10" text-anchor="middle" stroke="#ffffff" stroke-width="2.5" paint-order="stroke" fill="#111111">{}</text>"##,
                escape(&text)
            )?;
        }
    }
    let mut y = HEADER + panel_h * rows as f64 + 8.0;
    let count_text = |of: &dyn Fn(usize) -> usize| -> String {
        if panels.len() == 1 {
            format!("({})", of(0))
        } else {
            let parts: Vec<String> = panels
                .iter()
                .enumerate()
                .map(|(k, p)| format!("{}: {}", p.title, of(k)))
                .collect();
            format!("({})", parts.join(", "))
        }
    };
    for (i, class) in spec.classes.iter().enumerate() {
        writeln!(
            w,
            r##"<rect x="{MARGIN}" y="{y:.0}" width="16" height="16" fill="{}" stroke="#666666" stroke-width="0.5"/><text x="{:.0}" y="{:.0}" font-size="13">{} {}</text>"##,
            fill_of(i),
            MARGIN + 24.0,
            y + 13.0,
            escape(&class.label),
            count_text(&|k| counts[k][i])
        )?;
        y += 22.0;
    }
    if let Some(label) = &spec.mark_label {
        writeln!(
            w,
            r##"<rect x="{MARGIN}" y="{y:.0}" width="16" height="16" fill="#ffffff" stroke="#666666" stroke-width="0.5"/><rect x="{MARGIN}" y="{y:.0}" width="16" height="16" fill="url(#dots)"/><text x="{:.0}" y="{:.0}" font-size="13">{} {}</text>"##,
            MARGIN + 24.0,
            y + 13.0,
            escape(label),
            count_text(&|k| marked[k])
        )?;
        y += 22.0;
    }
    for note in spec.notes.iter().chain(std::iter::once(&spec.source)) {
        writeln!(
            w,
            r##"<text x="{MARGIN}" y="{:.0}" font-size="11" fill="#444444">{}</text>"##,
            y + 11.0,
            escape(note)
        )?;
        y += 16.0;
    }
    writeln!(w, "</svg>")
}
