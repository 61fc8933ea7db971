//! The parton level: production of the pair, decay chains, radiation.

use quarry_event::Truth;
use quarry_lorentz::FourMomentum;
use quarry_pdg::{
    branching as br, BOTTOM_MASS, ELECTRON_MASS, HIGGS_MASS, HIGGS_WIDTH, MUON_MASS, TOP_MASS,
    TOP_WIDTH, W_MASS, W_WIDTH, Z_MASS, Z_WIDTH,
};
use rand::Rng;
use rand_distr::{Distribution, Gamma, Poisson, StandardNormal};
use rand_pcg::Pcg64Mcg;

use crate::config::{Daughter, DecayMode, Partner, Process, ToyConfig};
use crate::kinematics::{two_body_decay, MassWindow};

/// What a parton-record entry is.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub enum PartonKind {
    /// The pair-produced heavy quark (or antiquark).
    HeavyQuark,
    /// A top quark (the pair-produced one in top-pair events, or a daughter).
    Top,
    /// A W boson.
    W,
    /// A Z boson.
    Z,
    /// A Higgs boson.
    Higgs,
    /// A b quark.
    Bottom,
    /// A light quark (u, d, s, c), massless in the toy.
    LightQuark,
    /// A gluon (from t* → tg, the H → gg stand-in, or radiation).
    Gluon,
    /// An electron or positron.
    Electron,
    /// A muon.
    Muon,
    /// A neutrino.
    Neutrino,
}

impl PartonKind {
    /// True for partons that become jets (b, light quarks, gluons).
    ///
    /// ```
    /// assert!(quarry_toy::PartonKind::Gluon.is_coloured_final());
    /// assert!(!quarry_toy::PartonKind::W.is_coloured_final());
    /// ```
    pub fn is_coloured_final(self) -> bool {
        matches!(
            self,
            PartonKind::Bottom | PartonKind::LightQuark | PartonKind::Gluon
        )
    }

    /// True for entries that decay further (heavy quark, top, W, Z, H).
    pub fn decays(self) -> bool {
        matches!(
            self,
            PartonKind::HeavyQuark
                | PartonKind::Top
                | PartonKind::W
                | PartonKind::Z
                | PartonKind::Higgs
        )
    }
}

/// One entry of the parton record.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Parton {
    /// What it is.
    pub kind: PartonKind,
    /// Four-momentum in the lab (GeV).
    pub p4: FourMomentum,
    /// Generated mass (GeV) (Breit–Wigner for unstable particles, the PDG
    /// mass otherwise); equals `p4.m()` up to rounding.
    pub mass: f64,
    /// Index of the parent entry, `None` for the two pair-produced quarks
    /// and for radiation.
    pub parent: Option<usize>,
    /// Electric charge sign for W bosons and charged leptons (±1), 0 for
    /// everything else.
    pub charge: i8,
    /// Truth label (see the crate docs for the vocabulary). Intermediate
    /// particles carry their path too: `h` (the heavy quark), `h.t`, `h.W`,
    /// `h.t.W`, ...
    pub truth: Truth,
}

/// Everything the generator knew about one event before the detector.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct PartonRecord {
    /// All partons: entries 0 and 1 are the pair-produced quark and
    /// antiquark, then their decay chains, then radiation. Parents always
    /// come before their children.
    pub partons: Vec<Parton>,
    /// Decay mode of the quark (entry 0) and of the antiquark (entry 1).
    /// Top pairs report [`DecayMode::BottomW`] twice.
    pub modes: [Option<DecayMode>; 2],
    /// For each jet of the event (same order): the unsmeared four-momentum
    /// it was made from (the sum of merged partons).
    pub jet_sources: Vec<FourMomentum>,
    /// For each large-radius jet of the event (same order): the unsmeared
    /// four-momentum of its W, Z, H or top.
    pub fat_jet_sources: Vec<FourMomentum>,
}

