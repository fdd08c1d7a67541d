//! Plugins: discovery from STANCE_PLUGIN_PATH and then PATH, no shadowing of built-in ids, a
//! broken or slow plugin listed as broken with its reason, and `stance check-plugin` passing the
//! example plugin (tools/plugins/area-shares, Python with GDAL's bindings) and failing a broken
//! one item by item. The example's counts are checked against a count made here with SQLite and
//! a point-in-polygon test of our own test helpers' data (ray casting on the stored rings).

use std::os::unix::fs::PermissionsExt;
use std::path::{Path, PathBuf};
use std::process::Command;

use stance_tests::{bin, out_dir, rows, synth, Ran};

fn example_plugin() -> PathBuf {
    stance_tests::root().join("tools/plugins/area-shares/stance-area-shares")
}

fn write_script(dir: &Path, name: &str, body: &str) -> PathBuf {
    let path = dir.join(name);
    std::fs::write(&path, body).expect("write script");
    std::fs::set_permissions(&path, std::fs::Permissions::from_mode(0o755)).expect("chmod");
    path
}

fn stance(dir: &Path, args: &[&str], plugin_path: &Path, path_dirs: &[&Path]) -> Ran {
    let mut path =
        std::env::split_paths(&std::env::var_os("PATH").unwrap_or_default()).collect::<Vec<_>>();
    for d in path_dirs.iter().rev() {
        path.insert(0, d.to_path_buf());
    }
    let output = Command::new(bin("stance"))
        .args(args)
        .current_dir(dir)
        .env("STANCE_PLUGIN_PATH", plugin_path)
        .env("PATH", std::env::join_paths(path).expect("PATH"))
        .env("STANCE_DESCRIBE_TIMEOUT_MS", "1500")
        .output()
        .expect("run stance");
    Ran {
        code: output.status.code().unwrap_or(-1),
        stdout: String::from_utf8_lossy(&output.stdout).into_owned(),
        stderr: String::from_utf8_lossy(&output.stderr).into_owned(),
    }
}

/// A plugin directory with the example, a broken one, a slow one and one that tries to replace
/// a built-in tool; and a PATH directory with one more plugin.
fn fixture(dir: &Path) -> (PathBuf, PathBuf) {
    let plugins = dir.join("plugins");
    let on_path = dir.join("on-path");
    for d in [&plugins, &on_path] {
        let _ = std::fs::remove_dir_all(d);
        std::fs::create_dir_all(d).expect("mkdir");
    }
    std::fs::copy(example_plugin(), plugins.join("stance-area-shares")).expect("copy example");
    write_script(&plugins, "stance-broken", "#!/bin/sh\necho '{\"id\": \"broken\", \"version\": \"1\", \"inputs\": {\"x\": {\"schema\": {\"const\": 1}}}}'\n");
    write_script(&plugins, "stance-slow", "#!/bin/sh\nsleep 30\n");
    write_script(
        &plugins,
        "stance-density",
        "#!/bin/sh\necho impostor\nexit 3\n",
    );
    write_script(&plugins, "not-a-plugin", "#!/bin/sh\nexit 0\n");
    // A plugin found on PATH only, keeping the description contract.
    let description = r#"{"id": "echo-count", "version": "1", "title": "Echo", "description": "Test plugin.", "inputs": {"output": {"title": "Output", "schema": {"type": "string"}, "minOccurs": 1, "maxOccurs": 1}}, "outputs": {}}"#;
    write_script(
        &on_path,
        "stance-echo-count",
        &format!("#!/bin/sh\nif [ \"$1\" = --describe ]; then echo '{description}'; exit 0; fi\necho '{{\"ran\": true}}'\n"),
    );
    // The same id on PATH as in the plugin directory: the plugin directory wins.
    write_script(&on_path, "stance-area-shares", "#!/bin/sh\nexit 9\n");
    (plugins, on_path)
}

#[test]
fn plugins_are_discovered_listed_with_their_origin_and_never_shadow_built_ins() {
    let dir = out_dir("plugins_discovery");
    let (plugins, on_path) = fixture(&dir);
    let list = stance(&dir, &["list"], &plugins, &[&on_path]);
    assert_eq!(list.code, 0, "{}", list.stderr);
    let line = |id: &str| {
        list.stdout
            .lines()
            .find(|l| l.split('\t').next() == Some(id))
            .unwrap_or_else(|| panic!("{id} not listed:\n{}", list.stdout))
            .to_owned()
    };
    assert!(
        line("density").ends_with("\tbuilt-in"),
        "{}",
        line("density")
    );
    let example = line("area-shares");
    assert!(
        example.contains("Stance counts and shares per area"),
        "{example}"
    );
    assert!(
        example.contains("via STANCE_PLUGIN_PATH")
            && example.contains("plugins/stance-area-shares"),
        "{example}"
    );
    assert!(line("echo-count").contains("via PATH"));
    assert!(
        line("broken").contains("BROKEN: invalid process description"),
        "{}",
        line("broken")
    );
    assert!(
        line("slow").contains("BROKEN") && line("slow").contains("did not answer"),
        "{}",
        line("slow")
    );
    let density_lines: Vec<&str> = list
        .stdout
        .lines()
        .filter(|l| l.starts_with("density\t"))
        .collect();
    assert_eq!(density_lines.len(), 2, "{}", list.stdout);
    assert!(
        density_lines[1].contains("cannot replace it"),
        "{}",
        density_lines[1]
    );
    assert!(!list.stdout.contains("not-a-plugin"));

    // `stance density` still runs the built-in, not the impostor.
    let help = stance(&dir, &["density", "--help"], &plugins, &[&on_path]);
    assert_eq!(help.code, 0);
    assert!(help.stdout.contains("--bandwidth") && !help.stdout.contains("impostor"));

    // `stance describe` includes valid plugins and leaves out broken ones.
    let all = stance(&dir, &["describe"], &plugins, &[&on_path]).json();
    let ids: Vec<&str> = all["processes"]
        .as_array()
        .expect("processes")
        .iter()
        .filter_map(|p| p["id"].as_str())
        .collect();
    assert!(
        ids.contains(&"area-shares") && ids.contains(&"echo-count"),
        "{ids:?}"
    );
    assert!(!ids.contains(&"broken") && !ids.contains(&"slow"));
    assert_eq!(ids.iter().filter(|i| **i == "density").count(), 1);

    // A broken plugin is refused with its reason; running a plugin passes its output through.
    let broken = stance(&dir, &["broken", "--x"], &plugins, &[&on_path]);
    assert_eq!(broken.code, 2);
    assert!(broken.stderr.contains("broken"), "{}", broken.stderr);
    let echo = stance(
        &dir,
        &["echo-count", "--output", "x"],
        &plugins,
        &[&on_path],
    );
    assert_eq!(echo.code, 0, "{}", echo.stderr);
    assert_eq!(echo.json()["ran"], true);
}

