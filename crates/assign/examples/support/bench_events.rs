//! Events shared by the criterion bench `benches/assign.rs` and the
//! instruction-count workload `examples/search_workload.rs`, so both measure
//! the same searches.
//!
//! Events are built from exact two-body decays of pair-produced heavy quarks,
//! with jet energies smeared by 10 %, MET from the neutrino smeared by 15 GeV,
//! and extra radiation jets, so that the right assignment has a small but
//! non-zero χ² as in real events.

use quarry_event::{Event, Flavour, Jet, Lepton, Met};
use quarry_lorentz::FourMomentum;

/// A small deterministic generator (xorshift64*), enough for bench events.
struct Rng(u64);

impl Rng {
    fn next(&mut self) -> f64 {
        self.0 ^= self.0 >> 12;
        self.0 ^= self.0 << 25;
        self.0 ^= self.0 >> 27;
        (self.0.wrapping_mul(0x2545_F491_4F6C_DD1D) >> 11) as f64 / (1u64 << 53) as f64
    }
    fn range(&mut self, lo: f64, hi: f64) -> f64 {
        lo + (hi - lo) * self.next()
    }
    fn gauss(&mut self) -> f64 {
        let (u, v) = (self.next().max(1e-300), self.next());
        (-2.0 * u.ln()).sqrt() * (std::f64::consts::TAU * v).cos()
    }
}

fn decay(rng: &mut Rng, parent: &FourMomentum, m1: f64, m2: f64) -> (FourMomentum, FourMomentum) {
    let m = parent.m();
    let lam = (m * m - (m1 + m2).powi(2)) * (m * m - (m1 - m2).powi(2));
    let p = lam.max(0.0).sqrt() / (2.0 * m);
    let cos = rng.range(-1.0, 1.0);
    let sin = (1.0 - cos * cos).sqrt();
    let phi = rng.range(-std::f64::consts::PI, std::f64::consts::PI);
    let (x, y, z) = (p * sin * phi.cos(), p * sin * phi.sin(), p * cos);
    let a = FourMomentum::new(x, y, z, (p * p + m1 * m1).sqrt());
    let b = FourMomentum::new(-x, -y, -z, (p * p + m2 * m2).sqrt());
    (a.from_rest_frame_of(parent), b.from_rest_frame_of(parent))
}

fn smear(rng: &mut Rng, p: FourMomentum) -> FourMomentum {
    p * (1.0 + 0.10 * rng.gauss()).max(0.3)
}

fn heavy(rng: &mut Rng, mass: f64, sign: f64) -> FourMomentum {
    FourMomentum::from_pt_eta_phi_m(
        rng.range(0.0, 300.0),
        rng.range(-1.0, 1.0),
        sign * rng.range(1.0, 2.0),
        mass,
    )
}

fn finish(
    rng: &mut Rng,
    id: u64,
    bs: &[FourMomentum],
    qs: &[FourMomentum],
    lep: FourMomentum,
    nu: FourMomentum,
    n_jets: usize,
) -> Event {
    let mut e = Event::new(id);
    for b in bs {
        e.jets.push(Jet::new(smear(rng, *b), 0.9));
    }
    for q in qs {
        e.jets.push(Jet::new(smear(rng, *q), 0.1));
    }
    while e.jets.len() < n_jets {
        let isr = FourMomentum::from_pt_eta_phi_m(
            rng.range(25.0, 120.0),
            rng.range(-2.5, 2.5),
            rng.range(-3.1, 3.1),
            5.0,
        );
        e.jets.push(Jet::new(isr, 0.1));
    }
    for (i, j) in e.jets.iter_mut().enumerate() {
        j.index = i as u32;
    }
    e.muons.push(Lepton {
        p4: lep,
        flavour: Flavour::Muon,
        charge: 1,
        truth: None,
        index: 0,
    });
    e.met = Met::new(nu.px() + 15.0 * rng.gauss(), nu.py() + 15.0 * rng.gauss());
    e
}

fn bw_event(rng: &mut Rng, id: u64) -> Event {
    let mw = quarry_pdg::W_MASS;
    let mb = quarry_pdg::BOTTOM_MASS;
    let (qh, ql) = (heavy(rng, 1200.0, 1.0), heavy(rng, 1200.0, -1.0));
    let (bh, wh) = decay(rng, &qh, mb, mw);
    let (q1, q2) = decay(rng, &wh, 0.0, 0.0);
    let (bl, wl) = decay(rng, &ql, mb, mw);
    let (lep, nu) = decay(rng, &wl, quarry_pdg::MUON_MASS, 0.0);
    finish(rng, id, &[bh, bl], &[q1, q2], lep, nu, 6)
}

fn tw_event(rng: &mut Rng, id: u64, n_jets: usize) -> Event {
    let (mw, mt, mb) = (
        quarry_pdg::W_MASS,
        quarry_pdg::TOP_MASS,
        quarry_pdg::BOTTOM_MASS,
    );
    let (th, tl) = (heavy(rng, 1400.0, 1.0), heavy(rng, 1400.0, -1.0));
    let (toph, w2) = decay(rng, &th, mt, mw);
    let (bh, w1) = decay(rng, &toph, mb, mw);
    let (q1, q2) = decay(rng, &w1, 0.0, 0.0);
    let (q3, q4) = decay(rng, &w2, 0.0, 0.0);
    let (topl, w3) = decay(rng, &tl, mt, mw);
    let (bl, wl) = decay(rng, &topl, mb, mw);
    let (lep, nu) = decay(rng, &wl, quarry_pdg::MUON_MASS, 0.0);
    let (q5, q6) = decay(rng, &w3, 0.0, 0.0);
    finish(
        rng,
        id,
        &[bh, bl],
        &[q1, q2, q3, q4, q5, q6],
        lep,
        nu,
        n_jets,
    )
}

/// The bench's event sets, drawn in a fixed order from one seed: 512 bW-pair
/// events with 6 jets, then 128 tW-pair events with 8 jets and 128 with 10.
pub fn bench_events() -> (Vec<Event>, Vec<Event>, Vec<Event>) {
    let mut rng = Rng(0x9E37_79B9_7F4A_7C15);
    let bw: Vec<Event> = (0..512).map(|i| bw_event(&mut rng, i)).collect();
    let tw8: Vec<Event> = (0..128).map(|i| tw_event(&mut rng, i, 8)).collect();
    let tw10: Vec<Event> = (0..128).map(|i| tw_event(&mut rng, i, 10)).collect();
    (bw, tw8, tw10)
}