impl PartonRecord {
    /// Indices of the direct children of entry `i`.
    ///
    /// ```
    /// use quarry_toy::{Generator, ToyConfig};
    /// let g = Generator::new(ToyConfig::top_pair(), 1).unwrap();
    /// let (_, rec) = g.generate_with_partons(0);
    /// assert_eq!(rec.children(0).count(), 2); // t → b W
    /// ```
    pub fn children(&self, i: usize) -> impl Iterator<Item = usize> + '_ {
        self.partons
            .iter()
            .enumerate()
            .filter(move |(_, p)| p.parent == Some(i))
            .map(|(j, _)| j)
    }

    /// Entries of one kind.
    pub fn of_kind(&self, kind: PartonKind) -> impl Iterator<Item = &Parton> + '_ {
        self.partons.iter().filter(move |p| p.kind == kind)
    }
}

/// How a W, Z or H decays.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
enum Channel {
    LightQuarks,
    BottomPair,
    GluonPair,
    Electron,
    Muon,
    Neutrinos,
}

impl Channel {
    fn has_charged_lepton(self) -> bool {
        matches!(self, Channel::Electron | Channel::Muon)
    }
}

/// One side's discrete choices, made before any kinematics so that the
/// side label (`l`/`h`/`a`/`b`) is known when labels are written.
#[derive(Clone, Copy, Debug)]
struct SidePlan {
    mode: DecayMode,
    /// Decay of the top's W, if the quark daughter is a top.
    top_w: Option<Channel>,
    /// Decay of the W, Z or H daughter (None for a gluon).
    boson: Option<Channel>,
}

impl SidePlan {
    fn leptonic_w(&self) -> bool {
        let (_, b) = self.mode.daughters();
        self.top_w.is_some_and(Channel::has_charged_lepton)
            || (b == Daughter::W && self.boson.is_some_and(Channel::has_charged_lepton))
    }
}

/// Cumulative probabilities of the W, Z and H channels (τ channels
/// dropped, see the crate docs).
#[derive(Clone, Copy, Debug)]
struct ChannelTables {
    w: [(f64, Channel); 3],
    z: [(f64, Channel); 5],
    h: [(f64, Channel); 2],
}

fn cumulative<const N: usize>(items: [(f64, Channel); N]) -> [(f64, Channel); N] {
    let total: f64 = items.iter().map(|x| x.0).sum();
    let mut acc = 0.0;
    let mut out = items;
    for (slot, (p, c)) in out.iter_mut().zip(items) {
        acc += p / total;
        *slot = (acc, c);
    }
    // Guard the last bin against rounding.
    out[N - 1].0 = f64::INFINITY;
    out
}

impl ChannelTables {
    fn new() -> ChannelTables {
        ChannelTables {
            w: cumulative([
                (br::W_TO_E_NU, Channel::Electron),
                (br::W_TO_MU_NU, Channel::Muon),
                (br::W_TO_HADRONS, Channel::LightQuarks),
            ]),
            z: cumulative([
                (br::Z_TO_EE, Channel::Electron),
                (br::Z_TO_MUMU, Channel::Muon),
                (br::Z_TO_INVISIBLE, Channel::Neutrinos),
                (br::Z_TO_BB, Channel::BottomPair),
                (br::Z_TO_HADRONS - br::Z_TO_BB, Channel::LightQuarks),
            ]),
            h: cumulative([
                (br::H_TO_BB, Channel::BottomPair),
                (1.0 - br::H_TO_BB, Channel::GluonPair),
            ]),
        }
    }
}

fn pick<const N: usize>(u: f64, table: &[(f64, Channel); N]) -> Channel {
    table
        .iter()
        .find(|(c, _)| u < *c)
        .map_or(table[N - 1].1, |x| x.1)
}

/// The W, Z and H channel probabilities the generator uses, renormalised
/// after dropping τ channels: `(W→eν, W→μν, W→qq')`,
/// `(Z→ee, Z→μμ, Z→νν, Z→bb̄, Z→light qq̄)`, `(H→bb̄, H→gg stand-in)`.
/// Exposed so tests can compare observed fractions with them.
///
/// ```
/// let (w, _, _) = quarry_toy::channel_probabilities();
/// assert!((w.iter().sum::<f64>() - 1.0).abs() < 1e-12);
/// ```
pub fn channel_probabilities() -> ([f64; 3], [f64; 5], [f64; 2]) {
    fn diffs<const N: usize>(t: &[(f64, Channel); N]) -> [f64; N] {
        let mut out = [0.0; N];
        let mut prev = 0.0;
        for (i, (c, _)) in t.iter().enumerate() {
            let c = if c.is_finite() { *c } else { 1.0 };
            out[i] = c - prev;
            prev = c;
        }
        out
    }
    let t = ChannelTables::new();
    (diffs(&t.w), diffs(&t.z), diffs(&t.h))
}

