//! The files a run touches, in a temporary folder of its own: outputs stay
//! inside the `.ward` file's folder and are never written through a link;
//! the CSV and SVG of a scan are replaced together or not at all, through
//! exclusive temporary files that do not stay behind; `test` does not
//! follow links, so a link to `.` cannot make it loop, and `--accept`
//! keeps a file's permissions. Inputs that are not regular files, too
//! large or not UTF-8 are refused with a clear error; nothing blocks.

use std::fs;
use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};

use wardsmith::diagnostic::{ErrorKind, Source};
use wardsmith::run::{run_folder, run_path, run_source, Mode, Options};

/// A fresh folder under the system's temporary folder, removed on drop.
struct Scratch(PathBuf);

impl Scratch {
    fn new(name: &str) -> Scratch {
        let nanos = std::time::SystemTime::now()
            .duration_since(std::time::UNIX_EPOCH)
            .map_or(0, |d| d.as_nanos());
        let dir =
            std::env::temp_dir().join(format!("wardsmith-{name}-{}-{nanos}", std::process::id()));
        fs::create_dir_all(&dir).expect("a scratch folder");
        Scratch(dir)
    }

    fn path(&self, name: &str) -> PathBuf {
        self.0.join(name)
    }

    fn write(&self, name: &str, text: &str) -> PathBuf {
        let path = self.path(name);
        fs::write(&path, text).expect("write");
        path
    }

    /// The names in the folder, sorted.
    fn names(&self) -> Vec<String> {
        let mut names: Vec<String> = fs::read_dir(&self.0)
            .expect("list")
            .map(|e| e.expect("entry").file_name().to_string_lossy().into_owned())
            .collect();
        names.sort();
        names
    }
}

impl Drop for Scratch {
    fn drop(&mut self) {
        let _ = fs::remove_dir_all(&self.0);
    }
}

/// A numeric file whose `scan` writes `into "{into}"`.
fn scan_file(into: &str) -> String {
    format!(
        "dimension 3\nscalar O dim Delta\npoints x1 x2\nplace x1 at (0, 0, 0)\n\
         place x2 at (1, 0, 0)\nmodel conformal\ncoefficient <O O> = 1\n\
         scan Delta from 1 to 2 steps 3: <O(x1) O(x2)> = 2 <O(x1) O(x2)> into \"{into}\"\n"
    )
}

fn wardsmith(args: &[&str]) -> std::process::Output {
    Command::new(env!("CARGO_BIN_EXE_wardsmith"))
        .args(args)
        .output()
        .expect("the binary runs")
}

#[test]
fn a_scan_writes_both_files_inside_its_folder_and_nothing_else() {
    let dir = Scratch::new("scan");
    let ward = dir.write("s.ward", &scan_file("plot"));
    run_path(&ward, Mode::Check, &Options::default()).unwrap_or_else(|e| panic!("{}", e.render()));
    assert_eq!(dir.names(), ["plot.csv", "plot.svg", "s.ward"]);
    let csv = fs::read_to_string(dir.path("plot.csv")).expect("csv");
    assert_eq!(csv.lines().count(), 4, "{csv}");
    // An absolute name or one with `..` is refused before anything runs.
    for name in ["/tmp/wardsmith-plot", "../plot", "a/../../plot"] {
        let e = run_source(
            &Source::new("abs.ward", scan_file(name)),
            &dir.0,
            Mode::Check,
            &Options::default(),
        )
        .expect_err("refused");
        assert_eq!(e.kind, ErrorKind::Syntax, "{}", e.render());
        assert!(e.message.contains("relative path"), "{}", e.render());
    }
}

#[cfg(unix)]
#[test]
fn links_never_take_a_scan_out_of_its_folder() {
    use std::os::unix::fs::symlink;
    let outside = Scratch::new("outside");
    let victim = outside.write("victim.csv", "precious\n");
    let dir = Scratch::new("linked");
    // A linked folder leading out: refused, nothing written there.
    symlink(&outside.0, dir.path("out")).expect("link");
    let ward = dir.write("s.ward", &scan_file("out/plot"));
    let e = run_path(&ward, Mode::Check, &Options::default()).expect_err("refused");
    assert_eq!(e.kind, ErrorKind::Io);
    assert!(
        e.message.contains("leads out of the folder"),
        "{}",
        e.render()
    );
    assert_eq!(outside.names(), ["victim.csv"]);
    // A planted link at the target is replaced, not written through; so is
    // one at the temporary name an older version used.
    symlink(&victim, dir.path("plot.csv")).expect("link");
    symlink(&victim, dir.path("plot.partial")).expect("link");
    let ward = dir.write("t.ward", &scan_file("plot"));
    run_path(&ward, Mode::Check, &Options::default()).unwrap_or_else(|e| panic!("{}", e.render()));
    assert_eq!(fs::read_to_string(&victim).expect("victim"), "precious\n");
    let csv = fs::symlink_metadata(dir.path("plot.csv")).expect("csv");
    assert!(csv.file_type().is_file());
    assert_eq!(outside.names(), ["victim.csv"]);
}

