//! `eccaudit survey` and `eccaudit merge`: a survey equals separate audits of its tables, an
//! interrupted survey resumes to the same catalogue, shards in any number merge into the
//! single run's files byte for byte (survey catalogue and folders; an inject grid's trials),
//! a bad table is reported with file, line and column while the others are audited, a bad
//! manifest is one clear line, and the Slurm batch script carries the run's flags.
//!
//! The tables are simulated one-companion orbits with fixed seeds
//! (examples/make_survey_tables.rs); the audits are made small (2 true e × 3 trials, short
//! sampler runs) so the whole file runs in seconds.

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

use assert_cmd::Command;
use predicates::prelude::*;

use crate::survey_tables;

fn eccaudit() -> Command {
    let mut cmd = Command::cargo_bin("eccaudit").expect("the eccaudit binary is built for tests");
    // A test run inside a Slurm job must not pick up the job's array index.
    for var in [
        "SLURM_ARRAY_TASK_ID",
        "SLURM_ARRAY_TASK_COUNT",
        "SLURM_ARRAY_TASK_MIN",
        "SLURM_ARRAY_TASK_MAX",
    ] {
        cmd.env_remove(var);
    }
    cmd
}

/// The small audit every test uses (flags shared by `survey` and `audit`).
const AUDIT_FLAGS: [&str; 16] = [
    "--e",
    "0,0.3",
    "--trials",
    "3",
    "--seed",
    "5",
    // These tests check the plumbing, not the precision: the circular decision adds at most
    // 200 simulations (default 10000), and the statement quotes least squares, whose extra
    // simulations are cheap (a quoted posterior estimator adds posterior runs).
    "--max-circular",
    "200",
    "--estimator",
    "lsq",
    "--posterior-walkers",
    "16",
    "--posterior-steps",
    "60",
    "--posterior-burn",
    "30",
];

/// Writes `n` simulated tables and their manifest into `dir`; returns the manifest's path.
fn make_survey(dir: &Path, n: usize) -> PathBuf {
    survey_tables::write_survey(dir, n, 40, 3).unwrap();
    dir.join("manifest.csv")
}

fn survey(manifest: &Path, out: &Path, extra: &[&str]) -> assert_cmd::assert::Assert {
    eccaudit()
        .arg("survey")
        .arg(manifest)
        .arg("--out")
        .arg(out)
        .args(AUDIT_FLAGS)
        .args(extra)
        .assert()
}

/// Every file under `dir` (relative path → bytes), skipping Slurm logs.
fn tree(dir: &Path) -> BTreeMap<String, Vec<u8>> {
    fn walk(root: &Path, dir: &Path, out: &mut BTreeMap<String, Vec<u8>>) {
        for entry in std::fs::read_dir(dir).unwrap() {
            let path = entry.unwrap().path();
            if path.is_dir() {
                walk(root, &path, out);
            } else {
                let rel = path.strip_prefix(root).unwrap().display().to_string();
                if !rel.starts_with("slurm-") {
                    out.insert(rel, std::fs::read(&path).unwrap());
                }
            }
        }
    }
    let mut out = BTreeMap::new();
    walk(dir, dir, &mut out);
    out
}

/// Asserts two output trees are equal file by file, naming the first difference.
fn assert_same_tree(a: &Path, b: &Path) {
    let (ta, tb) = (tree(a), tree(b));
    assert_eq!(
        ta.keys().collect::<Vec<_>>(),
        tb.keys().collect::<Vec<_>>(),
        "file lists of {} and {}",
        a.display(),
        b.display()
    );
    for (name, bytes) in &ta {
        assert!(
            bytes == &tb[name],
            "{name} differs between {} and {}",
            a.display(),
            b.display()
        );
    }
}

fn read(path: &Path) -> String {
    std::fs::read_to_string(path).unwrap()
}

