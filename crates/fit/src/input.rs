//! The fit problem as data: measured objects, the neutrino start, composites
//! and constraints, held inline in fixed-capacity arrays.

use quarry_lorentz::FourMomentum;
use quarry_pdg::{TOP_MASS, TOP_WIDTH, W_MASS, W_WIDTH};

/// Most measured objects (jets + charged leptons) one fit takes.
pub const MAX_OBJECTS: usize = 10;
/// Most composites (sums of members) one fit takes.
pub const MAX_COMPOSITES: usize = 8;
/// Most constraints one fit takes.
pub const MAX_CONSTRAINTS: usize = 8;
/// Most [`Constraint::EqualMass`] constraints (each adds one free common mass).
pub const MAX_COMMON_MASSES: usize = 3;
/// Size of the fit's parameter vector: one scale factor per object, three
/// neutrino momentum components, one value per common mass. Unused entries
/// are padding the fit never moves.
pub const MAX_PARAMS: usize = MAX_OBJECTS + 3 + MAX_COMMON_MASSES;

/// What kind of measurement an object is; selects its resolution.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub enum MeasuredKind {
    /// A jet: energy resolution σ(E) from the calorimeter model, per |η| bin.
    Jet,
    /// An electron: pt resolution.
    Electron,
    /// A muon: pt resolution.
    Muon,
}

/// One measured object entering the fit.
///
/// Invariant (checked by [`FitInput::add_object`]): all components finite,
/// E > 0 and |p| > 0 (a direction exists), m² ≥ −1e-6·E² (no space-like
/// measured object beyond rounding), and `sigma`, if given, finite and > 0.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Measured {
    /// The measured four-momentum (GeV).
    pub p4: FourMomentum,
    /// The kind of measurement.
    pub kind: MeasuredKind,
    /// The measured quantity's σ (GeV) (E for a jet, pt for a lepton) if the
    /// input knows it (e.g. a per-object calibration); `None` evaluates the
    /// resolution model at the measured value.
    pub sigma: Option<f64>,
}

impl Measured {
    /// A measured jet.
    ///
    /// ```
    /// use quarry_fit::{Measured, MeasuredKind};
    /// use quarry_lorentz::FourMomentum;
    /// let j = Measured::jet(FourMomentum::from_pt_eta_phi_m(50.0, 0.1, 0.2, 5.0));
    /// assert_eq!(j.kind, MeasuredKind::Jet);
    /// ```
    pub fn jet(p4: FourMomentum) -> Self {
        Measured {
            p4,
            kind: MeasuredKind::Jet,
            sigma: None,
        }
    }
    /// The same object with an explicit σ (GeV) of its measured quantity.
    ///
    /// ```
    /// use quarry_fit::Measured;
    /// use quarry_lorentz::FourMomentum;
    /// let j = Measured::jet(FourMomentum::new(0.0, 30.0, 40.0, 50.0)).with_sigma(6.0);
    /// assert_eq!(j.sigma, Some(6.0));
    /// ```
    #[must_use]
    pub fn with_sigma(mut self, sigma: f64) -> Self {
        self.sigma = Some(sigma);
        self
    }
    /// A measured electron.
    pub fn electron(p4: FourMomentum) -> Self {
        Measured {
            p4,
            kind: MeasuredKind::Electron,
            sigma: None,
        }
    }
    /// A measured muon.
    pub fn muon(p4: FourMomentum) -> Self {
        Measured {
            p4,
            kind: MeasuredKind::Muon,
            sigma: None,
        }
    }
}

/// The neutrino: its starting momentum and the MET measurement that
/// constrains its transverse part.
///
/// Invariant (checked by [`FitInput::set_neutrino`]): all values finite and
/// the MET covariance `[xx, xy, yy]` positive definite.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct NeutrinoStart {
    /// Starting `[px, py, pz]` (GeV), e.g. MET and one W-mass pz solution.
    pub p3: [f64; 3],
    /// Measured MET `[x, y]` (GeV).
    pub met: [f64; 2],
    /// MET covariance `[xx, xy, yy]` (GeV²), e.g. from
    /// `quarry_resolution::ResolutionModel::met_covariance`.
    pub met_cov: [f64; 3],
}

/// A set of members whose four-momenta add up to a decaying particle:
/// measured objects (by index into [`FitInput::objects`]) and optionally the
/// neutrino. Stored as a bit mask, so it is `Copy` and 4 bytes.
///
/// ```
/// use quarry_fit::Composite;
/// let w = Composite::new().with_object(2).with_object(3);
/// assert!(w.contains_object(3) && !w.contains_neutrino());
/// ```
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Hash)]
pub struct Composite {
    objects: u16,
    neutrino: bool,
}

