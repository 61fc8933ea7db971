//! The checks every object passes before it enters an [`Event`], for both
//! layouts: the same limits and the same error categories as the CSV
//! reader (quarry-csv), so that an event is bad for the same reasons
//! whatever its file format.
//!
//! [`Event`]: quarry_event::Event

use quarry_csv::{format_f64, BadReason, ENERGY_ROUNDING_TOLERANCE, MAX_ABS_ETA, MAX_ABS_PHI};
use quarry_lorentz::FourMomentum;

use crate::map::NegativePolicy;

/// Which value of an object is at fault.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub(crate) enum Field {
    Pt,
    Eta,
    Phi,
    Mass,
    Energy,
    Btag,
    Charge,
    Truth,
    Weight,
    CovXx,
    /// The object as a whole (e.g. its four-momentum overflows).
    Whole,
}

/// What is wrong with one value.
#[derive(Clone, Debug, PartialEq)]
pub(crate) struct Fault {
    pub field: Field,
    pub value: Option<String>,
    pub reason: BadReason,
    pub message: String,
}

fn fault(field: Field, x: Option<f64>, reason: BadReason, message: &str) -> Fault {
    Fault {
        field,
        value: x.map(format_f64),
        reason,
        message: message.to_string(),
    }
}

/// A required finite number (`None` = null or absent).
pub(crate) fn finite(field: Field, x: Option<f64>, what: &str) -> Result<f64, Fault> {
    match x {
        None => Err(fault(
            field,
            None,
            BadReason::MissingValue,
            &format!("is null (expected {what})"),
        )),
        Some(v) if !v.is_finite() => Err(Fault {
            field,
            value: Some(v.to_string()),
            reason: BadReason::NotFinite,
            message: "is not a finite number".into(),
        }),
        Some(v) => Ok(v),
    }
}

/// The kinematic values of one object as read.
#[derive(Clone, Copy, Debug)]
pub(crate) struct Kinematics {
    pub pt: Option<f64>,
    pub eta: Option<f64>,
    pub phi: Option<f64>,
    /// `Ok(mass)` or `Err(energy)`: which one the input gives.
    pub mass_or_energy: Result<Option<f64>, Option<f64>>,
    pub negative_mass: NegativePolicy,
}

/// Checks `pt ≥ 0`, `|η| ≤ MAX_ABS_ETA`, `|φ| ≤ 2π`, `mass ≥ 0` (or the
/// map's policy), `E ≥ |p|` up to rounding, and that the four-momentum is
/// finite.
pub(crate) fn four_momentum(k: Kinematics) -> Result<FourMomentum, Fault> {
    let pt = finite(Field::Pt, k.pt, "pt in GeV")?;
    if pt < 0.0 {
        return Err(fault(
            Field::Pt,
            Some(pt),
            BadReason::OutOfRange,
            "is negative (expected pt ≥ 0)",
        ));
    }
    let eta = finite(Field::Eta, k.eta, "eta")?;
    if eta.abs() > MAX_ABS_ETA {
        return Err(fault(
            Field::Eta,
            Some(eta),
            BadReason::OutOfRange,
            &format!("is outside [-{MAX_ABS_ETA}, {MAX_ABS_ETA}]"),
        ));
    }
    let phi = phi_value(k.phi)?;
    let p4 = match k.mass_or_energy {
        Ok(m) => {
            let mut m = finite(Field::Mass, m, "mass in GeV")?;
            if m < 0.0 {
                if k.negative_mass == NegativePolicy::Zero {
                    m = 0.0;
                } else {
                    return Err(fault(
                        Field::Mass,
                        Some(m),
                        BadReason::OutOfRange,
                        "is negative (expected mass ≥ 0; a column map may read small negative masses as 0 with negative_mass = \"zero\")",
                    ));
                }
            }
            FourMomentum::from_pt_eta_phi_m(pt, eta, phi, m)
        }
        Err(e) => {
            let e = finite(Field::Energy, e, "energy in GeV")?;
            let p = pt * eta.cosh();
            let e = if e >= p {
                e
            } else if e >= p * (1.0 - ENERGY_ROUNDING_TOLERANCE) && e >= 0.0 {
                p
            } else {
                return Err(fault(
                    Field::Energy,
                    Some(e),
                    BadReason::OutOfRange,
                    &format!(
                        "is below the momentum |p| = {} GeV (energy must be ≥ |p|)",
                        format_f64(p)
                    ),
                ));
            };
            FourMomentum::from_pt_eta_phi_e(pt, eta, phi, e)
        }
    };
    if ![p4.px(), p4.py(), p4.pz(), p4.e()]
        .iter()
        .all(|x| x.is_finite())
    {
        return Err(fault(
            Field::Whole,
            None,
            BadReason::NotFinite,
            "four-momentum overflows: values too large",
        ));
    }
    Ok(p4)
}

/// A required azimuth within `[-2π, 2π]`.
pub(crate) fn phi_value(phi: Option<f64>) -> Result<f64, Fault> {
    let phi = finite(Field::Phi, phi, "phi in radians")?;
    if phi.abs() > MAX_ABS_PHI {
        return Err(fault(
            Field::Phi,
            Some(phi),
            BadReason::OutOfRange,
            "is outside [-2π, 2π] (phi is in radians)",
        ));
    }
    Ok(phi)
}

