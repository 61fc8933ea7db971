//! The SVG plots: files are written, hold the expected text and series, and
//! empty inputs are typed errors.

use quarry_eval::{
    evaluate, markdown_table, plot_chi2, plot_fit_prob, plot_mass, plot_mass_with,
    plot_right_fraction, EvalError, EvalRecord, MassPlot,
};

fn sample(name: &str, mass: Option<f64>, centre: f64, n: usize) -> Vec<EvalRecord> {
    (0..n)
        .map(|i| {
            // Deterministic triangular-ish spread around the centre.
            let u = ((i * 7919) % n) as f64 / n as f64 - 0.5;
            let v = ((i * 104_729) % n) as f64 / n as f64 - 0.5;
            EvalRecord {
                sample: name.into(),
                generated_mass: mass,
                hypothesis: "bwbw-ljets".into(),
                status: if i % 10 == 9 { "too_few_jets" } else { "ok" }.into(),
                mass: Some(centre * (1.0 + 0.08 * (u + v))),
                chi2: Some(0.01 + (i % 50) as f64 * if i % 3 == 0 { 20.0 } else { 0.1 }),
                fit_prob: Some(((i * 31) % 100) as f64 / 100.0),
                truth_match: mass.map(|_| i % 3 != 0),
                composite_matches: Vec::new(),
                mass_column: "fit_mass".into(),
                mass_candidates: Vec::new(),
            }
        })
        .collect()
}

fn all_records() -> Vec<EvalRecord> {
    let mut r = sample("ttbar", None, 175.0, 400);
    for m in [600.0, 1000.0, 1400.0] {
        r.extend(sample(&format!("T{m}"), Some(m), m, 400));
    }
    r
}

fn svg(path: &std::path::Path) -> String {
    let text = std::fs::read_to_string(path).unwrap();
    assert!(
        text.starts_with("<svg"),
        "not an SVG: {}",
        &text[..40.min(text.len())]
    );
    assert!(text.trim_end().ends_with("</svg>"));
    text
}

#[test]
fn mass_plot_has_every_sample_and_axis_titles() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("mass.svg");
    plot_mass(&all_records(), "bwbw-ljets", &path).unwrap();
    let text = svg(&path);
    for label in [
        "Reconstructed mass (fit_mass) — bwbw-ljets",
        "reconstructed mass, column fit_mass [GeV]",
        "ttbar (background, 360 ev.)",
        "T600 (m = 600 GeV, 360 ev.)",
        "T1400 (m = 1400 GeV, 360 ev.)",
    ] {
        assert!(text.contains(label), "missing '{label}'");
    }
    // Three signal lines in three palette colours, one grey filled area.
    for colour in ["#0F6E7A", "#C8553D", "#6B4E9B", "#9AA3AD"] {
        assert!(
            text.to_uppercase().contains(colour),
            "missing colour {colour}"
        );
    }
}

#[test]
fn chi2_and_probability_plots_split_right_and_wrong() {
    let dir = tempfile::tempdir().unwrap();
    let records: Vec<EvalRecord> = all_records()
        .into_iter()
        .filter(|r| r.generated_mass.is_some())
        .collect();
    let chi2 = dir.path().join("chi2.svg");
    plot_chi2(&records, "bwbw-ljets", &chi2).unwrap();
    let text = svg(&chi2);
    // 3 samples × 360 ok rows; i % 3 != 0 is right.
    assert!(text.contains("right assignment (720 ev.)"), "{text}");
    assert!(text.contains("wrong assignment (360 ev.)"));
    let prob = dir.path().join("prob.svg");
    plot_fit_prob(&records, "bwbw-ljets", &prob).unwrap();
    assert!(svg(&prob).contains("fit χ² probability"));
}

