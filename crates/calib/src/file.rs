//! The calibration file: what a calibration measured, as editable TOML
//! (format described in `docs/calibration.md`).
//!
//! One flat table per item, each number next to its `_error` and the sample
//! size it came from, and a `status` saying whether the item was measured or
//! left at the default (and why). Reading checks every value: a file never
//! yields a NaN, a negative width or a response ≤ 0.

use serde::{Deserialize, Serialize};

use crate::{
    BTagRates, CoreEstimate, JetGroup, LeptonGroup, Measured, MetCalibration, QuadratureFit,
};

/// The file format version this crate writes and reads.
pub const FORMAT_VERSION: u32 = 1;

/// `status` of an item that was measured.
pub const MEASURED: &str = "measured";

/// A whole calibration.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct CalibrationFile {
    /// [`FORMAT_VERSION`].
    pub format: u32,
    /// Where the numbers came from (free text per sample, e.g. file name and
    /// event count).
    pub samples: Vec<String>,
    /// Jet response and resolution, per flavour and |η| bin.
    pub jet: Vec<JetEntry>,
    /// Electron pt resolution.
    pub electron: LeptonEntry,
    /// Muon pt resolution.
    pub muon: LeptonEntry,
    /// MET resolution per component.
    pub met: MetEntry,
    /// b-tag rates at the working point.
    pub btag: BTagEntry,
    /// Mass peaks of constrained composites (right assignments).
    #[serde(default)]
    pub mass_peak: Vec<MassPeakEntry>,
}

/// Jet response and resolution of one flavour in one |η| bin:
/// σ(E)/E = a/√E ⊕ b/E ⊕ c after the response r(E) = r₀ + r₁·ln(E/100 GeV)
/// is divided out.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct JetEntry {
    /// `b` or `light`.
    pub flavour: String,
    /// Lower |η| edge.
    pub abs_eta_min: f64,
    /// Upper |η| edge.
    pub abs_eta_max: f64,
    /// `measured`, or `default: REASON` (the numbers are then the defaults).
    pub status: String,
    /// Jets used.
    pub n: u64,
    /// Energy bins that entered the fits.
    pub n_bins: u64,
    /// Stochastic term a \[√GeV\].
    pub stochastic: f64,
    /// Its statistical error.
    pub stochastic_error: f64,
    /// Noise term b \[GeV\].
    pub noise: f64,
    /// Its statistical error.
    pub noise_error: f64,
    /// Constant term c.
    pub constant: f64,
    /// Its statistical error.
    pub constant_error: f64,
    /// χ² of the resolution fit.
    pub resolution_chi2: f64,
    /// Its degrees of freedom.
    pub resolution_ndf: u64,
    /// Response r₀ at 100 GeV.
    pub response_at_100_gev: f64,
    /// Its statistical error.
    pub response_at_100_gev_error: f64,
    /// Response slope r₁ per unit ln E.
    pub response_slope: f64,
    /// Its statistical error.
    pub response_slope_error: f64,
    /// Largest low-side tail excess over a Gaussian among the energy bins
    /// (fraction of jets beyond 2.5 core σ below the core, minus 0.62 %).
    pub low_tail_excess_max: f64,
    /// Its statistical error.
    pub low_tail_excess_max_error: f64,
    /// Mean true energy of the bin with that largest excess \[GeV\].
    pub low_tail_energy: f64,
}

/// Lepton pt resolution σ(pt)/pt = c ⊕ k·pt.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct LeptonEntry {
    /// `measured` or `default: REASON`.
    pub status: String,
    /// Leptons used.
    pub n: u64,
    /// c.
    pub constant: f64,
    /// Its statistical error.
    pub constant_error: f64,
    /// k \[1/GeV\].
    pub per_gev: f64,
    /// Its statistical error.
    pub per_gev_error: f64,
    /// χ² of the fit.
    pub chi2: f64,
    /// Its degrees of freedom.
    pub ndf: u64,
}

