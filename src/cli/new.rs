//! `sagtrip new`: a bundled circuit written out as a starting file.

use super::*;

#[derive(Args)]
pub(crate) struct NewArgs {
    /// The file to write (refused if it exists).
    #[arg(required_unless_present = "list")]
    file: Option<PathBuf>,
    /// The bundled circuit to start from (see --list).
    #[arg(long, default_value = "guard-230v")]
    from: String,
    /// List the bundled circuits.
    #[arg(long, conflicts_with = "file")]
    list: bool,
}

pub(crate) fn new(args: &NewArgs) -> Outcome {
    let mut out = String::new();
    if args.list {
        say!(out, "bundled circuits (sagtrip new FILE --from NAME):\n");
        for b in sagtrip::builtin::BUNDLED {
            say!(out, "  {:<24} {}", b.name, b.summary());
        }
        return Ok(out);
    }
    let Some(path) = &args.file else {
        return Err("give the file to write, or --list".into());
    };
    let bundled = sagtrip::builtin::bundled(&args.from).ok_or_else(|| {
        let names: Vec<&str> = sagtrip::builtin::BUNDLED.iter().map(|b| b.name).collect();
        format!(
            "--from {}: no such bundled circuit (there are: {})",
            args.from,
            names.join(", ")
        )
    })?;
    // Never replace a file: a starting file goes where there is none.
    if path.exists() {
        return Err(format!(
            "{} exists: `sagtrip new` writes only new files (choose another name)",
            path.display()
        )
        .into());
    }
    let text = format!(
        "# Started from sagtrip's bundled circuit `{}` (sagtrip new); edit it freely.\n{}",
        bundled.name, bundled.text
    );
    write_atomic(path, |w| w.write_all(text.as_bytes()))
        .map_err(|e| format!("cannot write {}: {e}", path.display()))?;
    say!(
        out,
        "wrote {} from the bundled circuit `{}`: {}\ncheck it with: sagtrip check --circuit {}",
        path.display(),
        bundled.name,
        bundled.summary(),
        path.display()
    );
    Ok(out)
}