#[test]
fn right_fraction_plot_has_one_point_per_mass() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("right.svg");
    plot_right_fraction(&evaluate(&all_records()), &path).unwrap();
    let text = svg(&path);
    assert!(text.contains("generated mass [GeV]"));
    // One filled marker per mass point plus one in the legend (the error
    // bars draw their own open rings, r = 6).
    let filled = text
        .lines()
        .filter(|l| l.starts_with("<circle") && l.contains(r#"r="5""#))
        .count();
    assert_eq!(filled, 4, "{text}");
}

#[test]
fn nothing_to_plot_is_a_typed_error_and_writes_nothing() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("x.svg");
    let records = all_records();
    assert!(matches!(
        plot_mass(&records, "no-such-hypothesis", &path),
        Err(EvalError::NothingToPlot(_))
    ));
    let background: Vec<EvalRecord> = sample("ttbar", None, 175.0, 50);
    assert!(matches!(
        plot_chi2(&background, "bwbw-ljets", &path),
        Err(EvalError::NothingToPlot(_))
    ));
    assert!(matches!(
        plot_right_fraction(&evaluate(&background), &path),
        Err(EvalError::NothingToPlot(_))
    ));
    assert!(!path.exists());
}

#[test]
fn unwritable_path_is_a_plot_error() {
    let err = plot_mass(
        &all_records(),
        "bwbw-ljets",
        std::path::Path::new("/nonexistent-dir/for/sure/mass.svg"),
    )
    .unwrap_err();
    assert!(matches!(err, EvalError::Plot { .. }), "{err}");
}

/// Every non-empty bin of every sample carries a √k/N error bar (Poisson,
/// common practice), so a histogram of 360 masses has as many bars as
/// non-empty bins; the log-scale option draws the same bars on a log axis.
#[test]
fn mass_plot_has_statistical_error_bars_and_a_log_option() {
    let dir = tempfile::tempdir().unwrap();
    // One sample only, so every bar belongs to it.
    let records = sample("T1000", Some(1000.0), 1000.0, 400);
    for log_y in [false, true] {
        let path = dir.path().join(format!("mass-{log_y}.svg"));
        plot_mass_with(&records, "bwbw-ljets", &path, MassPlot { log_y }).unwrap();
        let text = svg(&path);
        assert_eq!(text.contains("(log scale)"), log_y);
        // An error bar is a vertical line plus two caps: count the vertical
        // lines in the sample's colour (#0F6E7A at 0.8 opacity).
        let bars = text
            .lines()
            .filter(|l| l.starts_with("<line") && l.to_uppercase().contains("#0F6E7A"))
            .count();
        assert!(bars >= 3 * 10, "log_y {log_y}: {bars} error-bar lines");
    }
}

/// The top-pair hypothesis on a heavy-quark signal has no pair mass: it is
/// left out of the Markdown table and the right-fraction plot, and named
/// under the table.
#[test]
fn groups_that_do_not_measure_the_signal_mass_are_left_out() {
    let mut records = all_records();
    records.extend(
        sample("T1000", Some(1000.0), 1000.0, 200)
            .into_iter()
            .map(|mut r| {
                r.hypothesis = "ttbar-ljets".into();
                r.mass = None;
                r.mass_column = String::new();
                r
            }),
    );
    let summary = evaluate(&records);
    let g = summary.get("T1000", "ttbar-ljets").unwrap();
    assert!(!g.measures_signal_mass);
    // The same when the top-pair rows carry their top masses, once the
    // hypothesis is marked as one with fixed-mass pairs.
    let mut with_tops = all_records();
    with_tops.extend(
        sample("T1000", Some(1000.0), 172.5, 200)
            .into_iter()
            .map(|mut r| {
                r.hypothesis = "ttbar-ljets".into();
                r
            }),
    );
    let mut s2 = evaluate(&with_tops);
    assert!(s2.get("T1000", "ttbar-ljets").unwrap().measures_signal_mass);
    s2.mark_fixed_mass(&["ttbar-ljets".to_string()]);
    assert!(!s2.get("T1000", "ttbar-ljets").unwrap().measures_signal_mass);
    assert!(!markdown_table(&s2).contains("| ttbar-ljets |"));
    assert!(
        summary
            .get("T1000", "bwbw-ljets")
            .unwrap()
            .measures_signal_mass
    );
    let table = markdown_table(&summary);
    assert!(
        !table.lines().any(|l| l.starts_with("| ttbar-ljets")),
        "{table}"
    );
    assert!(table.contains("Left out") && table.contains("ttbar-ljets on T1000"));
    assert!(table.contains("| mass column |") && table.contains("| fit_mass |"));
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("right.svg");
    plot_right_fraction(&summary, &path).unwrap();
    assert!(!svg(&path).contains("ttbar-ljets"));
}
