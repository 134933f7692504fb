//! Inline SVG plots for the HTML report, written as text: rates as points with interval
//! whiskers on a 0–100% axis, one row per label.
//!
//! Invariants: every string from a run goes through [`escape`]; a series is told apart by marker
//! shape and a text legend, never by colour alone; a rate without judged pairs is drawn as text
//! only. Output is deterministic (fixed sizes, coordinates rounded to 0.1 px).

use super::html::escape;
use crate::stats::Rate;

/// How a series is drawn; shapes differ so the plot reads in grey scale.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Marker {
    Circle,
    Square,
}

impl Marker {
    fn class(self) -> &'static str {
        match self {
            Marker::Circle => "m-circle",
            Marker::Square => "m-square",
        }
    }

    fn draw(self, x: f64, y: f64) -> String {
        match self {
            Marker::Circle => format!(
                r#"<circle class="{}" cx="{x:.1}" cy="{y:.1}" r="5"/>"#,
                self.class()
            ),
            Marker::Square => format!(
                r#"<rect class="{}" x="{:.1}" y="{:.1}" width="9" height="9"/>"#,
                self.class(),
                x - 4.5,
                y - 4.5
            ),
        }
    }
}

/// One row of an interval chart.
#[derive(Debug, Clone)]
pub struct IntervalRow {
    pub label: String,
    pub marker: Marker,
    pub rate: Rate,
}

#[derive(Debug, Clone)]
pub struct IntervalChart {
    /// Also the SVG's accessible name.
    pub title: String,
    /// What the axis measures, e.g. "flip rate".
    pub axis_label: String,
    /// Series names shown under the plot, by marker.
    pub legend: Vec<(Marker, String)>,
    pub rows: Vec<IntervalRow>,
}

const WIDTH: f64 = 760.0;
const LABEL_W: f64 = 220.0;
const PLOT_W: f64 = 360.0;
const ROW_H: f64 = 24.0;
const TOP: f64 = 34.0;

/// Characters of a row label that fit left of the plot; longer labels end in "…" (the tables
/// beside every chart carry the full text).
const LABEL_CHARS: usize = 30;

fn clip(label: &str) -> String {
    if label.chars().count() <= LABEL_CHARS {
        label.to_string()
    } else {
        let head: String = label.chars().take(LABEL_CHARS - 1).collect();
        format!("{head}…")
    }
}