/// Precomputed, validated inputs of the parton-level generator.
#[derive(Clone, Debug)]
pub(crate) struct PartonModel {
    partner: Option<Partner>,
    pair_kind: PartonKind,
    modes: Vec<(f64, DecayMode)>,
    quark: MassWindow,
    top: MassWindow,
    w: MassWindow,
    z: MassWindow,
    higgs: MassWindow,
    channels: ChannelTables,
    delta: Gamma<f64>,
    n_radiation: Option<Poisson<f64>>,
    sqrt_s: f64,
    rapidity_sigma: f64,
    rad_pt_min: f64,
    rad_pt_max: f64,
    rad_eta_sigma: f64,
}

/// Margin (GeV) kept between a parent's lowest mass and its daughters'.
const MASS_MARGIN: f64 = 1.0;

impl PartonModel {
    /// Builds the model; `cfg` must be validated.
    pub(crate) fn new(cfg: &ToyConfig) -> PartonModel {
        let w = MassWindow::new(W_MASS, W_WIDTH, MASS_MARGIN);
        let z = MassWindow::new(Z_MASS, Z_WIDTH, 2.0 * BOTTOM_MASS + MASS_MARGIN);
        let higgs = MassWindow::new(HIGGS_MASS, HIGGS_WIDTH, 2.0 * BOTTOM_MASS + MASS_MARGIN);
        let top = MassWindow::new(TOP_MASS, TOP_WIDTH, BOTTOM_MASS + w.lo + MASS_MARGIN);
        let lowest = |d: Daughter| match d {
            Daughter::Bottom => BOTTOM_MASS,
            Daughter::Top => top.lo,
            Daughter::W => w.lo,
            Daughter::Z => z.lo,
            Daughter::Higgs => higgs.lo,
            Daughter::Gluon => 0.0,
        };
        let (partner, pair_kind, modes, quark) = match &cfg.process {
            Process::TopPair => (
                None,
                PartonKind::Top,
                vec![(f64::INFINITY, DecayMode::BottomW)],
                top,
            ),
            Process::HeavyPair(q) => {
                let mut acc = 0.0;
                let mut modes = Vec::new();
                let mut floor: f64 = 0.0;
                for (mode, f) in q.branching.nonzero() {
                    acc += f;
                    modes.push((acc, mode));
                    let (a, b) = mode.daughters();
                    floor = floor.max(lowest(a) + lowest(b) + MASS_MARGIN);
                }
                if let Some(last) = modes.last_mut() {
                    last.0 = f64::INFINITY;
                }
                let window = MassWindow::new(q.mass, q.width_fraction * q.mass, floor);
                (Some(q.partner), PartonKind::HeavyQuark, modes, window)
            }
        };
        let scale = cfg.production.mass_scale * quark.mass;
        PartonModel {
            partner,
            pair_kind,
            modes,
            quark,
            top,
            w,
            z,
            higgs,
            channels: ChannelTables::new(),
            delta: Gamma::new(1.5, scale).expect("validated: scale > 0"),
            n_radiation: (cfg.radiation.mean > 0.0)
                .then(|| Poisson::new(cfg.radiation.mean).expect("validated: 0 < mean < 100")),
            sqrt_s: cfg.sqrt_s,
            rapidity_sigma: cfg.production.rapidity_sigma,
            rad_pt_min: cfg.radiation.pt_min,
            rad_pt_max: cfg.radiation.pt_max,
            rad_eta_sigma: cfg.radiation.eta_sigma,
        }
    }

