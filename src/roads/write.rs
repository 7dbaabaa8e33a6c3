//! Writes a small OpenStreetMap PBF file (nodes and ways, uncompressed blobs): for generated
//! networks in tests, benchmarks and the demo. The layout follows the OSM wiki's "PBF Format"
//! page: each blob is a 4-byte big-endian length, a `BlobHeader` and a `Blob` with `raw` data;
//! the first blob is an `OSMHeader`, the rest `OSMData` primitive blocks of at most
//! [`BLOCK_ELEMENTS`] elements.

use crate::scenario::LonLat;

/// Most nodes or ways in one primitive block (the format's readers expect ≤ 8,000).
pub const BLOCK_ELEMENTS: usize = 8_000;

/// A node to write.
#[derive(Clone, Debug)]
pub struct OsmNode {
    /// Node id.
    pub id: i64,
    /// Position (stored to 1e-7 degree).
    pub at: LonLat,
    /// Tags, (key, value); empty for a plain way node.
    pub tags: Vec<(String, String)>,
}

/// A way to write.
#[derive(Clone, Debug)]
pub struct OsmWay {
    /// Way id.
    pub id: i64,
    /// Tags, (key, value).
    pub tags: Vec<(String, String)>,
    /// Node ids in order.
    pub refs: Vec<i64>,
}

fn varint(out: &mut Vec<u8>, mut v: u64) {
    while v >= 0x80 {
        out.push((v as u8) | 0x80);
        v >>= 7;
    }
    out.push(v as u8);
}

fn zigzag(v: i64) -> u64 {
    ((v << 1) ^ (v >> 63)) as u64
}

fn key(out: &mut Vec<u8>, field: u32, wire: u8) {
    varint(out, (u64::from(field) << 3) | u64::from(wire));
}

fn bytes_field(out: &mut Vec<u8>, field: u32, b: &[u8]) {
    key(out, field, 2);
    varint(out, b.len() as u64);
    out.extend_from_slice(b);
}

fn int_field(out: &mut Vec<u8>, field: u32, v: u64) {
    key(out, field, 0);
    varint(out, v);
}

fn blob(out: &mut Vec<u8>, kind: &str, data: &[u8]) {
    let mut b = Vec::with_capacity(data.len() + 16);
    bytes_field(&mut b, 1, data); // raw
    int_field(&mut b, 2, data.len() as u64); // raw_size
    let mut h = Vec::new();
    bytes_field(&mut h, 1, kind.as_bytes()); // type
    int_field(&mut h, 3, b.len() as u64); // datasize
    out.extend_from_slice(&(h.len() as u32).to_be_bytes());
    out.extend_from_slice(&h);
    out.extend_from_slice(&b);
}

/// A primitive block: string table, one group of `group` bytes (already encoded).
fn block(strings: &[&str], group_field: u32, group: &[u8]) -> Vec<u8> {
    let mut st = Vec::new();
    for s in strings {
        bytes_field(&mut st, 1, s.as_bytes());
    }
    let mut g = Vec::new();
    bytes_field(&mut g, group_field, group);
    let mut out = Vec::new();
    bytes_field(&mut out, 1, &st);
    out.extend_from_slice(&g);
    out
}

fn packed(out: &mut Vec<u8>, field: u32, values: impl Iterator<Item = u64>) {
    let mut p = Vec::new();
    for v in values {
        varint(&mut p, v);
    }
    bytes_field(out, field, &p);
}

/// Index of `s` in a block's string table, added at the end if new.
fn index<'s>(s: &'s str, strings: &mut Vec<&'s str>) -> u64 {
    match strings.iter().position(|x| *x == s) {
        Some(i) => i as u64,
        None => {
            strings.push(s);
            (strings.len() - 1) as u64
        }
    }
}

/// Encodes `nodes` and `ways` as a `.osm.pbf` file.
pub fn write_pbf(nodes: &[OsmNode], ways: &[OsmWay]) -> Vec<u8> {
    let mut out = Vec::new();
    let mut header = Vec::new();
    bytes_field(&mut header, 4, b"OsmSchema-V0.6");
    bytes_field(&mut header, 16, b"broodcast");
    blob(&mut out, "OSMHeader", &header);
    for chunk in nodes.chunks(BLOCK_ELEMENTS) {
        let mut strings: Vec<&str> = vec![""];
        let mut group = Vec::new();
        for n in chunk {
            let mut m = Vec::new();
            key(&mut m, 1, 0);
            varint(&mut m, zigzag(n.id));
            if !n.tags.is_empty() {
                let keys: Vec<u64> = n.tags.iter().map(|(k, _)| index(k, &mut strings)).collect();
                let vals: Vec<u64> = n.tags.iter().map(|(_, v)| index(v, &mut strings)).collect();
                packed(&mut m, 2, keys.into_iter());
                packed(&mut m, 3, vals.into_iter());
            }
            key(&mut m, 8, 0);
            varint(&mut m, zigzag((n.at.lat * 1e7).round() as i64));
            key(&mut m, 9, 0);
            varint(&mut m, zigzag((n.at.lon * 1e7).round() as i64));
            bytes_field(&mut group, 1, &m);
        }
        // One PrimitiveGroup holds all the block's nodes.
        let data = block(&strings, 2, &group);
        blob(&mut out, "OSMData", &data);
    }
    for chunk in ways.chunks(BLOCK_ELEMENTS) {
        let mut strings: Vec<&str> = vec![""];
        let mut group = Vec::new();
        let mut pending: Vec<Vec<u8>> = Vec::new();
        for w in chunk {
            let mut m = Vec::new();
            int_field(&mut m, 1, w.id as u64);
            let keys: Vec<u64> = w.tags.iter().map(|(k, _)| index(k, &mut strings)).collect();
            let vals: Vec<u64> = w.tags.iter().map(|(_, v)| index(v, &mut strings)).collect();
            packed(&mut m, 2, keys.into_iter());
            packed(&mut m, 3, vals.into_iter());
            let mut last = 0i64;
            packed(
                &mut m,
                8,
                w.refs.iter().map(|&r| {
                    let d = r - last;
                    last = r;
                    zigzag(d)
                }),
            );
            pending.push(m);
        }
        for m in &pending {
            bytes_field(&mut group, 3, m);
        }
        let data = block(&strings, 2, &group);
        blob(&mut out, "OSMData", &data);
    }
    out
}
