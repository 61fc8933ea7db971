//! Hypothesis files: every documented validation error, and the TOML round
//! trip of every preset.

use quarry_assign::{presets, ConstraintKind, Hypothesis, HypothesisError, Width};

/// A small valid hypothesis; each bad case below edits it.
const BASE: &str = r#"
name = "base"
leading_jets = 5

[[role]]
name = "b"
kind = "jet"
tag = "b"
truth = ["h.b"]

[[role]]
name = "q1"
kind = "jet"
tag = "light"

[[role]]
name = "q2"
kind = "jet"
tag = "light"

[[role]]
name = "lep"
kind = "lepton"

[[role]]
name = "nu"
kind = "neutrino"
from = "lep"

[[composite]]
name = "W"
parts = ["q1", "q2"]

[[composite]]
name = "top"
parts = ["W", "b"]

[[composite]]
name = "Wl"
parts = ["lep", "nu"]

[[constraint]]
mass = "W"
target = "W"
width = 10.0

[[constraint]]
equal = ["top", "Wl"]
relative_width = 0.1

[[interchangeable]]
roles = ["q1", "q2"]
"#;

fn err(text: &str) -> HypothesisError {
    match Hypothesis::from_toml(text) {
        Ok(_) => panic!("accepted:\n{text}"),
        Err(e) => {
            // Every message is non-empty and readable.
            assert!(!e.to_string().is_empty());
            e
        }
    }
}

fn edit(from: &str, to: &str) -> String {
    assert!(BASE.contains(from), "{from}");
    BASE.replacen(from, to, 1)
}

#[test]
fn base_is_valid() {
    let h = Hypothesis::from_toml(BASE).unwrap();
    assert_eq!(h.roles().len(), 5);
    assert_eq!(h.min_jets(), 3);
    assert_eq!(h.interchangeable(), &[vec![1, 2]]);
    assert!(matches!(h.constraints()[1].width, Width::Relative(r) if r == 0.1));
    // Particle names resolve through quarry-pdg.
    assert!(
        matches!(h.constraints()[0].kind, ConstraintKind::Mass { target, .. } if target == quarry_pdg::W_MASS)
    );
    // A plain integer target is GeV.
    let h = Hypothesis::from_toml(&edit("target = \"W\"", "target = 80")).unwrap();
    assert!(
        matches!(h.constraints()[0].kind, ConstraintKind::Mass { target, .. } if target == 80.0)
    );
}

#[test]
fn parse_errors() {
    assert!(matches!(
        err(&edit("leading_jets = 5", "leading_jets = \"five\"")),
        HypothesisError::Parse(_)
    ));
    assert!(matches!(
        err(&edit("tag = \"b\"", "tag = \"c\"")),
        HypothesisError::Parse(_)
    ));
    // Unknown keys are rejected rather than ignored.
    let e = err(&edit("tag = \"b\"", "tag = \"b\"\ncolour = \"red\""));
    assert!(
        matches!(&e, HypothesisError::Parse(m) if m.contains("colour")),
        "{e}"
    );
    assert!(matches!(
        err("name = \"x\"\nleading_jets = 2\n"),
        HypothesisError::Empty(_)
    ));
}

#[test]
fn name_errors() {
    assert!(
        matches!(err(&edit("name = \"q2\"", "name = \"q1\"")), HypothesisError::DuplicateName(n) if n == "q1")
    );
    assert!(matches!(
        err(&edit("name = \"top\"", "name = \"W\"")),
        HypothesisError::DuplicateName(_)
    ));
    assert!(matches!(
        err(&edit("parts = [\"W\", \"b\"]", "parts = [\"W\", \"bb\"]")),
        HypothesisError::UnknownName { name, .. } if name == "bb"
    ));
    // A neutrino must come from a lepton role.
    assert!(matches!(
        err(&edit("from = \"lep\"", "from = \"b\"")),
        HypothesisError::UnknownName {
            expected: "a lepton role",
            ..
        }
    ));
    assert!(matches!(
        err(&edit("mass = \"W\"", "mass = \"q1\"")),
        HypothesisError::UnknownName { .. }
    ));
    assert!(matches!(
        err(&edit(
            "roles = [\"q1\", \"q2\"]",
            "roles = [\"q1\", \"q3\"]"
        )),
        HypothesisError::UnknownName { .. }
    ));
}

