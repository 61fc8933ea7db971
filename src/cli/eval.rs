//! `quarry eval`: a thin layer over `quarry::eval` — read reconstruction
//! output of several samples, write the summary CSV, the Markdown table and
//! the SVG plots.

use std::io::Write;
use std::path::{Path, PathBuf};

use quarry::eval::{
    choose_mass_columns, evaluate, markdown_table, mass_choice_table, plot_chi2, plot_fit_prob,
    plot_mass_with, plot_right_fraction, read_sample, write_summary_csv, EvalError, EvalRecord,
    MassPlot,
};

use super::args::EvalArgs;
use super::protect::refuse_output_among_inputs;
use super::Failure;

pub fn run(args: &EvalArgs) -> Result<(), Failure> {
    let inputs = || args.samples.iter().map(|s| s.path.as_path());
    refuse_output_among_inputs(&args.output, inputs())?;
    if let Some(table) = &args.table {
        refuse_output_among_inputs(table, inputs())?;
    }
    let mut records: Vec<EvalRecord> = Vec::new();
    for spec in &args.samples {
        records.extend(
            read_sample(spec, &args.mass_column).map_err(|e| Failure::Input(e.to_string()))?,
        );
    }
    let fixed = fixed_mass_hypotheses(&records);
    let choices = choose_mass_columns(&mut records, &args.mass_column, &fixed);
    let mut summary = evaluate(&records);
    summary.mark_fixed_mass(&fixed);

    let mut csv = Vec::new();
    write_summary_csv(&summary, &mut csv).map_err(|e| Failure::Output(e.to_string()))?;
    write_out(&args.output, &csv)?;
    if let Some(path) = &args.table {
        let text = format!(
            "{}\nMass column per hypothesis (closure of every candidate on the signal samples):\n\n{}",
            markdown_table(&summary),
            mass_choice_table(&choices)
        );
        write_out(path, text.as_bytes())?;
    }

    let mut written: Vec<PathBuf> = Vec::new();
    if let Some(dir) = &args.plots {
        std::fs::create_dir_all(dir)
            .map_err(|e| Failure::Output(format!("{}: {e}", dir.display())))?;
        let mut hypotheses: Vec<&str> = Vec::new();
        for r in &records {
            if !hypotheses.contains(&r.hypothesis.as_str()) {
                hypotheses.push(&r.hypothesis);
            }
        }
        let signal: Vec<EvalRecord> = records
            .iter()
            .filter(|r| r.generated_mass.is_some())
            .cloned()
            .collect();
        for h in hypotheses {
            let stem = file_stem(h);
            let mass = dir.join(format!("mass_{stem}.svg"));
            let chi2 = dir.join(format!("chi2_{stem}.svg"));
            let prob = dir.join(format!("fit_prob_{stem}.svg"));
            let options = MassPlot { log_y: args.log_y };
            keep(
                plot_mass_with(&records, h, &mass, options),
                mass,
                &mut written,
            )?;
            keep(plot_chi2(&signal, h, &chi2), chi2, &mut written)?;
            keep(plot_fit_prob(&signal, h, &prob), prob, &mut written)?;
        }
        let right = dir.join("right_fraction.svg");
        keep(plot_right_fraction(&summary, &right), right, &mut written)?;
    }
    if !args.quiet {
        eprintln!(
            "quarry eval: {} rows, {} sample/hypothesis groups; {} plots written",
            records.len(),
            summary.groups.len(),
            written.len()
        );
        for c in &choices {
            eprintln!(
                "  {}: mass column {} ({})",
                c.hypothesis,
                c.column.as_deref().unwrap_or("none"),
                c.reason
            );
        }
        for p in &written {
            eprintln!("  {}", p.display());
        }
    }
    Ok(())
}

/// The hypotheses among `records` that are presets without an equal-mass
/// constraint: their `mass_a`/`mass_b` are composites constrained to known
/// masses (the top-pair preset's two tops), not a free heavy-quark mass.
/// A hypothesis read from a user's file is not known here and is taken to
/// measure a free mass.
fn fixed_mass_hypotheses(records: &[EvalRecord]) -> Vec<String> {
    use quarry::assign::{presets, ConstraintKind};
    let mut fixed: Vec<String> = Vec::new();
    for r in records {
        if fixed.contains(&r.hypothesis) {
            continue;
        }
        if let Some(h) = presets::get(&r.hypothesis) {
            let free = h
                .constraints()
                .iter()
                .any(|c| matches!(c.kind, ConstraintKind::EqualMass { .. }));
            if !free {
                fixed.push(r.hypothesis.clone());
            }
        }
    }
    fixed
}

/// A plot with nothing to draw is skipped (e.g. no fit, no signal sample);
/// any other failure is an output error.
fn keep(
    result: Result<(), EvalError>,
    path: PathBuf,
    written: &mut Vec<PathBuf>,
) -> Result<(), Failure> {
    match result {
        Ok(()) => {
            written.push(path);
            Ok(())
        }
        Err(EvalError::NothingToPlot(_)) => Ok(()),
        Err(e) => Err(Failure::Output(e.to_string())),
    }
}

/// A hypothesis name made safe for a file name.
fn file_stem(name: &str) -> String {
    name.chars()
        .map(|c| {
            if c.is_ascii_alphanumeric() || c == '-' || c == '_' {
                c
            } else {
                '_'
            }
        })
        .collect()
}

fn write_out(path: &Path, bytes: &[u8]) -> Result<(), Failure> {
    let result = if path == Path::new("-") {
        std::io::stdout().lock().write_all(bytes)
    } else {
        std::fs::write(path, bytes)
    };
    result.map_err(|e| Failure::Output(format!("{}: {e}", path.display())))
}
