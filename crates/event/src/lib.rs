//! The event model: what one selected collision looks like to quarry.
//!
//! An [`Event`] holds small-radius jets (with b-tag scores), large-radius
//! jets, electrons, muons and the missing transverse momentum. Every object
//! is a small `Copy` struct carrying a [`FourMomentum`] and implementing the
//! workspace-wide [`Momentum`] trait, so later stages never care which kind
//! of object they hold.
//!
//! **Design decision:** simulation truth travels *with the object* as a short
//! inline [`Truth`] label (no heap string), so a jet stays `Copy` and the
//! evaluation can match any reconstructed assignment to the generated decay
//! without a side table.
//!
//! # Truth labels
//! A label names where a reconstructed object came from, as a dot-separated
//! path from the pair-produced parent down to the final parton:
//! - the first segment is the *side*: `l` for the parent whose W decays to a
//!   lepton in single-lepton events, `h` for the other one; `a`/`b` when
//!   neither or both sides decay leptonically;
//! - middle segments are intermediate bosons or tops: `t`, `W`, `Z`, `H`;
//! - the last segment is the final object: `b`, `q` (light quark), `g`
//!   (gluon), `e`, `mu`, `nu`.
//!
//! Example: `h.t.W.q` is a light quark from the W of the top on the hadronic
//! side. Extra radiation is `isr`. Hypothesis roles name the labels they
//! accept, with `*` matching one segment.
//!
//! Build events with the `add_*` methods: they number each object by its
//! position among its kind (the `index` that outputs use to name input
//! objects), and put a lepton in the list of its own flavour.
//!
//! ```
//! use quarry_event::{Event, Jet, Lepton, Met, Truth};
//! use quarry_lorentz::FourMomentum;
//! let mut event = Event::new(7);
//! event
//!     .add_jet(Jet::new(FourMomentum::from_pt_eta_phi_m(80.0, 0.1, 0.2, 9.0), 0.9)
//!         .with_truth(Truth::new("h.b")?))
//!     .add_jet(Jet::new(FourMomentum::from_pt_eta_phi_m(60.0, -0.4, 2.0, 7.0), 0.1))
//!     .add_lepton(Lepton::electron(FourMomentum::from_pt_eta_phi_m(40.0, 0.3, -1.0, 0.000511), -1));
//! event.met = Met::from_pt_phi(30.0, -0.3);
//! assert_eq!(event.jets[0].truth.unwrap().as_str(), "h.b");
//! assert_eq!((event.jets[0].index, event.jets[1].index), (0, 1));
//! assert_eq!(event.electrons.len(), 1);
//! # Ok::<(), quarry_event::TruthError>(())
//! ```
#![deny(missing_docs)]

use std::fmt;

pub use quarry_lorentz::{FourMomentum, Momentum};

mod selection;
pub use selection::Selection;

/// Why a text is not a truth label.
#[derive(Clone, Debug, PartialEq, Eq, thiserror::Error)]
#[error(
    "'{text}' is not a truth label (1-{} printable ASCII characters, no commas or spaces)",
    Truth::CAPACITY
)]
pub struct TruthError {
    /// The rejected text.
    pub text: String,
}

/// A truth label of at most [`Truth::CAPACITY`] ASCII bytes, stored inline.
///
/// Invariant: the stored bytes are printable ASCII without commas or
/// whitespace, 1 to `CAPACITY` long.
#[derive(Clone, Copy, PartialEq, Eq, Hash)]
pub struct Truth {
    len: u8,
    bytes: [u8; Truth::CAPACITY],
}

impl Truth {
    /// The longest label that fits.
    pub const CAPACITY: usize = 23;

    /// Makes a label; a [`TruthError`] if `text` is empty, longer than
    /// [`CAPACITY`](Self::CAPACITY), or has bytes other than printable ASCII
    /// without commas and spaces.
    ///
    /// ```
    /// use quarry_event::Truth;
    /// assert!(Truth::new("l.W.mu").is_ok());
    /// assert!(Truth::new("").is_err());
    /// let e = Truth::new("has space").unwrap_err();
    /// assert!(e.to_string().starts_with("'has space' is not a truth label"));
    /// ```
    pub fn new(text: &str) -> Result<Truth, TruthError> {
        let b = text.as_bytes();
        if b.is_empty()
            || b.len() > Self::CAPACITY
            || !b.iter().all(|&c| c.is_ascii_graphic() && c != b',')
        {
            return Err(TruthError {
                text: text.to_string(),
            });
        }
        let mut bytes = [0u8; Self::CAPACITY];
        bytes[..b.len()].copy_from_slice(b);
        Ok(Truth {
            len: b.len() as u8,
            bytes,
        })
    }

