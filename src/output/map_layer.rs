//! The orientation layer of a route sheet's map: the road network's roads around the route
//! (major roads wider and named), a few named places, and the legend strip under the map.
//!
//! Drawn from [`MapLayer`](crate::roads::layer::MapLayer), the extract's public map data:
//! nothing of the scenario's requests (names, phones, e-mails, addresses) enters this layer.
//! Names are set where they clash with nothing already on the map (stop dots and labels, the
//! depot, the driven path, the scale bar and north arrow, other names); a name that finds no
//! such spot is left out. Deterministic.

use std::fmt::Write;

use super::esc;
use super::svg::{Frame, f1};
use crate::roads::graph::RoadGraph;
use crate::scenario::LonLat;

/// Height of the legend strip under the map's data, SVG user units (about 5 mm printed).
pub(crate) const LEGEND_H: f64 = 18.0;

/// Most road names on one map.
const MAX_ROAD_NAMES: usize = 10;
/// Most place names on one map.
const MAX_PLACE_NAMES: usize = 6;
/// Font size of road names, SVG user units.
const ROAD_FONT: f64 = 8.5;
/// Font size of place names, SVG user units.
const PLACE_FONT: f64 = 10.5;

/// Estimated width of `text` at `font` size, SVG user units (DejaVu Sans averages about 0.6
/// em a character; a little generous so names do not touch what they avoid).
fn text_width(text: &str, font: f64) -> f64 {
    text.chars().count() as f64 * font * 0.62
}

/// What names must keep clear of, in map units: circles (centre, radius), axis-aligned
/// boxes, and polylines (with a clearance).
#[derive(Default)]
pub(crate) struct Occupied {
    circles: Vec<((f64, f64), f64)>,
    boxes: Vec<[f64; 4]>,
    lines: Vec<Vec<(f64, f64)>>,
}

impl Occupied {
    /// Adds a circle.
    pub fn circle(&mut self, c: (f64, f64), r: f64) {
        self.circles.push((c, r));
    }
    /// Adds a box `[x0, y0, x1, y1]`.
    pub fn rect(&mut self, b: [f64; 4]) {
        self.boxes.push(b);
    }
    /// Adds a polyline.
    pub fn line(&mut self, l: Vec<(f64, f64)>) {
        self.lines.push(l);
    }
    /// Whether a disc of radius `r` at `p` touches anything.
    fn hits(&self, p: (f64, f64), r: f64) -> bool {
        self.circles
            .iter()
            .any(|&(c, cr)| (c.0 - p.0).hypot(c.1 - p.1) < cr + r)
            || self
                .boxes
                .iter()
                .any(|b| p.0 + r > b[0] && p.0 - r < b[2] && p.1 + r > b[1] && p.1 - r < b[3])
            || self
                .lines
                .iter()
                .any(|l| l.windows(2).any(|w| seg_dist(p, w[0], w[1]) < r + 2.0))
    }
}

/// Distance from `p` to the segment `a`–`b`.
fn seg_dist(p: (f64, f64), a: (f64, f64), b: (f64, f64)) -> f64 {
    let (dx, dy) = (b.0 - a.0, b.1 - a.1);
    let l2 = dx * dx + dy * dy;
    let t = if l2 > 0.0 {
        (((p.0 - a.0) * dx + (p.1 - a.1) * dy) / l2).clamp(0.0, 1.0)
    } else {
        0.0
    };
    (p.0 - a.0 - t * dx).hypot(p.1 - a.1 - t * dy)
}

/// Runs of the road's points (map units) whose segments touch the canvas `w` × `h` widened
/// by `margin`.
fn visible_runs(pts: &[(f64, f64)], w: f64, h: f64, margin: f64) -> Vec<Vec<(f64, f64)>> {
    let mut runs: Vec<Vec<(f64, f64)>> = Vec::new();
    let mut open = false;
    for s in pts.windows(2) {
        let (a, b) = (s[0], s[1]);
        let shows = a.0.max(b.0) >= -margin
            && a.0.min(b.0) <= w + margin
            && a.1.max(b.1) >= -margin
            && a.1.min(b.1) <= h + margin;
        if shows {
            if !open {
                runs.push(vec![a]);
                open = true;
            }
            if let Some(r) = runs.last_mut() {
                r.push(b);
            }
        } else {
            open = false;
        }
    }
    runs
}