/// A 12-table survey gives, table by table, the files of a separate `eccaudit audit` run with
/// the same flags (same settings, trials, statement, summary), and one catalogue row each.
#[test]
fn a_survey_equals_separate_audits() {
    let dir = tempfile::tempdir().unwrap();
    let manifest = make_survey(&dir.path().join("data"), 12);
    let out = dir.path().join("survey");
    survey(&manifest, &out, &["--threads", "2"])
        .success()
        .stdout(predicate::str::contains(
            "12 table(s) audited, 0 not auditable",
        ));
    let catalogue = read(&out.join("catalogue.csv"));
    assert_eq!(catalogue.lines().count(), 13, "{catalogue}");
    for i in 1..=12 {
        let folder = out.join(format!("{i:03}-star-{i:03}"));
        let table = dir.path().join(format!("data/tables/star-{i:03}.csv"));
        let single = dir.path().join(format!("audit-{i}"));
        let mut cmd = eccaudit();
        cmd.arg("audit").arg(&table).arg("--out").arg(&single);
        if i % 3 == 0 {
            // The manifest asks for a trend, which `audit` takes from a settings file.
            assert!(read(&folder.join("settings.json")).contains("\"trend\": true"));
            cmd.arg("--settings").arg(folder.join("settings.json"));
        } else {
            cmd.args(AUDIT_FLAGS);
        }
        cmd.assert().success();
        for file in [
            "settings.json",
            "trials.csv",
            "statement.json",
            "statement.txt",
            "context.json",
            "summary.json",
            "bias.svg",
        ] {
            assert!(
                read(&folder.join(file)) == read(&single.join(file)),
                "table {i}: {file} differs between survey and audit"
            );
        }
        // The catalogue row carries the audit's numbers.
        let statement: serde_json::Value =
            serde_json::from_str(&read(&single.join("statement.json"))).unwrap();
        let rows: serde_json::Value =
            serde_json::from_str(&read(&folder.join("catalogue.json"))).unwrap();
        assert_eq!(rows[0]["period"], statement["fitted"]["period"]);
        // The recommended estimator's value, calibrated interval and decision.
        let recommended = statement["recommended"].as_str().unwrap();
        let row = statement["rows"]
            .as_array()
            .unwrap()
            .iter()
            .find(|r| r["name"] == recommended)
            .unwrap();
        assert_eq!(rows[0]["estimator"], recommended);
        assert_eq!(rows[0]["e"], row["value"]);
        assert_eq!(rows[0]["e_low95"], row["interval"]["lower"]);
        assert_eq!(rows[0]["e_high95"], row["interval"]["upper"]);
        assert_eq!(
            rows[0]["circular_mc_p"],
            statement["decision"]["p"]["value"]
        );
        assert_eq!(
            rows[0]["circular_excluded"],
            statement["decision"]["circular_excluded"]
        );
        assert_eq!(rows[0]["status"], "ok");
    }
}

/// A survey stopped part-way (mid-table, by a trial budget; then after whole tables) and run
/// again gives the same catalogue and folders as an uninterrupted run.
#[test]
fn an_interrupted_survey_resumes_to_the_same_catalogue() {
    let dir = tempfile::tempdir().unwrap();
    let manifest = make_survey(&dir.path().join("data"), 5);
    let whole = dir.path().join("whole");
    survey(&manifest, &whole, &[]).success();

    let parts = dir.path().join("parts");
    // Table 1 ran 6 base trials and the extra ones its statement asked for (the adaptive rule):
    // a budget of those + 2 finishes table 1 and leaves table 2 with 2 trials.
    let table1 = read(&whole.join("001-star-001/trials.csv")).lines().count() - 2;
    assert!(table1 >= 6, "{table1} trials in table 1");
    let budget = (table1 + 2).to_string();
    survey(&manifest, &parts, &["--stop-after", &budget])
        .success()
        .stderr(predicate::str::contains("stopped early"))
        .stderr(predicate::str::contains("4 of 5 tables not done yet"));
    let partial = read(&parts.join("002-star-002/trials.csv"));
    assert_eq!(partial.lines().count(), 2 + 2, "{partial}");
    assert!(!parts.join("002-star-002/catalogue.json").exists());
    survey(&manifest, &parts, &["--stop-after-tables", "2"])
        .success()
        .stdout(predicate::str::contains(
            "2 table(s) audited, 0 not auditable, 1 already done",
        ));
    survey(&manifest, &parts, &[])
        .success()
        .stdout(predicate::str::contains(
            "2 table(s) audited, 0 not auditable, 3 already done",
        ));
    assert_same_tree(&whole, &parts);
}

