//! `steadycal assess` end to end: chosen weights, known uncertainties from named columns,
//! renamed columns, the level origin and the DIN 32645 blank method in the JSON document; bad
//! uncertainty cells refused with file, line and column. Inputs are written by the tests
//! (invented).

mod common;

use common::steadycal;

/// A small run (x = 1…6 twice) with renamed columns and uncertainty columns.
fn lab_file(dir: &std::path::Path, bad_cell: Option<&str>) -> std::path::PathBuf {
    let mut text = String::from("time,counts,gas,u_counts,u_gas\n");
    let rows = [
        (1.0, 3.3),
        (2.0, 5.6),
        (3.0, 7.1),
        (4.0, 9.3),
        (5.0, 10.7),
        (6.0, 12.1),
        (1.0, 3.1),
        (2.0, 5.4),
        (3.0, 7.4),
        (4.0, 9.0),
        (5.0, 11.0),
        (6.0, 12.4),
    ];
    for (i, (x, y)) in rows.iter().enumerate() {
        let u = match (i, bad_cell) {
            (4, Some(cell)) => cell.to_string(),
            _ => "0.5".to_string(),
        };
        text.push_str(&format!("{i},{y},{x},{u},0.05\n"));
    }
    let path = dir.join("lab.csv");
    std::fs::write(&path, text).unwrap();
    path
}

fn assess_json(args: &[&str], bad_cell: Option<&str>) -> (i32, serde_json::Value, String) {
    let dir = tempfile::tempdir().unwrap();
    let path = lab_file(dir.path(), bad_cell);
    let output = steadycal()
        .arg("assess")
        .arg(&path)
        .args(["--raw-column", "counts", "--ref-column", "gas", "--json"])
        .args(args)
        .output()
        .unwrap();
    let stderr = String::from_utf8_lossy(&output.stderr).into_owned();
    assert!(!stderr.contains("panicked"), "{stderr}");
    let json = serde_json::from_slice(&output.stdout).unwrap_or_default();
    (output.status.code().unwrap_or(-1), json, stderr)
}

#[test]
fn chosen_weights_are_named_and_make_the_headline() {
    let (code, json, stderr) = assess_json(&["--weights", "ref^-2"], None);
    assert_eq!(code, 0, "{stderr}");
    assert_eq!(json["wls"]["weights"], "ref^-2");
    assert_eq!(json["headline_fit"], "wls");
    assert_eq!(json["reading_spread"]["model"], "reference_power");
    assert_eq!(json["inverse_prediction"]["fit"], "wls");
    assert_eq!(
        json["inverse_prediction"]["rows"][0]["readings_averaged"],
        2
    );
    let (_, none, _) = assess_json(&["--weights", "none"], None);
    assert!(none["wls"].is_null());
    assert_eq!(none["headline_fit"], "ols");
    let (code, _, stderr) = assess_json(&["--weights", "1/x"], None);
    assert_eq!(code, 2, "{stderr}");
    assert!(
        stderr.contains("expected auto, none, ref^P or level^P"),
        "{stderr}"
    );
}

#[test]
fn uncertainty_columns_give_the_chi_squared_check() {
    let (code, json, stderr) = assess_json(&["--raw-uncertainty-column", "u_counts"], None);
    assert_eq!(code, 0, "{stderr}");
    assert_eq!(json["wls"]["weights"], "known u(raw)");
    assert_eq!(json["wls"]["covariance_rescaled"], false);
    assert_eq!(json["wls"]["chi_squared_df"], 10);
    assert!(json["wls"]["chi_squared_p"].as_f64().unwrap() > 0.0);
    let (code, both, stderr) = assess_json(
        &[
            "--raw-uncertainty-column",
            "u_counts",
            "--ref-uncertainty-column",
            "u_gas",
        ],
        None,
    );
    assert_eq!(code, 0, "{stderr}");
    assert_eq!(both["wls"]["weights"], "known u(raw), u(ref)");
}

#[test]
fn bad_uncertainty_cells_are_refused_with_line_and_column() {
    for (cell, located) in [
        (
            "",
            "lab.csv: line 6, column `u_counts`: the cell is a missing marker",
        ),
        (
            "NA",
            "lab.csv: line 6, column `u_counts`: the cell is a missing marker",
        ),
        ("n/a", "lab.csv:6:4: column `u_counts`: expected a number"),
        (
            "-0.5",
            "lab.csv: line 6, column `u_counts`: -0.5 is not a standard uncertainty",
        ),
    ] {
        let (code, _, stderr) = assess_json(&["--raw-uncertainty-column", "u_counts"], Some(cell));
        assert_eq!(code, 2, "{cell:?}: {stderr}");
        assert!(stderr.contains(located), "{cell:?}: {stderr}");
    }
    let (code, _, stderr) = assess_json(&["--raw-uncertainty-column", "u_missing"], None);
    assert_eq!(code, 2, "{stderr}");
    assert!(stderr.contains("no `u_missing` column"), "{stderr}");
}

