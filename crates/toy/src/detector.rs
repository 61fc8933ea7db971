//! The toy detector: partons → jets, leptons, large-radius jets and MET.

use quarry_event::{Event, FatJet, Flavour, Jet, Lepton, Met};
use quarry_lorentz::{wrap_phi, FourMomentum};
use rand::Rng;
use rand_distr::StandardNormal;
use rand_pcg::Pcg64Mcg;

use crate::config::{Acceptance, BTagModel, Distortion, ToyConfig};
use crate::partons::{PartonKind, PartonRecord};
use quarry_resolution::ResolutionModel;

/// Smallest smeared lepton pt (GeV) (the Gaussian is truncated there).
const LEPTON_PT_FLOOR: f64 = 0.1;

#[derive(Clone, Debug)]
pub(crate) struct Detector {
    acceptance: Acceptance,
    resolution: ResolutionModel,
    k_b: f64,
    k_light: f64,
    distortion: Distortion,
}

/// A jet being built from one or more partons, with its direction cached
/// (η and φ cost a logarithm and an arctangent each).
#[derive(Clone, Copy)]
struct Proto {
    p4: FourMomentum,
    eta: f64,
    phi: f64,
    lead: usize,
}

/// Cached (η, φ) of every parton of the event: ΔR is needed many times.
#[derive(Clone, Copy, Default)]
struct Direction {
    eta: f64,
    phi: f64,
}

impl Direction {
    fn of(p: &FourMomentum) -> Direction {
        Direction {
            eta: p.eta(),
            phi: p.phi(),
        }
    }

    #[inline]
    fn delta_r2(&self, other: &Direction) -> f64 {
        let deta = self.eta - other.eta;
        let dphi = wrap_phi(self.phi - other.phi);
        deta * deta + dphi * dphi
    }
}

/// Partons per event the detector looks at; the generator makes at most
/// 2 + 2·8 + 12 = 30.
const MAX_PARTONS: usize = 32;

impl Detector {
    pub(crate) fn new(cfg: &ToyConfig) -> Detector {
        let b: &BTagModel = &cfg.btag;
        Detector {
            acceptance: cfg.acceptance,
            resolution: cfg.resolution.clone(),
            k_b: b.exponent(b.b_efficiency),
            k_light: b.exponent(b.mistag_rate),
            distortion: cfg.distortion,
        }
    }

    /// Energy smeared at fixed direction and mass; truncated from below.
    #[inline]
    fn smear_jet(&self, rng: &mut Pcg64Mcg, p: &FourMomentum, eta: f64) -> FourMomentum {
        let e = p.e();
        let sigma = self.resolution.jet_energy_sigma(e, eta);
        let z: f64 = rng.sample(StandardNormal);
        let m2 = p.m2().max(0.0);
        let floor = self
            .acceptance
            .jet_energy_floor
            .max(m2.sqrt() * (1.0 + 1e-9) + 1e-9);
        let e_new = (e + sigma * z).max(floor);
        with_energy(p, e_new, m2)
    }

    /// The jet after the configured distortion: energy times the response
    /// at the unsmeared energy `e_true`, and for b jets, with probability
    /// `b_jet_tail_fraction`, times a uniform tail factor; direction and
    /// mass kept, truncated below like the smearing. Draws random numbers
    /// only for b jets when a tail is configured.
    fn distort(
        &self,
        rng: &mut Pcg64Mcg,
        jet: &FourMomentum,
        e_true: f64,
        is_b: bool,
    ) -> FourMomentum {
        let d = &self.distortion;
        let mut scale = d.jet_response(e_true);
        if is_b && d.b_jet_tail_fraction > 0.0 && rng.random::<f64>() < d.b_jet_tail_fraction {
            scale *= d.b_jet_tail_min_scale
                + (d.b_jet_tail_max_scale - d.b_jet_tail_min_scale) * rng.random::<f64>();
        }
        let m2 = jet.m2().max(0.0);
        let floor = self
            .acceptance
            .jet_energy_floor
            .max(m2.sqrt() * (1.0 + 1e-9) + 1e-9);
        with_energy(jet, (jet.e() * scale).max(floor), m2)
    }
}

/// `p` with energy `e_new` at fixed direction and mass² `m2`.
#[inline]
fn with_energy(p: &FourMomentum, e_new: f64, m2: f64) -> FourMomentum {
    let p_old = p.p();
    if p_old == 0.0 {
        return FourMomentum::new(0.0, 0.0, 0.0, e_new);
    }
    let k = (e_new * e_new - m2).max(0.0).sqrt() / p_old;
    FourMomentum::new(p.px() * k, p.py() * k, p.pz() * k, e_new)
}

