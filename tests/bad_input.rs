//! The malformed-input corpus in tests/data/bad/: every file gets one clear message naming the file, line and
//! field, what was found and what was expected; exit code 2; no panic; no output file.

use std::process::Command;

fn repo(rel: &str) -> String {
    format!("{}/{rel}", env!("CARGO_MANIFEST_DIR"))
}

#[test]
fn every_bad_input_is_reported_clearly() {
    let cases = std::fs::read_to_string(repo("tests/data/bad/cases.csv")).unwrap();
    let out_dir = std::env::temp_dir().join(format!("dipwatch-bad-{}", std::process::id()));
    std::fs::create_dir_all(&out_dir).unwrap();
    let mut n = 0;
    for line in cases.lines().filter(|l| !l.starts_with('#')).skip(1) {
        let mut parts = line.splitn(3, ',');
        let (file, kind, fragments) = (
            parts.next().unwrap(),
            parts.next().unwrap(),
            parts.next().unwrap(),
        );
        let path = repo(&format!("tests/data/bad/{file}"));
        let out = out_dir.join(format!("{file}.out"));
        let (sites, targets) = (repo("sites.example.toml"), repo("targets.example.csv"));
        let mut frags: Vec<String> = fragments
            .split(" | ")
            .map(|f| f.replace("{file}", &path))
            .collect();
        let owned = |v: &[&str]| v.iter().map(|s| s.to_string()).collect::<Vec<String>>();
        let mut args: Vec<String> = match kind {
            "sites" => owned(&["plan", "--sites", &path, "--targets", &targets]),
            "targets" => owned(&["plan", "--sites", &sites, "--targets", &path]),
            "observed" => owned(&["refine", "--targets", &targets, "--observed", &path]),
            "args" => {
                let mut a: Vec<String> = frags
                    .remove(0)
                    .split_whitespace()
                    .map(str::to_string)
                    .collect();
                a.extend(owned(&["--sites", &sites, "--targets", &targets]));
                a
            }
            other => panic!("unknown kind {other}"),
        };
        if kind != "args" {
            args.extend(["--out".to_string(), out.to_str().unwrap().to_string()]);
            if kind != "observed" {
                args.extend([
                    "--from".to_string(),
                    "2027-03-01".to_string(),
                    "--days".to_string(),
                    "1".to_string(),
                ]);
            }
        }
        let o = Command::new(env!("CARGO_BIN_EXE_dipwatch"))
            .args(&args)
            .output()
            .unwrap();
        let err = String::from_utf8_lossy(&o.stderr);
        assert_eq!(
            o.status.code(),
            Some(2),
            "{file}: exit code {:?}, stderr:\n{err}",
            o.status.code()
        );
        assert!(
            !err.contains("panicked") && !err.contains("RUST_BACKTRACE"),
            "{file}: panic:\n{err}"
        );
        for f in &frags {
            assert!(
                err.contains(f.as_str()),
                "{file}: message lacks {f:?}:\n{err}"
            );
        }
        assert!(
            o.stdout.is_empty(),
            "{file}: output on stdout despite the error"
        );
        assert!(!out.exists(), "{file}: an output file was written");
        n += 1;
    }
    assert!(n >= 30, "only {n} cases");
}