    /// The label as text.
    ///
    /// ```
    /// assert_eq!(quarry_event::Truth::new("isr").unwrap().as_str(), "isr");
    /// ```
    pub fn as_str(&self) -> &str {
        // Invariant: only ASCII was stored.
        std::str::from_utf8(&self.bytes[..self.len as usize]).unwrap_or("")
    }

    /// Whether this label matches `pattern`, a dot-separated path in which
    /// `*` matches exactly one segment.
    ///
    /// ```
    /// let t = quarry_event::Truth::new("h.t.W.q").unwrap();
    /// assert!(t.matches("h.t.W.q"));
    /// assert!(t.matches("*.t.W.q"));
    /// assert!(!t.matches("h.W.q"));
    /// ```
    pub fn matches(&self, pattern: &str) -> bool {
        let mut labels = self.as_str().split('.');
        let mut pats = pattern.split('.');
        loop {
            match (labels.next(), pats.next()) {
                (None, None) => return true,
                (Some(l), Some(p)) if p == "*" || p == l => {}
                _ => return false,
            }
        }
    }
}

impl fmt::Debug for Truth {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "Truth({:?})", self.as_str())
    }
}

impl fmt::Display for Truth {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.as_str())
    }
}

/// A small-radius jet.
///
/// Invariant: `btag` is in [0, 1] (a score, or 0/1 for a working-point
/// decision); the reader enforces it.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Jet {
    /// Four-momentum \[GeV\].
    pub p4: FourMomentum,
    /// b-tag score in [0, 1]; 0 when the input has none.
    pub btag: f64,
    /// Simulation truth label, if the input has one.
    pub truth: Option<Truth>,
    /// Position among this event's jets in the input (0-based). The reader
    /// and [`Event::add_jet`] set it and selection keeps it, so outputs can
    /// name input jets after selection has removed and re-ordered some.
    pub index: u32,
}

impl Jet {
    /// A jet without truth.
    ///
    /// ```
    /// use quarry_event::{FourMomentum, Jet};
    /// let j = Jet::new(FourMomentum::new(30.0, 0.0, 0.0, 31.0), 0.2);
    /// assert_eq!(j.btag, 0.2);
    /// ```
    pub fn new(p4: FourMomentum, btag: f64) -> Jet {
        Jet {
            p4,
            btag,
            truth: None,
            index: 0,
        }
    }

    /// The same jet with a truth label.
    ///
    /// ```
    /// use quarry_event::{FourMomentum, Jet, Truth};
    /// let j = Jet::new(FourMomentum::ZERO, 0.0).with_truth(Truth::new("isr").unwrap());
    /// assert!(j.truth.is_some());
    /// ```
    pub fn with_truth(mut self, truth: Truth) -> Jet {
        self.truth = Some(truth);
        self
    }

    /// The same jet with its input position set.
    ///
    /// ```
    /// use quarry_event::{FourMomentum, Jet};
    /// assert_eq!(Jet::new(FourMomentum::ZERO, 0.0).with_index(4).index, 4);
    /// ```
    pub fn with_index(mut self, index: u32) -> Jet {
        self.index = index;
        self
    }
}

impl Momentum for Jet {
    #[inline]
    fn p4(&self) -> FourMomentum {
        self.p4
    }
}

/// A large-radius jet, which may contain a whole hadronic W, Z, H or top.
///
/// ```
/// use quarry_event::{Event, FatJet, FourMomentum};
/// let mut e = Event::new(1);
/// e.add_fat_jet(FatJet::new(FourMomentum::from_pt_eta_phi_m(450.0, 0.2, 1.0, 82.0)));
/// assert_eq!(e.fat_jets[0].index, 0);
/// ```
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct FatJet {
    /// Four-momentum \[GeV\]; its mass is the jet mass used in mass windows.
    pub p4: FourMomentum,
    /// Simulation truth label, if the input has one (e.g. `h.W`).
    pub truth: Option<Truth>,
    /// Position among this event's large-radius jets in the input (0-based).
    pub index: u32,
}

impl FatJet {
    /// A large-radius jet without truth (index set by
    /// [`Event::add_fat_jet`]).
    pub fn new(p4: FourMomentum) -> FatJet {
        FatJet {
            p4,
            truth: None,
            index: 0,
        }
    }

    /// The same jet with a truth label.
    pub fn with_truth(mut self, truth: Truth) -> FatJet {
        self.truth = Some(truth);
        self
    }
}

