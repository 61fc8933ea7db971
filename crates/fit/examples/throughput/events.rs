//! Deterministic toy bW-pair events for the fit throughput measurements,
//! shared by `examples/throughput` (CPU time) and the root criterion bench
//! `benches/fit.rs` (which includes this file with `#[path]`).
//!
//! Hypothesis: b_had, q1, q2 → W_had, B_had; b_lep, muon, ν → W_lep, B_lep;
//! constraints m(W_had) = m(W_lep) = m_W and m(B_had) = m(B_lep) with a
//! free common mass. Each event carries its 3 "best" assignments (the right
//! one, b_had ↔ b_lep swapped, b_had ↔ q1 swapped).

use std::f64::consts::PI;

use quarry_fit::{Composite, Constraint, FitInput, Measured, NeutrinoStart};
use quarry_lorentz::FourMomentum;
use quarry_pdg::{BOTTOM_MASS, MUON_MASS, W_MASS};
use quarry_resolution::ResolutionModel;

/// Mass of the pair-produced heavy quark in the toy events (GeV).
pub const HEAVY_MASS: f64 = 1000.0;

/// Small deterministic generator (xorshift64*), uniform in [lo, hi).
pub struct Xorshift(u64);

impl Xorshift {
    pub fn uniform(&mut self, lo: f64, hi: f64) -> f64 {
        self.0 ^= self.0 >> 12;
        self.0 ^= self.0 << 25;
        self.0 ^= self.0 >> 27;
        let bits = self.0.wrapping_mul(0x2545_f491_4f6c_dd1d) >> 11;
        lo + (hi - lo) * (bits as f64 / (1u64 << 53) as f64)
    }
    pub fn gauss(&mut self) -> f64 {
        let u1 = self.uniform(1e-12, 1.0);
        let u2 = self.uniform(0.0, 1.0);
        (-2.0 * u1.ln()).sqrt() * (2.0 * PI * u2).cos()
    }
}

fn two_body(
    parent: &FourMomentum,
    m1: f64,
    m2: f64,
    rng: &mut Xorshift,
) -> (FourMomentum, FourMomentum) {
    let m = parent.m();
    let lam = (m * m - (m1 + m2).powi(2)) * (m * m - (m1 - m2).powi(2));
    let p = lam.max(0.0).sqrt() / (2.0 * m);
    let cos_t = rng.uniform(-1.0, 1.0);
    let phi = rng.uniform(-PI, PI);
    let sin_t = (1.0 - cos_t * cos_t).sqrt();
    let (x, y, z) = (p * sin_t * phi.cos(), p * sin_t * phi.sin(), p * cos_t);
    let a = FourMomentum::new(x, y, z, (p * p + m1 * m1).sqrt());
    let b = FourMomentum::new(-x, -y, -z, (p * p + m2 * m2).sqrt());
    (a.from_rest_frame_of(parent), b.from_rest_frame_of(parent))
}

/// W-mass pz root with the smaller |pz| (real part if complex).
fn pz_start(lep: &FourMomentum, met: [f64; 2]) -> f64 {
    let mu = 0.5 * (W_MASS * W_MASS - lep.m2().max(0.0)) + lep.px() * met[0] + lep.py() * met[1];
    let el2 = lep.e() * lep.e();
    let et2 = el2 - lep.pz() * lep.pz();
    let a = mu * lep.pz() / et2;
    let disc = a * a - (el2 * (met[0] * met[0] + met[1] * met[1]) - mu * mu) / et2;
    if disc < 0.0 {
        a
    } else if a >= 0.0 {
        a - disc.sqrt()
    } else {
        a + disc.sqrt()
    }
}

/// One smeared bW-pair event as [b_had, q1, q2, b_lep], muon, MET, cov.
pub fn event(
    model: &ResolutionModel,
    rng: &mut Xorshift,
) -> ([FourMomentum; 4], FourMomentum, [f64; 2], [f64; 3]) {
    loop {
        let mut heavy = || {
            let (pt, eta, phi) = (
                rng.uniform(20.0, 300.0),
                rng.uniform(-1.5, 1.5),
                rng.uniform(-PI, PI),
            );
            FourMomentum::from_pt_eta_phi_m(pt, eta, phi, HEAVY_MASS)
        };
        let (had, lep) = (heavy(), heavy());
        let (b_had, w_had) = two_body(&had, BOTTOM_MASS, W_MASS, rng);
        let (q1, q2) = two_body(&w_had, 0.0, 0.0, rng);
        let (b_lep, w_lep) = two_body(&lep, BOTTOM_MASS, W_MASS, rng);
        let (mu, nu) = two_body(&w_lep, MUON_MASS, 0.0, rng);
        let mut jets = [b_had, q1, q2, b_lep];
        if jets
            .iter()
            .chain([&mu])
            .any(|p| p.pt() < 25.0 || p.eta().abs() > 2.5)
        {
            continue;
        }
        let sum_pt: f64 = jets.iter().map(|j| j.pt()).sum();
        for j in jets.iter_mut() {
            let s = model.jet_energy_sigma(j.e(), j.eta());
            *j = *j * ((j.e() + s * rng.gauss()).max(0.05 * j.e()) / j.e());
        }
        let s = model.lepton_pt_sigma(quarry_event::Flavour::Muon, mu.pt());
        let mu = mu * ((mu.pt() + s * rng.gauss()).max(0.05 * mu.pt()) / mu.pt());
        let sm = model.met_sigma(sum_pt);
        let met = [nu.px() + sm * rng.gauss(), nu.py() + sm * rng.gauss()];
        return (jets, mu, met, [sm * sm, 0.0, sm * sm]);
    }
}

/// The bW-pair fit input for jets in the order [b_had, q1, q2, b_lep].
pub fn input(jets: [FourMomentum; 4], mu: FourMomentum, met: [f64; 2], cov: [f64; 3]) -> FitInput {
    let mut input = FitInput::new();
    for j in jets {
        input.add_object(Measured::jet(j)).expect("capacity");
    }
    let lep = input.add_object(Measured::muon(mu)).expect("capacity");
    input
        .set_neutrino(NeutrinoStart {
            p3: [met[0], met[1], pz_start(&mu, met)],
            met,
            met_cov: cov,
        })
        .expect("finite");
    let w_had = input
        .add_composite(Composite::of(&[1, 2], false))
        .expect("valid");
    let w_lep = input
        .add_composite(Composite::of(&[lep], true))
        .expect("valid");
    let b_had = input
        .add_composite(Composite::of(&[0, 1, 2], false))
        .expect("valid");
    let b_lep = input
        .add_composite(Composite::of(&[3, lep], true))
        .expect("valid");
    input
        .add_constraint(Constraint::w_mass(w_had))
        .expect("valid");
    input
        .add_constraint(Constraint::w_mass(w_lep))
        .expect("valid");
    input
        .add_constraint(Constraint::EqualMass {
            a: b_had,
            b: b_lep,
            width: 25.0,
        })
        .expect("valid");
    input
}

/// `n` events, each as its 3 assignments' fit inputs (fixed seed).
pub fn events(model: &ResolutionModel, n: usize) -> Vec<[FitInput; 3]> {
    let mut rng = Xorshift(0x9e37_79b9_7f4a_7c15);
    (0..n)
        .map(|_| {
            let (j, mu, met, cov) = event(model, &mut rng);
            [
                input(j, mu, met, cov),
                input([j[3], j[1], j[2], j[0]], mu, met, cov),
                input([j[1], j[0], j[2], j[3]], mu, met, cov),
            ]
        })
        .collect()
}
