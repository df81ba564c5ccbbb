//! The malformed-input corpus in `tests/malformed/`: every case gives its expected exit code
//! and a message that names the problem, never a panic, and writes no output file.

use std::path::Path;
use std::process::Command;

#[test]
fn every_corpus_case_fails_as_listed() {
    let corpus = Path::new(env!("CARGO_MANIFEST_DIR")).join("../tests/malformed");
    let manifest = std::fs::read_to_string(corpus.join("MANIFEST.tsv")).unwrap();
    let dir = tempfile::tempdir().unwrap();
    for f in std::fs::read_dir(&corpus).unwrap() {
        let f = f.unwrap().path();
        std::fs::copy(&f, dir.path().join(f.file_name().unwrap())).unwrap();
    }
    // Generated here rather than committed: a bench log with a 10-million-character line.
    let long = format!("a,b,label\n1,2,GO\n{},2,NO-GO\n", "7".repeat(10_000_000));
    std::fs::write(dir.path().join("log-10-million-character-line.csv"), long).unwrap();
    let extra = "log-10-million-character-line.csv\ttrain {} --folds 0 -o out.json\t2\tline 3: longer than 1048576 bytes";
    let mut cases = 0;
    for line in manifest
        .lines()
        .filter(|l| !l.starts_with('#'))
        .skip(1)
        .chain([extra])
    {
        let cols: Vec<&str> = line.split('\t').collect();
        let [file, args, exit, message] = cols[..] else {
            panic!("bad manifest line: {line}")
        };
        let args: Vec<String> = args.split(' ').map(|a| a.replace("{}", file)).collect();
        let o = Command::new(env!("CARGO_BIN_EXE_linegate"))
            .args(&args)
            .current_dir(dir.path())
            .output()
            .unwrap();
        let (stdout, stderr) = (
            String::from_utf8_lossy(&o.stdout),
            String::from_utf8_lossy(&o.stderr),
        );
        let want: i32 = exit.parse().unwrap();
        assert_eq!(
            o.status.code(),
            Some(want),
            "{file} ({}): exit code; stderr: {stderr}",
            args.join(" ")
        );
        assert!(!stderr.contains("panicked"), "{file}: panic: {stderr}");
        assert!(
            stdout.contains(message) || stderr.contains(message),
            "{file}: expected '{message}' in\n{stdout}\n{stderr}"
        );
        if want != 0 {
            assert!(
                stderr.contains(file),
                "{file}: the message names the file: {stderr}"
            );
            assert!(
                !dir.path().join("out.json").exists(),
                "{file}: no output on failure"
            );
        }
        let _ = std::fs::remove_file(dir.path().join("out.json"));
        cases += 1;
    }
    assert!(cases >= 30, "{cases} cases");
}