impl Momentum for FatJet {
    #[inline]
    fn p4(&self) -> FourMomentum {
        self.p4
    }
}

/// Charged-lepton flavour.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub enum Flavour {
    /// Electron.
    Electron,
    /// Muon.
    Muon,
}

/// A charged lepton.
///
/// Invariant: `charge` is −1 or +1 (0 only when the input gives none).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Lepton {
    /// Four-momentum \[GeV\]; its mass is respected by the neutrino solver.
    pub p4: FourMomentum,
    /// Flavour.
    pub flavour: Flavour,
    /// Electric charge in units of e: −1, +1, or 0 if unknown.
    pub charge: i8,
    /// Simulation truth label, if the input has one.
    pub truth: Option<Truth>,
    /// Position among this event's leptons of the same flavour in the input
    /// (0-based).
    pub index: u32,
}

impl Lepton {
    /// An electron of charge −1 or +1 (0 if unknown), without truth; its
    /// index is set by [`Event::add_lepton`].
    ///
    /// ```
    /// use quarry_event::{Flavour, FourMomentum, Lepton};
    /// let e = Lepton::electron(FourMomentum::from_pt_eta_phi_m(30.0, 0.0, 0.0, 0.000511), 1);
    /// assert_eq!((e.flavour, e.charge), (Flavour::Electron, 1));
    /// ```
    pub fn electron(p4: FourMomentum, charge: i8) -> Lepton {
        Lepton::new(p4, Flavour::Electron, charge)
    }

    /// A muon (as [`electron`](Self::electron)).
    pub fn muon(p4: FourMomentum, charge: i8) -> Lepton {
        Lepton::new(p4, Flavour::Muon, charge)
    }

    /// A lepton of either flavour, without truth.
    pub fn new(p4: FourMomentum, flavour: Flavour, charge: i8) -> Lepton {
        Lepton {
            p4,
            flavour,
            charge,
            truth: None,
            index: 0,
        }
    }

    /// The same lepton with a truth label.
    pub fn with_truth(mut self, truth: Truth) -> Lepton {
        self.truth = Some(truth);
        self
    }
}

impl Momentum for Lepton {
    #[inline]
    fn p4(&self) -> FourMomentum {
        self.p4
    }
}

/// Missing transverse momentum.
///
/// `cov`, when present, is the symmetric 2×2 covariance `[σxx², σxy, σyy²]`
/// in GeV² (the reader checks it is positive semi-definite).
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct Met {
    /// x component \[GeV\].
    pub px: f64,
    /// y component \[GeV\].
    pub py: f64,
    /// Covariance `[xx, xy, yy]` \[GeV²\], if the input has one.
    pub cov: Option<[f64; 3]>,
}

impl Met {
    /// MET without covariance.
    ///
    /// ```
    /// let m = quarry_event::Met::new(3.0, 4.0);
    /// assert_eq!(m.pt(), 5.0);
    /// ```
    pub fn new(px: f64, py: f64) -> Met {
        Met { px, py, cov: None }
    }

    /// MET of magnitude `pt` \[GeV\] at azimuth `phi`, without covariance.
    ///
    /// ```
    /// let m = quarry_event::Met::from_pt_phi(50.0, std::f64::consts::FRAC_PI_2);
    /// assert!(m.px.abs() < 1e-12 && (m.py - 50.0).abs() < 1e-12);
    /// assert!((m.pt() - 50.0).abs() < 1e-12);
    /// ```
    pub fn from_pt_phi(pt: f64, phi: f64) -> Met {
        Met::new(pt * phi.cos(), pt * phi.sin())
    }

    /// Magnitude \[GeV\].
    ///
    /// ```
    /// assert_eq!(quarry_event::Met::new(0.0, -2.0).pt(), 2.0);
    /// ```
    pub fn pt(&self) -> f64 {
        // The four-vector crate's guarded √(px² + py²).
        FourMomentum::new(self.px, self.py, 0.0, 0.0).pt()
    }

    /// Azimuth in (−π, π].
    ///
    /// ```
    /// assert_eq!(quarry_event::Met::new(1.0, 0.0).phi(), 0.0);
    /// ```
    pub fn phi(&self) -> f64 {
        self.p4().phi()
    }
}

impl Momentum for Met {
    /// A massless transverse vector: `(px, py, 0, pt)`.
    #[inline]
    fn p4(&self) -> FourMomentum {
        FourMomentum::new(self.px, self.py, 0.0, self.pt())
    }
}

