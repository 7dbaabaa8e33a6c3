//! The parsed road graph on disk, so that the second plan of a week skips parsing the extract.
//!
//! One file per extract, `roads-<hash>-<bytes>.bin` in the cache folder, keyed by the
//! extract's length and FNV-1a 64 hash (not cryptographic: the cache guards against stale
//! data, not against an attacker who can write the scenario folder). The file starts with
//! [`MAGIC`] and a format version, repeats the key, and ends with the FNV-1a 64 hash of all
//! that precedes it: a file that fails any of these is ignored and the extract is parsed
//! again. The cache never overwrites or deletes a file it did not write: a new file is
//! written under a temporary name created fresh (`create_new`) and linked to its final name
//! only if that name is free, or renamed over a file that starts with [`MAGIC`] (a cache
//! file broodcast wrote that failed its checks).

use std::fs;
use std::hash::Hasher;
use std::io::{self, Read, Write};
use std::path::{Path, PathBuf};

use super::graph::{RoadGraph, Segment};
use super::layer::{MapLayer, MapPlace, MapRoad};

/// First bytes of every cache file.
pub const MAGIC: &[u8; 16] = b"broodcast-roads\n";

/// Format version; a change of layout or of the graph rules (classes, speeds) bumps it.
/// Version 2 added the map layer (roads with names, places).
const VERSION: u32 = 2;

/// Cache key of an extract: (FNV-1a 64 hash, length in bytes).
pub fn key(bytes: &[u8]) -> (u64, u64) {
    (fnv(bytes), bytes.len() as u64)
}

fn fnv(bytes: &[u8]) -> u64 {
    let mut h = fnv::FnvHasher::default();
    h.write(bytes);
    h.finish()
}

/// Path of the cache file for `key` in `dir`.
pub fn path(dir: &Path, key: (u64, u64)) -> PathBuf {
    dir.join(format!("roads-{:016x}-{}.bin", key.0, key.1))
}

/// Serializes `graph` with its key.
pub fn encode(graph: &RoadGraph, key: (u64, u64)) -> Vec<u8> {
    let n = graph.nodes();
    let m = graph.segments.len();
    let mut out = Vec::with_capacity(64 + n * 24 + m * 17);
    out.extend_from_slice(MAGIC);
    out.extend_from_slice(&VERSION.to_le_bytes());
    out.extend_from_slice(&key.0.to_le_bytes());
    out.extend_from_slice(&key.1.to_le_bytes());
    out.extend_from_slice(&(n as u64).to_le_bytes());
    out.extend_from_slice(&(m as u64).to_le_bytes());
    out.extend_from_slice(&graph.fastest_kmh.to_le_bytes());
    for i in 0..n {
        out.extend_from_slice(&graph.lon[i].to_le_bytes());
        out.extend_from_slice(&graph.lat[i].to_le_bytes());
        out.extend_from_slice(&graph.osm_id[i].to_le_bytes());
    }
    for s in &graph.segments {
        out.extend_from_slice(&s.a.to_le_bytes());
        out.extend_from_slice(&s.b.to_le_bytes());
        out.extend_from_slice(&s.minutes.to_le_bytes());
        out.push(u8::from(s.forward) | (u8::from(s.backward) << 1));
    }
    let text = |out: &mut Vec<u8>, t: &str| {
        out.extend_from_slice(&(t.len() as u64).to_le_bytes());
        out.extend_from_slice(t.as_bytes());
    };
    out.extend_from_slice(&(graph.layer.roads.len() as u64).to_le_bytes());
    for r in &graph.layer.roads {
        out.push(u8::from(r.major));
        text(&mut out, &r.name);
        out.extend_from_slice(&(r.nodes.len() as u64).to_le_bytes());
        for v in &r.nodes {
            out.extend_from_slice(&v.to_le_bytes());
        }
    }
    out.extend_from_slice(&(graph.layer.places.len() as u64).to_le_bytes());
    for p in &graph.layer.places {
        out.push(p.rank);
        text(&mut out, &p.name);
        out.extend_from_slice(&p.at.lon.to_le_bytes());
        out.extend_from_slice(&p.at.lat.to_le_bytes());
    }
    let sum = fnv(&out);
    out.extend_from_slice(&sum.to_le_bytes());
    out
}

struct Reader<'a>(&'a [u8]);

impl Reader<'_> {
    fn take<const N: usize>(&mut self) -> Option<[u8; N]> {
        let (head, rest) = self.0.split_first_chunk::<N>()?;
        self.0 = rest;
        Some(*head)
    }
    fn u64(&mut self) -> Option<u64> {
        self.take().map(u64::from_le_bytes)
    }
    fn f64(&mut self) -> Option<f64> {
        self.take().map(f64::from_le_bytes)
    }
    fn u32(&mut self) -> Option<u32> {
        self.take().map(u32::from_le_bytes)
    }
    /// A count of items of at least `min_bytes` each, if the rest of the file can hold them.
    fn count(&mut self, min_bytes: usize) -> Option<usize> {
        let n = usize::try_from(self.u64()?).ok()?;
        (n.checked_mul(min_bytes)? <= self.0.len()).then_some(n)
    }
    fn text(&mut self) -> Option<String> {
        let n = self.count(1)?;
        let (head, rest) = self.0.split_at(n);
        self.0 = rest;
        String::from_utf8(head.to_vec()).ok()
    }
}

