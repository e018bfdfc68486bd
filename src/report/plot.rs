//! SVG plots of estimation results, drawn with plotters into a string.
//!
//! In: an [`EnergyReport`] (energy against Krylov dimension, error bars of ±1 bootstrap
//! standard error, as in the table, the exact value as a dashed line when known) or a
//! [`DosReport`] (the density of states with its ±2σ band, as in the table, and the exact
//! broadened spectrum when known), and the energy axis label with its unit. Out: the SVG
//! document as text; the caller writes it. Invariant: no file I/O here, the error bars and
//! bands are the ones the text table prints (each labelled with its width), and the same report
//! always gives the same bytes.

use crate::estimate::{DosReport, EnergyReport, EnergyRow, KrylovKind};
use plotters::prelude::*;

const WIDTH: u32 = 800;
const HEIGHT: u32 = 520;
const KRYLOV_COLOR: RGBColor = RGBColor(31, 94, 168);
const PENCIL_COLOR: RGBColor = RGBColor(196, 92, 22);
const EXACT_COLOR: RGBColor = RGBColor(40, 40, 40);
const BAND_COLOR: RGBColor = RGBColor(150, 185, 225);

/// Why a plot could not be drawn.
#[derive(Clone, Debug, PartialEq)]
pub enum PlotError {
    /// The report holds nothing to draw (every energy rejected, fewer than two DOS points):
    /// the options asked for an empty plot.
    Empty(&'static str),
    /// The drawing library failed on a well-formed report: a phasewright bug.
    Drawing(String),
}

impl std::fmt::Display for PlotError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            PlotError::Empty(what) => write!(f, "there is no {what} to plot"),
            PlotError::Drawing(m) => write!(f, "cannot draw the plot: {m}"),
        }
    }
}

impl std::error::Error for PlotError {}

impl crate::error::LayerError for PlotError {
    fn blame(&self) -> crate::error::Blame {
        match self {
            PlotError::Empty(_) => crate::error::Blame::Input(crate::diag::Code::UsageInput),
            PlotError::Drawing(_) => crate::error::Blame::Bug,
        }
    }

    fn hint(&self) -> Option<&str> {
        match self {
            PlotError::Empty(_) => Some("the table has no value to draw: drop --plot"),
            PlotError::Drawing(_) => None,
        }
    }
}

fn err<E: std::fmt::Display>(e: E) -> PlotError {
    PlotError::Drawing(e.to_string())
}

/// One plotted series of `(x, y, half-width of the error bar)`.
struct Points {
    label: &'static str,
    color: RGBColor,
    offset: f64,
    data: Vec<(f64, f64, f64)>,
}

/// `(dimension, energy, σ)` for every row where `pick` gives an energy.
fn with_bars(
    r: &EnergyReport,
    pick: impl Fn(&EnergyRow) -> (Option<f64>, Option<f64>),
) -> Vec<(f64, f64, f64)> {
    r.rows
        .iter()
        .filter_map(|row| {
            let (e, se) = pick(row);
            e.map(|e| (row.dimension as f64, e, se.unwrap_or(0.0)))
        })
        .collect()
}

/// Energy against Krylov dimension, both estimators, with ±1σ error bars (one bootstrap
/// standard error, the `±1σ` columns of the table). `energy_label` names the axis and its unit.
pub fn energy_svg(r: &EnergyReport, energy_label: &str) -> Result<String, PlotError> {
    let krylov_label = match r.kind {
        KrylovKind::Hamiltonian => "Krylov (H, S)",
        KrylovKind::Sine => "Krylov (sin(H dt)/dt, S)",
    };
    let series = [
        Points {
            label: krylov_label,
            color: KRYLOV_COLOR,
            offset: -0.08,
            data: with_bars(r, |row| (row.krylov, row.krylov_std_error)),
        },
        Points {
            label: "matrix pencil",
            color: PENCIL_COLOR,
            offset: 0.08,
            data: with_bars(r, |row| (row.pencil, row.pencil_std_error)),
        },
    ];
    // Range: every point with its bar, and the exact value; errors are clipped at 4 bar widths
    // of the spread so one wild point does not flatten the rest.
    let mut lo = f64::INFINITY;
    let mut hi = f64::NEG_INFINITY;
    for s in &series {
        for &(_, y, e) in &s.data {
            lo = lo.min(y - e);
            hi = hi.max(y + e);
        }
    }
    if let Some(x) = r.exact {
        lo = lo.min(x);
        hi = hi.max(x);
    }
    if !lo.is_finite() || !hi.is_finite() {
        return Err(PlotError::Empty("energy"));
    }
    let pad = ((hi - lo) * 0.08).max(1e-6);
    let (lo, hi) = (lo - pad, hi + pad);
    let k_max = r.rows.len().max(1) as f64;

    let mut out = String::new();
    {
        let root = SVGBackend::with_string(&mut out, (WIDTH, HEIGHT)).into_drawing_area();
        root.fill(&WHITE).map_err(err)?;
        let mut chart = ChartBuilder::on(&root)
            .caption("Lowest energy against Krylov dimension", ("sans-serif", 20))
            .margin(12)
            .x_label_area_size(44)
            .y_label_area_size(80)
            .build_cartesian_2d(0.5f64..k_max + 0.5, lo..hi)
            .map_err(err)?;
        chart
            .configure_mesh()
            .x_desc("Krylov dimension d")
            .y_desc(energy_label)
            .x_labels(r.rows.len().clamp(2, 12))
            .x_label_formatter(&|x| format!("{x:.0}"))
            .y_label_formatter(&|y| format!("{y:.4}"))
            .draw()
            .map_err(err)?;
        if let Some(x) = r.exact {
            let label = format!("exact {x:.6}");
            chart
                .draw_series(DashedLineSeries::new(
                    vec![(0.5, x), (k_max + 0.5, x)],
                    6,
                    4,
                    EXACT_COLOR.stroke_width(1),
                ))
                .map_err(err)?
                .label(label)
                .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 18, y)], EXACT_COLOR));
        }
        for s in &series {
            if s.data.is_empty() {
                continue;
            }
            let color = s.color;
            let bars = s.data.iter().flat_map(|&(x, y, e)| {
                let x = x + s.offset;
                [
                    PathElement::new(vec![(x, y - e), (x, y + e)], color.stroke_width(1)),
                    PathElement::new(vec![(x - 0.05, y - e), (x + 0.05, y - e)], color),
                    PathElement::new(vec![(x - 0.05, y + e), (x + 0.05, y + e)], color),
                ]
            });
            chart.draw_series(bars).map_err(err)?;
            chart
                .draw_series(
                    s.data
                        .iter()
                        .map(|&(x, y, _)| Circle::new((x + s.offset, y), 4, color.filled())),
                )
                .map_err(err)?
                .label(format!("{} (±1σ)", s.label))
                .legend(move |(x, y)| Circle::new((x + 9, y), 4, color.filled()));
        }
        chart
            .configure_series_labels()
            .background_style(WHITE.mix(0.9))
            .border_style(BLACK.mix(0.4))
            .position(SeriesLabelPosition::UpperRight)
            .draw()
            .map_err(err)?;
        root.present().map_err(err)?;
    }
    Ok(out)
}

