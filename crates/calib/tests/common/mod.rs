//! Matched pairs from the toy generator's parton record: the in-memory
//! stand-in for truth columns in a file.

use quarry_calib::{JetFlavour, JetMatch, LeptonMatch, MetMatch};
use quarry_event::Flavour;
use quarry_lorentz::FourMomentum;
use quarry_toy::{Generator, PartonKind, ToyConfig};

/// Matched jets, leptons and MET of `n` events of `config`.
pub struct Matches {
    pub jets: Vec<JetMatch>,
    pub leptons: Vec<LeptonMatch>,
    pub met: Vec<MetMatch>,
}

pub fn matches(config: ToyConfig, seed: u64, n: u64) -> Matches {
    let generator = Generator::new(config, seed).unwrap();
    let mut out = Matches {
        jets: Vec::new(),
        leptons: Vec::new(),
        met: Vec::new(),
    };
    for i in 0..n {
        let (event, rec) = generator.generate_with_partons(i);
        for (jet, source) in event.jets.iter().zip(&rec.jet_sources) {
            let label = jet.truth.unwrap();
            let flavour = if label.as_str().ends_with(".b") {
                JetFlavour::Bottom
            } else {
                JetFlavour::Light
            };
            out.jets.push(
                JetMatch::new(jet.p4.e(), source.e(), source.eta(), flavour, jet.btag).unwrap(),
            );
        }
        for lepton in event.leptons() {
            let kind = match lepton.flavour {
                Flavour::Electron => PartonKind::Electron,
                Flavour::Muon => PartonKind::Muon,
            };
            // The toy keeps the lepton's direction: the parton with the same
            // label and the smallest ΔR is its source.
            let source: Option<&FourMomentum> = rec
                .of_kind(kind)
                .filter(|p| Some(p.truth) == lepton.truth)
                .map(|p| &p.p4)
                .min_by(|a, b| a.delta_r(&lepton.p4).total_cmp(&b.delta_r(&lepton.p4)));
            let source = source.unwrap();
            out.leptons
                .push(LeptonMatch::new(lepton.flavour, lepton.p4.pt(), source.pt()).unwrap());
        }
        let (mut nx, mut ny) = (0.0, 0.0);
        for nu in rec.of_kind(PartonKind::Neutrino) {
            nx += nu.p4.px();
            ny += nu.p4.py();
        }
        let sum_pt: f64 = event.jets.iter().map(|j| j.p4.pt()).sum();
        out.met
            .push(MetMatch::new([event.met.px, event.met.py], [nx, ny], sum_pt).unwrap());
    }
    out
}
