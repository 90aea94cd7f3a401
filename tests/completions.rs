//! `efold completions` and `efold man` on the real binary, checked against the clap
//! definitions themselves (`efold::cli::Args`): every command and every visible option must
//! appear, and the scripts and pages must be what their shells and the man formatter accept.

mod common;
use clap::CommandFactory;
use common::efold;

/// Every command's path (`scan`, `golden write`) with its visible long options, from the
/// parser's own definitions.
fn commands() -> Vec<(Vec<String>, Vec<String>)> {
    fn walk(cmd: &clap::Command, path: Vec<String>, out: &mut Vec<(Vec<String>, Vec<String>)>) {
        for sub in cmd.get_subcommands() {
            let mut p = path.clone();
            p.push(sub.get_name().to_string());
            let longs = sub
                .get_arguments()
                .filter(|a| !a.is_hide_set())
                .filter_map(|a| a.get_long().map(|l| format!("--{l}")))
                .collect();
            out.push((p.clone(), longs));
            walk(sub, p, out);
        }
    }
    let mut out = Vec::new();
    walk(&efold::cli::Args::command(), Vec::new(), &mut out);
    out
}

/// A program on the PATH, if there.
fn have(program: &str) -> bool {
    std::process::Command::new(program)
        .arg("--version")
        .output()
        .is_ok_and(|o| o.status.success())
}

fn check_script(shell: &str, path: &std::path::Path) {
    let st = std::process::Command::new(shell).arg("-n").arg(path).status().unwrap();
    assert!(st.success(), "{shell} -n refuses the script");
}

#[test]
fn completion_scripts_name_every_command_and_parse() {
    let cmds = commands();
    assert!(cmds.len() >= 16, "{cmds:?}");
    let dir = std::env::temp_dir().join(format!("efold-completions-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    for shell in ["bash", "zsh", "fish", "elvish", "powershell"] {
        let r = efold(&["completions", shell]);
        assert_eq!(r.code, 0, "{shell}: {}", r.stderr);
        for (path, longs) in &cmds {
            let name = path.last().unwrap();
            assert!(r.stdout.contains(name.as_str()), "{shell}: no command {name}");
            for l in longs {
                // fish names a long option `-l NAME`
                let written = if shell == "fish" {
                    format!("-l {}", &l[2..])
                } else {
                    l.clone()
                };
                assert!(r.stdout.contains(&written), "{shell}: no {l} of {path:?}");
            }
        }
        let file = dir.join(format!("efold.{shell}"));
        std::fs::write(&file, &r.stdout).unwrap();
        // bash is on every machine that runs these tests; the others where installed
        if shell == "bash" {
            check_script("bash", &file);
        } else if (shell == "zsh" || shell == "fish") && have(shell) {
            check_script(shell, &file);
        }
    }
    std::fs::remove_dir_all(&dir).ok();
    let bad = efold(&["completions", "tcsh"]);
    assert_eq!(bad.code, 2);
    assert!(bad.stderr.contains("tcsh"), "{}", bad.stderr);
}

/// roff escapes the hyphen (`\-`); the text of a page reads without it.
fn plain(roff: &str) -> String {
    roff.replace("\\-", "-")
}

#[test]
fn manual_pages_hold_every_command_and_option() {
    let cmds = commands();
    let top = efold(&["man"]);
    assert_eq!(top.code, 0, "{}", top.stderr);
    assert!(top.stdout.starts_with(".ie") && top.stdout.contains(".TH efold 1"));
    for (path, _) in &cmds {
        assert!(
            plain(&top.stdout).contains(&path.join("-")) || path.len() > 1,
            "no {path:?}"
        );
    }
    let dir = std::env::temp_dir().join(format!("efold-man-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let r = efold(&["man", "--out", dir.to_str().unwrap()]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    assert!(r.stdout.is_empty());
    let mut files: Vec<String> = std::fs::read_dir(&dir)
        .unwrap()
        .map(|e| e.unwrap().file_name().into_string().unwrap())
        .collect();
    files.sort();
    assert_eq!(files.len(), cmds.len() + 1, "{files:?}");
    assert_eq!(std::fs::read_to_string(dir.join("efold.1")).unwrap(), top.stdout);
    for (path, longs) in &cmds {
        let name = format!("efold-{}.1", path.join("-"));
        let page = plain(&std::fs::read_to_string(dir.join(&name)).unwrap_or_else(|_| panic!("no {name}")));
        for l in longs {
            assert!(page.contains(l.as_str()), "{name}: no {l}");
        }
        // one page on standard output is the file's page
        let one = efold(&["man", &path.join("-")]);
        assert_eq!(plain(&one.stdout), page, "{name}");
        // the man formatter reads it (UTF-8, through its preprocessor, as man does) without a
        // warning, where installed
        if have("groff") {
            let out = std::process::Command::new("groff")
                .args(["-k", "-man", "-Tutf8", "-ww", "-z"])
                .arg(dir.join(&name))
                .output()
                .unwrap();
            assert!(
                out.status.success() && out.stderr.is_empty(),
                "{name}: {}",
                String::from_utf8_lossy(&out.stderr)
            );
        }
    }
    std::fs::remove_dir_all(&dir).ok();
    let missing = efold(&["man", "nope"]);
    assert_eq!(missing.code, 2);
    assert!(missing.stderr.contains("no manual page `nope`") && missing.stderr.contains("golden-write"));
    let not_dir = efold(&["man", "--out", "/nonexistent/efold-man"]);
    assert_eq!(not_dir.code, 2);
    assert!(not_dir.stderr.contains("not a directory"), "{}", not_dir.stderr);
}
