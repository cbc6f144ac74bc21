//! The report's figures, drawn with plotters' SVG backend (text is left to the viewer's
//! fonts, so no font files are needed).
//!
//! Every figure is an x–y chart of a few series (lines, points, points with vertical error
//! bars); axes are labelled with the quantity and its unit. Figures are returned as SVG
//! text with their file names.

use plotters::prelude::*;

use super::Report;
use crate::estimate::Method;

/// One SVG figure and the file name it should be written to.
#[derive(Clone, Debug)]
pub struct Figure {
    /// File name, e.g. `convergence.svg`.
    pub file: String,
    /// What it shows, for the report's caption.
    pub caption: String,
    /// The SVG document.
    pub svg: String,
}

/// How a series is drawn.
#[derive(Clone, Copy, Debug, PartialEq)]
enum Style {
    Line,
    Dashed,
    Points,
}

/// One series of a chart: points (x, y, 1σ of y).
struct Series {
    label: String,
    style: Style,
    color: RGBColor,
    points: Vec<(f64, f64, f64)>,
}

impl Series {
    fn new(label: &str, style: Style, color: RGBColor, points: Vec<(f64, f64, f64)>) -> Series {
        Series {
            label: label.to_string(),
            style,
            color,
            points,
        }
    }
}

const BLUE_: RGBColor = RGBColor(31, 119, 180);
const ORANGE_: RGBColor = RGBColor(214, 110, 14);
const GREEN_: RGBColor = RGBColor(44, 140, 44);
const GREY_: RGBColor = RGBColor(110, 110, 110);

/// A range that holds every value and error bar, padded by 8 %.
fn span(values: impl Iterator<Item = (f64, f64)>) -> (f64, f64) {
    let (mut lo, mut hi) = (f64::INFINITY, f64::NEG_INFINITY);
    for (v, e) in values {
        if v.is_finite() {
            lo = lo.min(v - e.abs());
            hi = hi.max(v + e.abs());
        }
    }
    if !lo.is_finite() {
        return (0.0, 1.0);
    }
    let pad = if hi > lo {
        0.08 * (hi - lo)
    } else {
        0.05 * lo.abs().max(1e-3)
    };
    (lo - pad, hi + pad)
}

/// Draw one chart.
fn chart(
    title: &str,
    x_desc: &str,
    y_desc: &str,
    series: &[Series],
    legend: SeriesLabelPosition,
) -> String {
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (720, 440)).into_drawing_area();
        // Drawing into a string cannot fail but for a bad range; the ranges are made finite
        // above, so errors are ignored rather than turned into panics.
        let _ = draw(&root, title, x_desc, y_desc, series, legend);
        let _ = root.present();
    }
    svg
}

type DrawResult = std::result::Result<(), DrawingAreaErrorKind<std::io::Error>>;

fn draw(
    root: &DrawingArea<SVGBackend<'_>, plotters::coord::Shift>,
    title: &str,
    x_desc: &str,
    y_desc: &str,
    series: &[Series],
    legend: SeriesLabelPosition,
) -> DrawResult {
    root.fill(&WHITE)?;
    let xs = span(
        series
            .iter()
            .flat_map(|s| s.points.iter().map(|p| (p.0, 0.0))),
    );
    let ys = span(
        series
            .iter()
            .flat_map(|s| s.points.iter().map(|p| (p.1, p.2))),
    );
    let mut ch = ChartBuilder::on(root)
        .caption(title, ("sans-serif", 20))
        .margin(12)
        .x_label_area_size(48)
        .y_label_area_size(86)
        .build_cartesian_2d(xs.0..xs.1, ys.0..ys.1)?;
    ch.configure_mesh()
        .x_desc(x_desc)
        .y_desc(y_desc)
        .label_style(("sans-serif", 13))
        .axis_desc_style(("sans-serif", 15))
        .light_line_style(WHITE)
        .draw()?;
    for s in series {
        let color = s.color;
        let pts: Vec<(f64, f64)> = s.points.iter().map(|p| (p.0, p.1)).collect();
        match s.style {
            Style::Line => {
                ch.draw_series(LineSeries::new(pts, color.stroke_width(2)))?
                    .label(s.label.clone())
                    .legend(move |(x, y)| PathElement::new(vec![(x, y), (x + 18, y)], color));
            }
            Style::Dashed => {
                ch.draw_series(DashedLineSeries::new(pts, 6, 4, color.stroke_width(2)))?
                    .label(s.label.clone())
                    .legend(move |(x, y)| PathElement::new(vec![(x, y), (x + 18, y)], color));
            }
            Style::Points => {
                ch.draw_series(
                    s.points
                        .iter()
                        .filter(|p| p.2 > 0.0)
                        .map(|p| PathElement::new(vec![(p.0, p.1 - p.2), (p.0, p.1 + p.2)], color)),
                )?;
                ch.draw_series(
                    pts.iter()
                        .map(|&(x, y)| Circle::new((x, y), 4, color.filled())),
                )?
                .label(s.label.clone())
                .legend(move |(x, y)| Circle::new((x + 9, y), 4, color.filled()));
            }
        }
    }
    ch.configure_series_labels()
        .background_style(WHITE.mix(0.85))
        .border_style(BLACK)
        .label_font(("sans-serif", 13))
        .position(legend)
        .draw()?;
    Ok(())
}