#[test]
fn a_scan_that_cannot_write_both_files_changes_neither() {
    let dir = Scratch::new("neither");
    let ward = dir.write("s.ward", &scan_file("plot"));
    dir.write("plot.csv", "old table\n");
    // The SVG's place is taken by a folder that holds a file: the rename
    // onto it fails after the CSV's has gone through.
    fs::create_dir(dir.path("plot.svg")).expect("folder");
    dir.write("plot.svg/keep", "");
    let e = run_path(&ward, Mode::Check, &Options::default()).expect_err("cannot write");
    assert_eq!(e.kind, ErrorKind::Io, "{}", e.render());
    assert!(e.message.contains("neither was changed"), "{}", e.render());
    assert_eq!(
        fs::read_to_string(dir.path("plot.csv")).expect("csv"),
        "old table\n"
    );
    // No temporary file stays behind.
    assert_eq!(dir.names(), ["plot.csv", "plot.svg", "s.ward"]);
}

#[test]
fn concurrent_scans_of_one_file_leave_whole_files() {
    let dir = Scratch::new("concurrent");
    let ward = dir.write("s.ward", &scan_file("plot"));
    std::thread::scope(|s| {
        for _ in 0..8 {
            s.spawn(|| {
                run_path(&ward, Mode::Check, &Options::default())
                    .unwrap_or_else(|e| panic!("{}", e.render()))
            });
        }
    });
    assert_eq!(dir.names(), ["plot.csv", "plot.svg", "s.ward"]);
    let csv = fs::read_to_string(dir.path("plot.csv")).expect("csv");
    assert!(csv.starts_with("Delta,left,right\n") && csv.lines().count() == 4);
    let svg = fs::read_to_string(dir.path("plot.svg")).expect("svg");
    assert!(svg.starts_with("<svg") && svg.trim_end().ends_with("</svg>"));
}

#[cfg(unix)]
#[test]
fn test_does_not_follow_links_and_accept_keeps_the_mode() {
    use std::os::unix::fs::{symlink, PermissionsExt};
    let outside = Scratch::new("accept-outside");
    let foreign = outside.write(
        "foreign.ward",
        "dimension 4\nparameters a\nsimplify a + a expect 3 a\n",
    );
    let dir = Scratch::new("accept");
    let file = dir.write(
        "f.ward",
        "dimension 4\nparameters a\n# kept\nsimplify a + a expect 3 a\n",
    );
    fs::set_permissions(&file, fs::Permissions::from_mode(0o640)).expect("chmod");
    // Two links to the folder itself (an exponential walk if followed) and
    // one to a file outside it.
    symlink(".", dir.path("s")).expect("link");
    symlink(".", dir.path("t")).expect("link");
    symlink(&foreign, dir.path("g.ward")).expect("link");
    let options = Options {
        accept: true,
        ..Options::default()
    };
    let out = run_folder(&dir.0, &options).unwrap_or_else(|e| panic!("{}", e.render()));
    assert!(
        out.report.ends_with("1 passed, 0 failed\n"),
        "{}",
        out.report
    );
    assert_eq!(out.report.lines().count(), 2, "{}", out.report);
    assert_eq!(
        fs::read_to_string(&file).expect("read"),
        "dimension 4\nparameters a\n# kept\nsimplify a + a expect 2 a\n"
    );
    let meta = fs::symlink_metadata(&file).expect("meta");
    assert!(meta.file_type().is_file());
    assert_eq!(meta.permissions().mode() & 0o777, 0o640);
    // The file outside was neither checked nor rewritten.
    assert!(fs::read_to_string(&foreign)
        .expect("read")
        .contains("expect 3 a"));
    assert_eq!(dir.names(), ["f.ward", "g.ward", "s", "t"]);
}