/// Shards in any number (1, 3 into separate folders; 4 into one shared folder, the index taken
/// from Slurm's environment) merge into the single run's catalogue and folders byte for byte.
#[test]
fn survey_shards_merge_to_the_single_run() {
    let dir = tempfile::tempdir().unwrap();
    let manifest = make_survey(&dir.path().join("data"), 7);
    let single = dir.path().join("single");
    survey(&manifest, &single, &[]).success();

    for n in [1usize, 3] {
        let shard_dirs: Vec<PathBuf> = (0..n)
            .map(|i| dir.path().join(format!("s{n}-{i}")))
            .collect();
        for (i, shard_dir) in shard_dirs.iter().enumerate() {
            survey(&manifest, shard_dir, &["--shard", &format!("{i}/{n}")]).success();
        }
        let merged = dir.path().join(format!("merged-{n}"));
        eccaudit()
            .arg("merge")
            .args(&shard_dirs)
            .arg("--out")
            .arg(&merged)
            .assert()
            .success()
            .stdout(predicate::str::contains("Merged 7 tables"));
        assert_same_tree(&single, &merged);
    }

    // Four Slurm array tasks (ids 10..13) writing into one folder, merged in place.
    let shared = dir.path().join("shared");
    for id in 10..14 {
        let mut cmd = eccaudit();
        cmd.env("SLURM_ARRAY_TASK_ID", id.to_string())
            .env("SLURM_ARRAY_TASK_MIN", "10")
            .env("SLURM_ARRAY_TASK_MAX", "13")
            .env("SLURM_ARRAY_TASK_COUNT", "4")
            .arg("survey")
            .arg(&manifest)
            .arg("--out")
            .arg(&shared)
            .args(AUDIT_FLAGS)
            .assert()
            .success()
            .stderr(predicate::str::contains(format!(
                "running shard {}/4",
                id - 10
            )));
    }
    // Before every shard is done, merge refuses.
    let early = dir.path().join("early");
    eccaudit()
        .arg("merge")
        .arg(dir.path().join("s3-0"))
        .arg("--out")
        .arg(&early)
        .assert()
        .failure()
        .stderr(predicate::str::contains("are not done in any input folder"));
    eccaudit()
        .arg("merge")
        .arg(&shared)
        .arg("--out")
        .arg(&shared)
        .assert()
        .success();
    assert_same_tree(&single, &shared);
}

/// One inject grid split into 3 shards, merged, and finished with --resume: the trials file
/// and the summary of a single run.
#[test]
fn inject_shards_merge_to_the_single_run() {
    let dir = tempfile::tempdir().unwrap();
    let grid = [
        "inject",
        "--epochs",
        "20",
        "--baseline",
        "150",
        "--uncertainty",
        "3",
        "--period",
        "9.1",
        "--k",
        "18",
        "--e",
        "0,0.2,0.4",
        "--trials",
        "5",
        "--seed",
        "8",
        "--no-posterior",
    ];
    let single = dir.path().join("single");
    eccaudit()
        .args(grid)
        .arg("--out")
        .arg(&single)
        .assert()
        .success();
    let shards: Vec<PathBuf> = (0..3).map(|i| dir.path().join(format!("g{i}"))).collect();
    for (i, s) in shards.iter().enumerate() {
        eccaudit()
            .args(grid)
            .arg("--out")
            .arg(s)
            .args(["--shard", &format!("{i}/3")])
            .assert()
            .success()
            .stderr(predicate::str::contains(format!(
                "shard {i}/3: 5 of its 5 trials"
            )));
    }
    let merged = dir.path().join("merged");
    eccaudit()
        .arg("merge")
        .args(&shards)
        .arg("--out")
        .arg(&merged)
        .assert()
        .success()
        .stdout(predicate::str::contains("Merged 15 of 15 trials"));
    assert_eq!(
        read(&merged.join("trials.csv")),
        read(&single.join("trials.csv"))
    );
    eccaudit()
        .args(grid)
        .arg("--out")
        .arg(&merged)
        .arg("--resume")
        .assert()
        .success();
    assert_eq!(
        read(&merged.join("trials.csv")),
        read(&single.join("trials.csv"))
    );
    assert_eq!(
        read(&merged.join("summary.json")),
        read(&single.join("summary.json"))
    );
}

