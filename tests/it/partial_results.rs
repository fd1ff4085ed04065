//! Partial results: a leg replica whose windows cannot be estimated is reported
//! failed with its reason, and never stops `collect` for the rest of the campaign.

use crate::life_support::{legwork, rows, small_campaign, text};

#[test]
fn one_broken_leg_leaves_every_other_edge_with_a_result_and_exits_3() {
    let tmp = tempfile::tempdir().unwrap();
    let file = small_campaign(tmp.path(), "");
    let run = legwork(tmp.path(), &["-q", "run", file.to_str().unwrap()]);
    assert!(run.status.success(), "{}", text(&run));
    let tree = tmp.path().join("tree");
    assert_eq!(rows(&tree.join("results/edges.csv")).len(), 3);

    // Break one finished window of one leg: a value the reader refuses (NaN).
    let broken = tree.join("ork-01+ork-02/complex/r1/w03/production/window.tsv");
    let table = std::fs::read_to_string(&broken).unwrap();
    let mut lines: Vec<String> = table.lines().map(str::to_string).collect();
    let row = lines
        .iter()
        .position(|l| !l.starts_with('#') && !l.starts_with("time"))
        .unwrap()
        + 5;
    let mut fields: Vec<&str> = lines[row].split('\t').collect();
    fields[2] = "nan";
    lines[row] = fields.join("\t");
    std::fs::write(&broken, lines.join("\n") + "\n").unwrap();

    let out = legwork(tmp.path(), &["collect", file.to_str().unwrap()]);
    assert_eq!(out.status.code(), Some(3), "{}", text(&out));
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(
        stderr.contains("incomplete") && stderr.contains("hint:"),
        "{}",
        text(&out)
    );
    let stdout = String::from_utf8_lossy(&out.stdout);
    assert!(stdout.contains("Failed (1 leg replicas"), "{}", text(&out));
    assert!(
        stdout.contains("ork-01+ork-02/complex/r1"),
        "{}",
        text(&out)
    );

    // Every other edge has its result; the broken one is listed with the reason.
    let edges = rows(&tree.join("results/edges.csv"));
    let subjects: Vec<&str> = edges.iter().map(|e| e["subject"].as_str()).collect();
    assert_eq!(subjects, ["ork-01+ork-03", "ork-02+ork-03"], "{edges:?}");
    let legs = rows(&tree.join("results/legs.csv"));
    assert_eq!(legs.len(), 5, "six leg replicas less the broken one");
    // The network still places all three ligands (the two edges left connect them).
    assert_eq!(rows(&tree.join("results/ligands.csv")).len(), 3);

    let missing = rows(&tree.join("results/missing.csv"));
    let failed: Vec<_> = missing.iter().filter(|m| m["status"] == "failed").collect();
    assert_eq!(failed.len(), 1, "{missing:?}");
    assert_eq!(failed[0]["subject"], "ork-01+ork-02");
    assert_eq!(failed[0]["leg"], "complex");
    assert!(
        failed[0]["reason"].contains("w03") && failed[0]["reason"].to_lowercase().contains("nan"),
        "the reason names the window and the problem: {}",
        failed[0]["reason"]
    );
    let left: Vec<_> = missing
        .iter()
        .filter(|m| m["status"] == "left_out")
        .collect();
    assert_eq!(left.len(), 1);
    assert_eq!(left[0]["subject"], "ork-01+ork-02");
    assert!(
        left[0]["reason"].contains("complex/r1 failed"),
        "{:?}",
        left[0]
    );

    let html = std::fs::read_to_string(tree.join("report/index.html")).unwrap();
    assert!(html.contains("id=\"missing\"") && html.contains("ork-01+ork-02/complex/r1"));
    // `report` re-renders the same from summary.json.
    let rep = legwork(tmp.path(), &["report", file.to_str().unwrap()]);
    assert!(
        String::from_utf8_lossy(&rep.stdout).contains("Failed (1 leg replicas"),
        "{}",
        text(&rep)
    );
}
