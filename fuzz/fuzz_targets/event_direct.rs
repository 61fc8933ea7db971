//! Fuzzes the library API below the reader: events built in code with
//! *any* `f64` (NaN, ±∞, 1e300, negative energies, |η| ≫ 10, φ outside
//! (−π, π], zero mass and zero pt, identical objects, a lepton along the
//! beam) go straight into `Pipeline` workers — the reader's range checks do
//! not protect callers who build events themselves.
//!
//! Properties checked: no panic, one result per hypothesis, and every
//! number finite or replaced by a typed status (`bad_input` for a
//! non-finite momentum, a search status, or a fit status).
#![no_main]

use libfuzzer_sys::arbitrary::{self, Arbitrary};
use libfuzzer_sys::fuzz_target;
use quarry::event::{Event, FatJet, Flavour, Jet, Lepton, Met};
use quarry::lorentz::FourMomentum;
use quarry_fuzz::{check_reconstructions, pipelines};

/// A number drawn mostly from the hostile values, sometimes raw bits.
#[derive(Debug, Arbitrary)]
enum Num {
    Pick(u8),
    Small(i16),
    Raw(f64),
}

const SPECIAL: [f64; 16] = [
    0.0,
    -0.0,
    1.0,
    80.4,
    173.0,
    1e6,
    -1e6,
    1e300,
    f64::MAX,
    f64::MIN_POSITIVE,
    f64::NAN,
    f64::INFINITY,
    f64::NEG_INFINITY,
    12.0,
    std::f64::consts::PI,
    -std::f64::consts::PI,
];

impl Num {
    fn get(&self) -> f64 {
        match *self {
            Num::Pick(i) => SPECIAL[usize::from(i) % SPECIAL.len()],
            Num::Small(i) => f64::from(i) / 8.0,
            Num::Raw(x) => x,
        }
    }
}

#[derive(Debug, Arbitrary)]
struct Obj {
    pt: Num,
    eta: Num,
    phi: Num,
    mass: Num,
    btag: Num,
    charge: i8,
    /// Use (px, py, pz, E) = (pt, eta, phi, mass) directly instead.
    cartesian: bool,
    /// Repeat the previous object exactly.
    repeat: bool,
}

impl Obj {
    fn p4(&self) -> FourMomentum {
        let (a, b, c, d) = (
            self.pt.get(),
            self.eta.get(),
            self.phi.get(),
            self.mass.get(),
        );
        if self.cartesian {
            FourMomentum::new(a, b, c, d)
        } else {
            FourMomentum::from_pt_eta_phi_m(a, b, c, d)
        }
    }
}

#[derive(Debug, Arbitrary)]
struct Input {
    pipeline: u8,
    id: u64,
    weight: Num,
    jets: Vec<Obj>,
    leptons: Vec<(bool, Obj)>,
    fat_jets: Vec<Obj>,
    met: (Num, Num),
    cov: Option<(Num, Num, Num)>,
}

fuzz_target!(|input: Input| {
    let all = pipelines();
    let pipeline = &all[usize::from(input.pipeline) % all.len()];
    let mut e = Event::new(input.id);
    e.weight = input.weight.get();
    let mut last = FourMomentum::default();
    for (i, o) in input.jets.iter().take(40).enumerate() {
        let p4 = if o.repeat { last } else { o.p4() };
        last = p4;
        e.jets.push(Jet::new(p4, o.btag.get()).with_index(i as u32));
    }
    for (i, o) in input.fat_jets.iter().take(10).enumerate() {
        e.fat_jets.push(FatJet {
            p4: o.p4(),
            truth: None,
            index: i as u32,
        });
    }
    for (muon, o) in input.leptons.iter().take(10) {
        let p4 = if o.repeat { last } else { o.p4() };
        last = p4;
        let list = if *muon {
            &mut e.muons
        } else {
            &mut e.electrons
        };
        list.push(Lepton {
            p4,
            flavour: if *muon {
                Flavour::Muon
            } else {
                Flavour::Electron
            },
            charge: o.charge,
            truth: None,
            index: list.len() as u32,
        });
    }
    e.met = Met::new(input.met.0.get(), input.met.1.get());
    if let Some((xx, xy, yy)) = &input.cov {
        e.met.cov = Some([xx.get(), xy.get(), yy.get()]);
    }
    let results = pipeline.worker().reconstruct(e);
    check_reconstructions(pipeline, input.id, &results);
});
