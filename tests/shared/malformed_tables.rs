//! The malformed-table fixtures, listed once for both test binaries: the reader's check
//! (`reference/table_reader.rs`) and the command line's (`cli/table.rs`) loop over the same
//! files of `tests/data/tables/malformed/` and their `expected/NAME.message`.

/// The folder of malformed tables.
pub const MALFORMED: &str = concat!(env!("CARGO_MANIFEST_DIR"), "/tests/data/tables/malformed");

/// Every malformed table as (file name, the one-line message it must be refused with), sorted by
/// name. To add a case, add the table and `expected/NAME.message`.
pub fn malformed_tables() -> Vec<(String, String)> {
    let mut names: Vec<String> = std::fs::read_dir(MALFORMED)
        .unwrap()
        .map(|entry| entry.unwrap().path())
        .filter(|path| path.is_file())
        .map(|path| path.file_name().unwrap().to_string_lossy().into_owned())
        .collect();
    names.sort();
    assert!(names.len() >= 12, "{names:?}");
    names
        .into_iter()
        .map(|name| {
            let expected = std::fs::read_to_string(format!("{MALFORMED}/expected/{name}.message"))
                .unwrap_or_else(|_| panic!("{name} has no expected/{name}.message"));
            let expected = expected.trim_end_matches('\n').to_string();
            (name, expected)
        })
        .collect()
}