impl Composite {
    /// The empty composite (invalid until a member is added).
    pub const fn new() -> Self {
        Composite {
            objects: 0,
            neutrino: false,
        }
    }
    /// Adds object `index`. Indices ≥ [`MAX_OBJECTS`] are kept out of the
    /// mask and make [`FitInput::add_composite`] fail.
    #[must_use]
    pub const fn with_object(mut self, index: usize) -> Self {
        if index < MAX_OBJECTS {
            self.objects |= 1 << index;
        } else {
            self.objects |= 1 << 15; // marker bit: rejected on insertion
        }
        self
    }
    /// Adds the neutrino.
    #[must_use]
    pub const fn with_neutrino(mut self) -> Self {
        self.neutrino = true;
        self
    }
    /// From object indices, with or without the neutrino.
    ///
    /// ```
    /// use quarry_fit::Composite;
    /// let top = Composite::of(&[0, 1, 2], false);
    /// assert_eq!(top.object_mask(), 0b111);
    /// ```
    pub fn of(objects: &[usize], neutrino: bool) -> Self {
        let mut c = Composite::new();
        for &i in objects {
            c = c.with_object(i);
        }
        c.neutrino = neutrino;
        c
    }
    /// True if object `index` is a member.
    pub const fn contains_object(&self, index: usize) -> bool {
        index < MAX_OBJECTS && self.objects & (1 << index) != 0
    }
    /// True if the neutrino is a member.
    pub const fn contains_neutrino(&self) -> bool {
        self.neutrino
    }
    /// Bit `i` set ⇔ object `i` is a member.
    pub const fn object_mask(&self) -> u16 {
        self.objects
    }
}

/// A constraint on composite masses, from the hypothesis.
///
/// In soft mode each constraint adds Gaussian χ² terms of width `width`; in
/// hard mode the width is only used to scale the problem and the constraint
/// is met exactly (see the crate docs).
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Constraint {
    /// m(composite) = mass.
    Mass {
        /// Index into [`FitInput::composites`].
        composite: usize,
        /// Target mass (GeV).
        mass: f64,
        /// Gaussian width for soft mode (GeV), e.g. the particle's PDG width.
        width: f64,
    },
    /// m(a) = m(b) = M with M a free common mass fitted alongside.
    EqualMass {
        /// First composite.
        a: usize,
        /// Second composite.
        b: usize,
        /// Gaussian width of each m = M term in soft mode (GeV).
        width: f64,
    },
}

impl Constraint {
    /// m(composite) = W mass with the W width (both from `quarry_pdg`).
    ///
    /// ```
    /// let c = quarry_fit::Constraint::w_mass(0);
    /// assert!(matches!(c, quarry_fit::Constraint::Mass { mass, .. } if mass == quarry_pdg::W_MASS));
    /// ```
    pub fn w_mass(composite: usize) -> Self {
        Constraint::Mass {
            composite,
            mass: W_MASS,
            width: W_WIDTH,
        }
    }
    /// m(composite) = top mass with the top width (both from `quarry_pdg`).
    pub fn top_mass(composite: usize) -> Self {
        Constraint::Mass {
            composite,
            mass: TOP_MASS,
            width: TOP_WIDTH,
        }
    }
}

