//! SVG plots in quarry's own style: warm off-white paper, thin stepped
//! histograms normalised to unit area, a teal/rust/violet/ochre palette for
//! signal and a grey filled area for background.
//!
//! Each function takes the records (or the summary) as given: filter the
//! slice first to plot a subset (one sample, one hypothesis).

use std::path::Path;

use plotters::coord::combinators::LogCoord;
use plotters::coord::ranged1d::ValueFormatter;
use plotters::coord::types::RangedCoordf64;
use plotters::coord::Shift;
use plotters::prelude::*;

use crate::record::{EvalError, EvalRecord};
use crate::stats::{quantile, sorted_finite};
use crate::summary::Summary;

/// Plot size in pixels (width, height).
pub const PLOT_SIZE: (u32, u32) = (900, 560);

const PAPER: RGBColor = RGBColor(0xfc, 0xfb, 0xf8);
const INK: RGBColor = RGBColor(0x2b, 0x2d, 0x33);
const GRID: RGBColor = RGBColor(0xe4, 0xe0, 0xd8);
const AXIS: RGBColor = RGBColor(0x8a, 0x85, 0x7c);
const BACKGROUND_FILL: RGBColor = RGBColor(0x9a, 0xa3, 0xad);
const BACKGROUND_LINE: RGBColor = RGBColor(0x5f, 0x68, 0x73);
/// Signal / series colours, in order.
const PALETTE: [RGBColor; 6] = [
    RGBColor(0x0f, 0x6e, 0x7a), // teal
    RGBColor(0xc8, 0x55, 0x3d), // rust
    RGBColor(0x6b, 0x4e, 0x9b), // violet
    RGBColor(0xb8, 0x8a, 0x12), // ochre
    RGBColor(0x2f, 0x8f, 0x4e), // green
    RGBColor(0x8c, 0x2f, 0x5e), // wine
];
const RIGHT: RGBColor = PALETTE[0];
const WRONG: RGBColor = PALETTE[1];
const FONT: &str = "sans-serif";

fn plot_error(path: &Path) -> impl Fn(&dyn std::fmt::Display) -> EvalError + '_ {
    move |e| EvalError::Plot {
        path: path.to_path_buf(),
        message: e.to_string(),
    }
}

/// A 1-2-2.5-5 × 10ᵏ bin width near `raw`.
fn nice_width(raw: f64) -> f64 {
    let exp = raw.log10().floor();
    let base = 10f64.powf(exp);
    let m = raw / base;
    let step = [1.0, 2.0, 2.5, 5.0, 10.0]
        .into_iter()
        .find(|&s| s >= m)
        .unwrap_or(10.0);
    step * base
}

/// Equal-width binning from `lo` with `n` bins of `width`; with `log`, the
/// bins are equal in log₁₀ of the value (edges 10^(lo + i·width)).
#[derive(Clone, Copy, Debug)]
struct Binning {
    lo: f64,
    width: f64,
    n: usize,
    log: bool,
}

impl Binning {
    fn covering(lo: f64, hi: f64, target_bins: usize) -> Binning {
        let width = nice_width(((hi - lo) / target_bins as f64).max(1e-9));
        let lo = (lo / width).floor() * width;
        let n = (((hi - lo) / width).ceil() as usize).max(1);
        Binning {
            lo,
            width,
            n,
            log: false,
        }
    }

    /// Bins equal in log₁₀ between positive `lo` and `hi`.
    fn covering_log(lo: f64, hi: f64, target_bins: usize) -> Binning {
        Binning {
            log: true,
            ..Binning::covering(lo.log10(), hi.log10(), target_bins)
        }
    }

    /// Edge `i` (0 ..= n) in value units.
    fn edge(&self, i: usize) -> f64 {
        let e = self.lo + i as f64 * self.width;
        if self.log {
            10f64.powf(e)
        } else {
            e
        }
    }

    fn hi(&self) -> f64 {
        self.edge(self.n)
    }

