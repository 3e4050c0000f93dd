//! Measured-data import: the parsed series against the same numbers fed to the estimators
//! directly (slow twin: the gap-filled series built by hand), units, gaps and every kind of
//! bad input with its line number.

use clockwright_core::estimate::{estimate, Estimator, Options, Series};
use clockwright_core::measured::*;
use clockwright_core::synthesis::{synthesize, PowerLaw, Spec};

fn white(n: u64, seed: u64) -> Vec<f64> {
    synthesize(&Spec { tau0_s: 1.0, points: n, seed, terms: vec![PowerLaw { alpha: 0, h: 2e-30 }] }).unwrap()
}

#[test]
fn evenly_spaced_frequency_gives_the_estimator_of_the_same_numbers() {
    let y = white(500, 1);
    let mut csv = String::from("# a comment\n# tau0_s: 2.5\ny\n");
    for v in &y {
        csv += &format!("{v:e}\n");
    }
    let r = import_csv(&csv, &Options::default()).unwrap();
    let want = estimate(Series::Frequency(&y), 2.5, Estimator::Allan, &Options::default()).unwrap();
    assert_eq!(r.adev, want);
    assert_eq!((r.rows, r.samples, r.gap_count), (500, 500, 0));
    assert_eq!(r.quantity, Quantity::Frequency);
}

#[test]
fn phase_units_and_frequency_offsets_convert_to_base_units() {
    // x in ns with time stamps in MJD (one sample per 10 s), against x in s.
    let x: Vec<f64> = (0..300).map(|k| ((k * 37 % 101) as f64 - 50.0) * 0.01).collect();
    let mut csv = String::from("t_mjd;x_ns\n");
    for (k, v) in x.iter().enumerate() {
        csv += &format!("{};{v}\n", 60000.0 + k as f64 * 10.0 / 86400.0);
    }
    let r = import_csv(&csv, &Options::default()).unwrap();
    assert!((r.tau0_s - 10.0).abs() < 1e-6);
    let xs: Vec<f64> = x.iter().map(|v| v * 1e-9).collect();
    let want = estimate(Series::Phase(&xs), r.tau0_s, Estimator::Allan, &Options::default()).unwrap();
    for (a, b) in r.adev.points.iter().zip(&want.points) {
        assert!((a.deviation / b.deviation - 1.0).abs() < 1e-12);
    }
    // df_hz with a nominal frequency: y = df / nominal.
    let d = parse_csv("# nominal_hz: 5e14\n# tau0_s: 1\ndf_hz\n1\n-0.5\n2\n").unwrap();
    assert_eq!(d.values, vec![2e-15, -1e-15, 4e-15]);
    let d = parse_csv("# tau0_s: 1\nx_ps\n1\n2\n3\n").unwrap();
    assert_eq!(d.quantity, Quantity::Phase);
    assert!((d.values[2] - 3e-12).abs() < 1e-27);
}

/// Slow twin: time stamps with holes give the series with NaN at the missing samples, and
/// the estimator result of that series; gaps are reported with their lines.
#[test]
fn gaps_in_time_stamps_and_empty_cells_become_missing_samples() {
    let y = white(200, 2);
    let mut want = Vec::new();
    let mut csv = String::from("# tau0_s: 1\nt_s,y\n");
    let mut line = 2;
    let mut first_gap_line = 0;
    for (k, v) in y.iter().enumerate() {
        if (50..53).contains(&k) {
            want.push(f64::NAN);
            continue;
        }
        line += 1;
        if k == 53 {
            first_gap_line = line;
        }
        if k == 120 {
            csv += &format!("{},\n", k as f64 * 1.0 + 0.02);
            want.push(f64::NAN);
            continue;
        }
        csv += &format!("{},{v:e}\n", k as f64 * 1.0 + 0.02 * ((k % 3) as f64 - 1.0));
        want.push(*v);
    }
    let d = parse_csv(&csv).unwrap();
    assert_eq!(d.values.len(), 200);
    for (a, b) in d.values.iter().zip(&want) {
        assert!(a == b || (a.is_nan() && b.is_nan()));
    }
    assert_eq!(d.gaps.len(), 2);
    assert_eq!(d.gaps[0], Gap { line: first_gap_line as u64, start_index: 50, missing: 3 });
    assert_eq!(d.gaps[1].start_index, 120);
    let r = analyse(&d, &Options::default()).unwrap();
    assert_eq!(r.gap_samples, 4);
    assert!(r.notes[0].contains("2 gaps with 4 missing samples"));
    let est = estimate(Series::Frequency(&want), 1.0, Estimator::Allan, &Options::default()).unwrap();
    assert_eq!(r.adev, est);
}