#[test]
fn structure_errors() {
    // Cycle: W contains top, top contains W.
    let e = err(&edit(
        "parts = [\"q1\", \"q2\"]",
        "parts = [\"q1\", \"q2\", \"top\"]",
    ));
    assert!(
        matches!(&e, HypothesisError::Cycle(path) if path.contains(&"W".to_string())),
        "{e}"
    );
    // A composite containing itself.
    assert!(matches!(
        err(&edit("parts = [\"q1\", \"q2\"]", "parts = [\"q1\", \"W\"]")),
        HypothesisError::Cycle(_)
    ));
    // A role in two composites.
    assert!(matches!(
        err(&edit("parts = [\"lep\", \"nu\"]", "parts = [\"lep\", \"nu\", \"q1\"]")),
        HypothesisError::UsedTwice { name, .. } if name == "q1"
    ));
    // The same role twice in one composite.
    assert!(matches!(
        err(&edit(
            "parts = [\"W\", \"b\"]",
            "parts = [\"W\", \"b\", \"b\"]"
        )),
        HypothesisError::UsedTwice { .. }
    ));
    assert!(matches!(
        err(&edit("parts = [\"W\", \"b\"]", "parts = []")),
        HypothesisError::Empty(_)
    ));
}

#[test]
fn impossible_requirements() {
    assert!(matches!(
        err(&edit("kind = \"lepton\"", "kind = \"lepton\"\ntag = \"b\"")),
        HypothesisError::FieldNotForKind { field: "tag", .. }
    ));
    assert!(matches!(
        err(&edit(
            "tag = \"b\"",
            "tag = \"b\"\nmass_window = [60.0, 100.0]"
        )),
        HypothesisError::FieldNotForKind {
            field: "mass_window",
            ..
        }
    ));
    // Two neutrinos.
    let two_nu = format!("{BASE}\n[[role]]\nname = \"nu2\"\nkind = \"neutrino\"\nfrom = \"lep\"\n");
    assert!(matches!(err(&two_nu), HypothesisError::Impossible { .. }));
    // Neutrino without a source.
    assert!(matches!(
        err(&edit("from = \"lep\"", "")),
        HypothesisError::Impossible { .. }
    ));
    // Inverted mass window.
    let big = format!(
        "{BASE}\n[[role]]\nname = \"fat\"\nkind = \"large_jet\"\nmass_window = [120.0, 60.0]\n"
    );
    assert!(matches!(err(&big), HypothesisError::Impossible { .. }));
    // A same-flavour pair of an electron role and a muon role.
    let pair = format!(
        "{BASE}\n[[role]]\nname = \"e1\"\nkind = \"lepton\"\nflavour = \"e\"\n[[role]]\nname = \"m1\"\nkind = \"lepton\"\nflavour = \"mu\"\n[[lepton_pair]]\nroles = [\"e1\", \"m1\"]\nflavour = \"same\"\n"
    );
    assert!(matches!(err(&pair), HypothesisError::Impossible { .. }));
    // Same-sign requirement between a plus and a minus role.
    let charges = format!(
        "{BASE}\n[[role]]\nname = \"p\"\nkind = \"lepton\"\ncharge = \"plus\"\n[[role]]\nname = \"m\"\nkind = \"lepton\"\ncharge = \"minus\"\n[[lepton_pair]]\nroles = [\"p\", \"m\"]\ncharge = \"same\"\n"
    );
    assert!(matches!(err(&charges), HypothesisError::Impossible { .. }));
    // only_closest on a composite of jets.
    assert!(matches!(
        err(&edit("width = 10.0", "width = 10.0\nonly_closest = true")),
        HypothesisError::Impossible { .. }
    ));
    // Fewer leading jets than jet roles, or more than the buffers hold.
    assert!(matches!(
        err(&edit("leading_jets = 5", "leading_jets = 2")),
        HypothesisError::BadLeadingJets {
            value: 2,
            needed: 3,
            ..
        }
    ));
    assert!(matches!(
        err(&edit("leading_jets = 5", "leading_jets = 40")),
        HypothesisError::BadLeadingJets { .. }
    ));
    // A large jet may only replace jet roles.
    let whole = format!("{BASE}\n[[role]]\nname = \"fat\"\nkind = \"large_jet\"\n").replace(
        "parts = [\"lep\", \"nu\"]",
        "parts = [\"lep\", \"nu\"]\nor_large_jet = \"fat\"",
    );
    assert!(matches!(err(&whole), HypothesisError::Impossible { .. }));
}