    /// Unit-area contents (fraction of all `values` per bin); values beyond
    /// the range go to the first or last bin when `clamp`, else are dropped.
    fn fractions(&self, values: &[f64], clamp: bool) -> Vec<f64> {
        let mut h = vec![0.0; self.n];
        for &v in values {
            let t = if self.log {
                v.max(f64::MIN_POSITIVE).log10()
            } else {
                v
            };
            let i = ((t - self.lo) / self.width).floor();
            let i = if clamp {
                i.clamp(0.0, (self.n - 1) as f64)
            } else if i < 0.0 || i >= self.n as f64 {
                continue;
            } else {
                i
            };
            h[i as usize] += 1.0;
        }
        let total = values.len().max(1) as f64;
        h.iter_mut().for_each(|c| *c /= total);
        h
    }

    /// Outline of a stepped histogram, from and back to zero.
    fn steps(&self, h: &[f64]) -> Vec<(f64, f64)> {
        let mut pts = Vec::with_capacity(2 * h.len() + 2);
        pts.push((self.edge(0), 0.0));
        for (i, &c) in h.iter().enumerate() {
            pts.push((self.edge(i), c));
            pts.push((self.edge(i + 1), c));
        }
        pts.push((self.hi(), 0.0));
        pts
    }
}

fn format_width(w: f64) -> String {
    let s = format!("{w:.3}");
    s.trim_end_matches('0').trim_end_matches('.').to_string()
}

type PlotResult = Result<(), Box<dyn std::error::Error>>;

type Chart<'a, 'b, X = RangedCoordf64, Y = RangedCoordf64> =
    ChartContext<'a, SVGBackend<'b>, Cartesian2d<X, Y>>;

/// Tick label: integers without decimals, others with at most 3.
fn tick(v: &f64) -> String {
    if v.abs() >= 1e5 || (v.abs() < 1e-3 && *v != 0.0) {
        return format!("{v:.0e}");
    }
    format_width(*v)
}

/// Paper, caption and a styled mesh; returns the chart. `x` and `y` are
/// linear (`RangedCoordf64`) or logarithmic (`LogCoord<f64>`) axes.
fn styled_chart<'a, 'b, X, Y>(
    root: &'a DrawingArea<SVGBackend<'b>, Shift>,
    caption: &str,
    x: X,
    y: Y,
    x_desc: &str,
    y_desc: &str,
) -> Result<Chart<'a, 'b, X, Y>, Box<dyn std::error::Error>>
where
    X: Ranged<ValueType = f64> + ValueFormatter<f64>,
    Y: Ranged<ValueType = f64> + ValueFormatter<f64>,
{
    root.fill(&PAPER)?;
    let mut chart = ChartBuilder::on(root)
        .caption(caption, (FONT, 24).into_font().color(&INK))
        .margin_top(16)
        .margin_left(16)
        .margin_right(28)
        .margin_bottom(12)
        .x_label_area_size(54)
        .y_label_area_size(68)
        .build_cartesian_2d(x, y)?;
    chart.plotting_area().fill(&WHITE)?;
    chart
        .configure_mesh()
        .bold_line_style(GRID.stroke_width(1))
        .light_line_style(TRANSPARENT)
        .axis_style(AXIS.stroke_width(1))
        .label_style((FONT, 14).into_font().color(&INK))
        .axis_desc_style((FONT, 16).into_font().color(&INK))
        .x_desc(x_desc)
        .y_desc(y_desc)
        .x_labels(10)
        .y_labels(8)
        .x_label_formatter(&tick)
        .y_label_formatter(&tick)
        .draw()?;
    Ok(chart)
}

fn legend<'a, 'b: 'a, X: Ranged<ValueType = f64>, Y: Ranged<ValueType = f64>>(
    chart: &mut Chart<'a, 'b, X, Y>,
    position: SeriesLabelPosition,
) -> PlotResult {
    chart
        .configure_series_labels()
        .position(position)
        .margin(12)
        .background_style(WHITE.mix(0.92))
        .border_style(GRID)
        .label_font((FONT, 15).into_font().color(&INK))
        .draw()?;
    Ok(())
}