/// MET resolution per component σ = floor ⊕ s·√(Σ jet pt).
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct MetEntry {
    /// `measured` or `default: REASON`.
    pub status: String,
    /// Events used.
    pub n_events: u64,
    /// floor \[GeV\].
    pub floor: f64,
    /// Its statistical error.
    pub floor_error: f64,
    /// s \[√GeV\].
    pub sqrt_sum_pt: f64,
    /// Its statistical error.
    pub sqrt_sum_pt_error: f64,
    /// χ² of the fit.
    pub chi2: f64,
    /// Its degrees of freedom.
    pub ndf: u64,
}

/// b-tag rates with 68.27 % Clopper–Pearson intervals.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct BTagEntry {
    /// `measured` or `default: REASON`.
    pub status: String,
    /// Working point (score above which a jet is tagged).
    pub working_point: f64,
    /// Tagged b jets / b jets.
    pub b_efficiency: f64,
    /// Interval low end.
    pub b_efficiency_lo: f64,
    /// Interval high end.
    pub b_efficiency_hi: f64,
    /// b jets counted.
    pub n_b: u64,
    /// Tagged light jets / light jets.
    pub mistag: f64,
    /// Interval low end.
    pub mistag_lo: f64,
    /// Interval high end.
    pub mistag_hi: f64,
    /// Light jets counted.
    pub n_light: u64,
}

/// The peak of one constrained composite's mass on right (truth-matched)
/// assignments, beside its pole mass.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct MassPeakEntry {
    /// Which composite (e.g. `ttbar-ljets:W_had`).
    pub name: String,
    /// Pole mass \[GeV\] (PDG) the χ² targets by default.
    pub pole: f64,
    /// Fitted peak: centre of the Gaussian core \[GeV\].
    pub peak: f64,
    /// Its statistical error.
    pub peak_error: f64,
    /// Core width σ \[GeV\].
    pub width: f64,
    /// Its statistical error.
    pub width_error: f64,
    /// Right assignments used.
    pub n: u64,
    /// Of which inside the core window.
    pub n_core: u64,
}

impl MassPeakEntry {
    /// The entry for `masses` of the composite `name` with pole mass
    /// `pole`; `None` when the masses have no Gaussian core.
    pub fn measure(name: &str, pole: f64, masses: &[f64]) -> Option<MassPeakEntry> {
        let core = CoreEstimate::of(masses)?;
        Some(MassPeakEntry {
            name: name.to_string(),
            pole,
            peak: core.center.value,
            peak_error: core.center.error,
            width: core.sigma.value,
            width_error: core.sigma.error,
            n: core.n as u64,
            n_core: core.n_core as u64,
        })
    }
}

/// Why a calibration file could not be read or written.
#[derive(Debug, thiserror::Error)]
pub enum FileError {
    /// Not TOML or not this format.
    #[error("calibration file: {0}")]
    Toml(#[from] toml::de::Error),
    /// A value is unusable; the text names the item and field.
    #[error("calibration file: {0}")]
    Invalid(String),
}

/// The defaults an item falls back to when it cannot be measured (the
/// caller's resolution model and b-tag rates). Jet (a, b, c) per |η| are
/// looked up by the closure given to [`CalibrationFile::from_results`].
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Defaults {
    /// Electron (c, k).
    pub electron: (f64, f64),
    /// Muon (c, k).
    pub muon: (f64, f64),
    /// MET (floor, s).
    pub met: (f64, f64),
    /// b-tag (working point, efficiency, mistag).
    pub btag: (f64, f64, f64),
}

/// The measured results a file is built from.
pub struct Results<'a> {
    /// Sample descriptions.
    pub samples: Vec<String>,
    /// From [`crate::calibrate_jets`].
    pub jets: &'a [JetGroup],
    /// From [`crate::calibrate_leptons`] (electrons, muons), or why not.
    pub leptons: Result<&'a [LeptonGroup], String>,
    /// From [`crate::calibrate_met`], or why not.
    pub met: Result<&'a MetCalibration, String>,
    /// From [`crate::calibrate_btag`], or why not.
    pub btag: Result<BTagRates, String>,
    /// Measured mass peaks.
    pub mass_peaks: Vec<MassPeakEntry>,
}

fn status_of<T>(fit: &Result<T, String>) -> String {
    match fit {
        Ok(_) => MEASURED.to_string(),
        Err(reason) => format!("default: {reason}"),
    }
}