/// `run` without the points that lie within 0.2 units of the line through their neighbours
/// kept (a straight road drawn with two points, not dozens); the ends always stay.
fn simplify(run: &[(f64, f64)]) -> Vec<(f64, f64)> {
    let mut out: Vec<(f64, f64)> = Vec::with_capacity(run.len());
    for (i, &p) in run.iter().enumerate() {
        if let (Some(&a), Some(&c)) = (out.last(), run.get(i + 1))
            && dist(a, c) > 0.0
            && seg_dist(p, a, c) < 0.2
        {
            continue;
        }
        out.push(p);
    }
    out
}

fn points(run: &[(f64, f64)]) -> String {
    run.iter()
        .map(|p| format!("{},{}", f1(p.0), f1(p.1)))
        .collect::<Vec<_>>()
        .join(" ")
}

/// A named road's visible run, to be labelled.
struct Named<'a> {
    name: &'a str,
    run: Vec<(f64, f64)>,
    length: f64,
}

/// The roads of `graph`'s layer inside the `w` × `h` canvas of `frame`: minor roads thin
/// grey, major roads wide with a dark casing, as SVG elements; and the named major runs to
/// label, longest first. O(n) for n road points.
fn roads<'g>(graph: &'g RoadGraph, frame: &Frame, w: f64, h: f64) -> (String, Vec<Named<'g>>) {
    let at = |v: u32| {
        frame.px(LonLat {
            lon: graph.lon[v as usize],
            lat: graph.lat[v as usize],
        })
    };
    let (mut minor, mut casing, mut major) = (String::new(), String::new(), String::new());
    let mut named = Vec::new();
    for road in &graph.layer.roads {
        let pts: Vec<(f64, f64)> = road.nodes.iter().map(|&v| at(v)).collect();
        for run in visible_runs(&pts, w, h, 10.0) {
            let run = simplify(&run);
            let p = points(&run);
            if road.major {
                let _ = write!(
                    casing,
                    "<polyline class=\"road major\" points=\"{p}\" fill=\"none\" stroke=\"#8c8c8c\" stroke-width=\"4.6\" stroke-linejoin=\"round\"/>"
                );
                let _ = write!(
                    major,
                    "<polyline points=\"{p}\" fill=\"none\" stroke=\"#f5dc8c\" stroke-width=\"3\" stroke-linejoin=\"round\"/>"
                );
                if !road.name.is_empty() {
                    let length = run.windows(2).map(|s| dist(s[0], s[1])).sum();
                    named.push(Named {
                        name: &road.name,
                        run,
                        length,
                    });
                }
            } else {
                let _ = write!(
                    minor,
                    "<polyline class=\"road minor\" points=\"{p}\" fill=\"none\" stroke=\"#c4c4c4\" stroke-width=\"1.3\"/>"
                );
            }
        }
    }
    // Longest first; ties by name, then by where the run starts, for determinism.
    named.sort_by(|a, b| {
        b.length
            .total_cmp(&a.length)
            .then_with(|| a.name.cmp(b.name))
            .then_with(|| a.run[0].0.total_cmp(&b.run[0].0))
            .then_with(|| a.run[0].1.total_cmp(&b.run[0].1))
    });
    (minor + &casing + &major, named)
}

fn dist(a: (f64, f64), b: (f64, f64)) -> f64 {
    (a.0 - b.0).hypot(a.1 - b.1)
}

/// The point `s` units along `run`, if the run is that long.
fn along(run: &[(f64, f64)], mut s: f64) -> Option<(f64, f64)> {
    for w in run.windows(2) {
        let l = dist(w[0], w[1]);
        if s <= l && l > 0.0 {
            let t = s / l;
            return Some((
                w[0].0 + t * (w[1].0 - w[0].0),
                w[0].1 + t * (w[1].1 - w[0].1),
            ));
        }
        s -= l;
    }
    None
}

