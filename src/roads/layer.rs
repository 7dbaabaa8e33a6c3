//! What a route sheet's map draws around the driven path so that a driver can orient: the
//! extract's drivable roads (major or minor, with their names) and its named places.
//!
//! Read with the graph ([`super::read::parse`]) and cached with it. Roads point into the
//! graph's node arrays; places are the extract's `place=*` nodes with a `name` (places mapped
//! only as areas are not read). Everything here is public map data from the extract: nothing
//! of the scenario's requests enters it.

use crate::scenario::LonLat;

/// `highway=*` classes drawn as major roads (wider, and named on the map).
pub const MAJOR_CLASSES: [&str; 10] = [
    "motorway",
    "motorway_link",
    "trunk",
    "trunk_link",
    "primary",
    "primary_link",
    "secondary",
    "secondary_link",
    "tertiary",
    "tertiary_link",
];

/// Whether `highway` is a major road class.
pub fn is_major(highway: &str) -> bool {
    MAJOR_CLASSES.contains(&highway)
}

/// Kinds of named place kept, most important first (`place=*` values).
pub const PLACE_KINDS: [&str; 6] = ["city", "town", "village", "suburb", "hamlet", "locality"];

/// A drivable road of the extract: one way, or a run of it whose nodes the extract holds.
#[derive(Clone, Debug, PartialEq)]
pub struct MapRoad {
    /// Whether its class is one of [`MAJOR_CLASSES`].
    pub major: bool,
    /// Its `name` tag, else its `ref` tag, else empty.
    pub name: String,
    /// Graph node indices along the road, in way order (at least two).
    pub nodes: Vec<u32>,
}

/// A named place of the extract.
#[derive(Clone, Debug, PartialEq)]
pub struct MapPlace {
    /// Its `name` tag.
    pub name: String,
    /// Index of its `place` value in [`PLACE_KINDS`] (0 = city, the most important).
    pub rank: u8,
    /// Position, degrees (WGS 84).
    pub at: LonLat,
}

/// The roads and places of an extract, in file order.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct MapLayer {
    /// Drivable roads.
    pub roads: Vec<MapRoad>,
    /// Named places.
    pub places: Vec<MapPlace>,
}

/// The rank of a `place=*` value, if it is a kept kind.
pub fn place_rank(place: &str) -> Option<u8> {
    PLACE_KINDS
        .iter()
        .position(|k| *k == place)
        .map(|i| i as u8)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn classes_and_place_kinds() {
        assert!(is_major("secondary") && is_major("motorway_link"));
        assert!(!is_major("unclassified") && !is_major("residential"));
        assert_eq!(place_rank("city"), Some(0));
        assert_eq!(place_rank("hamlet"), Some(4));
        assert_eq!(place_rank("island"), None);
    }
}
