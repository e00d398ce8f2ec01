//! `redoubt import`: another format's topology written as a network file.

use std::io::Write;
use std::path::Path;

use super::options::ImportOptions;
use super::{Outcome, note, stdout_result};
use crate::error::{Error, Result};
use crate::model::{self, Network};
use crate::report;
use crate::solve;

fn read_text(path: &Path) -> Result<String> {
    model::read_input_text(path)
}

/// `import`: converts, validates the result as any network file is validated, writes it
/// atomically, and prints its `check` summary. A node-link import is written as it is
/// generated (its all-pairs demands never exist as a list), so its memory is the network's.
pub(super) fn run(
    from: &ImportOptions,
    out: &mut dyn Write,
    err: &mut dyn Write,
) -> Result<Outcome> {
    let mut fallback = None;
    let not_valid = |inputs: &[&Path]| {
        let names = inputs
            .iter()
            .map(|p| p.display().to_string())
            .collect::<Vec<_>>()
            .join(", ");
        move |e: Error| match e {
            Error::Input(m) => Error::Input(format!(
                "the imported network from {names} is not valid: {m}"
            )),
            other => other,
        }
    };
    let net = match from {
        ImportOptions::Networkx {
            file,
            json,
            name,
            rules,
        } => {
            report::file::check_output("--json", json, &[file.as_path()])?;
            let text = read_text(file)?;
            let graph_name = serde_json::from_str::<serde_json::Value>(&text)
                .ok()
                .and_then(|v| v["graph"]["name"].as_str().map(str::to_string));
            let name = name.clone().or(graph_name).unwrap_or_else(|| {
                file.file_stem()
                    .map_or("imported network".into(), |s| s.to_string_lossy().into())
            });
            let imported =
                model::import::from_node_link(&text, &name, rules).map_err(|e| prefix(e, file))?;
            if let (Some((n, of)), Some(attr), Some(c)) =
                (imported.fallback, &rules.capacity_attr, rules.capacity)
            {
                fallback = Some((n, of, attr.clone(), c));
            }
            drop(text);
            let net = imported.doc.network().map_err(not_valid(&[file]))?;
            report::file::write_atomic(json, |w| report::json::write_pretty(w, &imported.doc))?;
            net
        }
        ImportOptions::Csv {
            sites,
            links,
            demands,
            functions,
            json,
            name,
        } => {
            let mut ins = vec![sites.as_path(), links.as_path(), demands.as_path()];
            ins.extend(functions.as_deref());
            report::file::check_output("--json", json, &ins)?;
            let texts = ins
                .iter()
                .map(|p| read_text(p))
                .collect::<Result<Vec<String>>>()?;
            let shown: Vec<String> = ins.iter().map(|p| p.display().to_string()).collect();
            let file = |i: usize| model::import::CsvFile {
                path: &shown[i],
                text: &texts[i],
            };
            let doc = model::import::from_csv(
                name,
                file(0),
                file(1),
                file(2),
                functions.as_ref().map(|_| file(3)),
            )?;
            let text = report::json::to_string(&doc);
            let net = Network::from_json(&text).map_err(not_valid(&ins))?;
            report::file::write_atomic(json, |w| report::json::write_pretty(w, &doc))?;
            net
        }
    };
    if let Some((n, of, attr, capacity)) = fallback {
        note(report::text::note_capacity_fallback(
            err, n, of, &attr, capacity,
        ));
    }
    let cut_off = solve::baseline_cut_off(&net);
    stdout_result(report::text::write_check(out, &net, &cut_off))?;
    Ok(Outcome::Ok)
}

fn prefix(e: Error, path: &Path) -> Error {
    match e {
        Error::Input(m) => Error::Input(format!("{}: {m}", path.display())),
        other => other,
    }
}