/// One selected collision event.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Event {
    /// Event identifier from the input (unique within a file).
    pub id: u64,
    /// Small-radius jets, in input order.
    pub jets: Vec<Jet>,
    /// Large-radius jets, in input order.
    pub fat_jets: Vec<FatJet>,
    /// Electrons, in input order.
    pub electrons: Vec<Lepton>,
    /// Muons, in input order.
    pub muons: Vec<Lepton>,
    /// Missing transverse momentum (zero if the input has no MET row).
    pub met: Met,
    /// Event weight (1 if the input has none).
    pub weight: f64,
}

impl Event {
    /// An empty event with weight 1.
    ///
    /// ```
    /// let e = quarry_event::Event::new(3);
    /// assert_eq!(e.weight, 1.0);
    /// ```
    pub fn new(id: u64) -> Event {
        Event {
            id,
            weight: 1.0,
            ..Event::default()
        }
    }

    /// Adds a jet, numbering it by its position among the event's jets
    /// (its `index`, which outputs use to name it).
    ///
    /// ```
    /// use quarry_event::{Event, FourMomentum, Jet};
    /// let mut e = Event::new(1);
    /// e.add_jet(Jet::new(FourMomentum::ZERO, 0.0)).add_jet(Jet::new(FourMomentum::ZERO, 0.0));
    /// assert_eq!(e.jets[1].index, 1);
    /// ```
    pub fn add_jet(&mut self, jet: Jet) -> &mut Event {
        let index = self.jets.len() as u32;
        self.jets.push(jet.with_index(index));
        self
    }

    /// Adds a charged lepton to the list of its flavour, numbered by its
    /// position among the leptons of that flavour (`e0`, `mu1` in outputs).
    ///
    /// ```
    /// use quarry_event::{Event, FourMomentum, Lepton};
    /// let p4 = FourMomentum::from_pt_eta_phi_m(30.0, 0.0, 0.0, 0.105);
    /// let mut e = Event::new(1);
    /// e.add_lepton(Lepton::muon(p4, -1)).add_lepton(Lepton::electron(p4, 1));
    /// assert_eq!((e.muons.len(), e.electrons.len()), (1, 1));
    /// assert_eq!(e.electrons[0].index, 0);
    /// ```
    pub fn add_lepton(&mut self, lepton: Lepton) -> &mut Event {
        let list = match lepton.flavour {
            Flavour::Electron => &mut self.electrons,
            Flavour::Muon => &mut self.muons,
        };
        let index = list.len() as u32;
        list.push(Lepton { index, ..lepton });
        self
    }

    /// Adds a large-radius jet, numbered by its position among them.
    pub fn add_fat_jet(&mut self, jet: FatJet) -> &mut Event {
        let index = self.fat_jets.len() as u32;
        self.fat_jets.push(FatJet { index, ..jet });
        self
    }

    /// Whether every object's `index` is its position among its kind (and
    /// flavour), as the `add_*` methods and the reader set them, and every
    /// lepton sits in the list of its flavour. An event built by pushing
    /// objects into the public lists without indices fails this (all its
    /// jets would be named `0` in outputs).
    ///
    /// ```
    /// use quarry_event::{Event, FourMomentum, Jet};
    /// let mut e = Event::new(1);
    /// e.jets.push(Jet::new(FourMomentum::ZERO, 0.0));
    /// e.jets.push(Jet::new(FourMomentum::ZERO, 0.0));
    /// assert!(!e.indices_are_positions());
    /// ```
    pub fn indices_are_positions(&self) -> bool {
        let positional = |indices: &mut dyn Iterator<Item = u32>| {
            indices.enumerate().all(|(i, x)| x as usize == i)
        };
        positional(&mut self.jets.iter().map(|j| j.index))
            && positional(&mut self.fat_jets.iter().map(|j| j.index))
            && positional(&mut self.electrons.iter().map(|l| l.index))
            && positional(&mut self.muons.iter().map(|l| l.index))
            && self
                .electrons
                .iter()
                .all(|l| l.flavour == Flavour::Electron)
            && self.muons.iter().all(|l| l.flavour == Flavour::Muon)
    }

    /// Electrons then muons, as one iterator.
    ///
    /// ```
    /// let e = quarry_event::Event::new(3);
    /// assert_eq!(e.leptons().count(), 0);
    /// ```
    pub fn leptons(&self) -> impl Iterator<Item = &Lepton> {
        self.electrons.iter().chain(self.muons.iter())
    }

    /// Number of charged leptons.
    ///
    /// ```
    /// assert_eq!(quarry_event::Event::new(3).n_leptons(), 0);
    /// ```
    pub fn n_leptons(&self) -> usize {
        self.electrons.len() + self.muons.len()
    }
}
