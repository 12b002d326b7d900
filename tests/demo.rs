//! The demo: the generator reproduces demo-data/ byte for byte, and the bundle balances.

use crate::util::{root, Workdir};

#[test]
fn generator_reproduces_the_committed_demo_data() {
    let w = Workdir::new();
    w.ok(&["demo", "--out", "d", "--data-only"]);
    let committed = root().join("demo-data");
    let mut names: Vec<String> = std::fs::read_dir(w.path("d/data"))
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().to_string())
        .collect();
    names.sort();
    assert_eq!(
        names,
        [
            "README.md",
            "corrections.csv",
            "planted.json",
            "rules.toml",
            "rules_year_end.toml",
            "velmora_accounts.csv",
            "velmora_firms.csv",
            "velmora_prices.csv",
            "velmora_workforce.csv",
        ]
    );
    for name in names {
        let made = std::fs::read(w.path("d/data").join(&name)).unwrap();
        let kept = std::fs::read(committed.join(&name)).unwrap_or_default();
        assert!(made == kept, "demo-data/{name} differs from the generator's output; regenerate with `cargo run -- demo --out target/demo --data-only` and copy target/demo/data");
    }
}

#[test]
fn demo_bundle_is_complete_and_its_manifest_balances() {
    let w = Workdir::new();
    let r = w.ok(&["demo", "--out", "d"]);
    assert!(r.stdout.contains("bundle"), "{}", r.stdout);
    let m: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(w.path("d/bundle/manifest.json")).unwrap())
            .unwrap();
    let rows = &m["rows"];
    assert_eq!(
        rows["input"].as_u64().unwrap(),
        rows["kept"].as_u64().unwrap() + rows["rejected"].as_u64().unwrap()
    );
    // The ledger and the panel hold every input row exactly once; the ledger also holds the
    // joined files' rows that matched nothing, under their own file names.
    let panel = std::fs::read_to_string(w.path("d/bundle/panel.csv")).unwrap();
    let rejected = std::fs::read_to_string(w.path("d/bundle/rejected.csv")).unwrap();
    assert!(
        rejected.starts_with("source_row,source_file,"),
        "{rejected}"
    );
    let of_file = |file: &str| -> Vec<u64> {
        rejected
            .lines()
            .filter(|l| l.split(',').nth(1) == Some(file))
            .filter_map(|l| l.split(',').next()?.parse().ok())
            .collect()
    };
    let mut ids: Vec<u64> = panel
        .lines()
        .filter_map(|l| l.split(',').next()?.parse().ok())
        .chain(of_file("velmora_accounts.csv"))
        .collect();
    ids.sort();
    let n = rows["input"].as_u64().unwrap();
    assert_eq!(ids, (1..=n).collect::<Vec<_>>());
    // Each joined file: its rows in the ledger are the manifest's count, and those rows plus
    // the rows that matched the panel are the rows read.
    let report: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(w.path("d/bundle/report.json")).unwrap())
            .unwrap();
    let joins = m["joins"].as_array().unwrap();
    assert_eq!(joins.len(), 3);
    for (j, line) in joins.iter().zip(report["joins"].as_array().unwrap()) {
        let name = j["name"].as_str().unwrap();
        let in_ledger = of_file(name).len() as u64;
        assert_eq!(in_ledger, j["rejected"].as_u64().unwrap(), "{name}");
        assert_eq!(
            j["rows"].as_u64().unwrap(),
            line["rows_used"].as_u64().unwrap() + in_ledger,
            "{name}"
        );
        assert!(
            in_ledger > 0,
            "{name}: the demo plants rows that match nothing"
        );
    }
    let total = rejected.lines().count() as u64 - 1;
    assert_eq!(
        total,
        rows["rejected"].as_u64().unwrap()
            + joins
                .iter()
                .map(|j| j["rejected"].as_u64().unwrap())
                .sum::<u64>()
    );
    // Every output is listed with its true hash and size.
    for out in m["outputs"].as_array().unwrap() {
        let bytes = std::fs::read(w.path("d/bundle").join(out["path"].as_str().unwrap())).unwrap();
        assert_eq!(out["bytes"].as_u64().unwrap(), bytes.len() as u64);
        assert_eq!(
            out["sha256"].as_str().unwrap(),
            panelready::bundle::sha256_hex(&bytes)
        );
    }
    let planted: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(w.path("d/data/planted.json")).unwrap())
            .unwrap();
    let report: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(w.path("d/bundle/report.json")).unwrap())
            .unwrap();
    // The key steps find exactly what the generator planted.
    let keys = &report["keys"];
    assert_eq!(keys["missing_key_rows"], planted["missing_key_rows"]);
    assert_eq!(
        keys["exact_duplicate_rows"].as_u64().unwrap(),
        planted["exact_copies"].as_array().unwrap().len() as u64
    );
    assert_eq!(
        keys["conflicting_keys"].as_u64().unwrap(),
        planted["conflicting_keys"].as_array().unwrap().len() as u64
    );
}