/// The chart as an `<svg>` element sized in CSS pixels.
pub fn interval_chart(chart: &IntervalChart) -> String {
    let n = chart.rows.len() as f64;
    let plot_h = ROW_H * n.max(1.0);
    let axis_y = TOP + plot_h;
    let height = axis_y + 60.0;
    let x_of = |v: f64| LABEL_W + PLOT_W * v.clamp(0.0, 1.0);
    let mut s = format!(
        r#"<svg xmlns="http://www.w3.org/2000/svg" class="chart" role="img" width="{WIDTH}" height="{height:.0}" viewBox="0 0 {WIDTH} {height:.0}"><title>{}</title>"#,
        escape(&chart.title)
    );
    s.push_str(&format!(
        r#"<text class="c-title" x="0" y="16">{}</text>"#,
        escape(&chart.title)
    ));
    for tick in 0..=4 {
        let v = f64::from(tick) * 0.25;
        let x = x_of(v);
        s.push_str(&format!(
            r#"<line class="grid" x1="{x:.1}" y1="{TOP:.1}" x2="{x:.1}" y2="{axis_y:.1}"/><text class="tick" x="{x:.1}" y="{:.1}" text-anchor="middle">{:.0}%</text>"#,
            axis_y + 16.0,
            100.0 * v
        ));
    }
    s.push_str(&format!(
        r#"<text class="axis" x="{:.1}" y="{:.1}" text-anchor="middle">{} (%, points with {:.0}% interval whiskers)</text>"#,
        LABEL_W + PLOT_W / 2.0,
        axis_y + 34.0,
        escape(&chart.axis_label),
        100.0 * chart.rows.first().map_or(0.95, |r| r.rate.confidence)
    ));
    for (i, row) in chart.rows.iter().enumerate() {
        let y = TOP + ROW_H * (i as f64 + 0.5);
        s.push_str(&format!(
            r#"<text class="label" x="{:.1}" y="{:.1}" text-anchor="end">{}</text>"#,
            LABEL_W - 8.0,
            y + 4.0,
            escape(&clip(&row.label))
        ));
        if let (Some(v), Some(lo), Some(hi)) = (row.rate.value, row.rate.low, row.rate.high) {
            let (x0, x1) = (x_of(lo), x_of(hi));
            s.push_str(&format!(
                    r#"<path class="whisker" d="M{x0:.1} {:.1}V{:.1}M{x0:.1} {y:.1}H{x1:.1}M{x1:.1} {:.1}V{:.1}"/>"#,
                    y - 5.0,
                    y + 5.0,
                    y - 5.0,
                    y + 5.0
                ));
            s.push_str(&row.marker.draw(x_of(v), y));
        }
        s.push_str(&format!(
            r#"<text class="value" x="{:.1}" y="{:.1}">{}</text>"#,
            LABEL_W + PLOT_W + 10.0,
            y + 4.0,
            escape(&row.rate.describe())
        ));
    }
    let mut x = LABEL_W;
    for (marker, name) in &chart.legend {
        s.push_str(&marker.draw(x + 5.0, axis_y + 50.0));
        s.push_str(&format!(
            r#"<text class="legend" x="{:.1}" y="{:.1}">{}</text>"#,
            x + 16.0,
            axis_y + 54.0,
            escape(name)
        ));
        x += 24.0 + 7.5 * name.chars().count() as f64;
    }
    s.push_str("</svg>");
    s
}

#[cfg(test)]
mod tests {
    use super::*;

    fn chart(label: &str, rate: Rate) -> IntervalChart {
        IntervalChart {
            title: "t".into(),
            axis_label: "flip rate".into(),
            legend: vec![(Marker::Square, "same".into())],
            rows: vec![IntervalRow {
                label: label.into(),
                marker: Marker::Square,
                rate,
            }],
        }
    }

    #[test]
    fn whiskers_span_the_interval_on_a_0_to_100_axis() {
        // 70/88 at 95%: Wilson interval [0.7000, 0.8670] (Newcombe 1998 method 3 formula).
        let svg = chart("cloth", Rate::new(70, 88, 0.95));
        let text = interval_chart(&svg);
        let r = Rate::new(70, 88, 0.95);
        let x0 = LABEL_W + PLOT_W * r.low.unwrap();
        let x1 = LABEL_W + PLOT_W * r.high.unwrap();
        assert!(text.contains(&format!("M{x0:.1} ")), "{text}");
        assert!(text.contains(&format!("H{x1:.1}")), "{text}");
        assert!(text.contains("79.5% [70.0, 86.7] (70/88)"));
    }

    #[test]
    fn labels_are_escaped_and_empty_rates_draw_no_marker() {
        let text = interval_chart(&chart("<b>&\"", Rate::new(0, 0, 0.95)));
        assert!(text.contains("&lt;b&gt;&amp;&quot;"));
        assert!(!text.contains("<b>"));
        assert!(!text.contains("class=\"whisker\""));
        assert!(text.contains("n/a (0/0)"));
    }

    #[test]
    fn long_labels_are_clipped_before_escaping() {
        let long = format!("{}<tail>", "x".repeat(40));
        let text = interval_chart(&chart(&long, Rate::new(1, 2, 0.95)));
        assert!(text.contains(&format!("{}…</text>", "x".repeat(LABEL_CHARS - 1))));
        assert!(!text.contains("tail"));
    }
}