fn first_problem(csv: &str) -> (String, String) {
    let e = parse_csv(csv).unwrap_err();
    (e.problems[0].path.clone(), e.problems[0].allowed.clone())
}

#[test]
fn bad_files_give_errors_naming_the_line() {
    // Empty, header only, one point.
    assert!(first_problem("").1.contains("no header"));
    assert!(first_problem("# tau0_s: 1\n").1.contains("no header"));
    assert!(first_problem("# tau0_s: 1\ny\n").1.contains("at least 2 values"));
    assert!(first_problem("# tau0_s: 1\ny\n1e-15\n").1.contains("at least 2 values"));
    assert!(first_problem("# tau0_s: 1\nx_s\n1\n2\n").1.contains("at least 3 values"));
    // Unknown header.
    assert_eq!(first_problem("freq\n1\n2\n"), ("line 1".into(), first_problem("freq\n1\n2\n").1));
    assert!(first_problem("time,y\n1,2\n").1.contains("t_s or t_mjd"));
    // Non-numeric cells.
    let (p, a) = first_problem("# tau0_s: 1\ny\n1e-15\n2e-15 Hz\n3e-15\n");
    assert_eq!(p, "line 4");
    assert!(a.contains("finite number"));
    assert_eq!(first_problem("t_s,y\n0,1\nx,2\n3,4\n").0, "line 3");
    assert_eq!(first_problem("# tau0_s: 1\ny\n1\ninf\n2\n").0, "line 4");
    // Non-monotonic time stamps.
    let (p, a) = first_problem("t_s,y\n0,1\n1,2\n3,3\n2,4\n4,5\n");
    assert_eq!(p, "line 5");
    assert!(a.contains("must increase"), "{a}");
    assert_eq!(first_problem("t_s,y\n0,1\n1,2\n1,3\n2,4\n").0, "line 4");
    // Off the grid.
    let (p, a) = first_problem("t_s,y\n0,1\n1,2\n2,3\n3.5,4\n4.5,5\n5.5,6\n");
    assert_eq!(p, "line 5");
    assert!(a.contains("grid"), "{a}");
    // Mixed units: a second header with another unit.
    let (p, a) = first_problem("# tau0_s: 1\ny\n1\n2\nx_ns\n3\n4\n");
    assert_eq!(p, "line 5");
    assert!(a.contains("mixed units"), "{a}");
    // Wrong cell counts, missing directives.
    assert_eq!(first_problem("t_s,y\n0,1\n1,2,3\n2,3\n").0, "line 3");
    assert!(first_problem("y\n1\n2\n3\n").1.contains("tau0_s"));
    assert!(first_problem("# tau0_s: 1\ndf_hz\n1\n2\n").1.contains("nominal_hz"));
    assert!(first_problem("# tau0_s: -1\ny\n1\n2\n").1.contains("tau0_s"));
    // A gap too long for the sample cap.
    let e = parse_csv("t_s,y\n0,1\n1,2\n2,3\n1e12,4\n").unwrap_err();
    assert!(e.problems[0].allowed.contains("at most"), "{e}");
    // Many bad rows: a bounded list with a count of the rest.
    let mut csv = String::from("# tau0_s: 1\ny\n");
    for _ in 0..100 {
        csv += "bad\n";
    }
    let e = parse_csv(&csv).unwrap_err();
    assert_eq!(e.problems.len(), MAX_REPORTED_PROBLEMS + 1);
    assert!(e.problems.last().unwrap().value.contains("80 more"));
}