    fn plan_side(&self, rng: &mut Pcg64Mcg) -> SidePlan {
        let u: f64 = rng.random();
        let mode = self
            .modes
            .iter()
            .find(|(c, _)| u < *c)
            .map_or(self.modes[self.modes.len() - 1].1, |x| x.1);
        let (a, b) = mode.daughters();
        let top_w = (a == Daughter::Top).then(|| pick(rng.random(), &self.channels.w));
        let boson = match b {
            Daughter::W => Some(pick(rng.random(), &self.channels.w)),
            Daughter::Z => Some(pick(rng.random(), &self.channels.z)),
            Daughter::Higgs => Some(pick(rng.random(), &self.channels.h)),
            _ => None,
        };
        SidePlan { mode, top_w, boson }
    }

    /// Fills `rec.partons` and `rec.modes` for one event.
    pub(crate) fn generate(&self, rng: &mut Pcg64Mcg, rec: &mut PartonRecord) {
        rec.partons.clear();
        let plans = [self.plan_side(rng), self.plan_side(rng)];
        rec.modes = [Some(plans[0].mode), Some(plans[1].mode)];
        let sides: [&'static str; 2] = match (plans[0].leptonic_w(), plans[1].leptonic_w()) {
            (true, false) => ["l", "h"],
            (false, true) => ["h", "l"],
            _ => ["a", "b"],
        };

        // Radiation first: the pair system recoils against it.
        let mut radiation = [FourMomentum::ZERO; 12];
        let n_rad = self
            .n_radiation
            .as_ref()
            .map_or(0, |d| (d.sample(rng) as usize).min(radiation.len()));
        let (mut sum_px, mut sum_py) = (0.0, 0.0);
        for slot in radiation.iter_mut().take(n_rad) {
            let u: f64 = rng.random();
            // dN/dpt ∝ pt⁻³ above pt_min, cut at pt_max.
            let pt = (self.rad_pt_min / (1.0 - u).sqrt()).min(self.rad_pt_max);
            let eta = self.rad_eta_sigma * rng.sample::<f64, _>(StandardNormal);
            let phi = std::f64::consts::TAU * rng.random::<f64>();
            *slot = FourMomentum::from_pt_eta_phi_m(pt, eta, phi, 0.0);
            sum_px += slot.px();
            sum_py += slot.py();
        }

        // The pair system.
        let m1 = self.quark.draw(rng.random(), f64::INFINITY);
        let m2 = self.quark.draw(rng.random(), f64::INFINITY);
        let (px, py) = (-sum_px, -sum_py);
        let pt2 = px * px + py * py;
        let mut system = FourMomentum::ZERO;
        let mut m_pair = 0.0;
        for attempt in 0..64 {
            // Bounded retries for the (rare) draws beyond the collider energy;
            // the last attempt sits at threshold and central rapidity.
            let last = attempt == 63;
            let delta = if last { 0.0 } else { self.delta.sample(rng) };
            m_pair = m1 + m2 + delta;
            let mt = (m_pair * m_pair + pt2).sqrt();
            let y = if last {
                0.0
            } else {
                self.rapidity_sigma * rng.sample::<f64, _>(StandardNormal)
            };
            if mt * y.abs().exp() < self.sqrt_s || last {
                system = FourMomentum::new(px, py, mt * y.sinh(), mt * y.cosh());
                break;
            }
        }
        let (cos_t, phi) = iso(rng);
        let (q1, q2) = two_body_decay(&system, m_pair, m1, m2, cos_t, phi)
            .expect("pair mass exceeds the two quark masses");
        let sign = [1i8, -1i8];
        for (i, (p4, m)) in [(q1, m1), (q2, m2)].into_iter().enumerate() {
            rec.partons.push(Parton {
                kind: self.pair_kind,
                p4,
                mass: m,
                parent: None,
                charge: 0,
                truth: label(sides[i], &[], None),
            });
        }
        for i in 0..2 {
            self.decay_side(rng, rec, i, plans[i], sides[i], sign[i]);
        }
        for p4 in radiation.iter().take(n_rad) {
            rec.partons.push(Parton {
                kind: PartonKind::Gluon,
                p4: *p4,
                mass: 0.0,
                parent: None,
                charge: 0,
                truth: Truth::new("isr").expect("valid label"),
            });
        }
    }

