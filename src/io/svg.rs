//! SVG maps: each unit filled by a class (joined, partly covered, no data,
//! ...), with a legend, a title and notes. Coordinates are rounded to 0.1 px
//! so the same input gives the same bytes.

use std::io::Write;

use geo::MultiPolygon;

use crate::core::projection::Inset;

/// A class of units on the map.
#[derive(Debug, Clone)]
pub struct Class {
    /// Legend text.
    pub label: String,
    /// Fill colour (`#rrggbb`).
    pub color: String,
}

/// One unit to draw.
pub struct Shape<'a> {
    /// Code (used for the projection inset of US units and the tooltip).
    pub code: String,
    /// Tooltip text.
    pub title: String,
    /// Index into the classes.
    pub class: usize,
    /// Geometry in longitude/latitude.
    pub geometry: &'a MultiPolygon<f64>,
}

/// How to lay units out.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Layout {
    /// US units by state code: conterminous Albers with insets.
    UsInsets,
    /// Longitude scaled by the cosine of the middle latitude.
    Plain,
}

const WIDTH: f64 = 960.0;
const MARGIN: f64 = 10.0;

fn escape(text: &str) -> String {
    text.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
        .replace('"', "&quot;")
}

/// Writes the map.
pub fn write_map(
    w: &mut dyn Write,
    shapes: &[Shape<'_>],
    classes: &[Class],
    layout: Layout,
    title: &str,
    notes: &[String],
) -> std::io::Result<()> {
    let mid_lat = {
        let lats: Vec<f64> = shapes
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
        match layout {
            Layout::UsInsets => Inset::for_state(code.get(..2).unwrap_or("")).project(lon, lat),
            Layout::Plain => (
                lon.to_radians() * mid_lat.to_radians().cos(),
                lat.to_radians(),
            ),
        }
    };
    // Project every ring once.
    let projected: Vec<Vec<Vec<(f64, f64)>>> = shapes
        .iter()
        .map(|s| {
            s.geometry
                .0
                .iter()
                .flat_map(|p| std::iter::once(p.exterior()).chain(p.interiors()))
                .map(|ring| ring.0.iter().map(|c| project(&s.code, c.x, c.y)).collect())
                .collect()
        })
        .collect();
    let (mut x0, mut y0, mut x1, mut y1) = (
        f64::INFINITY,
        f64::INFINITY,
        f64::NEG_INFINITY,
        f64::NEG_INFINITY,
    );
    for &(x, y) in projected.iter().flatten().flatten() {
        x0 = x0.min(x);
        x1 = x1.max(x);
        y0 = y0.min(y);
        y1 = y1.max(y);
    }
    if !x0.is_finite() {
        (x0, y0, x1, y1) = (0.0, 0.0, 1.0, 1.0);
    }
    let scale = (WIDTH - 2.0 * MARGIN) / (x1 - x0).max(1e-12);
    let map_height = (y1 - y0) * scale + 2.0 * MARGIN;
    let header = 34.0;
    let legend_height = 22.0 * classes.len() as f64 + 16.0 * notes.len() as f64 + 16.0;
    let height = header + map_height + legend_height;
    writeln!(
        w,
        r#"<svg xmlns="http://www.w3.org/2000/svg" width="{WIDTH}" height="{height:.0}" viewBox="0 0 {WIDTH} {height:.0}" font-family="sans-serif">"#
    )?;
    writeln!(w, r##"<rect width="100%" height="100%" fill="#ffffff"/>"##)?;
    writeln!(
        w,
        r#"<text x="{MARGIN}" y="22" font-size="18">{}</text>"#,
        escape(title)
    )?;
    writeln!(
        w,
        r##"<g stroke="#ffffff" stroke-width="0.25" stroke-linejoin="round">"##
    )?;
    for (shape, rings) in shapes.iter().zip(&projected) {
        let mut d = String::new();
        for ring in rings {
            for (i, &(x, y)) in ring.iter().enumerate() {
                let px = MARGIN + (x - x0) * scale;
                let py = header + MARGIN + (y1 - y) * scale;
                d.push_str(&format!(
                    "{}{:.1},{:.1}",
                    if i == 0 { "M" } else { "L" },
                    px,
                    py
                ));
            }
            d.push('Z');
        }
        let color = classes
            .get(shape.class)
            .map_or("#000000", |c| c.color.as_str());
        writeln!(
            w,
            r#"<path fill="{color}" d="{d}"><title>{}</title></path>"#,
            escape(&shape.title)
        )?;
    }
    writeln!(w, "</g>")?;
    let mut y = header + map_height + 8.0;
    for class in classes {
        let count = shapes
            .iter()
            .filter(|s| classes.get(s.class).is_some_and(|c| c.label == class.label))
            .count();
        writeln!(
            w,
            r##"<rect x="{MARGIN}" y="{y:.0}" width="16" height="16" fill="{}" stroke="#666666" stroke-width="0.5"/><text x="{:.0}" y="{:.0}" font-size="13">{} ({count})</text>"##,
            class.color,
            MARGIN + 24.0,
            y + 13.0,
            escape(&class.label)
        )?;
        y += 22.0;
    }
    for note in notes {
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