/// A horizontal reference line across `x0..x1`.
fn level(label: &str, color: RGBColor, y: f64, x0: f64, x1: f64) -> Series {
    Series::new(
        label,
        Style::Dashed,
        color,
        vec![(x0, y, 0.0), (x1, y, 0.0)],
    )
}

/// Every figure that applies to the report's data.
pub fn figures(w: &Report<'_>) -> Vec<Figure> {
    let mut out = Vec::new();
    let s = w.survey;
    let unit = &w.lattice.crystal.formula_unit.name;
    let pauling = s.pauling.w_per_unit();
    let infinite = [
        s.strips.as_ref().map(|t| &t.estimate),
        s.extrapolated.as_ref().map(|x| &x.estimate),
        s.sampled.as_ref().map(|m| &m.sampled.estimate),
    ]
    .into_iter()
    .flatten()
    .find(|e| e.method != Method::Exact);
    // Exact counts against 1/N, with Pauling's value and the infinite-crystal estimate. The
    // smallest cells (fewer than 8 formula units) are left out when enough others remain:
    // they wrap bonds onto themselves and would squeeze the rest into a corner.
    let counted = |min: f64| -> Vec<(f64, f64, f64)> {
        s.exact
            .iter()
            .filter(|e| e.ln_w_per_unit.is_finite() && e.formula_units >= min)
            .map(|e| (1.0 / e.formula_units, e.w_per_unit(), 0.0))
            .collect()
    };
    let mut exact = counted(8.0);
    if exact.len() < 3 {
        exact = counted(1e-9);
    }
    if !exact.is_empty() {
        let x1 = exact.iter().map(|p| p.0).fold(0.0, f64::max);
        let mut series = vec![Series::new(
            "exact counts, periodic cells",
            Style::Points,
            BLUE_,
            exact,
        )];
        let sampled: Vec<(f64, f64, f64)> = s
            .sampled_sizes
            .iter()
            .map(|m| {
                let e = &m.sampled.estimate;
                (
                    1.0 / e.formula_units,
                    e.w_per_unit(),
                    e.sigma_w().unwrap_or(0.0),
                )
            })
            .collect();
        if !sampled.is_empty() {
            series.push(Series::new(
                "Monte Carlo, periodic cells",
                Style::Points,
                GREY_,
                sampled,
            ));
        }
        if let Some(e) = infinite {
            let label = format!("{} (infinite crystal)", crate::text::method_label(e));
            series.push(Series::new(
                &label,
                Style::Points,
                ORANGE_,
                vec![(0.0, e.w_per_unit(), e.sigma_w().unwrap_or(0.0))],
            ));
        }
        series.push(level("Pauling estimate", GREY_, pauling, 0.0, x1));
        out.push(Figure {
            file: "convergence.svg".into(),
            caption: format!(
                "Exact (and, where sampled, Monte Carlo, with 1σ bars) W per {unit} of periodic cells against 1/N (N formula units in the cell; exact cells below 8 formula units left out when three or more others exist), with Pauling's estimate and the infinite-crystal value at 1/N = 0."
            ),
            svg: chart(
                &format!("W per {unit} against cell size"),
                "1/N (N = formula units in the cell)",
                &format!("W per {unit}"),
                &series,
                SeriesLabelPosition::UpperLeft,
            ),
        });
    }
    if let Some(t) = &s.strips {
        let widths: Vec<(f64, f64, f64)> = t
            .widths
            .iter()
            .map(|r| (1.0 / (r.width * r.width) as f64, r.ln_w_per_unit.exp(), 0.0))
            .collect();
        let x1 = widths.iter().map(|p| p.0).fold(0.0, f64::max);
        let e = &t.estimate;
        let series = vec![
            Series::new("infinite strips of width L", Style::Points, BLUE_, widths),
            Series::new(
                "extrapolated to L → ∞",
                Style::Points,
                ORANGE_,
                vec![(0.0, e.w_per_unit(), e.sigma_w().unwrap_or(0.0))],
            ),
            level("Pauling estimate", GREY_, pauling, 0.0, x1),
        ];
        out.push(Figure {
            file: "strips.svg".into(),
            caption: format!(
                "Transfer matrix: W per {unit} of infinite periodic strips of width L cells against 1/L², and the extrapolation to infinite width."
            ),
            svg: chart(
                &format!("W per {unit} of strips against width"),
                "1/L² (L = strip width in cells)",
                &format!("W per {unit}"),
                &series,
                SeriesLabelPosition::UpperLeft,
            ),
        });
    }
    if let Some(m) = &s.sampled {
        let x = &m.sampled;
        let n = x.estimate.formula_units.max(1e-300);
        let points: Vec<(f64, f64, f64)> = x
            .betas
            .iter()
            .zip(x.mean_energy.iter().zip(&x.reference_energy))
            .map(|(&b, (&e, &r))| (b, (e - r) / n, 0.0))
            .collect();
        let total: Vec<(f64, f64, f64)> = x
            .betas
            .iter()
            .zip(&x.mean_energy)
            .map(|(&b, &e)| (b, e / n, 0.0))
            .collect();
        let series = vec![
            Series::new("⟨E⟩ − E_Pauling (integrated)", Style::Line, BLUE_, points),
            Series::new("⟨E⟩", Style::Dashed, GREEN_, total),
        ];
        out.push(Figure {
            file: "integrand.svg".into(),
            caption: format!(
                "Monte Carlo on the {} cell: mean number of violated constraints per {unit} against β, and its difference from the Pauling reference, which is the integrand of the correction to ln W.",
                m.cells
            ),
            svg: chart(
                "Thermodynamic integration",
                "β (inverse temperature, per violated constraint)",
                &format!("violations per {unit}"),
                &series,
                SeriesLabelPosition::UpperRight,
            ),
        });
    }
    if let Some(k) = &w.comparison {
        let data: Vec<(f64, f64, f64)> = k.points.iter().map(|&(t, cp)| (t, cp / t, 0.0)).collect();
        let curve: Vec<(f64, f64, f64)> = k.curve.iter().map(|&(t, y)| (t, y, 0.0)).collect();
        let debye: Vec<(f64, f64, f64)> = k.debye_curve.iter().map(|&(t, y)| (t, y, 0.0)).collect();
        let series = vec![
            Series::new("measured", Style::Points, BLUE_, data),
            Series::new("interpolant integrated", Style::Line, GREEN_, curve),
            Series::new(
                &format!("{} extrapolation", k.low_t_words),
                Style::Dashed,
                ORANGE_,
                debye,
            ),
        ];
        out.push(Figure {
            file: "calorimetry.svg".into(),
            caption: format!(
                "Heat capacity data of {}: Cp/T against T, the interpolant whose integral gives the entropy, and the {} extrapolation below {} K.",
                k.file,
                k.low_t_words,
                crate::text::sig(k.lowest_k, 4)
            ),
            svg: chart(
                "Cp/T against temperature",
                "T (K)",
                "Cp/T (J/(mol K²))",
                &series,
                SeriesLabelPosition::LowerRight,
            ),
        });
    }
    out
}