impl Detector {
    pub(crate) fn reconstruct(
        &self,
        rng: &mut Pcg64Mcg,
        rec: &mut PartonRecord,
        id: u64,
        event: &mut Event,
    ) {
        let acc = &self.acceptance;
        *event = Event::new(id);
        rec.jet_sources.clear();
        rec.fat_jet_sources.clear();

        let n_partons = rec.partons.len().min(MAX_PARTONS);
        let mut dirs = [Direction::default(); MAX_PARTONS];
        for (d, p) in dirs.iter_mut().zip(&rec.partons[..n_partons]) {
            if p.kind.is_coloured_final() || p.kind.decays() {
                *d = Direction::of(&p.p4);
            }
        }

        // Jets: coloured final partons in decreasing pt, each merged into the
        // first earlier proto-jet within jet_merge_dr.
        let mut order = [(0.0, 0usize); MAX_PARTONS];
        let mut n = 0;
        for (i, p) in rec.partons[..n_partons].iter().enumerate() {
            if p.kind.is_coloured_final() {
                order[n] = (p.p4.pt2(), i);
                n += 1;
            }
        }
        let order = &mut order[..n];
        order.sort_unstable_by(|a, b| b.0.total_cmp(&a.0).then(a.1.cmp(&b.1)));
        let mut protos = [Proto {
            p4: FourMomentum::ZERO,
            eta: 0.0,
            phi: 0.0,
            lead: 0,
        }; MAX_PARTONS];
        let mut n_protos = 0;
        let dr2 = acc.jet_merge_dr * acc.jet_merge_dr;
        for &(_, i) in order.iter() {
            let p4 = rec.partons[i].p4;
            let d = dirs[i];
            let target = protos[..n_protos].iter_mut().find(|pr| {
                Direction {
                    eta: pr.eta,
                    phi: pr.phi,
                }
                .delta_r2(&d)
                    < dr2
            });
            match target {
                Some(pr) => {
                    pr.p4 += p4;
                    let merged = Direction::of(&pr.p4);
                    pr.eta = merged.eta;
                    pr.phi = merged.phi;
                }
                None => {
                    protos[n_protos] = Proto {
                        p4,
                        eta: d.eta,
                        phi: d.phi,
                        lead: i,
                    };
                    n_protos += 1;
                }
            }
        }
        let mut sum_jet_pt = 0.0;
        for pr in protos[..n_protos].iter() {
            let jet_p4 = self.smear_jet(rng, &pr.p4, pr.eta);
            let lead = rec.partons[pr.lead];
            let k = if lead.kind == PartonKind::Bottom {
                self.k_b
            } else {
                self.k_light
            };
            let btag = rng.random::<f64>().powf(k);
            let jet_p4 = if self.distortion.is_none() {
                jet_p4
            } else {
                self.distort(rng, &jet_p4, pr.p4.e(), lead.kind == PartonKind::Bottom)
            };
            // Direction is kept: the proto-jet's η is the jet's.
            let pt = jet_p4.pt();
            if pt > acc.jet_pt_min && pr.eta.abs() < acc.jet_abs_eta_max {
                sum_jet_pt += pt;
                event
                    .jets
                    .push(Jet::new(jet_p4, btag).with_truth(lead.truth));
                rec.jet_sources.push(pr.p4);
            }
        }

        // Leptons and neutrinos.
        let (mut nu_px, mut nu_py) = (0.0, 0.0);
        for p in rec.partons.iter() {
            let flavour = match p.kind {
                PartonKind::Neutrino => {
                    nu_px += p.p4.px();
                    nu_py += p.p4.py();
                    continue;
                }
                PartonKind::Electron => Flavour::Electron,
                PartonKind::Muon => Flavour::Muon,
                _ => continue,
            };
            let pt = p.p4.pt();
            let sigma = self.resolution.lepton_pt_sigma(flavour, pt);
            let pt_new = (pt + sigma * rng.sample::<f64, _>(StandardNormal)).max(LEPTON_PT_FLOOR);
            let (pt_min, eta_max) = match flavour {
                Flavour::Electron => (acc.electron_pt_min, acc.electron_abs_eta_max),
                Flavour::Muon => (acc.muon_pt_min, acc.muon_abs_eta_max),
            };
            let eta = p.p4.eta();
            if pt_new > pt_min && eta.abs() < eta_max {
                let lepton = Lepton {
                    p4: FourMomentum::from_pt_eta_phi_m(pt_new, eta, p.p4.phi(), p.mass),
                    flavour,
                    charge: p.charge,
                    truth: Some(p.truth),
                    index: 0,
                };
                match flavour {
                    Flavour::Electron => event.electrons.push(lepton),
                    Flavour::Muon => event.muons.push(lepton),
                }
            }
        }

        // Large-radius jets: hadronically decaying tops and bosons with
        // enough pt whose final decay products all lie within the radius;
        // the outermost such parent wins (a contained top hides its W).
        let r2 = acc.fat_jet_radius * acc.fat_jet_radius;
        let mut covered = [false; MAX_PARTONS];
        for i in 0..n_partons {
            let p = rec.partons[i];
            if let Some(parent) = p.parent {
                if covered[parent] {
                    covered[i] = true;
                    continue;
                }
            }
            if !matches!(
                p.kind,
                PartonKind::Top | PartonKind::W | PartonKind::Z | PartonKind::Higgs
            ) || p.p4.pt2() < acc.fat_jet_pt_min * acc.fat_jet_pt_min
            {
                continue;
            }
            if !contained_hadronic(rec, &dirs, i, r2) {
                continue;
            }
            covered[i] = true;
            // Smear the whole four-vector by the jet energy resolution (mass
            // scales with energy: a crude stand-in for jet-mass resolution).
            let e = p.p4.e();
            let sigma = self.resolution.jet_energy_sigma(e, dirs[i].eta);
            let e_new =
                (e + sigma * rng.sample::<f64, _>(StandardNormal)).max(acc.jet_energy_floor);
            let fat = p.p4 * (e_new / e);
            if fat.pt() > acc.fat_jet_pt_min && fat.eta().abs() < acc.fat_jet_abs_eta_max {
                event.fat_jets.push(FatJet {
                    p4: fat,
                    truth: Some(p.truth),
                    index: 0,
                });
                rec.fat_jet_sources.push(p.p4);
            }
        }

        // MET: true neutrino pt plus Gaussian noise per component.
        let s = self.resolution.met_sigma(sum_jet_pt);
        let nx: f64 = rng.sample(StandardNormal);
        let ny: f64 = rng.sample(StandardNormal);
        event.met = Met {
            px: nu_px + s * nx,
            py: nu_py + s * ny,
            cov: Some([s * s, 0.0, s * s]),
        };

        // Order by decreasing pt and number the objects.
        sort_by_pt(&mut event.jets, &mut rec.jet_sources, |j| j.p4.pt2());
        for (i, j) in event.jets.iter_mut().enumerate() {
            j.index = i as u32;
        }
        sort_by_pt(&mut event.fat_jets, &mut rec.fat_jet_sources, |j| {
            j.p4.pt2()
        });
        for (i, j) in event.fat_jets.iter_mut().enumerate() {
            j.index = i as u32;
        }
        for leptons in [&mut event.electrons, &mut event.muons] {
            leptons.sort_by(|a, b| b.p4.pt2().total_cmp(&a.p4.pt2()));
            for (i, l) in leptons.iter_mut().enumerate() {
                l.index = i as u32;
            }
        }
    }
}