#[test]
fn width_and_target_errors() {
    for bad in ["width = 0.0", "width = -3.0", "width = nan", "width = inf"] {
        assert!(
            matches!(
                err(&edit("width = 10.0", bad)),
                HypothesisError::BadWidth { .. }
            ),
            "{bad}"
        );
    }
    assert!(matches!(
        err(&edit("width = 10.0", "")),
        HypothesisError::BadWidth { .. }
    ));
    assert!(matches!(
        err(&edit("width = 10.0", "width = 10.0\nrelative_width = 0.1")),
        HypothesisError::BadWidth { .. }
    ));
    // Relative widths are for equal-mass constraints only.
    assert!(matches!(
        err(&edit("width = 10.0", "relative_width = 0.1")),
        HypothesisError::BadWidth { .. }
    ));
    assert!(matches!(
        err(&edit("relative_width = 0.1", "relative_width = 0.0")),
        HypothesisError::BadWidth { .. }
    ));
    assert!(matches!(
        err(&edit("target = \"W\"", "target = \"Zprime\"")),
        HypothesisError::BadTarget { .. }
    ));
    assert!(matches!(
        err(&edit("target = \"W\"", "target = -80.0")),
        HypothesisError::BadTarget { .. }
    ));
    assert!(matches!(
        err(&edit("target = \"W\"", "")),
        HypothesisError::BadTarget { .. }
    ));
    assert!(matches!(
        err(&edit(
            "relative_width = 0.1",
            "relative_width = 0.1\ntarget = \"W\""
        )),
        HypothesisError::BadTarget { .. }
    ));
    assert!(matches!(
        err(&edit(
            "equal = [\"top\", \"Wl\"]",
            "equal = [\"top\", \"W\"]"
        )),
        HypothesisError::Impossible { .. }
    ));
    assert!(matches!(
        err(&edit("equal = [\"top\", \"Wl\"]", "equal = [\"top\"]")),
        HypothesisError::Impossible { .. }
    ));
}

#[test]
fn interchange_and_size_errors() {
    let diff_tag = edit(
        "name = \"q2\"\nkind = \"jet\"\ntag = \"light\"",
        "name = \"q2\"\nkind = \"jet\"\ntag = \"any\"",
    );
    assert!(matches!(
        err(&diff_tag),
        HypothesisError::BadInterchange { .. }
    ));
    assert!(matches!(
        err(&edit("roles = [\"q1\", \"q2\"]", "roles = [\"q1\", \"b\"]")),
        HypothesisError::BadInterchange { .. }
    ));
    assert!(matches!(
        err(&edit("roles = [\"q1\", \"q2\"]", "roles = [\"q1\"]")),
        HypothesisError::BadInterchange { .. }
    ));
    let mut many = String::from("name = \"many\"\nleading_jets = 20\n");
    for i in 0..17 {
        many += &format!("[[role]]\nname = \"j{i}\"\nkind = \"jet\"\n");
    }
    assert!(matches!(
        err(&many),
        HypothesisError::TooMany {
            what: "roles",
            count: 17,
            max: 16
        }
    ));
    assert!(matches!(
        err(&edit("truth = [\"h.b\"]", "truth = [\"h..b\"]")),
        HypothesisError::BadTruthPattern { .. }
    ));
}