    /// Decays pair entry `idx` (a heavy quark or a top) by `plan`.
    /// `sign` is +1 for the quark, −1 for the antiquark.
    fn decay_side(
        &self,
        rng: &mut Pcg64Mcg,
        rec: &mut PartonRecord,
        idx: usize,
        plan: SidePlan,
        side: &'static str,
        sign: i8,
    ) {
        let parent = rec.partons[idx];
        let (a, b) = plan.mode.daughters();
        let window = |d: Daughter| match d {
            Daughter::Bottom => MassWindow::fixed(BOTTOM_MASS),
            Daughter::Top => self.top,
            Daughter::W => self.w,
            Daughter::Z => self.z,
            Daughter::Higgs => self.higgs,
            Daughter::Gluon => MassWindow::fixed(0.0),
        };
        let (wa, wb) = (window(a), window(b));
        let ma = wa.draw(rng.random(), parent.mass - wb.lo - 1e-6);
        let mb = wb.draw(rng.random(), parent.mass - ma - 1e-6);
        // The W charge: the top's W has the sign of the (anti)quark; a direct
        // W from the heavy quark has the partner's sign (top pairs: t → bW⁺).
        let direct_w_sign = sign * self.partner.map_or(1, Partner::w_sign);
        let (ia, ib) = self.push_pair(
            rng,
            rec,
            idx,
            (daughter_kind(a), ma, 0),
            (
                daughter_kind(b),
                mb,
                if b == Daughter::W { direct_w_sign } else { 0 },
            ),
            (side, &[], a),
            (side, &[], b),
        );
        if a == Daughter::Top {
            self.decay_top(
                rng,
                rec,
                ia,
                side,
                sign,
                plan.top_w.unwrap_or(Channel::LightQuarks),
            );
        }
        if let Some(channel) = plan.boson {
            self.decay_boson(rng, rec, ib, side, &[], b, channel);
        }
    }

    fn decay_top(
        &self,
        rng: &mut Pcg64Mcg,
        rec: &mut PartonRecord,
        idx: usize,
        side: &'static str,
        sign: i8,
        channel: Channel,
    ) {
        let m_top = rec.partons[idx].mass;
        let m_w = self.w.draw(rng.random(), m_top - BOTTOM_MASS - 1e-6);
        let (_, iw) = self.push_pair(
            rng,
            rec,
            idx,
            (PartonKind::Bottom, BOTTOM_MASS, 0),
            (PartonKind::W, m_w, sign),
            (side, &["t"], Daughter::Bottom),
            (side, &["t"], Daughter::W),
        );
        self.decay_boson(rng, rec, iw, side, &["t"], Daughter::W, channel);
    }