/// Reads a cache file's bytes; `None` unless every check passes (magic, version, key,
/// checksum, sizes, node indices in range, finite values).
pub fn decode(bytes: &[u8], key: (u64, u64)) -> Option<RoadGraph> {
    let (body, sum) = bytes.split_last_chunk::<8>()?;
    if fnv(body) != u64::from_le_bytes(*sum) || !body.starts_with(MAGIC) {
        return None;
    }
    let mut r = Reader(&body[MAGIC.len()..]);
    if r.u32()? != VERSION || (r.u64()?, r.u64()?) != key {
        return None;
    }
    let n = usize::try_from(r.u64()?).ok()?;
    let m = usize::try_from(r.u64()?).ok()?;
    let fastest = r.f64()?;
    if r.0.len() < n.checked_mul(24)?.checked_add(m.checked_mul(17)?)? || n > u32::MAX as usize {
        return None;
    }
    let (mut lon, mut lat, mut id) = (
        Vec::with_capacity(n),
        Vec::with_capacity(n),
        Vec::with_capacity(n),
    );
    for _ in 0..n {
        lon.push(r.f64()?);
        lat.push(r.f64()?);
        id.push(i64::from_le_bytes(r.take()?));
    }
    let mut segments = Vec::with_capacity(m);
    for _ in 0..m {
        let (a, b, minutes, [flags]) = (r.u32()?, r.u32()?, r.f64()?, r.take::<1>()?);
        if a as usize >= n || b as usize >= n || !(minutes.is_finite() && minutes >= 0.0) {
            return None;
        }
        let (forward, backward) = (flags & 1 != 0, flags & 2 != 0);
        if flags > 3 || !(forward || backward) {
            return None;
        }
        segments.push(Segment {
            a,
            b,
            minutes,
            forward,
            backward,
        });
    }
    let mut roads = Vec::new();
    for _ in 0..r.count(17)? {
        let [major] = r.take::<1>()?;
        let name = r.text()?;
        let k = r.count(4)?;
        let nodes = (0..k).map(|_| r.u32()).collect::<Option<Vec<u32>>>()?;
        if major > 1 || k < 2 || nodes.iter().any(|&v| v as usize >= n) {
            return None;
        }
        roads.push(MapRoad {
            major: major == 1,
            name,
            nodes,
        });
    }
    let mut places = Vec::new();
    for _ in 0..r.count(25)? {
        let [rank] = r.take::<1>()?;
        let name = r.text()?;
        let at = crate::scenario::LonLat {
            lon: r.f64()?,
            lat: r.f64()?,
        };
        if usize::from(rank) >= super::layer::PLACE_KINDS.len() {
            return None;
        }
        places.push(MapPlace { name, rank, at });
    }
    let coords_ok = lon.iter().all(|x| (-180.0..=180.0).contains(x))
        && lat.iter().all(|y| (-90.0..=90.0).contains(y))
        && places
            .iter()
            .all(|p| (-180.0..=180.0).contains(&p.at.lon) && (-90.0..=90.0).contains(&p.at.lat));
    (r.0.is_empty() && coords_ok && fastest.is_finite() && fastest > 0.0 && m > 0).then(|| {
        let mut graph = RoadGraph::new(lon, lat, id, segments, fastest);
        graph.layer = MapLayer { roads, places };
        graph
    })
}

/// The cached graph for `key` in `dir`, if a valid one is there.
pub fn load(dir: &Path, key: (u64, u64)) -> Option<RoadGraph> {
    decode(&fs::read(path(dir, key)).ok()?, key)
}

/// Writes the cache file for `key` (see the module documentation for what it never touches).
pub fn store(dir: &Path, key: (u64, u64), graph: &RoadGraph) -> io::Result<()> {
    fs::create_dir_all(dir)?;
    let target = path(dir, key);
    let tmp = dir.join(format!(
        "{}.tmp-{}",
        target
            .file_name()
            .map_or_else(Default::default, |n| n.to_string_lossy()),
        std::process::id()
    ));
    let mut file = fs::OpenOptions::new()
        .write(true)
        .create_new(true)
        .open(&tmp)?;
    let written = file
        .write_all(&encode(graph, key))
        .and_then(|()| file.sync_all());
    drop(file);
    let placed = written.and_then(|()| {
        // Only the first bytes tell whose file it is.
        let ours = fs::File::open(&target).ok().map(|f| {
            let mut head = Vec::with_capacity(MAGIC.len());
            let _ = f.take(MAGIC.len() as u64).read_to_end(&mut head);
            head == MAGIC
        });
        match ours {
            None => fs::hard_link(&tmp, &target),
            Some(true) => fs::rename(&tmp, &target),
            Some(false) => Err(io::Error::new(
                io::ErrorKind::AlreadyExists,
                format!("{} is not a broodcast cache file", target.display()),
            )),
        }
    });
    if tmp.exists() {
        // The temporary file is ours (created fresh above).
        let _ = fs::remove_file(&tmp);
    }
    placed
}