/// The broadened density of states with its ±2σ band (and the exact curve when known).
/// `energy_label` names the energy axis and its unit.
pub fn dos_svg(r: &DosReport, energy_label: &str) -> Result<String, PlotError> {
    let n = r.energies.len();
    if n < 2 {
        return Err(PlotError::Empty("density of states"));
    }
    let (x0, x1) = (r.energies[0], r.energies[n - 1]);
    let mut lo: f64 = 0.0;
    let mut hi: f64 = 0.0;
    for i in 0..n {
        lo = lo.min(r.density[i] - 2.0 * r.std_error[i]);
        hi = hi.max(r.density[i] + 2.0 * r.std_error[i]);
        if let Some(ex) = &r.exact {
            hi = hi.max(ex[i]);
        }
    }
    let pad = ((hi - lo) * 0.06).max(1e-9);
    let mut out = String::new();
    {
        let root = SVGBackend::with_string(&mut out, (WIDTH, HEIGHT)).into_drawing_area();
        root.fill(&WHITE).map_err(err)?;
        let caption = format!(
            "Density of states, σ = {:.4} (resolution limit π/(K·dt) = {:.4})",
            r.sigma, r.resolution
        );
        let mut chart = ChartBuilder::on(&root)
            .caption(caption, ("sans-serif", 18))
            .margin(12)
            .x_label_area_size(44)
            .y_label_area_size(80)
            .build_cartesian_2d(x0..x1, (lo - pad)..(hi + pad))
            .map_err(err)?;
        chart
            .configure_mesh()
            .x_desc(energy_label)
            .y_desc("states per unit energy")
            .x_label_formatter(&|x| format!("{x:.2}"))
            .y_label_formatter(&|y| format!("{y:.2}"))
            .draw()
            .map_err(err)?;
        let mut band: Vec<(f64, f64)> = (0..n)
            .map(|i| (r.energies[i], r.density[i] + 2.0 * r.std_error[i]))
            .collect();
        band.extend(
            (0..n)
                .rev()
                .map(|i| (r.energies[i], r.density[i] - 2.0 * r.std_error[i])),
        );
        chart
            .draw_series(std::iter::once(Polygon::new(band, BAND_COLOR.mix(0.6))))
            .map_err(err)?
            .label("±2σ band")
            .legend(|(x, y)| Rectangle::new([(x, y - 5), (x + 18, y + 5)], BAND_COLOR.filled()));
        chart
            .draw_series(LineSeries::new(
                (0..n).map(|i| (r.energies[i], r.density[i])),
                KRYLOV_COLOR.stroke_width(2),
            ))
            .map_err(err)?
            .label("estimate")
            .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 18, y)], KRYLOV_COLOR));
        if let Some(ex) = &r.exact {
            chart
                .draw_series(DashedLineSeries::new(
                    (0..n).map(|i| (r.energies[i], ex[i])),
                    6,
                    4,
                    PENCIL_COLOR.stroke_width(2),
                ))
                .map_err(err)?
                .label("exact (diagonalised)")
                .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 18, y)], PENCIL_COLOR));
        }
        chart
            .configure_series_labels()
            .background_style(WHITE.mix(0.9))
            .border_style(BLACK.mix(0.4))
            .position(SeriesLabelPosition::UpperRight)
            .draw()
            .map_err(err)?;
        root.present().map_err(err)?;
    }
    Ok(out)
}