/// Draws a stepped unit-area histogram as a line, optionally filled.
/// `floor` is the bottom of the y axis (0, or the lowest decade drawn on a
/// logarithmic axis): empty bins are drawn there.
#[allow(clippy::too_many_arguments)]
fn draw_hist<'a, 'b: 'a, X: Ranged<ValueType = f64>, Y: Ranged<ValueType = f64>>(
    chart: &mut Chart<'a, 'b, X, Y>,
    binning: &Binning,
    h: &[f64],
    floor: f64,
    color: RGBColor,
    fill: Option<RGBColor>,
    label: String,
) -> PlotResult {
    let pts: Vec<(f64, f64)> = binning
        .steps(h)
        .into_iter()
        .map(|(x, y)| (x, y.max(floor)))
        .collect();
    if let Some(fill) = fill {
        chart
            .draw_series(
                AreaSeries::new(pts, floor, fill.mix(0.45)).border_style(color.stroke_width(1)),
            )?
            .label(label)
            .legend(move |(x, y)| {
                Rectangle::new([(x, y - 6), (x + 22, y + 6)], fill.mix(0.6).filled())
            });
    } else {
        chart
            .draw_series(std::iter::once(PathElement::new(
                pts,
                color.stroke_width(2),
            )))?
            .label(label)
            .legend(move |(x, y)| {
                PathElement::new(vec![(x, y), (x + 22, y)], color.stroke_width(3))
            });
    }
    Ok(())
}

/// One sample's masses for the mass plot.
struct MassSample<'a> {
    name: &'a str,
    generated_mass: Option<f64>,
    masses: Vec<f64>,
}

/// Options of [`plot_mass_with`].
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct MassPlot {
    /// Logarithmic y axis: a small background sample normalised to unit
    /// area no longer squashes the signal curves, and tails stay visible.
    pub log_y: bool,
}

/// [`plot_mass`] with the default options (linear y axis).
///
/// ```no_run
/// # let records: Vec<quarry_eval::EvalRecord> = vec![];
/// quarry_eval::plot_mass(&records, "bwbw-ljets", "mass.svg".as_ref()).unwrap();
/// ```
pub fn plot_mass(records: &[EvalRecord], hypothesis: &str, path: &Path) -> Result<(), EvalError> {
    plot_mass_with(records, hypothesis, path, MassPlot::default())
}

