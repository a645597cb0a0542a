//! The sign chain of a closeout (docs/sign-chain.md), through the binary: logs from
//! `magproof simulate align` and `magproof simulate polarity`, one plan running both, and
//! the chain read back from the terminal text, the JSON and the ledger.

use crate::util::{assert_code, json_stdout, stdout, TestDir};

/// Simulate an align run (`align_flags`) and a polarity run (`polarity_flags`) into
/// sub-folders and write `plan.toml` running both: the polarity simulator's rods and
/// magnetometer with the align simulator's `[align_test]`. Both simulators put the
/// magnetometer on the body axes (`sensor_to_body` the identity).
fn two_step_plan(dir: &TestDir, align_flags: &[&str], polarity_flags: &[&str]) {
    let mut a = vec!["simulate", "align", "--seed", "3", "--out", "al"];
    a.extend_from_slice(align_flags);
    assert_code(&dir.run(&a), 0);
    let mut p = vec!["simulate", "polarity", "--seed", "3", "--out", "po"];
    p.extend_from_slice(polarity_flags);
    assert_code(&dir.run(&p), 0);
    let al = std::fs::read_to_string(dir.join("al/plan.toml")).unwrap();
    let po = std::fs::read_to_string(dir.join("po/plan.toml")).unwrap();
    let align_test = &al[al.find("[align_test]").unwrap()..al.find("[[step]]").unwrap()];
    let head = &po[..po.find("[[step]]").unwrap()];
    dir.write(
        "plan.toml",
        format!(
            "{head}\n{align_test}[[step]]\nkind = \"align\"\nlog = \"al/align.csv\"\n\n\
             [[step]]\nkind = \"polarity\"\nlog = \"po/pulses.csv\"\n"
        ),
    );
}

fn axis<'a>(j: &'a serde_json::Value, name: &str) -> &'a serde_json::Value {
    j["sign_chain"]
        .as_array()
        .expect("sign_chain")
        .iter()
        .find(|a| a["axis"] == name)
        .unwrap_or_else(|| panic!("no axis {name} in {j}"))
}

#[test]
fn a_flipped_magnetometer_axis_and_a_reversed_rod_show_as_a_broken_cancelling_pair() {
    let dir = TestDir::new();
    two_step_plan(&dir, &["--axis-fault", "flip-y"], &["--reverse", "y"]);
    let out = dir.run(&["closeout", "--no-record", "--json", "plan.toml"]);
    assert_code(&out, 1);
    let j = json_stdout(&out);
    let y = axis(&j, "y");
    assert_eq!(y["magnetometer"], "flipped");
    assert_eq!(y["rod"], "reversed");
    assert_eq!(y["law"], "unchecked", "no loop step");
    assert_eq!(y["gyro"], "unchecked");
    assert_eq!(y["ok"], false);
    for other in ["x", "z"] {
        assert_eq!(axis(&j, other)["magnetometer"], "ok");
        assert_eq!(axis(&j, other)["rod"], "ok");
    }
    assert_eq!(j["sign_chain_complete"], false);
    assert_eq!(j["sign_chain_status"], "broken");
    let notes = j["sign_chain_notes"].to_string();
    assert!(
        notes.contains("Body y") && notes.contains("cancel"),
        "{notes}"
    );

    // The terminal summary shows the table and the pair.
    let text = dir.run(&["closeout", "--no-record", "plan.toml"]);
    assert_code(&text, 1);
    let t = stdout(&text);
    assert!(t.contains("Sign chain per body axis"), "{t}");
    assert!(t.contains("FLIPPED") && t.contains("REVERSED"), "{t}");
    assert!(t.contains("sign chain") && t.contains("BROKEN"), "{t}");
    assert!(t.contains("two signs cancel"), "{t}");
    assert!(
        t.contains("(broken on body y; not proven on body x, z;"),
        "the verdict list parts broken from unproven axes: {t}"
    );

    // The report carries the section and the same keys in result.json.
    let rep = dir.run(&["closeout", "--no-record", "--report", "rep", "plan.toml"]);
    assert_code(&rep, 1);
    let html = std::fs::read_to_string(dir.join("rep/report.html")).unwrap();
    assert!(
        html.contains("Sign chain per body axis"),
        "no chain section"
    );
    assert!(html.contains("FLIPPED") && html.contains("REVERSED"));
    let saved: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.join("rep/result.json")).unwrap())
            .unwrap();
    assert_eq!(saved["sign_chain"], j["sign_chain"]);
}

#[test]
fn clean_align_and_polarity_pass_with_the_chain_incomplete_and_recorded() {
    let dir = TestDir::new();
    two_step_plan(&dir, &[], &[]);
    let out = dir.run(&["closeout", "--json", "--ledger", "l.db", "plan.toml"]);
    // Nothing tests the law (no loop step): the chain is incomplete, which is not a
    // failed check, so the closeout passes.
    assert_code(&out, 0);
    let j = json_stdout(&out);
    assert_eq!(j["pass"], true);
    for name in ["x", "y", "z"] {
        let a = axis(&j, name);
        assert_eq!(a["magnetometer"], "ok", "{a}");
        assert_eq!(a["rod"], "ok", "{a}");
        assert_eq!(a["law"], "unchecked", "{a}");
        assert_eq!(a["ok"], false, "{a}");
    }
    assert_eq!(j["sign_chain_complete"], false);
    assert_eq!(j["sign_chain_status"], "incomplete");

    // The ledger keeps the chain beside the two steps, with its per-axis quantities.
    let h = json_stdout(&dir.run(&["history", "--json", "--ledger", "l.db"]));
    let runs = h["runs"].as_array().unwrap();
    let kinds: Vec<&str> = runs.iter().map(|r| r["kind"].as_str().unwrap()).collect();
    assert_eq!(kinds, ["align", "polarity", "sign_chain"]);
    let chain = &runs[2];
    assert_eq!(chain["result"]["sign_chain_status"], "incomplete");
    assert!(
        chain["pass"].is_null(),
        "incomplete is neither pass nor fail"
    );
    let q = chain["quantities"].to_string();
    for name in [
        "sign_chain_x",
        "sign_chain_y_rod",
        "sign_chain_z_law",
        "sign_chain_status",
    ] {
        assert!(q.contains(&format!("\"{name}\"")), "{name} missing: {q}");
    }
    assert_eq!(
        chain["inputs"].as_array().unwrap().len(),
        3,
        "plan and two logs"
    );

    // history --kind takes the chain's kind, and the same closeout again is not a new run.
    let again = dir.run(&["closeout", "--ledger", "l.db", "plan.toml"]);
    assert_code(&again, 0);
    assert!(
        stdout(&again).contains("INCOMPLETE   same inputs as run #3, not recorded again"),
        "{}",
        stdout(&again)
    );
    let only = dir.run(&[
        "history",
        "--json",
        "--ledger",
        "l.db",
        "--kind",
        "sign_chain",
    ]);
    let runs = json_stdout(&only)["runs"].as_array().unwrap().clone();
    assert_eq!(runs.len(), 1);
    assert_eq!(runs[0]["kind"], "sign_chain");
}

#[test]
fn a_closeout_without_align_polarity_or_loop_has_no_chain() {
    let dir = TestDir::new();
    assert_code(
        &dir.run(&["simulate", "tumble", "--seed", "2", "--out", "."]),
        0,
    );
    let out = dir.run(&["closeout", "--no-record", "--json", "plan.toml"]);
    let j = json_stdout(&out);
    assert!(j.get("sign_chain").is_none(), "{j}");
    assert!(j.get("sign_chain_complete").is_none());
}