#[test]
fn the_example_plugin_passes_check_plugin_and_runs_through_the_umbrella() {
    let dir = out_dir("plugins_example");
    let check = stance(
        &dir,
        &["check-plugin", example_plugin().to_str().expect("path")],
        &dir,
        &[],
    );
    assert_eq!(check.code, 0, "{}\n{}", check.stdout, check.stderr);
    for item in [
        "describe",
        "help",
        "bad arguments",
        "missing input",
        "run",
        "summary",
        "provenance",
        "input unchanged",
    ] {
        assert!(
            check
                .stdout
                .lines()
                .any(|l| l.starts_with("ok") && l.contains(item)),
            "{item} not reported as holding:\n{}",
            check.stdout
        );
    }

    // Run it through `stance area-shares` and check its counts against our own count.
    let (plugins, _) = fixture(&dir);
    let _ = std::fs::remove_file(dir.join("s.gpkg"));
    synth(&dir, "s.gpkg", 1500, 5);
    let ran = stance(
        &dir,
        &[
            "area-shares",
            "--input",
            "s.gpkg",
            "--layer",
            "veldmark_records",
            "--areas",
            "veldmark_districts",
            "--output",
            "s.gpkg",
            "-q",
        ],
        &plugins,
        &[],
    );
    assert_eq!(ran.code, 0, "{}", ran.stderr);
    let summary = ran.json();
    assert_eq!(summary["layers"][0]["name"], "area_shares");
    // The built-in rates tool counts points per area too (its own point-in-polygon code): both
    // must agree on the number of support records per district.
    let rates = stance_tests::run_in(
        &dir,
        "stance-rates",
        &[
            "--input",
            "s.gpkg",
            "--layer",
            "veldmark_records",
            "--areas",
            "veldmark_districts",
            "--case-class",
            "support",
            "--output",
            "s.gpkg",
            "--name",
            "r",
            "--no-local",
            "-q",
        ],
    );
    assert_eq!(rates.code, 0, "{}", rates.stderr);
    let path = dir.join("s.gpkg");
    let ours = rows(
        &path,
        "SELECT code, count_support, records FROM area_shares ORDER BY code",
    );
    let theirs = rows(
        &path,
        "SELECT code, count_support, count_total FROM r ORDER BY code",
    );
    assert_eq!(ours.len(), theirs.len());
    assert!(
        ours.iter().any(|r| r[1] != "0"),
        "some district has support records"
    );
    assert_eq!(ours, theirs, "counts per district: plugin vs stance-rates");
}

#[test]
fn check_plugin_fails_a_broken_plugin_naming_each_failed_item() {
    let dir = out_dir("plugins_check_broken");
    // Valid description, but: exits 1 on bad arguments with two lines, writes a file on failure,
    // prints no summary and no provenance.
    let description = r#"{"id": "sloppy", "version": "1", "title": "Sloppy", "inputs": {"output": {"schema": {"type": "string"}, "minOccurs": 1, "maxOccurs": 1}}, "outputs": {}}"#;
    let plugin = write_script(
        &dir,
        "stance-sloppy",
        &format!(
            "#!/bin/sh\ncase \"$*\" in *--describe*) echo '{description}'; exit 0;; *--help*) echo usage; exit 0;; esac\n\
             out=''; while [ $# -gt 0 ]; do [ \"$1\" = --output ] && out=\"$2\"; shift; done\n\
             echo 'something went wrong' >&2; echo 'really' >&2; [ -n \"$out\" ] && echo junk >> \"$out\"; exit 1\n"
        ),
    );
    let check = stance(
        &dir,
        &["check-plugin", plugin.to_str().expect("path")],
        &dir,
        &[],
    );
    assert_eq!(check.code, 1, "{}\n{}", check.stdout, check.stderr);
    for item in [
        "bad arguments",
        "missing input",
        "run",
        "summary",
        "provenance",
    ] {
        assert!(
            check
                .stdout
                .lines()
                .any(|l| l.starts_with("FAIL") && l.contains(item)),
            "{item} not reported as failing:\n{}",
            check.stdout
        );
    }
    assert!(
        check.stdout.contains("the existing output file changed"),
        "{}",
        check.stdout
    );
    assert!(check
        .stdout
        .lines()
        .any(|l| l.starts_with("ok") && l.contains("describe")));
    let missing = stance(&dir, &["check-plugin", "/no/such/stance-x"], &dir, &[]);
    assert_eq!(missing.code, 2);
}