/// Reconstructed mass of `ok` rows, one normalised histogram per sample:
/// signal samples (those with a generated mass) as coloured lines with a
/// dashed marker at the generated mass, background samples as grey filled
/// areas. Every non-empty bin carries its statistical uncertainty, √k/N
/// for k of the sample's N masses (Poisson, common practice). The title
/// and the axis name the mass column. Rows of other hypotheses are skipped.
///
/// The axis spans the 0.5–99.5 % quantiles of all masses; masses beyond it
/// are not drawn (the histograms stay normalised to all masses).
///
/// ```no_run
/// # let records: Vec<quarry_eval::EvalRecord> = vec![];
/// use quarry_eval::{plot_mass_with, MassPlot};
/// plot_mass_with(&records, "bwbw-ljets", "mass.svg".as_ref(), MassPlot { log_y: true }).unwrap();
/// ```
pub fn plot_mass_with(
    records: &[EvalRecord],
    hypothesis: &str,
    path: &Path,
    options: MassPlot,
) -> Result<(), EvalError> {
    let mut samples: Vec<MassSample> = Vec::new();
    let mut columns: Vec<&str> = Vec::new();
    for r in records
        .iter()
        .filter(|r| r.hypothesis == hypothesis && r.is_ok())
    {
        let Some(m) = r.mass.filter(|m| m.is_finite()) else {
            continue;
        };
        if !r.mass_column.is_empty() && !columns.contains(&r.mass_column.as_str()) {
            columns.push(&r.mass_column);
        }
        match samples.iter_mut().find(|s| s.name == r.sample) {
            Some(s) => s.masses.push(m),
            None => samples.push(MassSample {
                name: &r.sample,
                generated_mass: r.generated_mass,
                masses: vec![m],
            }),
        }
    }
    if samples.is_empty() {
        return Err(EvalError::NothingToPlot(format!(
            "no reconstructed masses for hypothesis '{hypothesis}'"
        )));
    }
    // Background first (drawn underneath), then signal by mass.
    samples.sort_by(|a, b| {
        let key = |s: &MassSample| (s.generated_mass.is_some(), s.generated_mass.unwrap_or(0.0));
        key(a)
            .partial_cmp(&key(b))
            .unwrap_or(std::cmp::Ordering::Equal)
    });
    let (mut lo, mut hi) = (f64::INFINITY, f64::NEG_INFINITY);
    for s in &samples {
        let sorted = sorted_finite(s.masses.iter().copied());
        lo = lo.min(quantile(&sorted, 0.005).unwrap_or(lo));
        hi = hi.max(quantile(&sorted, 0.995).unwrap_or(hi));
        if let Some(m) = s.generated_mass {
            lo = lo.min(m);
            hi = hi.max(m);
        }
    }
    let pad = 0.04 * (hi - lo).max(1.0);
    let binning = Binning::covering((lo - pad).max(0.0), hi + pad, 100);
    let hists: Vec<Vec<f64>> = samples
        .iter()
        .map(|s| binning.fractions(&s.masses, false))
        .collect();
    let ymax = hists.iter().flatten().fold(0.0f64, |a, &b| a.max(b));
    let column = if columns.is_empty() {
        "mass".to_string()
    } else {
        columns.join(", ")
    };
    let d = MassDrawing {
        caption: format!("Reconstructed mass ({column}) — {hypothesis}"),
        x_desc: format!("reconstructed mass, column {column} [GeV]"),
        y_desc: format!(
            "fraction of events / {} GeV{}",
            format_width(binning.width),
            if options.log_y { " (log scale)" } else { "" }
        ),
        binning,
        samples: &samples,
        hists: &hists,
    };
    let root = SVGBackend::new(path, PLOT_SIZE).into_drawing_area();
    let x = RangedCoordf64::from(binning.lo..binning.hi());
    let result = if options.log_y {
        // From the smallest possible non-empty bin (one mass of the largest
        // sample) to above the highest bin.
        let n_max = samples.iter().map(|s| s.masses.len()).max().unwrap_or(1) as f64;
        let floor = 10f64.powf((0.5 / n_max).log10().floor());
        let top = 10f64.powf((ymax.max(floor) * 2.0).log10().ceil());
        let y: LogCoord<f64> = (floor..top).log_scale().into();
        draw_mass(&root, x, y, floor, top, &d)
    } else {
        let top = (ymax * 1.18).max(1e-3);
        draw_mass(&root, x, RangedCoordf64::from(0.0..top), 0.0, top, &d)
    };
    result
        .and_then(|()| root.present().map_err(Into::into))
        .map_err(|e| plot_error(path)(&e))
}

/// Everything the mass plot draws.
struct MassDrawing<'s> {
    caption: String,
    x_desc: String,
    y_desc: String,
    binning: Binning,
    samples: &'s [MassSample<'s>],
    hists: &'s [Vec<f64>],
}

