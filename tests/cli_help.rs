//! The top-level `--help` text is part of the interface: this test keeps
//! `tests/fixtures/help.txt` equal to what the binary prints (update the file
//! together with any change to the commands), and checks exit statuses.

use std::process::Command;

#[test]
fn help_text_is_pinned() {
    let out = Command::new(env!("CARGO_BIN_EXE_fluxloom"))
        .arg("--help")
        .output()
        .unwrap();
    assert!(out.status.success());
    let expected = std::fs::read_to_string(concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/tests/fixtures/help.txt"
    ))
    .unwrap();
    assert_eq!(String::from_utf8_lossy(&out.stdout), expected);
}

#[test]
fn a_bad_command_line_exits_with_2() {
    let out = Command::new(env!("CARGO_BIN_EXE_fluxloom"))
        .args(["build"])
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
    let out = Command::new(env!("CARGO_BIN_EXE_fluxloom"))
        .args(["weave"])
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
}

#[test]
fn a_missing_plan_is_one_line_and_exit_1() {
    let out = Command::new(env!("CARGO_BIN_EXE_fluxloom"))
        .args(["build", "no-such-plan.toml"])
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(1));
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(err.lines().count(), 1, "{err}");
    assert!(
        err.starts_with("fluxloom: error: no-such-plan.toml: "),
        "{err}"
    );
}