#[test]
fn same_input_and_rules_give_a_byte_identical_bundle() {
    let w = Workdir::new();
    w.ok(&["demo", "--out", "d"]);
    let data = "d/data/velmora_accounts.csv";
    w.ok(&[
        "build",
        data,
        "--rules",
        "d/data/rules.toml",
        "--out",
        "again",
    ]);
    for name in [
        "panel.csv",
        "panel.parquet",
        "rejected.csv",
        "report.md",
        "report.json",
    ] {
        let a = std::fs::read(w.path("d/bundle").join(name)).unwrap();
        let b = std::fs::read(w.path("again").join(name)).unwrap();
        assert!(a == b, "{name} differs between two builds");
    }
}

#[test]
fn verify_passes_then_names_a_changed_file_and_refuses_a_moved_input() {
    let w = Workdir::new();
    w.ok(&["demo", "--out", "d"]);
    let r = w.ok(&["verify", "d/bundle"]);
    assert!(r.stdout.contains("rebuilt bit for bit"), "{}", r.stdout);
    // Change one byte of panel.csv.
    let p = w.path("d/bundle/panel.csv");
    let mut bytes = std::fs::read(&p).unwrap();
    let i = bytes.len() / 2;
    bytes[i] = if bytes[i] == b'1' { b'2' } else { b'1' };
    std::fs::write(&p, bytes).unwrap();
    let r = w.run(&["verify", "d/bundle"]);
    assert_eq!(r.code, 1, "{}{}", r.stdout, r.stderr);
    assert!(
        r.stdout.contains("changed since it was written: panel.csv"),
        "{}",
        r.stdout
    );
    assert!(!r.stdout.contains("report.md"), "{}", r.stdout);
    // Move the input away.
    std::fs::rename(w.path("d/data/velmora_accounts.csv"), w.path("moved.csv")).unwrap();
    w.fails(&["verify", "d/bundle"], "was it moved?");
}

/// `verify` on the demo bundle moved to `elsewhere/`, with its input and rules there too.
const RELOCATED: [&str; 6] = [
    "verify",
    "elsewhere/bundle",
    "--input",
    "elsewhere/accounts-2026.csv",
    "--rules",
    "elsewhere/r.toml",
];

#[test]
fn verify_checks_a_bundle_against_relocated_files_recognised_by_hash() {
    let w = Workdir::new();
    w.ok(&["demo", "--out", "d"]);
    // A colleague's machine: the bundle in another folder, the input and rules elsewhere
    // under other names, the originals gone.
    std::fs::create_dir_all(w.path("elsewhere")).unwrap();
    std::fs::rename(w.path("d/bundle"), w.path("elsewhere/bundle")).unwrap();
    std::fs::rename(
        w.path("d/data/velmora_accounts.csv"),
        w.path("elsewhere/accounts-2026.csv"),
    )
    .unwrap();
    std::fs::rename(w.path("d/data/rules.toml"), w.path("elsewhere/r.toml")).unwrap();
    w.fails(
        &["verify", "elsewhere/bundle"],
        "Pass its new place with --input",
    );
    // The files the rules name (joined tables, corrections) are read beside the rules file:
    // without them `verify` names the first one missing.
    w.fails(&RELOCATED, "velmora_workforce.csv");
    for name in [
        "velmora_workforce.csv",
        "velmora_firms.csv",
        "velmora_prices.csv",
        "corrections.csv",
    ] {
        std::fs::rename(w.path("d/data").join(name), w.path("elsewhere").join(name)).unwrap();
    }
    let r = w.ok(&RELOCATED);
    assert!(r.stdout.contains("rebuilt bit for bit"), "{}", r.stdout);
    // A wrong file is recognised by its hash.
    w.write("other.csv", "firm_id,fiscal_year\nA,2020\n");
    w.fails(
        &[
            "verify",
            "elsewhere/bundle",
            "--input",
            "other.csv",
            "--rules",
            "elsewhere/r.toml",
        ],
        "not the bundle's input file",
    );
    let manifest: serde_json::Value = serde_json::from_str(
        &std::fs::read_to_string(w.path("elsewhere/bundle/manifest.json")).unwrap(),
    )
    .unwrap();
    assert_eq!(manifest["input"]["name"], "velmora_accounts.csv");
    // A joined table changed since the build is named, before anything is rebuilt.
    let prices = w.path("elsewhere/velmora_prices.csv");
    let text = std::fs::read_to_string(&prices).unwrap();
    std::fs::write(&prices, text.replacen("100.0", "100.1", 1)).unwrap();
    w.fails(&RELOCATED, "velmora_prices.csv");
}