fn draw_mass<Y>(
    root: &DrawingArea<SVGBackend<'_>, Shift>,
    x: RangedCoordf64,
    y: Y,
    floor: f64,
    top: f64,
    d: &MassDrawing<'_>,
) -> PlotResult
where
    Y: Ranged<ValueType = f64> + ValueFormatter<f64>,
{
    let mut chart = styled_chart(root, &d.caption, x, y, &d.x_desc, &d.y_desc)?;
    let mut colour = 0;
    for (s, h) in d.samples.iter().zip(d.hists) {
        let label = match s.generated_mass {
            Some(m) => format!("{} (m = {} GeV, {} ev.)", s.name, m, s.masses.len()),
            None => format!("{} (background, {} ev.)", s.name, s.masses.len()),
        };
        let c = if let Some(m) = s.generated_mass {
            let c = PALETTE[colour % PALETTE.len()];
            colour += 1;
            chart.draw_series(DashedLineSeries::new(
                [(m, floor), (m, top)],
                6,
                5,
                c.mix(0.55).stroke_width(1),
            ))?;
            draw_hist(&mut chart, &d.binning, h, floor, c, None, label)?;
            c
        } else {
            draw_hist(
                &mut chart,
                &d.binning,
                h,
                floor,
                BACKGROUND_LINE,
                Some(BACKGROUND_FILL),
                label,
            )?;
            BACKGROUND_LINE
        };
        // √k/N on the fraction k/N: √(f/N).
        let n = s.masses.len() as f64;
        chart.draw_series(
            h.iter()
                .enumerate()
                .filter(|(_, &f)| f > 0.0)
                .map(|(i, &f)| {
                    let centre = d.binning.edge(i) + 0.5 * d.binning.width;
                    let e = (f / n).sqrt();
                    ErrorBar::new_vertical(
                        centre,
                        (f - e).max(floor),
                        f,
                        f + e,
                        c.mix(0.8).stroke_width(1),
                        3,
                    )
                }),
        )?;
    }
    legend(&mut chart, SeriesLabelPosition::UpperRight)
}

/// Right and wrong values of `value` among `ok` rows of `hypothesis` with a
/// truth verdict.
fn right_wrong(
    records: &[EvalRecord],
    hypothesis: &str,
    value: fn(&EvalRecord) -> Option<f64>,
) -> (Vec<f64>, Vec<f64>) {
    let mut right = Vec::new();
    let mut wrong = Vec::new();
    for r in records
        .iter()
        .filter(|r| r.hypothesis == hypothesis && r.is_ok())
    {
        let (Some(t), Some(v)) = (r.truth_match, value(r).filter(|v| v.is_finite())) else {
            continue;
        };
        if t {
            right.push(v);
        } else {
            wrong.push(v);
        }
    }
    (right, wrong)
}

fn right_wrong_plot(
    path: &Path,
    caption: &str,
    x_desc: &str,
    binning: Binning,
    right: &[f64],
    wrong: &[f64],
    position: SeriesLabelPosition,
) -> Result<(), EvalError> {
    let h_right = binning.fractions(right, true);
    let h_wrong = binning.fractions(wrong, true);
    let ymax = h_right
        .iter()
        .chain(&h_wrong)
        .fold(0.0f64, |a, &b| a.max(b))
        * 1.18;
    let y_desc = if binning.log {
        format!(
            "fraction of events / {} in log₁₀",
            format_width(binning.width)
        )
    } else {
        format!("fraction of events / {}", format_width(binning.width))
    };
    let data = RightWrong {
        caption,
        x_desc,
        y_desc: &y_desc,
        ymax: ymax.max(1e-3),
        binning,
        h_right: &h_right,
        h_wrong: &h_wrong,
        n_right: right.len(),
        n_wrong: wrong.len(),
        position,
    };
    let root = SVGBackend::new(path, PLOT_SIZE).into_drawing_area();
    let result = if binning.log {
        let x: LogCoord<f64> = (binning.edge(0)..binning.hi()).log_scale().into();
        draw_right_wrong(&root, x, &data)
    } else {
        draw_right_wrong(&root, RangedCoordf64::from(binning.lo..binning.hi()), &data)
    };
    result
        .and_then(|()| root.present().map_err(Into::into))
        .map_err(|e| plot_error(path)(&e))
}

/// Everything a right-vs-wrong plot draws.
struct RightWrong<'s> {
    caption: &'s str,
    x_desc: &'s str,
    y_desc: &'s str,
    ymax: f64,
    binning: Binning,
    h_right: &'s [f64],
    h_wrong: &'s [f64],
    n_right: usize,
    n_wrong: usize,
    position: SeriesLabelPosition,
}