/// Why a [`FitInput`] was refused. `Copy`, so a [`crate::FitStatus`] can carry it.
#[derive(Clone, Copy, Debug, PartialEq, Eq, thiserror::Error)]
pub enum FitInputError {
    /// More than [`MAX_OBJECTS`], [`MAX_COMPOSITES`], [`MAX_CONSTRAINTS`] or
    /// [`MAX_COMMON_MASSES`] items.
    #[error("fit input: too many {0}")]
    Capacity(&'static str),
    /// A value is NaN or infinite.
    #[error("fit input: non-finite {0}")]
    NonFinite(&'static str),
    /// An object has E ≤ 0, no direction, is space-like, or has σ ≤ 0.
    #[error("fit input: object {0} has E <= 0, |p| = 0, m² < 0 or sigma <= 0")]
    UnphysicalObject(usize),
    /// The MET covariance is not positive definite.
    #[error("fit input: MET covariance is not positive definite")]
    MetCovariance,
    /// A composite is empty or names an object/neutrino not (yet) present.
    #[error("fit input: composite {0} is empty or refers to a missing member")]
    BadComposite(usize),
    /// A constraint refers to a missing composite, has a ≤ 0 mass or width,
    /// or equates a composite with itself.
    #[error("fit input: constraint {0} is malformed")]
    BadConstraint(usize),
    /// There is a neutrino but no constrained composite contains it, so its
    /// pz is undetermined; or there are no constraints at all.
    #[error("fit input: the constraints do not determine every free parameter")]
    Underconstrained,
}

/// One fit problem, built per assignment: the assigned objects, the
/// neutrino (if any), the composites and their constraints.
///
/// Everything is inline (`Copy`, no heap): building and fitting thousands of
/// inputs per second allocates nothing. Items are added with the checked
/// `add_*`/`set_*` methods, which maintain the invariants the fit relies on:
/// every member and index refers to something already added, and every
/// number is finite.
///
/// ```
/// use quarry_fit::{Composite, Constraint, FitInput, Measured};
/// use quarry_lorentz::FourMomentum;
/// let mut input = FitInput::new();
/// let q1 = input.add_object(Measured::jet(FourMomentum::from_pt_eta_phi_m(45.0, 0.2, 0.3, 0.0))).unwrap();
/// let q2 = input.add_object(Measured::jet(FourMomentum::from_pt_eta_phi_m(40.0, -0.4, 1.9, 0.0))).unwrap();
/// let w = input.add_composite(Composite::of(&[q1, q2], false)).unwrap();
/// input.add_constraint(Constraint::w_mass(w)).unwrap();
/// assert_eq!(input.ndf(), 1);
/// ```
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct FitInput {
    objects: [Measured; MAX_OBJECTS],
    n_objects: u8,
    neutrino: Option<NeutrinoStart>,
    composites: [Composite; MAX_COMPOSITES],
    n_composites: u8,
    constraints: [Constraint; MAX_CONSTRAINTS],
    n_constraints: u8,
}

impl Default for FitInput {
    fn default() -> Self {
        Self::new()
    }
}

impl FitInput {
    /// An empty input.
    pub const fn new() -> Self {
        FitInput {
            objects: [Measured {
                p4: FourMomentum::ZERO,
                kind: MeasuredKind::Jet,
                sigma: None,
            }; MAX_OBJECTS],
            n_objects: 0,
            neutrino: None,
            composites: [Composite::new(); MAX_COMPOSITES],
            n_composites: 0,
            constraints: [Constraint::EqualMass {
                a: 0,
                b: 0,
                width: 0.0,
            }; MAX_CONSTRAINTS],
            n_constraints: 0,
        }
    }

    /// Empties the input for reuse.
    pub fn clear(&mut self) {
        *self = Self::new();
    }

    /// Adds a measured object; returns its index.
    ///
    /// ```
    /// use quarry_fit::{FitInput, FitInputError, Measured};
    /// use quarry_lorentz::FourMomentum;
    /// let mut input = FitInput::new();
    /// let bad = Measured::jet(FourMomentum::new(f64::NAN, 0.0, 0.0, 10.0));
    /// assert_eq!(input.add_object(bad), Err(FitInputError::NonFinite("object four-momentum")));
    /// ```
    pub fn add_object(&mut self, object: Measured) -> Result<usize, FitInputError> {
        let i = self.n_objects as usize;
        if i >= MAX_OBJECTS {
            return Err(FitInputError::Capacity("objects"));
        }
        let p = object.p4;
        if !p.is_finite() {
            return Err(FitInputError::NonFinite("object four-momentum"));
        }
        if p.e() <= 0.0 || p.p2() <= 0.0 || p.m2() < -1e-6 * p.e() * p.e() {
            return Err(FitInputError::UnphysicalObject(i));
        }
        if let Some(sigma) = object.sigma {
            if !sigma.is_finite() {
                return Err(FitInputError::NonFinite("object sigma"));
            }
            if sigma <= 0.0 {
                return Err(FitInputError::UnphysicalObject(i));
            }
        }
        self.objects[i] = object;
        self.n_objects += 1;
        Ok(i)
    }

    /// Sets the neutrino start and MET measurement.
    pub fn set_neutrino(&mut self, neutrino: NeutrinoStart) -> Result<(), FitInputError> {
        let all = neutrino
            .p3
            .iter()
            .chain(&neutrino.met)
            .chain(&neutrino.met_cov);
        if !all.into_iter().all(|v| v.is_finite()) {
            return Err(FitInputError::NonFinite("neutrino start or MET"));
        }
        let [xx, xy, yy] = neutrino.met_cov;
        if !(xx > 0.0 && yy > 0.0 && xx * yy - xy * xy > 0.0) {
            return Err(FitInputError::MetCovariance);
        }
        self.neutrino = Some(neutrino);
        Ok(())
    }

    /// Adds a composite; returns its index. Its members must already be
    /// present.
    pub fn add_composite(&mut self, composite: Composite) -> Result<usize, FitInputError> {
        let i = self.n_composites as usize;
        if i >= MAX_COMPOSITES {
            return Err(FitInputError::Capacity("composites"));
        }
        let known = ((1u32 << self.n_objects) - 1) as u16;
        let empty = composite.objects == 0 && !composite.neutrino;
        if empty
            || composite.objects & !known != 0
            || (composite.neutrino && self.neutrino.is_none())
        {
            return Err(FitInputError::BadComposite(i));
        }
        self.composites[i] = composite;
        self.n_composites += 1;
        Ok(i)
    }

    /// Adds a constraint on composites already present.
    pub fn add_constraint(&mut self, constraint: Constraint) -> Result<(), FitInputError> {
        let i = self.n_constraints as usize;
        if i >= MAX_CONSTRAINTS {
            return Err(FitInputError::Capacity("constraints"));
        }
        let nc = self.n_composites as usize;
        let ok = match constraint {
            Constraint::Mass {
                composite,
                mass,
                width,
            } => {
                if !(mass.is_finite() && width.is_finite()) {
                    return Err(FitInputError::NonFinite("constraint mass or width"));
                }
                composite < nc && mass > 0.0 && width > 0.0
            }
            Constraint::EqualMass { a, b, width } => {
                if !width.is_finite() {
                    return Err(FitInputError::NonFinite("constraint width"));
                }
                if self.n_common() >= MAX_COMMON_MASSES {
                    return Err(FitInputError::Capacity("equal-mass constraints"));
                }
                a < nc && b < nc && a != b && width > 0.0
            }
        };
        if !ok {
            return Err(FitInputError::BadConstraint(i));
        }
        self.constraints[i] = constraint;
        self.n_constraints += 1;
        Ok(())
    }

    /// The measured objects, in insertion order.
    pub fn objects(&self) -> &[Measured] {
        &self.objects[..self.n_objects as usize]
    }
    /// The neutrino, if any.
    pub fn neutrino(&self) -> Option<&NeutrinoStart> {
        self.neutrino.as_ref()
    }
    /// The composites, in insertion order.
    pub fn composites(&self) -> &[Composite] {
        &self.composites[..self.n_composites as usize]
    }
    /// The constraints, in insertion order.
    pub fn constraints(&self) -> &[Constraint] {
        &self.constraints[..self.n_constraints as usize]
    }
    /// Number of [`Constraint::EqualMass`] constraints (= free common masses).
    pub fn n_common(&self) -> usize {
        self.constraints()
            .iter()
            .filter(|c| matches!(c, Constraint::EqualMass { .. }))
            .count()
    }

    /// Degrees of freedom of the fit: constraint equations minus unmeasured
    /// parameters. A `Mass` constraint is one equation; an `EqualMass` is two
    /// (m_a = M, m_b = M) less one for the free M; the neutrino's pz is
    /// unmeasured and costs one (its px, py are measured by MET). May be
    /// negative for an underconstrained input ([`validate`](Self::validate)
    /// refuses those).
    ///
    /// Example: the bW-pair hypothesis (two W masses, one equal-mass pair,
    /// one neutrino) has 2 + 1 − 1 = 2.
    pub fn ndf(&self) -> i32 {
        let equations = self.constraints().len() as i32; // EqualMass: 2 − 1 = 1
        equations - i32::from(self.neutrino.is_some())
    }

    /// Checks what the `add_*` methods cannot check one item at a time:
    /// there is at least one constraint, ndf ≥ 0, and a neutrino (if any)
    /// belongs to a constrained composite.
    pub fn validate(&self) -> Result<(), FitInputError> {
        if self.constraints().is_empty() || self.ndf() < 0 {
            return Err(FitInputError::Underconstrained);
        }
        if self.neutrino.is_some() {
            let constrained_with_nu = self.constraints().iter().any(|c| match *c {
                Constraint::Mass { composite, .. } => self.composites[composite].neutrino,
                Constraint::EqualMass { a, b, .. } => {
                    self.composites[a].neutrino || self.composites[b].neutrino
                }
            });
            if !constrained_with_nu {
                return Err(FitInputError::Underconstrained);
            }
        }
        Ok(())
    }
}
