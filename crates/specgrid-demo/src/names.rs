//! Invented names for districts and fruit varieties. None is meant to match a real place,
//! cultivar, brand or person.

/// The invented district names (lower case, so CSV cells never need quoting).
pub const DISTRICT_NAMES: [&str; 8] = [
    "ashvale",
    "brindlemoor",
    "copperfen",
    "dunwhistle",
    "eddercombe",
    "fallowmere",
    "gorsebrook",
    "hollinwyn",
];

/// The five invented fruit varieties; the first one is the reference level in [`crate::truth`].
pub const VARIETY_NAMES: [&str; 5] = ["kestrel", "larkspur", "meadowglow", "nimbus", "osprey"];

/// Calendar label of the first season; later seasons count up by one.
pub const FIRST_SEASON: u32 = 2024;

/// Village code: district name plus a two-digit (or wider) number within the district,
/// for example `ashvale-07`.
pub(crate) fn village_code(district: &str, number_in_district: usize) -> String {
    format!("{district}-{number_in_district:02}")
}