/// A malformed table, a missing one and a row asking what this build cannot do appear in the
/// catalogue with file, line and column; the other tables are audited.
#[test]
fn bad_tables_are_reported_and_the_others_audited() {
    let dir = tempfile::tempdir().unwrap();
    let data = dir.path().join("data");
    let manifest = make_survey(&data, 3);
    std::fs::write(
        data.join("tables/bad.csv"),
        "bjd,rv [m/s],sigma [m/s]\n2460001.5,3.2,2.0\n2460002.5,4.1,2.0\n2460003.5,fast,2.0\n",
    )
    .unwrap();
    let mut text = read(&manifest);
    text.push_str("tables/bad.csv,\ntables/missing.csv,\n");
    std::fs::write(&manifest, text).unwrap();
    let out = dir.path().join("out");
    survey(&manifest, &out, &[])
        .success()
        .stdout(predicate::str::contains(
            "3 table(s) audited, 2 not auditable",
        ))
        .stderr(predicate::str::contains("tables/bad.csv:4:2:"));
    let catalogue = read(&out.join("catalogue.csv"));
    let lines: Vec<&str> = catalogue.lines().collect();
    assert_eq!(lines.len(), 6, "{catalogue}");
    assert!(
        lines[1..4].iter().all(|l| l.contains(",ok,1,")),
        "{catalogue}"
    );
    assert!(
        lines[4].starts_with("tables/bad.csv,004-bad,error,")
            && lines[4].contains("tables/bad.csv:4:2:"),
        "{}",
        lines[4]
    );
    assert!(
        lines[5].starts_with("tables/missing.csv,005-missing,error,")
            && lines[5].contains("cannot read `tables/missing.csv`"),
        "{}",
        lines[5]
    );
    let json: serde_json::Value = serde_json::from_str(&read(&out.join("catalogue.json"))).unwrap();
    assert_eq!(json.as_array().unwrap().len(), 5);
    assert_eq!(json[3]["status"], "error");
}

/// A manifest row asking for two companions gives two catalogue rows and the per-companion
/// folders of `eccaudit audit --companions 2`, with the same numbers.
#[test]
fn two_companions_give_two_rows() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(
        dir.path().join("two.csv"),
        survey_tables::two_companion_table(60, 4),
    )
    .unwrap();
    std::fs::write(dir.path().join("m.csv"), "table,companions\ntwo.csv,2\n").unwrap();
    let out = dir.path().join("out");
    survey(&dir.path().join("m.csv"), &out, &[]).success();
    let rows: serde_json::Value = serde_json::from_str(&read(&out.join("catalogue.json"))).unwrap();
    assert_eq!(rows.as_array().unwrap().len(), 2, "{rows}");
    assert_eq!(rows[0]["companion"], 1);
    assert_eq!(rows[1]["companion"], 2);
    let single = dir.path().join("single");
    eccaudit()
        .arg("audit")
        .arg(dir.path().join("two.csv"))
        .args(["--companions", "2", "--out"])
        .arg(&single)
        .args(AUDIT_FLAGS)
        .assert()
        .success();
    for c in ["c1", "c2"] {
        for file in ["trials.csv", "statement.json", "context.json"] {
            let a = read(&out.join("001-two").join(c).join(file));
            assert!(a == read(&single.join(c).join(file)), "{c}/{file} differs");
        }
    }
}

/// A malformed manifest stops the survey with one line naming file, line and column.
#[test]
fn a_bad_manifest_is_one_clear_line() {
    let dir = tempfile::tempdir().unwrap();
    let manifest = dir.path().join("m.csv");
    std::fs::write(&manifest, "table,stellar_mass\na.csv,1.1\nb.csv,heavy\n").unwrap();
    let assert = eccaudit()
        .arg("survey")
        .arg(&manifest)
        .arg("--out")
        .arg(dir.path().join("out"))
        .assert()
        .failure();
    let stderr = String::from_utf8(assert.get_output().stderr.clone()).unwrap();
    assert_eq!(stderr.lines().count(), 1, "{stderr}");
    assert!(
        stderr.contains(&format!("{}:3:2: stellar_mass `heavy`", manifest.display())),
        "{stderr}"
    );
}

/// The batch script runs this survey with the same flags, one shard per array task.
#[test]
fn the_batch_script_carries_the_flags() {
    let dir = tempfile::tempdir().unwrap();
    let manifest = make_survey(dir.path(), 2);
    let assert = eccaudit()
        .arg("survey")
        .arg(&manifest)
        .args([
            "--out",
            "results",
            "--trials",
            "7",
            "--write-sbatch",
            "4",
            "--cpus-per-task",
            "2",
        ])
        .assert()
        .success();
    let script = String::from_utf8(assert.get_output().stdout.clone()).unwrap();
    assert!(script.starts_with("#!/bin/bash\n"), "{script}");
    for needle in [
        "#SBATCH --array=0-3\n",
        "#SBATCH --cpus-per-task=2\n",
        " --trials 7 ",
        "--shard \"${SLURM_ARRAY_TASK_ID}/4\"",
    ] {
        assert!(script.contains(needle), "no `{needle}` in\n{script}");
    }
    assert!(!script.contains("--write-sbatch 4"), "{script}");
    assert!(!script.contains("--cpus-per-task 2"), "{script}");
}
