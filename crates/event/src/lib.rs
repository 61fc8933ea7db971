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
//! ```
//! use quarry_event::{Event, Jet, Met, Truth};
//! use quarry_lorentz::FourMomentum;
//! let mut event = Event::new(7);
//! event.jets.push(Jet::new(FourMomentum::from_pt_eta_phi_m(80.0, 0.1, 0.2, 9.0), 0.9)
//!     .with_truth(Truth::new("h.b").unwrap()));
//! event.met = Met::new(30.0, -10.0);
//! assert_eq!(event.jets[0].truth.unwrap().as_str(), "h.b");
//! ```
#![deny(missing_docs)]

use std::fmt;

pub use quarry_lorentz::{FourMomentum, Momentum};

mod selection;
pub use selection::Selection;

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

    /// Makes a label; `None` if `text` is empty, longer than
    /// [`CAPACITY`](Self::CAPACITY), or has bytes other than printable ASCII
    /// without commas and spaces.
    ///
    /// ```
    /// use quarry_event::Truth;
    /// assert!(Truth::new("l.W.mu").is_some());
    /// assert!(Truth::new("").is_none());
    /// assert!(Truth::new("has space").is_none());
    /// ```
    pub fn new(text: &str) -> Option<Truth> {
        let b = text.as_bytes();
        if b.is_empty()
            || b.len() > Self::CAPACITY
            || !b.iter().all(|&c| c.is_ascii_graphic() && c != b',')
        {
            return None;
        }
        let mut bytes = [0u8; Self::CAPACITY];
        bytes[..b.len()].copy_from_slice(b);
        Some(Truth {
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
    /// sets it and selection keeps it, so outputs can name input jets after
    /// selection has removed and re-ordered some.
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
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct FatJet {
    /// Four-momentum \[GeV\]; its mass is the jet mass used in mass windows.
    pub p4: FourMomentum,
    /// Simulation truth label, if the input has one (e.g. `h.W`).
    pub truth: Option<Truth>,
    /// Position among this event's large-radius jets in the input (0-based).
    pub index: u32,
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
