//! The text forms of a [`Reconstruction`] written to the output: the
//! assignment (`role=object;…`), the composite masses and the neutrino
//! solution's name.

use quarry_assign::ObjectRef as AssignRef;
use quarry_event::Flavour;
use quarry_neutrino::SolutionCase;

use super::Reconstruction;

impl Reconstruction {
    /// The best assignment as `role=object;...`: jets by their input index
    /// (`3`), leptons as `e0`/`mu1` (input index among that flavour),
    /// large-radius jets as `fj0`, the neutrino as `nu0`/`nu1` (root with
    /// the smaller/larger |pz|), unfilled roles as `-`. Empty without an
    /// assignment.
    pub fn assignment_text(&self) -> String {
        let Some(best) = self.best() else {
            return String::new();
        };
        let mut s = String::with_capacity(64);
        for (role, obj) in self.hypothesis.roles().iter().zip(best.objects()) {
            if !s.is_empty() {
                s.push(';');
            }
            s.push_str(&role.name);
            s.push('=');
            match *obj {
                AssignRef::Jet { index, .. } => s.push_str(&index.to_string()),
                AssignRef::Lepton { flavour, index, .. } => {
                    s.push_str(match flavour {
                        Flavour::Electron => "e",
                        Flavour::Muon => "mu",
                    });
                    s.push_str(&index.to_string());
                }
                AssignRef::LargeJet { index, .. } => {
                    s.push_str("fj");
                    s.push_str(&index.to_string());
                }
                AssignRef::Neutrino { root } => {
                    s.push_str("nu");
                    s.push_str(&root.to_string());
                }
                AssignRef::Empty => s.push('-'),
            }
        }
        s
    }

    /// Every composite mass of the best assignment as `name=mass;...` in
    /// declaration order, masses in GeV with 3 decimals. Empty without an
    /// assignment.
    pub fn masses_text(&self) -> String {
        let Some(best) = self.best() else {
            return String::new();
        };
        let mut s = String::with_capacity(64);
        for (c, comp) in self.hypothesis.composites().iter().enumerate() {
            if !s.is_empty() {
                s.push(';');
            }
            let m = best.composite_mass(c);
            s.push_str(&comp.name);
            s.push('=');
            if m.is_finite() {
                s.push_str(&format!("{m:.3}"));
            }
        }
        s
    }

    /// Which neutrino solution the best assignment used: `real_smaller`,
    /// `real_larger` (the root with the smaller/larger |pz| with the measured
    /// MET), `complex_real_part` (negative discriminant, imaginary part
    /// dropped) or `met_adjusted` (negative discriminant, MET moved by the
    /// smallest amount). `None` without a neutrino.
    pub fn neutrino_solution(&self) -> Option<&'static str> {
        let best = self.best()?;
        let nu = best.neutrino()?;
        let root = best.objects().iter().find_map(|o| match o {
            AssignRef::Neutrino { root } => Some(*root),
            _ => None,
        });
        Some(match nu.case {
            SolutionCase::Real if root == Some(1) => "real_larger",
            SolutionCase::Real => "real_smaller",
            SolutionCase::DroppedImaginary => "complex_real_part",
            SolutionCase::AdjustedMet => "met_adjusted",
        })
    }
}
