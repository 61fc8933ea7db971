//! `quarry columns list|show|template`: the column maps of Parquet inputs
//! with one row per event.

use std::io::Write;

use quarry::parquet::SHIPPED_MAPS;

use super::args::ColumnsCommand;
use super::Failure;

pub fn run(cmd: &ColumnsCommand) -> Result<(), Failure> {
    let text = match cmd {
        ColumnsCommand::List => {
            let width = SHIPPED_MAPS
                .iter()
                .map(|(n, _, _)| n.len())
                .max()
                .unwrap_or(0);
            SHIPPED_MAPS
                .iter()
                .map(|(name, about, _)| format!("{name:<width$}  {about}\n"))
                .collect()
        }
        ColumnsCommand::Show { name } => match SHIPPED_MAPS.iter().find(|(n, _, _)| n == name) {
            Some((_, _, toml)) => toml.to_string(),
            None => {
                return Err(Failure::Usage(format!(
                    "unknown column map '{name}' (shipped: {})",
                    SHIPPED_MAPS
                        .iter()
                        .map(|(n, _, _)| *n)
                        .collect::<Vec<_>>()
                        .join(", ")
                )))
            }
        },
        ColumnsCommand::Template { file } => {
            quarry::parquet::template_of_file(file).map_err(|e| Failure::Input(e.to_string()))?
        }
    };
    let mut out = std::io::stdout().lock();
    out.write_all(text.as_bytes())
        .and_then(|()| out.flush())
        .map_err(|e| Failure::Output(format!("<stdout>: write error: {e}")))
}