#[test]
fn every_preset_round_trips() {
    assert_eq!(presets::names().len(), 13);
    for name in presets::names() {
        let text = presets::toml(name).unwrap();
        let h = Hypothesis::from_toml(text).unwrap_or_else(|e| panic!("{name}: {e}"));
        assert_eq!(h.name(), *name);
        assert_eq!(presets::get(name).unwrap(), h);
        let written = h.to_toml();
        let back =
            Hypothesis::from_toml(&written).unwrap_or_else(|e| panic!("{name}: {e}\n{written}"));
        assert_eq!(back, h, "{name}");
        assert_eq!(back.to_toml(), written, "{name}: writing is not stable");
        // Particle names survive as names.
        assert!(
            !written.contains("80.3"),
            "{name}: target written as a number"
        );
        // Every role carries truth patterns except the neutrino.
        for r in h.roles() {
            assert!(
                r.truth.is_empty() == matches!(r.kind, quarry_assign::RoleKind::Neutrino { .. }),
                "{name}: role {}",
                r.name
            );
        }
    }
}

/// Hypothesis names go unquoted into output rows and file names: a comma,
/// quote or newline in one broke line-based merging (issue 12). Before the
/// fix every name below loaded.
#[test]
fn hypothesis_names_are_restricted_to_a_safe_set() {
    for bad in [
        "",
        "a,b",
        "a\"b",
        "two words",
        "a\\nb",
        "é",
        &"x".repeat(65),
    ] {
        let text = edit("name = \"base\"", &format!("name = {}", toml_string(bad)));
        assert_eq!(
            err(&text),
            HypothesisError::BadName(bad.replace("\\n", "\n")),
            "{bad:?}"
        );
    }
    for good in ["ttbar-ljets", "my_hyp.v2", "A1", &"x".repeat(64)] {
        let text = edit("name = \"base\"", &format!("name = \"{good}\""));
        assert_eq!(Hypothesis::from_toml(&text).unwrap().name(), good);
    }
    assert!(err(&edit("name = \"base\"", "name = \"a,b\""))
        .to_string()
        .contains("letters, digits, `-`, `_` or `.`"));
}

/// A TOML basic string for `s` (`\n` written as the escape).
fn toml_string(s: &str) -> String {
    format!("\"{}\"", s.replace('"', "\\\""))
}

/// The worst case is the count of injective fillings, `n!/(n−k)!` per
/// object kind (the falling factorial, a textbook formula), over the
/// interchangeable groups' `g!`. A file with 8 bare jet roles and
/// `leading_jets = 32` (issue 12: no practical end) is refused at load.
#[test]
fn absurd_worst_cases_are_refused_at_load() {
    let h = Hypothesis::from_toml(BASE).unwrap();
    // 3 jet roles of 5 jets, q1/q2 interchangeable; 1 lepton of 8; 2 roots.
    assert_eq!(
        h.worst_case_assignments(5),
        5.0 * 4.0 * 3.0 / 2.0 * 8.0 * 2.0
    );
    let mut text = String::from("name = \"wide\"\nleading_jets = 32\n");
    for i in 0..8 {
        text += &format!("\n[[role]]\nname = \"j{i}\"\nkind = \"jet\"\n");
    }
    text += "\n[[composite]]\nname = \"all\"\nparts = [\"j0\", \"j1\", \"j2\", \"j3\", \"j4\", \"j5\", \"j6\", \"j7\"]\n";
    text += "\n[[constraint]]\nmass = \"all\"\ntarget = 1000.0\nwidth = 100.0\n";
    let expected: f64 = (25..=32).map(f64::from).product(); // 32!/24! ≈ 4.2e11
    match err(&text) {
        HypothesisError::TooManyAssignments {
            count,
            leading_jets: 32,
            ..
        } => assert_eq!(count, expected),
        other => panic!("{other:?}"),
    }
    // With 12 leading jets (12!/4! ≈ 2e7) the same roles load.
    let h = Hypothesis::from_toml(&text.replace("leading_jets = 32", "leading_jets = 12")).unwrap();
    assert_eq!(
        h.worst_case_assignments(12),
        (5..=12).map(f64::from).product::<f64>()
    );
    // Every preset loads, far from the limit.
    for name in presets::names() {
        let h = presets::get(name).unwrap();
        assert!(h.worst_case_assignments(h.leading_jets()) < 1e9, "{name}");
    }
}