fn draw_right_wrong<X>(
    root: &DrawingArea<SVGBackend<'_>, Shift>,
    x: X,
    d: &RightWrong<'_>,
) -> PlotResult
where
    X: Ranged<ValueType = f64> + ValueFormatter<f64>,
{
    let y = RangedCoordf64::from(0.0..d.ymax);
    let mut chart = styled_chart(root, d.caption, x, y, d.x_desc, d.y_desc)?;
    if d.n_wrong > 0 {
        let label = format!("wrong assignment ({} ev.)", d.n_wrong);
        draw_hist(
            &mut chart,
            &d.binning,
            d.h_wrong,
            0.0,
            WRONG,
            Some(WRONG),
            label,
        )?;
    }
    if d.n_right > 0 {
        let label = format!("right assignment ({} ev.)", d.n_right);
        draw_hist(&mut chart, &d.binning, d.h_right, 0.0, RIGHT, None, label)?;
    }
    legend(&mut chart, d.position.clone())
}

/// χ² of the chosen assignment for right (teal line) and wrong (rust area)
/// assignments, `ok` rows of `hypothesis` with a truth verdict, each
/// normalised to unit area, in bins equal in log₁₀ χ² on a logarithmic
/// axis (χ² spans decades). The axis runs from the 1 % to the 99.5 %
/// quantile of all values (at least 10⁻³); the first and last bins collect
/// what lies beyond.
///
/// ```no_run
/// # let records: Vec<quarry_eval::EvalRecord> = vec![];
/// quarry_eval::plot_chi2(&records, "bwbw-ljets", "chi2.svg".as_ref()).unwrap();
/// ```
pub fn plot_chi2(records: &[EvalRecord], hypothesis: &str, path: &Path) -> Result<(), EvalError> {
    let (right, wrong) = right_wrong(records, hypothesis, |r| r.chi2);
    if right.is_empty() && wrong.is_empty() {
        return Err(EvalError::NothingToPlot(format!(
            "no χ² with a truth verdict for hypothesis '{hypothesis}'"
        )));
    }
    let all = sorted_finite(right.iter().chain(&wrong).copied());
    let lo = quantile(&all, 0.01).unwrap_or(1e-3).max(1e-3);
    let hi = quantile(&all, 0.995).unwrap_or(1.0).max(lo * 10.0);
    let binning = Binning::covering_log(lo, hi, 50);
    right_wrong_plot(
        path,
        &format!("χ² of the chosen assignment — {hypothesis}"),
        "χ² (log scale; end bins include under- and overflow)",
        binning,
        &right,
        &wrong,
        SeriesLabelPosition::UpperRight,
    )
}

/// Kinematic-fit χ² probability for right and wrong assignments (as
/// [`plot_chi2`]), 25 bins on [0, 1]. A fit whose model is right gives a
/// flat distribution for right assignments.
///
/// ```no_run
/// # let records: Vec<quarry_eval::EvalRecord> = vec![];
/// quarry_eval::plot_fit_prob(&records, "bwbw-ljets", "prob.svg".as_ref()).unwrap();
/// ```
pub fn plot_fit_prob(
    records: &[EvalRecord],
    hypothesis: &str,
    path: &Path,
) -> Result<(), EvalError> {
    let (right, wrong) = right_wrong(records, hypothesis, |r| r.fit_prob);
    if right.is_empty() && wrong.is_empty() {
        return Err(EvalError::NothingToPlot(format!(
            "no fit probability with a truth verdict for hypothesis '{hypothesis}'"
        )));
    }
    right_wrong_plot(
        path,
        &format!("Fit χ² probability — {hypothesis}"),
        "fit χ² probability",
        Binning {
            lo: 0.0,
            width: 0.04,
            n: 25,
            log: false,
        },
        &right,
        &wrong,
        SeriesLabelPosition::UpperMiddle,
    )
}

