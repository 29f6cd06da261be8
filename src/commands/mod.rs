//! One module per subcommand. Each has an `Args` (clap) and a `run`.

pub mod audit;
pub mod bench;
pub mod bench_posterior;
pub mod curve;
pub mod fit;
pub mod fit_plots;
pub mod inject;
pub mod input;
pub mod merge;
pub mod model_args;
pub mod population;
pub mod priors;
pub mod survey;
pub mod table;

/// The bytes of an input file, refusing one larger than
/// [`eccaudit_core::limits::MAX_INPUT_BYTES`] before reading it, so no file can make the
/// command allocate without bound. Errors name the file.
pub fn read_input_file(path: &std::path::Path) -> anyhow::Result<Vec<u8>> {
    use anyhow::Context;
    use std::io::Read;
    let name = path.display();
    let file = std::fs::File::open(path).with_context(|| format!("cannot read `{name}`"))?;
    let limit = eccaudit_core::limits::MAX_INPUT_BYTES;
    let mut bytes = Vec::new();
    // Read at most one byte more than the limit: a longer file is refused whatever its
    // metadata says (pipes and special files report no size).
    file.take(limit + 1)
        .read_to_end(&mut bytes)
        .with_context(|| format!("cannot read `{name}`"))?;
    if bytes.len() as u64 > limit {
        anyhow::bail!("`{name}` is larger than eccaudit reads ({limit} bytes)");
    }
    Ok(bytes)
}

/// The text of an input file (see [`read_input_file`]); an error names the file when it is
/// not UTF-8.
pub fn read_input_text(path: &std::path::Path) -> anyhow::Result<String> {
    use anyhow::Context;
    String::from_utf8(read_input_file(path)?).with_context(|| {
        format!(
            "cannot read `{}`: the file is not UTF-8 text",
            path.display()
        )
    })
}
