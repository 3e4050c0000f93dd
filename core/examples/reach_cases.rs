//! Prints, as JSON, the engine's reach numbers for the cases the independent reference
//! `tests/reference/reach.py` recomputes: the alpha-amplitude conversion at several masses
//! and densities, drift bounds of the demo pair under several campaigns and K values, the
//! levelling curve, and the pieces of the dark-matter reach at several masses.
//!
//! ```text
//! cargo run --release -p clockwright-core --example reach_cases > cases.json
//! ```

use clockwright_core::pair::{evaluate_pair, PairOptions};
use clockwright_core::reach::{alpha_amplitude_per_d_e, field_frequency_hz, reach, ReachOptions};
use serde_json::{json, Value};
use std::process::ExitCode;

fn run() -> Result<Value, String> {
    let mut conversion = Vec::new();
    for &rho in &[0.4, 0.3, 1.0] {
        for &m in &[1e-24, 1e-22, 3.3e-20, 1e-17, 1e-14] {
            conversion.push(json!({"mass_ev": m, "rho_gev_per_cm3": rho, "frequency_hz": field_frequency_hz(m), "alpha_amplitude_per_d_e": alpha_amplitude_per_d_e(m, rho)}));
        }
    }
    let base = clockwright_core::demo::pairs().into_iter().next().ok_or("no demo pair")?;
    let mut campaigns = Vec::new();
    let variants: [(u32, f64, f64, f64, Option<f64>); 5] = [
        (52, 86_400.0, 604_800.0, 3e-18, None),
        (2, 86_400.0, 3.15576e7, 0.0, None),
        (12, 3_600.0, 2.6e6, 1e-17, Some(0.5)),
        (365, 40_000.0, 86_400.0, 0.0, None),
        (5, 86_400.0, 8.0e6, 5e-18, Some(-3.0)),
    ];
    let opt = ReachOptions { mass_points: 11, ..Default::default() };
    for (sessions, len, spacing, sys, kb) in variants {
        let mut p = base.clone();
        p.campaign.sessions = sessions;
        p.campaign.session_length_s = len;
        p.campaign.spacing_s = spacing;
        p.campaign.systematic_per_session = sys;
        if let Some(k) = kb {
            p.b.transition.k_alpha = Some(k);
        }
        let r = reach(&p, &opt).map_err(|e| e.to_string())?;
        campaigns.push(json!({
            "times_s": p.campaign.session_centres_s(),
            "session_statistical": r.drift.session_statistical,
            "systematic_per_session": sys,
            "delta_k": r.drift.delta_k,
            "ratio_drift_per_year": r.drift.ratio_drift_per_year,
            "alpha_drift_per_year": r.drift.alpha_drift_per_year,
            "span_s": r.campaign_span_s,
            "live_time_s": r.live_time_s,
            "uptime": p.campaign.uptime,
            "session_length_s": len,
            "dark_matter": r.dark_matter,
            "levelling": r.levelling,
            "rho_gev_per_cm3": opt.rho_dm_gev_per_cm3,
            "coherence_periods": opt.coherence_periods,
            "stochastic_confidence": opt.stochastic_confidence,
        }));
    }
    let pair = evaluate_pair(&base, &PairOptions::default()).map_err(|e| e.to_string())?;
    Ok(json!({"conversion": conversion, "campaigns": campaigns, "pair_curve": {"tau_s": pair.tau_s, "total": pair.total}}))
}

fn main() -> ExitCode {
    match run() {
        Ok(v) => {
            println!("{}", serde_json::to_string_pretty(&v).unwrap_or_default());
            ExitCode::SUCCESS
        }
        Err(e) => {
            eprintln!("{e}");
            ExitCode::from(2)
        }
    }
}
