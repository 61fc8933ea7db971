//! Toy events for the fit tests: exact parton kinematics (on-shell two-body
//! decays in rest frames, boosted with quarry_lorentz) and Gaussian smearing
//! with the resolution model's own σ.
#![allow(dead_code)]

use quarry_fit::{Composite, Constraint, FitInput, Measured, NeutrinoStart};
use quarry_lorentz::FourMomentum;
use quarry_pdg::{BOTTOM_MASS, MUON_MASS, TOP_MASS, W_MASS};
use quarry_resolution::ResolutionModel;
use rand::Rng;
use rand_distr::{Distribution, StandardNormal};
use rand_pcg::Pcg64;

/// Källén function λ(a, b, c) = a² + b² + c² − 2ab − 2ac − 2bc (PDG
/// Kinematics section).
fn kallen(a: f64, b: f64, c: f64) -> f64 {
    a * a + b * b + c * c - 2.0 * (a * b + a * c + b * c)
}

/// Isotropic two-body decay of `parent` into masses m1, m2.
pub fn two_body(
    parent: &FourMomentum,
    m1: f64,
    m2: f64,
    rng: &mut Pcg64,
) -> (FourMomentum, FourMomentum) {
    let m = parent.m();
    let p = kallen(m * m, m1 * m1, m2 * m2).max(0.0).sqrt() / (2.0 * m);
    let cos_t: f64 = rng.random_range(-1.0..1.0);
    let phi: f64 = rng.random_range(-std::f64::consts::PI..std::f64::consts::PI);
    let sin_t = (1.0 - cos_t * cos_t).sqrt();
    let (px, py, pz) = (p * sin_t * phi.cos(), p * sin_t * phi.sin(), p * cos_t);
    let a = FourMomentum::new(px, py, pz, (p * p + m1 * m1).sqrt());
    let b = FourMomentum::new(-px, -py, -pz, (p * p + m2 * m2).sqrt());
    (a.from_rest_frame_of(parent), b.from_rest_frame_of(parent))
}

/// A resonance of mass `m` with random pt, η, φ.
pub fn resonance(m: f64, pt_max: f64, rng: &mut Pcg64) -> FourMomentum {
    let pt = rng.random_range(20.0..pt_max);
    let eta = rng.random_range(-1.5..1.5);
    let phi = rng.random_range(-3.1..3.1);
    FourMomentum::from_pt_eta_phi_m(pt, eta, phi, m)
}

/// Parton-level ℓ+jets decay of a heavy pair: X_had → b W(→ q q̄'),
/// X_lep → b W(→ μ ν). For X = top this is tt̄ → ℓ+jets.
#[derive(Clone, Copy, Debug)]
pub struct PairEvent {
    pub b_had: FourMomentum,
    pub q1: FourMomentum,
    pub q2: FourMomentum,
    pub b_lep: FourMomentum,
    pub lepton: FourMomentum,
    pub neutrino: FourMomentum,
}

impl PairEvent {
    pub fn generate(heavy_mass: f64, pt_max: f64, rng: &mut Pcg64) -> PairEvent {
        let had = resonance(heavy_mass, pt_max, rng);
        let lep = resonance(heavy_mass, pt_max, rng);
        let (b_had, w_had) = two_body(&had, BOTTOM_MASS, W_MASS, rng);
        let (q1, q2) = two_body(&w_had, 0.0, 0.0, rng);
        let (b_lep, w_lep) = two_body(&lep, BOTTOM_MASS, W_MASS, rng);
        let (lepton, neutrino) = two_body(&w_lep, MUON_MASS, 0.0, rng);
        PairEvent {
            b_had,
            q1,
            q2,
            b_lep,
            lepton,
            neutrino,
        }
    }
    /// ttbar with every quark and the lepton above `min_pt`, |η| < 2.5.
    pub fn generate_ttbar(min_pt: f64, rng: &mut Pcg64) -> PairEvent {
        PairEvent::generate_with_cuts(TOP_MASS, 250.0, min_pt, rng)
    }
    /// A heavy pair with every quark and the lepton above `min_pt`,
    /// |η| < 2.5 (rejection sampling).
    pub fn generate_with_cuts(
        heavy_mass: f64,
        pt_max: f64,
        min_pt: f64,
        rng: &mut Pcg64,
    ) -> PairEvent {
        loop {
            let e = PairEvent::generate(heavy_mass, pt_max, rng);
            if e.jets()
                .iter()
                .all(|j| j.pt() > min_pt && j.eta().abs() < 2.5)
                && e.lepton.pt() > min_pt
                && e.lepton.eta().abs() < 2.5
            {
                return e;
            }
        }
    }
    pub fn jets(&self) -> [FourMomentum; 4] {
        [self.b_had, self.q1, self.q2, self.b_lep]
    }
}

pub fn gauss(rng: &mut Pcg64) -> f64 {
    StandardNormal.sample(rng)
}