#[cfg(unix)]
#[test]
fn pipes_devices_and_large_files_are_refused_without_blocking() {
    let dir = Scratch::new("inputs");
    let fifo = dir.path("fifo.ward");
    let status = Command::new("mkfifo").arg(&fifo).status().expect("mkfifo");
    assert!(status.success());
    for path in [fifo.as_path(), Path::new("/dev/zero")] {
        let e = run_path(path, Mode::Check, &Options::default()).expect_err("refused");
        assert_eq!(e.kind, ErrorKind::Io);
        assert!(e.message.contains("not a regular file"), "{}", e.render());
    }
    // As a rules file too.
    let ward = dir.write(
        "r.ward",
        "dimension 4\nrules \"fifo.ward\"\nparameters a\nsimplify a\n",
    );
    let e = run_path(&ward, Mode::Check, &Options::default()).expect_err("refused");
    assert!(e.message.contains("not a regular file"), "{}", e.render());
    // One byte past the limit (a sparse file: nothing is written).
    let big = fs::File::create(dir.path("big.ward")).expect("create");
    big.set_len(wardsmith::budget::MAX_FILE_BYTES + 1)
        .expect("size");
    let e = run_path(&dir.path("big.ward"), Mode::Check, &Options::default()).expect_err("refused");
    assert!(
        e.message.contains("more than the limit of 16 MiB"),
        "{}",
        e.render()
    );
}

#[test]
fn text_that_is_not_utf8_is_placed_and_a_byte_order_mark_is_read() {
    let dir = Scratch::new("utf8");
    let bad = dir.path("bad.ward");
    fs::write(&bad, b"dimension 4\nparameters a\nsimplify a + \xff\n").expect("write");
    let e = run_path(&bad, Mode::Check, &Options::default()).expect_err("refused");
    assert_eq!(e.kind, ErrorKind::Io);
    assert!(e.to_string().contains("bad.ward:3:14: "), "{e}");
    let bom = dir.path("bom.ward");
    fs::write(
        &bom,
        "\u{feff}dimension 4\nparameters a\nsimplify a + a expect 2 a\n",
    )
    .expect("write");
    let out = run_path(&bom, Mode::Check, &Options::default())
        .unwrap_or_else(|e| panic!("{}", e.render()));
    assert_eq!(out.code, 0, "{}", out.report);
}

#[test]
fn control_characters_of_the_input_are_shown_escaped() {
    let text = "dimension 4\nparameters a\nsimplify a # \u{1b}]0;title\u{7}\n\u{1b}[2J\n";
    let e = run_source(
        &Source::new("esc.ward", text),
        Path::new("."),
        Mode::Check,
        &Options::default(),
    )
    .expect_err("a stray character");
    let plain = e.render();
    assert!(
        !plain.contains('\u{1b}') && !plain.contains('\u{7}'),
        "{plain:?}"
    );
    assert!(plain.contains("4 | \\u{1b}[2J"), "{plain}");
    // In colour, only the colours' own escape sequences are raw.
    let coloured = String::from_utf8_lossy(&e.render_to(true)).into_owned();
    assert!(
        !coloured.contains("\u{1b}]") && !coloured.contains("\u{1b}[2J"),
        "{coloured:?}"
    );
}

#[test]
fn a_file_that_is_not_a_rules_file_is_not_shown() {
    let dir = Scratch::new("rules");
    dir.write("secret.txt", "root:x:0:0:a secret first line\n");
    let ward = dir.write(
        "w.ward",
        "dimension 4\nrules \"secret.txt\"\nparameters a\nsimplify a\n",
    );
    for e in [
        run_path(&ward, Mode::Check, &Options::default()).expect_err("refused"),
        run_path(
            &dir.write("v.ward", "dimension 4\nparameters a\nsimplify a\n"),
            Mode::Check,
            &Options {
                rules: vec![dir.path("secret.txt")],
                ..Options::default()
            },
        )
        .expect_err("refused"),
    ] {
        let rendered = e.render();
        assert!(rendered.contains("is not a rules file"), "{rendered}");
        assert!(!rendered.contains("secret first line"), "{rendered}");
    }
}

#[cfg(unix)]
#[test]
fn a_closed_or_full_standard_output_is_not_a_crash() {
    let dir = Scratch::new("stdout");
    let ward = dir.write(
        "w.ward",
        "dimension 4\nparameters a\nsimplify a + a expect 2 a\n",
    );
    let ward = ward.to_str().expect("utf-8 path");
    // A full disk is an error, exit code 2.
    let full = fs::File::create("/dev/full").expect("/dev/full");
    let out = Command::new(env!("CARGO_BIN_EXE_wardsmith"))
        .args(["check", ward])
        .stdout(full)
        .output()
        .expect("runs");
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("No space left"));
    // A reader that has gone: no panic (exit code 101), no message.
    let mut child = Command::new(env!("CARGO_BIN_EXE_wardsmith"))
        .args(["check", ward])
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("spawns");
    drop(child.stdout.take());
    let out = child.wait_with_output().expect("ends");
    assert_eq!(
        out.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    assert!(
        out.stderr.is_empty(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    // An empty file says so.
    let empty = dir.write("empty.ward", "# nothing yet\n");
    let out = wardsmith(&["check", empty.to_str().expect("utf-8")]);
    assert_eq!(out.status.code(), Some(0));
    assert!(String::from_utf8_lossy(&out.stdout).starts_with("nothing to check"));
}