/// Whether a text box of half-height `r` from `a` to `b` stays inside the canvas and clear of
/// everything in `occ`.
fn free_span(a: (f64, f64), b: (f64, f64), r: f64, w: f64, h: f64, occ: &Occupied) -> bool {
    let n = (dist(a, b) / r).ceil().max(1.0) as usize;
    (0..=n).all(|i| {
        let t = i as f64 / n as f64;
        let p = (a.0 + t * (b.0 - a.0), a.1 + t * (b.1 - a.1));
        p.0 - r >= 2.0
            && p.0 + r <= w - 2.0
            && p.1 - r >= 2.0
            && p.1 + r <= h - 2.0
            && !occ.hits(p, r)
    })
}

/// Marks a placed text span in `occ` (as circles along it).
fn occupy_span(a: (f64, f64), b: (f64, f64), r: f64, occ: &mut Occupied) {
    let n = (dist(a, b) / r).ceil().max(1.0) as usize;
    for i in 0..=n {
        let t = i as f64 / n as f64;
        occ.circle((a.0 + t * (b.0 - a.0), a.1 + t * (b.1 - a.1)), r);
    }
}

/// Road names along their roads: for each named major run (longest first, at most
/// [`MAX_ROAD_NAMES`], each name once), the first straight stretch, scanning from the run's
/// middle outwards in 12-unit steps, where the name fits clear of `occ`; the text follows the
/// stretch, turned to read left to right.
fn road_names(named: &[Named<'_>], w: f64, h: f64, occ: &mut Occupied) -> String {
    let mut s = String::new();
    let mut done: Vec<&str> = Vec::new();
    let r = ROAD_FONT * 0.75;
    for n in named {
        if done.len() >= MAX_ROAD_NAMES {
            break;
        }
        if done.contains(&n.name) {
            continue;
        }
        let half = text_width(n.name, ROAD_FONT) / 2.0 + 3.0;
        if n.length < 2.0 * half {
            continue;
        }
        let mid = n.length / 2.0;
        let steps = ((mid - half) / 12.0).floor().max(0.0) as usize;
        let spot = (0..=steps)
            .flat_map(|k| [mid + 12.0 * k as f64, mid - 12.0 * k as f64])
            .find_map(|c| {
                let (a, b) = (along(&n.run, c - half)?, along(&n.run, c + half)?);
                // Straight enough: the chord is nearly as long as the stretch.
                let straight = dist(a, b) >= 0.97 * 2.0 * half;
                (straight && free_span(a, b, r, w, h, occ)).then_some((a, b))
            });
        let Some((mut a, mut b)) = spot else {
            continue;
        };
        if b.0 < a.0 || (b.0 == a.0 && b.1 < a.1) {
            std::mem::swap(&mut a, &mut b);
        }
        occupy_span(a, b, r, occ);
        let (cx, cy) = ((a.0 + b.0) / 2.0, (a.1 + b.1) / 2.0);
        let angle = (b.1 - a.1).atan2(b.0 - a.0).to_degrees();
        let _ = write!(
            s,
            "<text class=\"road-name\" x=\"{x}\" y=\"{y}\" transform=\"rotate({ang} {x} {cy})\" font-size=\"{ROAD_FONT}\" font-style=\"italic\" fill=\"#333\" text-anchor=\"middle\" stroke=\"#fbfbf7\" stroke-width=\"2.6\" paint-order=\"stroke\">{name}</text>",
            x = f1(cx),
            y = f1(cy + ROAD_FONT * 0.35),
            cy = f1(cy),
            ang = f1(angle),
            name = esc(n.name),
        );
        done.push(n.name);
    }
    s
}

/// Place names: the layer's places inside the canvas, most important first (then by name),
/// at most [`MAX_PLACE_NAMES`]: a dot and the name to its right, else its left, else above or
/// below, where it clashes with nothing in `occ`.
fn place_names(graph: &RoadGraph, frame: &Frame, w: f64, h: f64, occ: &mut Occupied) -> String {
    let mut places: Vec<_> = graph
        .layer
        .places
        .iter()
        .map(|p| (p, frame.px(p.at)))
        .filter(|(_, (x, y))| *x >= 0.0 && *x <= w && *y >= 0.0 && *y <= h)
        .collect();
    places.sort_by(|a, b| {
        a.0.rank
            .cmp(&b.0.rank)
            .then_with(|| a.0.name.cmp(&b.0.name))
    });
    let mut s = String::new();
    let mut shown = 0;
    let r = PLACE_FONT * 0.7;
    for (p, (x, y)) in places {
        if shown >= MAX_PLACE_NAMES {
            break;
        }
        let font = if p.rank <= 1 {
            PLACE_FONT + 1.0
        } else {
            PLACE_FONT
        };
        let tw = text_width(&p.name, font);
        let spots = [
            ((x + 6.0 + r, y), (x + 6.0 + tw - r, y), "start", x + 6.0),
            ((x - 6.0 - tw + r, y), (x - 6.0 - r, y), "end", x - 6.0),
            (
                (x - tw / 2.0 + r, y - 12.0),
                (x + tw / 2.0 - r, y - 12.0),
                "middle",
                x,
            ),
            (
                (x - tw / 2.0 + r, y + 12.0),
                (x + tw / 2.0 - r, y + 12.0),
                "middle",
                x,
            ),
        ];
        let Some(&(a, b, anchor, tx)) = spots
            .iter()
            .find(|(a, b, ..)| free_span(*a, *b, r, w, h, occ))
        else {
            continue;
        };
        occupy_span(a, b, r, occ);
        occ.circle((x, y), 3.0);
        let _ = write!(
            s,
            "<circle class=\"place\" cx=\"{x}\" cy=\"{y}\" r=\"{pr}\" fill=\"#444\"/><text class=\"place-name\" x=\"{tx}\" y=\"{ty}\" font-size=\"{font}\" font-weight=\"bold\" fill=\"#444\" text-anchor=\"{anchor}\" stroke=\"#fbfbf7\" stroke-width=\"3\" paint-order=\"stroke\">{name}</text>",
            x = f1(x),
            y = f1(y),
            pr = if p.rank <= 1 { "3" } else { "2.2" },
            tx = f1(tx),
            ty = f1(a.1 + font * 0.35),
            name = esc(&p.name),
        );
        shown += 1;
    }
    s
}

/// The orientation layer for a `w` × `h` map in `frame`: (roads, names). The roads go under
/// everything; the names go under the driven path and the block outlines (so those stay
/// visible) and keep clear of `occ`, which they extend.
pub(crate) fn layer(
    graph: &RoadGraph,
    frame: &Frame,
    w: f64,
    h: f64,
    occ: &mut Occupied,
) -> (String, String) {
    let (roads_svg, named) = roads(graph, frame, w, h);
    let mut names = place_names(graph, frame, w, h, occ);
    names.push_str(&road_names(&named, w, h, occ));
    (roads_svg, names)
}

/// The legend strip from `y` to `y + LEGEND_H` on a `w`-wide map, under its data: what the
/// line styles and symbols mean; the road entries only when `roads` are drawn.
pub(crate) fn legend(w: f64, y: f64, roads: bool) -> String {
    let mid = y + LEGEND_H / 2.0;
    let mut s = format!(
        "<g class=\"legend\"><rect x=\"0\" y=\"{}\" width=\"{}\" height=\"{}\" fill=\"#fff\"/><path d=\"M0 {}H{}\" stroke=\"#999\" stroke-width=\"0.8\"/>",
        f1(y),
        f1(w),
        f1(LEGEND_H),
        f1(y),
        f1(w)
    );
    let line = |x: f64, extra: &str| {
        format!(
            "<path d=\"M{} {}H{}\" fill=\"none\" {extra}/>",
            f1(x),
            f1(mid),
            f1(x + 20.0)
        )
    };
    type Symbol<'a> = Box<dyn Fn(f64) -> String + 'a>;
    let mut items: Vec<(Symbol<'_>, &str)> = vec![
        (
            Box::new(|x| line(x, "stroke=\"#1f4e9c\" stroke-width=\"2.2\"")),
            "route",
        ),
        (
            Box::new(|x| {
                line(
                    x,
                    "stroke=\"#1f4e9c\" stroke-width=\"2\" stroke-dasharray=\"6 4\" stroke-opacity=\"0.7\"",
                )
            }),
            "drive home",
        ),
        (
            Box::new(|x| {
                format!(
                    "<circle cx=\"{x}\" cy=\"{y}\" r=\"6\" fill=\"#fff\" stroke=\"#1f4e9c\" stroke-width=\"1.4\"/><text x=\"{x}\" y=\"{ty}\" font-size=\"8\" font-weight=\"bold\" text-anchor=\"middle\">1</text>",
                    x = f1(x + 10.0),
                    y = f1(mid),
                    ty = f1(mid + 3.0)
                )
            }),
            "stop, in order",
        ),
        (
            Box::new(|x| {
                format!(
                    "<rect x=\"{}\" y=\"{}\" width=\"16\" height=\"9\" fill=\"#cfe8c4\" stroke=\"#2f6a1f\" stroke-width=\"1.2\"/>",
                    f1(x + 2.0),
                    f1(mid - 4.5)
                )
            }),
            "block",
        ),
        (
            Box::new(|x| {
                format!(
                    "<rect x=\"{}\" y=\"{}\" width=\"10\" height=\"10\" fill=\"#000\"/>",
                    f1(x + 5.0),
                    f1(mid - 5.0)
                )
            }),
            "depot",
        ),
    ];
    if roads {
        items.push((
            Box::new(|x| {
                line(x, "stroke=\"#8c8c8c\" stroke-width=\"4.6\"")
                    + &line(x, "stroke=\"#f5dc8c\" stroke-width=\"3\"")
            }),
            "main road",
        ));
        items.push((
            Box::new(|x| line(x, "stroke=\"#c4c4c4\" stroke-width=\"1.3\"")),
            "other road",
        ));
        items.push((
            Box::new(|x| {
                format!(
                    "<circle cx=\"{}\" cy=\"{}\" r=\"2.6\" fill=\"#444\"/>",
                    f1(x + 10.0),
                    f1(mid)
                )
            }),
            "place",
        ));
    }
    let mut x = 8.0;
    for (symbol, text) in &items {
        s.push_str(&symbol(x));
        let _ = write!(
            s,
            "<text x=\"{}\" y=\"{}\" font-size=\"8.5\" fill=\"#222\">{text}</text>",
            f1(x + 24.0),
            f1(mid + 3.0),
        );
        x += 24.0 + text_width(text, 8.5) + 12.0;
    }
    s.push_str("</g>");
    s
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn runs_keep_only_segments_on_the_canvas() {
        let pts = [
            (-50.0, 5.0),
            (-20.0, 5.0),
            (5.0, 5.0),
            (50.0, 5.0),
            (150.0, 5.0),
            (200.0, 5.0),
        ];
        let runs = visible_runs(&pts, 100.0, 100.0, 10.0);
        assert_eq!(
            runs,
            vec![vec![(-20.0, 5.0), (5.0, 5.0), (50.0, 5.0), (150.0, 5.0)]]
        );
        assert!(visible_runs(&[(200.0, 0.0), (300.0, 0.0)], 100.0, 100.0, 10.0).is_empty());
    }

    #[test]
    fn straight_runs_keep_their_ends_and_corners() {
        let run = [
            (0.0, 0.0),
            (10.0, 0.05),
            (20.0, 0.0),
            (20.0, 10.0),
            (20.0, 30.0),
        ];
        assert_eq!(simplify(&run), vec![(0.0, 0.0), (20.0, 0.0), (20.0, 30.0)]);
        let bent = [(0.0, 0.0), (10.0, 3.0), (20.0, 0.0)];
        assert_eq!(simplify(&bent), bent.to_vec());
    }

    #[test]
    fn spans_avoid_what_is_occupied() {
        let mut occ = Occupied::default();
        assert!(free_span(
            (20.0, 50.0),
            (80.0, 50.0),
            6.0,
            100.0,
            100.0,
            &occ
        ));
        occ.circle((50.0, 52.0), 4.0);
        assert!(!free_span(
            (20.0, 50.0),
            (80.0, 50.0),
            6.0,
            100.0,
            100.0,
            &occ
        ));
        assert!(free_span(
            (20.0, 20.0),
            (80.0, 20.0),
            6.0,
            100.0,
            100.0,
            &occ
        ));
        occ.line(vec![(0.0, 25.0), (100.0, 25.0)]);
        assert!(!free_span(
            (20.0, 20.0),
            (80.0, 20.0),
            6.0,
            100.0,
            100.0,
            &occ
        ));
        // Off the canvas.
        assert!(!free_span(
            (60.0, 80.0),
            (120.0, 80.0),
            6.0,
            100.0,
            100.0,
            &Occupied::default()
        ));
    }
}