/// A b-tag score in [0, 1]; a negative one by the map's policy.
pub(crate) fn btag(x: Option<f64>, policy: NegativePolicy) -> Result<f64, Fault> {
    let b = finite(Field::Btag, x, "a b-tag score")?;
    if b < 0.0 && policy == NegativePolicy::Untagged {
        return Ok(0.0);
    }
    if !(0.0..=1.0).contains(&b) {
        return Err(fault(
            Field::Btag,
            Some(b),
            BadReason::OutOfRange,
            "is outside [0, 1] (expected a b-tag score or 0/1; a column map may read negative \"not computed\" scores as untagged with negative_btag = \"untagged\")",
        ));
    }
    Ok(b)
}

/// A charge of exactly −1 or +1.
pub(crate) fn charge(x: Option<f64>) -> Result<i8, Fault> {
    let c = finite(Field::Charge, x, "a charge of -1 or +1")?;
    if c == 1.0 {
        Ok(1)
    } else if c == -1.0 {
        Ok(-1)
    } else {
        Err(fault(
            Field::Charge,
            Some(c),
            BadReason::OutOfRange,
            "is not a charge of -1 or +1",
        ))
    }
}

/// A truth label.
pub(crate) fn truth(text: Option<&str>) -> Result<quarry_event::Truth, Fault> {
    let Some(t) = text else {
        return Err(fault(
            Field::Truth,
            None,
            BadReason::MissingValue,
            "is null (expected a truth label)",
        ));
    };
    quarry_event::Truth::new(t).map_err(|_| Fault {
        field: Field::Truth,
        value: Some(t.to_string()),
        reason: BadReason::BadTruth,
        message: "is not a truth label (1–23 printable ASCII characters, no commas or spaces)"
            .into(),
    })
}

/// A MET covariance that is positive semi-definite (up to rounding).
pub(crate) fn covariance(xx: f64, xy: f64, yy: f64) -> Result<[f64; 3], Fault> {
    if xx < 0.0 || yy < 0.0 || xy * xy > xx * yy * (1.0 + 1e-9) {
        return Err(Fault {
            field: Field::CovXx,
            value: None,
            reason: BadReason::BadCovariance,
            message: format!(
                "MET covariance [xx={}, xy={}, yy={}] is not positive semi-definite (need xx ≥ 0, yy ≥ 0, xy² ≤ xx·yy)",
                format_f64(xx),
                format_f64(xy),
                format_f64(yy)
            ),
        });
    }
    Ok([xx, xy, yy])
}

#[cfg(test)]
mod tests {
    use super::*;

    fn kin(pt: f64, eta: f64, phi: f64, m: f64) -> Kinematics {
        Kinematics {
            pt: Some(pt),
            eta: Some(eta),
            phi: Some(phi),
            mass_or_energy: Ok(Some(m)),
            negative_mass: NegativePolicy::Reject,
        }
    }

    #[test]
    fn limits_match_the_csv_reader() {
        assert!(four_momentum(kin(50.0, 0.1, 0.2, 5.0)).is_ok());
        assert_eq!(
            four_momentum(kin(-1.0, 0.1, 0.2, 5.0)).unwrap_err().field,
            Field::Pt
        );
        assert_eq!(
            four_momentum(kin(1.0, 21.0, 0.2, 5.0)).unwrap_err().field,
            Field::Eta
        );
        assert_eq!(
            four_momentum(kin(1.0, 0.0, 7.0, 5.0)).unwrap_err().field,
            Field::Phi
        );
        let neg = four_momentum(kin(1.0, 0.0, 0.0, -0.01)).unwrap_err();
        assert_eq!(
            (neg.field, neg.reason),
            (Field::Mass, BadReason::OutOfRange)
        );
        let zeroed = four_momentum(Kinematics {
            negative_mass: NegativePolicy::Zero,
            ..kin(10.0, 0.0, 0.0, -0.01)
        })
        .unwrap();
        assert_eq!(zeroed.m(), 0.0);
        let nan = four_momentum(kin(f64::NAN, 0.0, 0.0, 1.0)).unwrap_err();
        assert_eq!(nan.reason, BadReason::NotFinite);
        let huge = four_momentum(kin(1e300, 20.0, 0.0, 1.0)).unwrap_err();
        assert_eq!(huge.field, Field::Whole);
        assert_eq!(btag(Some(-10.0), NegativePolicy::Untagged).unwrap(), 0.0);
        assert!(btag(Some(-10.0), NegativePolicy::Reject).is_err());
        assert!(btag(Some(1.5), NegativePolicy::Untagged).is_err());
        assert_eq!(charge(Some(-1.0)).unwrap(), -1);
        assert!(charge(Some(2.0)).is_err());
        assert!(covariance(1.0, 2.0, 1.0).is_err());
        assert!(covariance(4.0, 1.0, 1.0).is_ok());
    }
}
