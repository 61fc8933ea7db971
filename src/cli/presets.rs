//! `quarry presets list|show`.

use std::io::Write;

use quarry::assign::presets;

use super::args::PresetsCommand;
use super::Failure;

pub fn run(cmd: &PresetsCommand) -> Result<(), Failure> {
    let mut out = std::io::stdout().lock();
    let text = match cmd {
        PresetsCommand::List => {
            let width = presets::names().iter().map(|n| n.len()).max().unwrap_or(0);
            let mut s = String::new();
            for name in presets::names() {
                let about = presets::description(name).unwrap_or("");
                s.push_str(&format!("{name:<width$}  {about}\n"));
            }
            s
        }
        PresetsCommand::Show { name } => match presets::toml(name) {
            Some(t) => t.to_string(),
            None => {
                return Err(Failure::Usage(format!(
                    "unknown preset '{name}' (known: {})",
                    presets::names().join(", ")
                )))
            }
        },
    };
    out.write_all(text.as_bytes())
        .and_then(|()| out.flush())
        .map_err(|e| Failure::Output(format!("<stdout>: write error: {e}")))
}