/// Right-assignment fraction against generated mass, one line per
/// hypothesis, with 68 % Wilson-interval error bars; signal groups only,
/// leaving out those that do not measure the signal's mass
/// ([`crate::GroupSummary::measures_signal_mass`]).
///
/// ```no_run
/// # let summary = quarry_eval::Summary::default();
/// quarry_eval::plot_right_fraction(&summary, "right.svg".as_ref()).unwrap();
/// ```
pub fn plot_right_fraction(summary: &Summary, path: &Path) -> Result<(), EvalError> {
    // (hypothesis, [(mass, fraction, lo68, hi68)])
    type Points = Vec<(f64, f64, f64, f64)>;
    let mut series: Vec<(&str, Points)> = Vec::new();
    for g in summary.groups.iter().filter(|g| g.measures_signal_mass) {
        let (Some(m), Some(f)) = (g.generated_mass, g.right) else {
            continue;
        };
        let (lo, hi) = f.wilson(1.0);
        let point = (m, f.value(), lo, hi);
        match series.iter_mut().find(|s| s.0 == g.hypothesis) {
            Some(s) => s.1.push(point),
            None => series.push((&g.hypothesis, vec![point])),
        }
    }
    if series.is_empty() {
        return Err(EvalError::NothingToPlot(
            "no signal sample with a right-assignment fraction".into(),
        ));
    }
    for s in &mut series {
        s.1.sort_by(|a, b| a.0.total_cmp(&b.0));
    }
    let (mut lo, mut hi) = (f64::INFINITY, f64::NEG_INFINITY);
    for p in series.iter().flat_map(|s| &s.1) {
        lo = lo.min(p.0);
        hi = hi.max(p.0);
    }
    let pad = (0.08 * (hi - lo)).max(50.0);
    let draw = || -> PlotResult {
        let root = SVGBackend::new(path, PLOT_SIZE).into_drawing_area();
        let mut chart = styled_chart(
            &root,
            "Right-assignment fraction vs mass",
            RangedCoordf64::from((lo - pad).max(0.0)..hi + pad),
            RangedCoordf64::from(0.0..1.0),
            "generated mass [GeV]",
            "right-assignment fraction",
        )?;
        for (i, (name, points)) in series.iter().enumerate() {
            let c = PALETTE[i % PALETTE.len()];
            chart
                .draw_series(LineSeries::new(
                    points.iter().map(|p| (p.0, p.1)),
                    c.mix(0.6).stroke_width(2),
                ))?
                .label(name.to_string())
                .legend(move |(x, y)| {
                    EmptyElement::at((x + 11, y))
                        + PathElement::new(vec![(-11, 0), (11, 0)], c.stroke_width(2))
                        + Circle::new((0, 0), 5, c.filled())
                });
            chart.draw_series(
                points
                    .iter()
                    .map(|p| ErrorBar::new_vertical(p.0, p.2, p.1, p.3, c.stroke_width(2), 12)),
            )?;
            chart.draw_series(
                points
                    .iter()
                    .map(|p| Circle::new((p.0, p.1), 5, c.filled())),
            )?;
        }
        legend(&mut chart, SeriesLabelPosition::LowerLeft)?;
        root.present()?;
        Ok(())
    };
    draw().map_err(|e| plot_error(path)(&e))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn nice_widths() {
        assert_eq!(nice_width(0.7), 1.0);
        assert_eq!(nice_width(23.0), 25.0);
        assert_eq!(nice_width(31.0), 50.0);
        assert_eq!(nice_width(0.018), 0.02);
    }

    #[test]
    fn binning_normalises_to_all_values() {
        let b = Binning::covering(0.0, 10.0, 10);
        assert_eq!((b.lo, b.width, b.n), (0.0, 1.0, 10));
        let h = b.fractions(&[0.5, 0.5, 9.5, 20.0], false);
        assert_eq!(h[0], 0.5);
        assert_eq!(h[9], 0.25);
        let h = b.fractions(&[0.5, 0.5, 9.5, 20.0], true);
        assert_eq!(h[9], 0.5);
        assert_eq!(b.steps(&h).len(), 2 * 10 + 2);
    }
}