/// Measured objects and MET of a parton event, smeared with the model's σ
/// evaluated at the true values.
#[derive(Clone, Copy, Debug)]
pub struct Smeared {
    pub jets: [FourMomentum; 4],
    /// σ(E) used to smear each jet (the model at the true energy).
    pub jet_sigma: [f64; 4],
    pub lepton: FourMomentum,
    /// σ(pt) used to smear the lepton.
    pub lepton_sigma: f64,
    pub met: [f64; 2],
    pub met_cov: [f64; 3],
}

pub fn smear(ev: &PairEvent, model: &ResolutionModel, rng: &mut Pcg64) -> Smeared {
    let mut jets = ev.jets();
    let mut jet_sigma = [0.0; 4];
    for (j, js) in jets.iter_mut().zip(jet_sigma.iter_mut()) {
        let sigma = model.jet_energy_sigma(j.e(), j.eta());
        let e = (j.e() + sigma * gauss(rng)).max(0.05 * j.e());
        *j = *j * (e / j.e());
        *js = sigma;
    }
    let pt = ev.lepton.pt();
    let sigma = model.lepton_pt_sigma(quarry_event::Flavour::Muon, pt);
    let lepton = ev.lepton * ((pt + sigma * gauss(rng)).max(0.05 * pt) / pt);
    let sum_pt: f64 = ev.jets().iter().map(|j| j.pt()).sum();
    let s = model.met_sigma(sum_pt);
    let met = [
        ev.neutrino.px() + s * gauss(rng),
        ev.neutrino.py() + s * gauss(rng),
    ];
    Smeared {
        jets,
        jet_sigma,
        lepton,
        lepton_sigma: sigma,
        met,
        met_cov: [s * s, 0.0, s * s],
    }
}

/// The two pz solutions of m(ℓν) = m_W with p_T,ν = MET (real parts when
/// complex): the common-practice neutrino start.
pub fn w_pz_roots(lep: &FourMomentum, met: [f64; 2]) -> [f64; 2] {
    let mw2 = W_MASS * W_MASS;
    let ml2 = lep.m2().max(0.0);
    let mu = 0.5 * (mw2 - ml2) + lep.px() * met[0] + lep.py() * met[1];
    let met2 = met[0] * met[0] + met[1] * met[1];
    let el2 = lep.e() * lep.e();
    let a = mu * lep.pz() / (el2 - lep.pz() * lep.pz());
    let et2 = el2 - lep.pz() * lep.pz();
    let disc = a * a - (el2 * met2 - mu * mu) / et2;
    if disc >= 0.0 {
        [a - disc.sqrt(), a + disc.sqrt()]
    } else {
        [a, a]
    }
}

/// ttbar ℓ+jets (or bW pair) fit input with the right assignment. `pz` is
/// the neutrino start. `equal_mass`: Some(width) uses m(had) = m(lep) free
/// instead of two top-mass constraints. `smearing_sigma`: give the fit the
/// σ the smearing used instead of the model at the measured value.
pub fn pair_input(s: &Smeared, pz: f64, equal_mass: Option<f64>, smearing_sigma: bool) -> FitInput {
    let mut input = FitInput::new();
    let jet = |k: usize| {
        let m = Measured::jet(s.jets[k]);
        if smearing_sigma {
            m.with_sigma(s.jet_sigma[k])
        } else {
            m
        }
    };
    let b_had = input.add_object(jet(0)).unwrap();
    let q1 = input.add_object(jet(1)).unwrap();
    let q2 = input.add_object(jet(2)).unwrap();
    let b_lep = input.add_object(jet(3)).unwrap();
    let muon = Measured::muon(s.lepton);
    let lep = input
        .add_object(if smearing_sigma {
            muon.with_sigma(s.lepton_sigma)
        } else {
            muon
        })
        .unwrap();
    input
        .set_neutrino(NeutrinoStart {
            p3: [s.met[0], s.met[1], pz],
            met: s.met,
            met_cov: s.met_cov,
        })
        .unwrap();
    let w_had = input
        .add_composite(Composite::of(&[q1, q2], false))
        .unwrap();
    let w_lep = input.add_composite(Composite::of(&[lep], true)).unwrap();
    let t_had = input
        .add_composite(Composite::of(&[b_had, q1, q2], false))
        .unwrap();
    let t_lep = input
        .add_composite(Composite::of(&[b_lep, lep], true))
        .unwrap();
    input.add_constraint(Constraint::w_mass(w_had)).unwrap();
    input.add_constraint(Constraint::w_mass(w_lep)).unwrap();
    match equal_mass {
        None => {
            input.add_constraint(Constraint::top_mass(t_had)).unwrap();
            input.add_constraint(Constraint::top_mass(t_lep)).unwrap();
        }
        Some(width) => {
            input
                .add_constraint(Constraint::EqualMass {
                    a: t_had,
                    b: t_lep,
                    width,
                })
                .unwrap();
        }
    }
    input
}
