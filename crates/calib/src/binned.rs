//! Core estimates in bins of an abscissa, and the points a resolution fit
//! takes from them.

use serde::{Deserialize, Serialize};

use crate::quadrature::Point;
use crate::{Binning, CoreEstimate, Measured, SkippedBin};

/// One bin of a resolution measured against an abscissa.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct ResolutionPoint {
    /// Lower edge of the abscissa.
    pub lo: f64,
    /// Upper edge.
    pub hi: f64,
    /// Mean abscissa of the bin's entries (the fit's x).
    pub mean: f64,
    /// Core of the measured quantity (ratio for leptons, residual for MET).
    pub core: CoreEstimate,
    /// The resolution fitted: σ/⟨ratio⟩ for leptons, σ \[GeV\] for MET.
    pub resolution: Measured,
}

/// Core estimates per bin; with `relative`, the resolution is σ/centre (a
/// ratio's width after correcting the scale), else σ itself.
pub(crate) fn binned_cores(
    edges: &[f64],
    values: &[Vec<f64>],
    abscissa_sums: &[f64],
    binning: &Binning,
    relative: bool,
) -> (Vec<ResolutionPoint>, Vec<SkippedBin>) {
    let mut points = Vec::new();
    let mut skipped = Vec::new();
    for (i, v) in values.iter().enumerate() {
        let (lo, hi) = (edges[i], edges[i + 1]);
        let skip = |reason: String| SkippedBin {
            lo,
            hi,
            n: v.len(),
            reason,
        };
        if v.len() < binning.min_entries {
            if !v.is_empty() {
                skipped.push(skip(format!("fewer than {} entries", binning.min_entries)));
            }
            continue;
        }
        let Some(core) = CoreEstimate::of(v) else {
            skipped.push(skip("no Gaussian core".to_string()));
            continue;
        };
        let resolution = if relative {
            if core.center.value <= 0.0 {
                skipped.push(skip("response core at or below 0".to_string()));
                continue;
            }
            let rel = core.sigma.value / core.center.value;
            Measured::new(
                rel,
                rel * ((core.sigma.error / core.sigma.value).powi(2)
                    + (core.center.error / core.center.value).powi(2))
                .sqrt(),
            )
        } else {
            core.sigma
        };
        points.push(ResolutionPoint {
            lo,
            hi,
            mean: abscissa_sums[i] / v.len() as f64,
            core,
            resolution,
        });
    }
    (points, skipped)
}

pub(crate) fn fit_points(points: &[ResolutionPoint]) -> Vec<Point> {
    points
        .iter()
        .map(|p| Point {
            x: p.mean,
            y: p.resolution.value,
            error: p.resolution.error,
        })
        .collect()
}