fn param(fit: &Result<&QuadratureFit, String>, j: usize, default: f64) -> (f64, f64) {
    match fit {
        Ok(f) => (f.params[j].value, f.params[j].error),
        Err(_) => (default, 0.0),
    }
}

fn chi2_ndf(fit: &Result<&QuadratureFit, String>) -> (f64, u64) {
    fit.as_ref().map_or((0.0, 0), |f| (f.chi2, f.ndf as u64))
}

/// A measured fit is usable when every parameter is finite and ≥ 0 with a
/// finite error; otherwise the item keeps its default.
fn usable(fit: &Result<QuadratureFit, String>) -> Result<&QuadratureFit, String> {
    let f = fit.as_ref().map_err(Clone::clone)?;
    if f.params
        .iter()
        .all(|p| p.value.is_finite() && p.value >= 0.0 && p.error.is_finite())
        && f.chi2.is_finite()
        && f.params.iter().any(|p| p.value > 0.0)
    {
        Ok(f)
    } else {
        Err("the fit gave an unusable value".to_string())
    }
}

impl CalibrationFile {
    /// Builds the file from measured results; items that could not be
    /// measured keep the defaults (`jet_default(flavour, |η| centre)` for
    /// jets, response 1) and say why in their `status`.
    pub fn from_results(
        results: &Results<'_>,
        jet_default: impl Fn(&str, f64) -> (f64, f64, f64),
        defaults: &Defaults,
    ) -> CalibrationFile {
        let jet = results
            .jets
            .iter()
            .map(|g| {
                let d = jet_default(g.flavour.name(), 0.5 * (g.abs_eta_lo + g.abs_eta_hi));
                let fit = usable(&g.resolution_fit);
                let response = g.response_fit.as_ref().map_err(Clone::clone).and_then(|r| {
                    if r.eval(30.0) > 0.0 && r.eval(3000.0) > 0.0 && r.at_100_gev.error.is_finite()
                    {
                        Ok(r)
                    } else {
                        Err("response fit not positive over 30 GeV - 3 TeV".to_string())
                    }
                });
                let status = match (&fit, &response) {
                    (Ok(_), Ok(_)) => MEASURED.to_string(),
                    (Err(e), _) | (_, Err(e)) => format!("default: {e}"),
                };
                let both = fit.is_ok() && response.is_ok();
                let fit = if both { fit } else { Err(String::new()) };
                let (a, ae) = param(&fit, 0, d.0);
                let (b, be) = param(&fit, 1, d.1);
                let (c, ce) = param(&fit, 2, d.2);
                let (chi2, ndf) = chi2_ndf(&fit);
                let (r0, r0e, r1, r1e) = match (&response, both) {
                    (Ok(r), true) => (
                        r.at_100_gev.value,
                        r.at_100_gev.error,
                        r.slope_per_log_e.value,
                        r.slope_per_log_e.error,
                    ),
                    _ => (1.0, 0.0, 0.0, 0.0),
                };
                let tail = g
                    .points
                    .iter()
                    .map(|p| (p.core.low_tail_excess(), p.mean))
                    .max_by(|x, y| x.0.value.total_cmp(&y.0.value))
                    .unwrap_or((Measured::new(0.0, 0.0), 0.0));
                JetEntry {
                    flavour: g.flavour.name().to_string(),
                    abs_eta_min: g.abs_eta_lo,
                    abs_eta_max: g.abs_eta_hi,
                    status,
                    n: g.n as u64,
                    n_bins: g.points.len() as u64,
                    stochastic: a,
                    stochastic_error: ae,
                    noise: b,
                    noise_error: be,
                    constant: c,
                    constant_error: ce,
                    resolution_chi2: chi2,
                    resolution_ndf: ndf,
                    response_at_100_gev: r0,
                    response_at_100_gev_error: r0e,
                    response_slope: r1,
                    response_slope_error: r1e,
                    low_tail_excess_max: tail.0.value,
                    low_tail_excess_max_error: tail.0.error,
                    low_tail_energy: tail.1,
                }
            })
            .collect();
        let lepton = |i: usize, d: (f64, f64)| {
            let (fit, n) = match &results.leptons {
                Ok(groups) => (usable(&groups[i].resolution_fit), groups[i].n as u64),
                Err(e) => (Err(e.clone()), 0),
            };
            let (c, ce) = param(&fit, 0, d.0);
            let (k, ke) = param(&fit, 1, d.1);
            let (chi2, ndf) = chi2_ndf(&fit);
            LeptonEntry {
                status: status_of(&fit),
                n,
                constant: c,
                constant_error: ce,
                per_gev: k,
                per_gev_error: ke,
                chi2,
                ndf,
            }
        };
        let (met_fit, met_n) = match &results.met {
            Ok(m) => (usable(&m.resolution_fit), m.n_events as u64),
            Err(e) => (Err(e.clone()), 0),
        };
        let (floor, floor_e) = param(&met_fit, 0, defaults.met.0);
        let (s, s_e) = param(&met_fit, 1, defaults.met.1);
        let (met_chi2, met_ndf) = chi2_ndf(&met_fit);
        // A floor of 0 would make the MET covariance singular at Σpt = 0.
        let met_fit = if floor > 0.0 {
            met_fit
        } else {
            Err("fitted floor is 0".to_string())
        };
        let (floor, floor_e, s, s_e) = if met_fit.is_ok() {
            (floor, floor_e, s, s_e)
        } else {
            (defaults.met.0, 0.0, defaults.met.1, 0.0)
        };
        let btag = match &results.btag {
            Ok(r) => BTagEntry {
                status: MEASURED.to_string(),
                working_point: r.working_point,
                b_efficiency: r.b_efficiency.value,
                b_efficiency_lo: r.b_efficiency.lo,
                b_efficiency_hi: r.b_efficiency.hi,
                n_b: r.b_efficiency.n,
                mistag: r.mistag.value,
                mistag_lo: r.mistag.lo,
                mistag_hi: r.mistag.hi,
                n_light: r.mistag.n,
            },
            Err(e) => BTagEntry {
                status: format!("default: {e}"),
                working_point: defaults.btag.0,
                b_efficiency: defaults.btag.1,
                b_efficiency_lo: defaults.btag.1,
                b_efficiency_hi: defaults.btag.1,
                n_b: 0,
                mistag: defaults.btag.2,
                mistag_lo: defaults.btag.2,
                mistag_hi: defaults.btag.2,
                n_light: 0,
            },
        };
        CalibrationFile {
            format: FORMAT_VERSION,
            samples: results.samples.clone(),
            jet,
            electron: lepton(0, defaults.electron),
            muon: lepton(1, defaults.muon),
            met: MetEntry {
                status: status_of(&met_fit),
                n_events: met_n,
                floor,
                floor_error: floor_e,
                sqrt_sum_pt: s,
                sqrt_sum_pt_error: s_e,
                chi2: met_chi2,
                ndf: met_ndf,
            },
            btag,
            mass_peak: results.mass_peaks.clone(),
        }
    }

