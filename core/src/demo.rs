//! The demo designs of the (invented) Fernhollow Time Laboratory design review.
//!
//! Every figure here is invented for the demonstration and plausible for its kind of
//! clock; the transition frequencies and lifetimes are recalled from memory. Measured
//! performance, not these files, decides.

use crate::design::{Design, Laser};

/// The demo design files, by file name.
pub const FILES: [(&str, &str); 4] = [
    ("ion-single.json", include_str!("../designs/ion-single.json")),
    ("ion-string-of-four.json", include_str!("../designs/ion-string-of-four.json")),
    ("lattice.json", include_str!("../designs/lattice.json")),
    ("octupole-ion.json", include_str!("../designs/octupole-ion.json")),
];

/// The four demo designs.
pub fn designs() -> Vec<Design> {
    FILES.iter().filter_map(|(_, text)| Design::from_json(text).ok()).collect()
}

/// The two demo lasers (room-temperature cavity A and cryogenic cavity B).
pub fn lasers() -> Vec<Laser> {
    let d = designs();
    let mut out: Vec<Laser> = Vec::new();
    for l in d.into_iter().map(|d| d.laser) {
        if !out.iter().any(|o| o.label == l.label) {
            out.push(l);
        }
    }
    out
}

/// The demo pair documents, by file name (invented figures; designs from the demo set).
pub const PAIR_FILES: [(&str, &str); 1] = [("pair-ion-octupole.json", include_str!("../designs/pair-ion-octupole.json"))];

/// The demo pairs.
pub fn pairs() -> Vec<crate::pair::PairDocument> {
    PAIR_FILES.iter().filter_map(|(_, text)| crate::pair::PairDocument::from_json(text).ok()).collect()
}
