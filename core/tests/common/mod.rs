//! Shared test utilities: design builders and slow, obvious twins of the fast algorithms.
#![allow(dead_code)]

use clockwright_core::design::*;
use clockwright_core::noise::NoiseTerm;

/// A small deterministic generator (SplitMix64) for random cases.
pub struct Rng(pub u64);

impl Rng {
    pub fn next_u64(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }
    pub fn uniform(&mut self, a: f64, b: f64) -> f64 {
        a + (b - a) * (self.next_u64() >> 11) as f64 / (1u64 << 53) as f64
    }
    pub fn log_uniform(&mut self, a: f64, b: f64) -> f64 {
        (self.uniform(a.ln(), b.ln())).exp()
    }
}

pub fn laser(terms: Vec<NoiseTerm>) -> Laser {
    Laser { label: String::new(), noise: terms, table: None, high_cutoff_hz: 1e3, drift_per_s: 0.0 }
}

pub fn white_laser(sigma_1s: f64) -> Laser {
    laser(vec![NoiseTerm::WhiteFrequency { sigma_y_1s: sigma_1s }])
}

pub fn pulse(duration_s: f64, area_pi: f64) -> Segment {
    Segment::Pulse { duration_s, area_pi, phase_deg: 0.0, detuning_offset_hz: 0.0 }
}

pub fn dead(duration_s: f64) -> Segment {
    Segment::Dead { label: DeadLabel::Other, duration_s }
}

/// A design with the given probe segments, `dead_s` of dead time before them, N atoms.
pub fn design(nu0: f64, atoms: u64, segments: Vec<Segment>, dead_s: f64, laser: Laser) -> Design {
    let mut segs = Vec::new();
    if dead_s > 0.0 {
        segs.push(Segment::Dead { label: DeadLabel::Cooling, duration_s: dead_s });
    }
    segs.extend(segments);
    let cycle: f64 = segs.iter().map(|s| s.duration_s()).sum();
    Design {
        schema_version: SCHEMA_VERSION,
        name: "test".into(),
        transition: Transition { label: String::new(), frequency_hz: nu0, lifetime_s: None, species: None, k_alpha: None },
        atoms: Atoms { count: atoms, entanglement: Entanglement::None },
        sequence: Sequence { segments: segs },
        detection: Detection { rounds: 1, misread_ground: 0.0, misread_excited: 0.0 },
        laser,
        lock: Lock { attack_time_s: (10.0 * cycle).max(1e-6), operating_point: OperatingPointRule::BestSlopeToNoise },
    }
}

/// Slow twin of the Bloch propagation: classical RK4 with many small steps.
pub fn rk4_bloch(mut r: [f64; 3], axis: [f64; 3], gamma: f64, t: f64, steps: usize) -> [f64; 3] {
    let f = |r: [f64; 3]| -> [f64; 3] {
        let [x, y, z] = axis;
        [
            y * r[2] - z * r[1] - gamma / 2.0 * r[0],
            z * r[0] - x * r[2] - gamma / 2.0 * r[1],
            x * r[1] - y * r[0] - gamma * (r[2] + 1.0),
        ]
    };
    let h = t / steps as f64;
    for _ in 0..steps {
        let k1 = f(r);
        let k2 = f([r[0] + h / 2.0 * k1[0], r[1] + h / 2.0 * k1[1], r[2] + h / 2.0 * k1[2]]);
        let k3 = f([r[0] + h / 2.0 * k2[0], r[1] + h / 2.0 * k2[1], r[2] + h / 2.0 * k2[2]]);
        let k4 = f([r[0] + h * k3[0], r[1] + h * k3[1], r[2] + h * k3[2]]);
        for i in 0..3 {
            r[i] += h / 6.0 * (k1[i] + 2.0 * k2[i] + 2.0 * k3[i] + k4[i]);
        }
    }
    r
}

pub fn rel(a: f64, b: f64) -> f64 {
    (a - b).abs() / b.abs().max(1e-300)
}