    #[allow(clippy::too_many_arguments)]
    fn decay_boson(
        &self,
        rng: &mut Pcg64Mcg,
        rec: &mut PartonRecord,
        idx: usize,
        side: &'static str,
        path: &[&'static str],
        boson: Daughter,
        channel: Channel,
    ) {
        let charge = rec.partons[idx].charge;
        let seg = match boson {
            Daughter::W => "W",
            Daughter::Z => "Z",
            _ => "H",
        };
        let mut full: [&'static str; 2] = ["", ""];
        full[..path.len()].copy_from_slice(path);
        full[path.len()] = seg;
        let path = &full[..=path.len()];
        let p = rec.partons[idx];
        let (k1, k2, m, leaf1, leaf2, c1, c2) = match channel {
            Channel::LightQuarks => (
                PartonKind::LightQuark,
                PartonKind::LightQuark,
                0.0,
                "q",
                "q",
                0,
                0,
            ),
            Channel::BottomPair => (
                PartonKind::Bottom,
                PartonKind::Bottom,
                BOTTOM_MASS,
                "b",
                "b",
                0,
                0,
            ),
            Channel::GluonPair => (PartonKind::Gluon, PartonKind::Gluon, 0.0, "g", "g", 0, 0),
            Channel::Neutrinos => (
                PartonKind::Neutrino,
                PartonKind::Neutrino,
                0.0,
                "nu",
                "nu",
                0,
                0,
            ),
            Channel::Electron | Channel::Muon => {
                let (kind, m, leaf) = if channel == Channel::Electron {
                    (PartonKind::Electron, ELECTRON_MASS, "e")
                } else {
                    (PartonKind::Muon, MUON_MASS, "mu")
                };
                if boson == Daughter::W {
                    // W± → ℓ± ν: the lepton carries the W's charge.
                    (kind, PartonKind::Neutrino, m, leaf, "nu", charge, 0)
                } else {
                    (kind, kind, m, leaf, leaf, 1, -1)
                }
            }
        };
        let m2 = if k2 == PartonKind::Neutrino { 0.0 } else { m };
        let (cos_t, phi) = iso(rng);
        let (d1, d2) = two_body_decay(&p.p4, p.mass, m, m2, cos_t, phi)
            .expect("boson mass window lies above its daughters");
        for (kind, p4, mass, leaf, c) in [(k1, d1, m, leaf1, c1), (k2, d2, m2, leaf2, c2)] {
            rec.partons.push(Parton {
                kind,
                p4,
                mass,
                parent: Some(idx),
                charge: c,
                truth: label(side, path, Some(leaf)),
            });
        }
    }

    /// Decays entry `idx` isotropically into two daughters and records them
    /// (with labels side.path.daughter); returns their indices.
    #[allow(clippy::too_many_arguments)]
    fn push_pair(
        &self,
        rng: &mut Pcg64Mcg,
        rec: &mut PartonRecord,
        idx: usize,
        (ka, ma, ca): (PartonKind, f64, i8),
        (kb, mb, cb): (PartonKind, f64, i8),
        (side_a, path_a, da): (&'static str, &[&'static str], Daughter),
        (side_b, path_b, db): (&'static str, &[&'static str], Daughter),
    ) -> (usize, usize) {
        let p = rec.partons[idx];
        let (cos_t, phi) = iso(rng);
        let (pa, pb) = two_body_decay(&p.p4, p.mass, ma, mb, cos_t, phi)
            .expect("mass windows keep the decay open");
        let ia = rec.partons.len();
        rec.partons.push(Parton {
            kind: ka,
            p4: pa,
            mass: ma,
            parent: Some(idx),
            charge: ca,
            truth: label(side_a, path_a, Some(segment(da))),
        });
        rec.partons.push(Parton {
            kind: kb,
            p4: pb,
            mass: mb,
            parent: Some(idx),
            charge: cb,
            truth: label(side_b, path_b, Some(segment(db))),
        });
        (ia, ia + 1)
    }
}

fn daughter_kind(d: Daughter) -> PartonKind {
    match d {
        Daughter::Bottom => PartonKind::Bottom,
        Daughter::Top => PartonKind::Top,
        Daughter::W => PartonKind::W,
        Daughter::Z => PartonKind::Z,
        Daughter::Higgs => PartonKind::Higgs,
        Daughter::Gluon => PartonKind::Gluon,
    }
}

fn segment(d: Daughter) -> &'static str {
    match d {
        Daughter::Bottom => "b",
        Daughter::Top => "t",
        Daughter::W => "W",
        Daughter::Z => "Z",
        Daughter::Higgs => "H",
        Daughter::Gluon => "g",
    }
}

/// An isotropic direction: (cos θ, φ).
#[inline]
fn iso(rng: &mut Pcg64Mcg) -> (f64, f64) {
    let c = 2.0 * rng.random::<f64>() - 1.0;
    (c, std::f64::consts::TAU * rng.random::<f64>())
}

/// Builds `side[.path…][.leaf]` on the stack.
fn label(side: &str, path: &[&str], leaf: Option<&str>) -> Truth {
    let mut buf = [0u8; Truth::CAPACITY];
    let mut n = 0;
    let mut put = |s: &str, dot: bool| {
        if dot {
            buf[n] = b'.';
            n += 1;
        }
        buf[n..n + s.len()].copy_from_slice(s.as_bytes());
        n += s.len();
    };
    put(side, false);
    for s in path {
        put(s, true);
    }
    if let Some(l) = leaf {
        put(l, true);
    }
    let text = std::str::from_utf8(&buf[..n]).expect("ASCII segments");
    Truth::new(text).expect("labels are short ASCII paths")
}