#[test]
fn level_origin_is_reported_and_used() {
    let (code, json, stderr) = assess_json(&["--level-origin", "-1"], None);
    assert_eq!(code, 0, "{stderr}");
    assert_eq!(json["model"]["level_origin"], -1.0);
    let (code, _, stderr) = assess_json(&["--level-origin", "nan"], None);
    assert_eq!(code, 2, "{stderr}");
}

#[test]
fn missing_markers_leave_checks_out_and_are_counted() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("lab.csv");
    let mut text = String::from("t,raw,ref\n");
    for (i, x) in [1.0, 2.0, 3.0, 4.0, 5.0, 6.0, 1.0, 2.0, 3.0, 4.0, 5.0, 6.0]
        .iter()
        .enumerate()
    {
        let raw = if i == 3 {
            "-200".to_string()
        } else {
            format!("{}", 1.0 + 2.0 * x + 0.01 * (i % 3) as f64)
        };
        text.push_str(&format!("{i},{raw},{x}\n"));
    }
    std::fs::write(&path, text).unwrap();
    let run = |extra: &[&str]| {
        let output = steadycal()
            .arg("assess")
            .arg(&path)
            .arg("--json")
            .args(extra)
            .output()
            .unwrap();
        let json: serde_json::Value = serde_json::from_slice(&output.stdout).unwrap();
        (
            json["observations"].as_u64().unwrap(),
            String::from_utf8_lossy(&output.stderr).into_owned(),
        )
    };
    // Without the marker, -200 is a measurement (an outlier the fit sees).
    let (observations, _) = run(&[]);
    assert_eq!(observations, 12);
    let (observations, stderr) = run(&["--missing=-200"]);
    assert_eq!(observations, 11);
    assert!(
        stderr.contains("1 row(s) with a reference but a missing `raw` were left out"),
        "{stderr}"
    );
}

#[test]
fn blank_readings_give_the_din32645_blank_method() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("lab.csv");
    let mut text = String::from("t,raw,ref\n");
    let blanks = [0.98, 1.03, 1.01, 0.97, 1.02];
    let standards = [
        (1.0, 3.02),
        (2.0, 4.97),
        (3.0, 7.05),
        (4.0, 8.96),
        (5.0, 11.03),
    ];
    let rows = blanks
        .iter()
        .map(|raw| (0.0, *raw))
        .chain(standards.iter().copied());
    for (i, (reference, raw)) in rows.enumerate() {
        text.push_str(&format!("{i},{raw},{reference}\n"));
    }
    std::fs::write(&path, text).unwrap();
    let output = steadycal()
        .arg("assess")
        .arg(&path)
        .args(["--json", "--weights", "none"])
        .output()
        .unwrap();
    let stderr = String::from_utf8_lossy(&output.stderr);
    assert_eq!(output.status.code(), Some(0), "{stderr}");
    let json: serde_json::Value = serde_json::from_slice(&output.stdout).unwrap();
    let blank = &json["limits"]["din32645_blank"];
    assert_eq!(blank["blank_readings"], 5);
    assert_eq!(blank["df"], 4);
    let critical = blank["critical_value"].as_f64().unwrap();
    assert!(critical > 0.0 && critical < 0.2, "{blank}");
    // A single blank reading gives no blank method.
    let single = dir.path().join("single.csv");
    let whole = std::fs::read_to_string(&path).unwrap();
    // Keep the header, the first blank and the standards.
    let lines: Vec<&str> = whole
        .lines()
        .enumerate()
        .filter(|(i, _)| !(2..=5).contains(i))
        .map(|(_, line)| line)
        .collect();
    std::fs::write(&single, lines.join("\n") + "\n").unwrap();
    let output = steadycal()
        .arg("assess")
        .arg(&single)
        .args(["--json", "--weights", "none"])
        .output()
        .unwrap();
    let json: serde_json::Value = serde_json::from_slice(&output.stdout).unwrap();
    assert!(json["limits"]["din32645"].is_object());
    assert!(json["limits"]["din32645_blank"].is_null());
    let text_output = steadycal()
        .arg("assess")
        .arg(&path)
        .args(["--weights", "none"])
        .output()
        .unwrap();
    let text = String::from_utf8_lossy(&text_output.stdout);
    assert!(text.contains("DIN 32645 blank method"), "{text}");
}