/// Text whose values repeat is held as codes during a run; every file holds it as read. Worked
/// by hand: firm A has one year (a singleton, which cleaning drops into the ledger) and ten
/// firms four years each; the sector repeats, one of its two values formula-like.
#[test]
fn repeating_text_reaches_every_file_as_read() {
    use polars::prelude::*;
    let w = Workdir::new();
    let sector = |firm: i32| if firm % 2 == 0 { "=Docks" } else { "Mills" };
    let mut rows = vec!["A,2001,=Docks,0.5".to_string()];
    for firm in 1..=10 {
        for y in 2001..=2004 {
            rows.push(format!(
                "F{firm:02},{y},{},{}.5",
                sector(firm),
                firm * 10 + y - 2000
            ));
        }
    }
    w.write("p.csv", &format!("f,y,sector,x\n{}\n", rows.join("\n")));
    w.write(
        "rules.toml",
        "[panel]\nentity = \"f\"\nperiod = \"y\"\n[clean]\ndrop_singletons = true\n",
    );
    w.ok(&["build", "p.csv", "--rules", "rules.toml", "--out", "o"]);
    // The guard's leading quote on every formula-like cell, in the panel and in the ledger.
    let guarded = |row: &str| row.replace(",=", ",'=");
    let panel = std::fs::read_to_string(w.path("o/panel.csv")).unwrap();
    let want: Vec<String> = rows[1..]
        .iter()
        .enumerate()
        .map(|(i, row)| format!("{},{}", i + 2, guarded(row)))
        .collect();
    assert_eq!(
        panel,
        format!("source_row,f,y,sector,x\n{}\n", want.join("\n"))
    );
    let rejected = std::fs::read_to_string(w.path("o/rejected.csv")).unwrap();
    assert!(rejected.contains(",A,2001,'=Docks,0.5"), "{rejected}");
    // panel.parquet: the sector as text, row by row as read.
    let file = std::fs::File::open(w.path("o/panel.parquet")).unwrap();
    let read = ParquetReader::new(file).finish().unwrap();
    let column = read.column("sector").unwrap();
    assert_eq!(column.dtype(), &DataType::String);
    let values: Vec<Option<&str>> = column.str().unwrap().iter().collect();
    let want: Vec<Option<&str>> = (1..=10)
        .flat_map(|firm| std::iter::repeat_n(Some(sector(firm)), 4))
        .collect();
    assert_eq!(values, want);
}

#[test]
fn csv_outputs_guard_formula_like_text() {
    let w = Workdir::new();
    w.write("p.csv", "f,y,note\n=cmd,1,+x\n=cmd,2,fine\nB,1,@y\n");
    w.ok(&[
        "build", "p.csv", "--entity", "f", "--period", "y", "--out", "o",
    ]);
    let panel = std::fs::read_to_string(w.path("o/panel.csv")).unwrap();
    assert_eq!(
        panel,
        "source_row,f,y,note\n1,'=cmd,1,'+x\n2,'=cmd,2,fine\n3,B,1,'@y\n"
    );
}