/// Whether every final descendant of entry `i` is a quark or gluon lying
/// within ΔR² < `r2` of entry `i`.
fn contained_hadronic(rec: &PartonRecord, dirs: &[Direction], i: usize, r2: f64) -> bool {
    let mut any = false;
    for (j, p) in rec.partons.iter().enumerate().take(dirs.len()).skip(i + 1) {
        if p.kind.decays() || !descends_from(rec, j, i) {
            continue;
        }
        if !p.kind.is_coloured_final() || dirs[j].delta_r2(&dirs[i]) >= r2 {
            return false;
        }
        any = true;
    }
    any
}

fn descends_from(rec: &PartonRecord, mut j: usize, ancestor: usize) -> bool {
    while let Some(parent) = rec.partons[j].parent {
        if parent == ancestor {
            return true;
        }
        j = parent;
    }
    false
}

/// Sorts objects by decreasing `pt2` (pt²: same order, no square root),
/// permuting `sources` the same way.
fn sort_by_pt<T: Copy>(objects: &mut [T], sources: &mut [FourMomentum], pt2: impl Fn(&T) -> f64) {
    let n = objects.len();
    // Insertion sort: events hold a handful of objects.
    for i in 1..n {
        let mut j = i;
        while j > 0 && pt2(&objects[j - 1]) < pt2(&objects[j]) {
            objects.swap(j - 1, j);
            sources.swap(j - 1, j);
            j -= 1;
        }
    }
}