    /// The file as TOML, with a header comment pointing at the format's
    /// description.
    pub fn to_toml(&self) -> String {
        let body = toml::to_string_pretty(self).unwrap_or_default();
        format!(
            "# quarry calibration (format {FORMAT_VERSION}; see docs/calibration.md).\n\
             # Every number has its statistical error beside it (`_error`) and the\n\
             # sample size it came from; `status` says whether an item was measured\n\
             # or left at its default, and why.\n\n{body}"
        )
    }

    /// Parses and validates a file.
    pub fn from_toml(text: &str) -> Result<CalibrationFile, FileError> {
        let file: CalibrationFile = toml::from_str(text)?;
        file.validate()?;
        Ok(file)
    }

    /// Checks every value: finite numbers, non-negative widths and errors,
    /// positive response over 30 GeV – 3 TeV, rates in \[0, 1\], ascending
    /// |η| bins per flavour, and a known format version.
    pub fn validate(&self) -> Result<(), FileError> {
        let bad = |what: String| Err(FileError::Invalid(what));
        if self.format != FORMAT_VERSION {
            return bad(format!(
                "format {} (this quarry reads format {FORMAT_VERSION})",
                self.format
            ));
        }
        let nonneg = |x: f64| x.is_finite() && x >= 0.0;
        for (i, j) in self.jet.iter().enumerate() {
            let at = format!(
                "jet entry {i} ({} |eta| {}-{})",
                j.flavour, j.abs_eta_min, j.abs_eta_max
            );
            if j.flavour != "b" && j.flavour != "light" {
                return bad(format!("{at}: flavour must be 'b' or 'light'"));
            }
            if !(nonneg(j.abs_eta_min)
                && j.abs_eta_max.is_finite()
                && j.abs_eta_max > j.abs_eta_min)
            {
                return bad(format!("{at}: need 0 <= abs_eta_min < abs_eta_max"));
            }
            for (name, v) in [
                ("stochastic", j.stochastic),
                ("stochastic_error", j.stochastic_error),
                ("noise", j.noise),
                ("noise_error", j.noise_error),
                ("constant", j.constant),
                ("constant_error", j.constant_error),
                ("resolution_chi2", j.resolution_chi2),
                ("response_at_100_gev_error", j.response_at_100_gev_error),
                ("response_slope_error", j.response_slope_error),
                ("low_tail_excess_max_error", j.low_tail_excess_max_error),
                ("low_tail_energy", j.low_tail_energy),
            ] {
                if !nonneg(v) {
                    return bad(format!("{at}: {name} = {v} must be finite and >= 0"));
                }
            }
            if j.stochastic + j.noise + j.constant == 0.0 {
                return bad(format!("{at}: a zero resolution"));
            }
            let r = |e: f64| j.response_at_100_gev + j.response_slope * (e / 100.0).ln();
            if !(j.response_slope.is_finite() && r(30.0) > 0.0 && r(3000.0) > 0.0) {
                return bad(format!(
                    "{at}: the response must be > 0 from 30 GeV to 3 TeV"
                ));
            }
            if !j.low_tail_excess_max.is_finite() {
                return bad(format!("{at}: low_tail_excess_max is not finite"));
            }
        }
        for (name, l) in [("electron", &self.electron), ("muon", &self.muon)] {
            if ![
                l.constant,
                l.constant_error,
                l.per_gev,
                l.per_gev_error,
                l.chi2,
            ]
            .into_iter()
            .all(nonneg)
                || l.constant + l.per_gev == 0.0
            {
                return bad(format!(
                    "{name}: coefficients and errors must be finite, >= 0, not both 0"
                ));
            }
        }
        let m = &self.met;
        if !([m.floor_error, m.sqrt_sum_pt, m.sqrt_sum_pt_error, m.chi2]
            .into_iter()
            .all(nonneg)
            && m.floor.is_finite()
            && m.floor > 0.0)
        {
            return bad("met: floor must be > 0, the rest finite and >= 0".to_string());
        }
        let b = &self.btag;
        let unit = |x: f64| x.is_finite() && (0.0..=1.0).contains(&x);
        let ordered =
            |lo: f64, v: f64, hi: f64| unit(lo) && unit(v) && unit(hi) && lo <= v && v <= hi;
        if !(b.working_point.is_finite()
            && ordered(b.b_efficiency_lo, b.b_efficiency, b.b_efficiency_hi)
            && ordered(b.mistag_lo, b.mistag, b.mistag_hi))
        {
            return bad(
                "btag: rates and their intervals must lie in [0, 1], lo <= value <= hi".to_string(),
            );
        }
        for p in &self.mass_peak {
            if !([p.pole, p.peak, p.peak_error, p.width_error]
                .into_iter()
                .all(nonneg)
                && p.width > 0.0
                && p.width.is_finite())
            {
                return bad(format!(
                    "mass_peak '{}': masses finite and >= 0, width > 0",
                    p.name
                ));
            }
        }
        Ok(())
    }

    /// The entry of `flavour` (`b` or `light`) serving |η| = `abs_eta` (the
    /// last bin of that flavour also serves beyond its edge).
    pub fn jet_entry(&self, flavour: &str, abs_eta: f64) -> Option<&JetEntry> {
        let mut last = None;
        for j in self.jet.iter().filter(|j| j.flavour == flavour) {
            if abs_eta >= j.abs_eta_min && abs_eta < j.abs_eta_max {
                return Some(j);
            }
            last = Some(j);
        }
        last
    }
}

impl JetEntry {
    /// The response r(E) at true energy `e` \[GeV\].
    pub fn response(&self, e: f64) -> f64 {
        self.response_at_100_gev + self.response_slope * (e.max(1.0) / 100.0).ln()
    }
}
