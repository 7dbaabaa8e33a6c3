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

/// First bytes of every cache file.
pub const MAGIC: &[u8; 16] = b"broodcast-roads\n";

/// Format version; a change of layout or of the graph rules (classes, speeds) bumps it.
const VERSION: u32 = 1;

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
    if r.0.len() != n.checked_mul(24)?.checked_add(m.checked_mul(17)?)? || n > u32::MAX as usize {
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
    let coords_ok = lon.iter().all(|x| (-180.0..=180.0).contains(x))
        && lat.iter().all(|y| (-90.0..=90.0).contains(y));
    (coords_ok && fastest.is_finite() && fastest > 0.0 && m > 0)
        .then(|| RoadGraph::new(lon, lat, id, segments, fastest))
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
