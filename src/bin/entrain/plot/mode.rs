//! The slowest mode's shape over the network's own layout: grids and tori as a heat
//! map of their cells, chains as a profile along the chain, every other graph drawn as
//! a graph (nodes at a layout, edges as drawn lines) coloured by the mode.

use super::canvas::{self, Anchor, Area, Scale, Stroke, Svg};
use super::palette::{GUIDE, INK, MUTED, Rgb, mode_colour};
use super::{PLOT_SIZE, PlotError, write};
use std::path::Path;

/// How the network is laid out on the page.
#[derive(Clone, Debug, PartialEq)]
pub enum ModeLayout {
    /// A grid or torus: one cell per node, node `r·cols + c` at row `r`, column `c`.
    Cells {
        /// Rows.
        rows: usize,
        /// Columns.
        cols: usize,
        /// Torus: the first and last row (and column) are neighbours too.
        wraps: bool,
    },
    /// A chain: the mode's value over node number, each node joined to the next.
    Line {
        /// Node 0 also listens to a fixed reference (drawn at −1 with value 0).
        pinned: bool,
    },
    /// Any graph: nodes at `positions`, `edges` drawn as lines.
    Graph {
        /// Position of each node (any units; scaled to fit, aspect kept).
        positions: Vec<(f64, f64)>,
        /// The graph's edges.
        edges: Vec<(usize, usize)>,
        /// How the positions were chosen (said on the plot).
        how: String,
    },
}

/// Everything the slowest-mode plot shows.
#[derive(Clone, Debug, PartialEq)]
pub struct ModePlot {
    /// Title.
    pub title: String,
    /// The mode's value at each node, largest magnitude 1.
    pub shape: Vec<f64>,
    /// The layout.
    pub layout: ModeLayout,
    /// The slowest non-trivial eigenvalue.
    pub lambda_slow: f64,
    /// How many eigenvalues equal it (`None`: only the slowest one is known).
    pub multiplicity: Option<usize>,
}

/// How many of `eigenvalues` equal `lambda` within a relative tolerance of 10⁻⁸ of the
/// largest (closed forms and the dense solver are far more precise than that).
pub fn multiplicity(eigenvalues: &[f64], lambda: f64) -> usize {
    let scale = eigenvalues.iter().copied().fold(1.0_f64, f64::max);
    eigenvalues
        .iter()
        .filter(|l| (*l - lambda).abs() <= 1e-8 * scale)
        .count()
}

/// `n` nodes evenly on a circle, node 0 at the top, numbering clockwise.
pub fn circle(n: usize) -> Vec<(f64, f64)> {
    (0..n)
        .map(|i| {
            let a = std::f64::consts::TAU * i as f64 / n.max(1) as f64;
            (a.sin(), -a.cos())
        })
        .collect()
}

/// A star: the hub (node 0) in the middle, the others on a circle.
pub fn star(n: usize) -> Vec<(f64, f64)> {
    std::iter::once((0.0, 0.0))
        .chain(circle(n.saturating_sub(1)))
        .collect()
}

/// Most nodes given the spectral layout (a dense eigen-decomposition; beyond this the
/// nodes go on a circle).
pub const SPECTRAL_MAX_NODES: usize = 1000;

/// The spectral layout of `graph`: node i at the i-th entries of the eigenvectors of the
/// two slowest non-trivial Laplacian modes (Hall, Management Science 17, 1970, from
/// memory), or `None` above [`SPECTRAL_MAX_NODES`] nodes or if the solver fails.
pub fn spectral(graph: &entrain::graph::Graph) -> Option<Vec<(f64, f64)>> {
    if graph.node_count() > SPECTRAL_MAX_NODES {
        return None;
    }
    let l = graph.laplacian_dense().ok()?;
    let eig = nalgebra::SymmetricEigen::try_new(l, f64::EPSILON, 100_000)?;
    let mut order: Vec<usize> = (0..eig.eigenvalues.len()).collect();
    order.sort_by(|a, b| eig.eigenvalues[*a].total_cmp(&eig.eigenvalues[*b]));
    let column = |k: Option<&usize>| {
        k.map(|&k| {
            eig.eigenvectors
                .column(k)
                .iter()
                .copied()
                .collect::<Vec<f64>>()
        })
    };
    let xs = column(order.get(1))?;
    let ys = column(order.get(2)).unwrap_or_else(|| vec![0.0; xs.len()]);
    Some(xs.into_iter().zip(ys).collect())
}

/// Most nodes whose spectral layout is then spread by [`spread`] (its cost grows as
/// the square of the node count per sweep).
pub const SPREAD_MAX_NODES: usize = 400;

/// Sweeps of [`spread`].
const SPREAD_SWEEPS: usize = 300;

/// Spread a layout so that drawn distances follow hop distances: stress majorization
/// with weights `d⁻²`, node by node (Gansner, Koren & North, Graph Drawing 2004, from
/// memory), started from `start`. The spectral layout alone bunches the ends of long
/// paths together; this keeps its overall shape and separates them. `start` is
/// returned unchanged above [`SPREAD_MAX_NODES`] nodes.
pub fn spread(start: &[(f64, f64)], edges: &[(usize, usize)]) -> Vec<(f64, f64)> {
    let n = start.len();
    if !(3..=SPREAD_MAX_NODES).contains(&n) {
        return start.to_vec();
    }
    let mut next: Vec<Vec<usize>> = vec![Vec::new(); n];
    for &(a, b) in edges {
        if let (Some(_), Some(_)) = (next.get(a), next.get(b)) {
            next[a].push(b);
            next[b].push(a);
        }
    }
    // Hop distances by breadth-first search from every node.
    let mut hops = vec![vec![usize::MAX; n]; n];
    for (s, row) in hops.iter_mut().enumerate() {
        let mut queue = std::collections::VecDeque::from([s]);
        row[s] = 0;
        while let Some(u) = queue.pop_front() {
            for &v in &next[u] {
                if row[v] == usize::MAX {
                    row[v] = row[u] + 1;
                    queue.push_back(v);
                }
            }
        }
    }
    // Scale the start so that its mean edge length is one hop.
    let mean_edge = edges
        .iter()
        .filter_map(|&(a, b)| Some((start.get(a)?, start.get(b)?)))
        .map(|(p, q)| (p.0 - q.0).hypot(p.1 - q.1))
        .sum::<f64>()
        / edges.len().max(1) as f64;
    let k = if mean_edge > 0.0 {
        1.0 / mean_edge
    } else {
        1.0
    };
    let mut x: Vec<(f64, f64)> = start.iter().map(|p| (p.0 * k, p.1 * k)).collect();
    for sweep in 0..SPREAD_SWEEPS {
        for i in 0..n {
            let (mut sx, mut sy, mut sw) = (0.0, 0.0, 0.0);
            for j in 0..n {
                let d = hops[i][j];
                if j == i || d == usize::MAX {
                    continue;
                }
                let d = d as f64;
                let w = 1.0 / (d * d);
                let (dx, dy) = (x[i].0 - x[j].0, x[i].1 - x[j].1);
                let len = dx.hypot(dy);
                // Coincident nodes: nudge apart along a direction fixed by the indices.
                let (ux, uy) = if len > 1e-9 {
                    (dx / len, dy / len)
                } else {
                    let a = (i * 7 + j * 13 + sweep) as f64;
                    (a.cos(), a.sin())
                };
                sx += w * (x[j].0 + d * ux);
                sy += w * (x[j].1 + d * uy);
                sw += w;
            }
            if sw > 0.0 {
                x[i] = (sx / sw, sy / sw);
            }
        }
    }
    x
}

/// Draw the slowest-mode plot to `path`.
///
/// # Errors
/// A [`PlotError`] when the file cannot be written.
pub fn mode_shape(path: &Path, p: &ModePlot) -> Result<(), PlotError> {
    let (w, h) = PLOT_SIZE;
    let mut svg = Svg::new(w, h, &p.title);
    let n = p.shape.len();
    let facts = match &p.layout {
        ModeLayout::Cells { rows, cols, wraps } => format!(
            "{rows} × {cols} {}: node number = row × {cols} + column (row-major); {}",
            if *wraps { "torus" } else { "grid" },
            if *wraps {
                "edges also join the first and last row and column"
            } else {
                "each node hears the cells beside it"
            }
        ),
        ModeLayout::Line { pinned: true } => {
            format!("chain of {n} nodes; node 0 also listens to the fixed reference")
        }
        ModeLayout::Line { pinned: false } => {
            format!("chain of {n} nodes, each joined to the next")
        }
        ModeLayout::Graph { edges, how, .. } => {
            format!("{n} nodes, {} edges drawn as lines; {how}", edges.len())
        }
    };
    canvas::heading(&mut svg, &p.title, &facts);
    let lam = format!("λ_slow = {:.4}", p.lambda_slow);
    let (note, m) = match p.multiplicity {
        Some(m) if m > 1 => (
            format!(
                "{lam} is repeated ({m} independent modes share it): the shape shown is one of several equally slow shapes; any mix of them decays as slowly"
            ),
            m.to_string(),
        ),
        Some(m) => (
            format!("{lam} is not repeated: this is the one slowest shape (its sign is arbitrary)"),
            m.to_string(),
        ),
        None => (
            format!(
                "{lam}; whether it repeats is not known (only the slowest eigenvalue was computed)"
            ),
            "unknown".to_owned(),
        ),
    };
    svg.group(
        "note",
        &[
            ("data-key", "multiplicity".into()),
            ("data-multiplicity", m),
        ],
    );
    svg.text((24.0, 72.0), &note, 12.0, Anchor::Start, INK, false);
    svg.end();

    let area = Area {
        left: 100.0,
        top: 100.0,
        right: w - 150.0,
        bottom: h - 62.0,
    };
    match &p.layout {
        ModeLayout::Cells { rows, cols, .. } => cells(&mut svg, area, *rows, *cols, &p.shape),
        ModeLayout::Line { pinned } => line(&mut svg, area, *pinned, &p.shape),
        ModeLayout::Graph {
            positions, edges, ..
        } => graph(&mut svg, area, positions, edges, &p.shape),
    }
    colour_bar(
        &mut svg,
        (w - 110.0, area.top + 20.0),
        area.bottom - area.top - 60.0,
    );
    write(path, svg.finish())
}

/// Text colour readable on the cell colour of value `v`.
fn text_on(v: f64) -> Rgb {
    if v.abs() > 0.6 { Rgb::WHITE } else { INK }
}

fn node_group(svg: &mut Svg, class: &str, i: usize, v: f64, extra: &[(&str, String)]) {
    let mut attrs = vec![("data-node", i.to_string()), ("data-value", format!("{v}"))];
    attrs.extend(extra.iter().cloned());
    svg.group(class, &attrs);
}

fn cells(svg: &mut Svg, area: Area, rows: usize, cols: usize, shape: &[f64]) {
    let size = ((area.right - area.left) / cols.max(1) as f64)
        .min((area.bottom - area.top - 20.0) / rows.max(1) as f64);
    let left = area.left + ((area.right - area.left) - size * cols as f64) / 2.0;
    let top = area.top + 20.0;
    let every = |count: usize| ((count as f64 / 20.0).ceil() as usize).max(1);
    svg.group(
        "heatmap",
        &[
            ("data-rows", rows.to_string()),
            ("data-cols", cols.to_string()),
        ],
    );
    for r in 0..rows {
        for c in 0..cols {
            let i = r * cols + c;
            let v = shape.get(i).copied().unwrap_or(f64::NAN);
            node_group(
                svg,
                "node cell",
                i,
                v,
                &[("data-row", r.to_string()), ("data-col", c.to_string())],
            );
            let at = (left + c as f64 * size, top + r as f64 * size);
            svg.rect(
                at,
                (size, size),
                Some((mode_colour(v), 1.0)),
                Some(&Stroke::solid(Rgb::WHITE, 1.0)),
            );
            if size >= 24.0 {
                svg.text(
                    (at.0 + size / 2.0, at.1 + size / 2.0 + 4.0),
                    &i.to_string(),
                    (size * 0.3).min(13.0),
                    Anchor::Middle,
                    text_on(v),
                    false,
                );
            }
            svg.end();
        }
    }
    svg.end();
    svg.group("axes", &[]);
    for r in (0..rows).step_by(every(rows)) {
        svg.group(
            "tick",
            &[("data-axis", "row".into()), ("data-value", r.to_string())],
        );
        svg.text(
            (left - 8.0, top + (r as f64 + 0.5) * size + 4.0),
            &r.to_string(),
            12.0,
            Anchor::End,
            MUTED,
            false,
        );
        svg.end();
    }
    for c in (0..cols).step_by(every(cols)) {
        svg.group(
            "tick",
            &[
                ("data-axis", "column".into()),
                ("data-value", c.to_string()),
            ],
        );
        svg.text(
            (left + (c as f64 + 0.5) * size, top - 6.0),
            &c.to_string(),
            12.0,
            Anchor::Middle,
            MUTED,
            false,
        );
        svg.end();
    }
    svg.vertical_text(
        (left - 40.0, top + rows as f64 * size / 2.0),
        "row",
        13.0,
        INK,
    );
    svg.text(
        (
            left + cols as f64 * size / 2.0,
            top + rows as f64 * size + 22.0,
        ),
        "column (numbers in the cells: node)",
        13.0,
        Anchor::Middle,
        INK,
        false,
    );
    svg.end();
}

fn line(svg: &mut Svg, area: Area, pinned: bool, shape: &[f64]) {
    let n = shape.len();
    let first = if pinned { -1.0 } else { 0.0 };
    let x = Scale::linear(first - 0.5, n as f64 - 0.5, area.left, area.right);
    let y = Scale::linear(-1.15, 1.15, area.bottom, area.top);
    // Integer node numbers only: a step of at least one node.
    let step = canvas::nice_step(n as f64 / 12.0).max(1.0).round() as usize;
    let mut x_ticks: canvas::Ticks = (0..n)
        .step_by(step)
        .map(|i| (i as f64, i.to_string()))
        .collect();
    if pinned {
        x_ticks.insert(0, (-1.0, "ref".to_owned()));
    }
    let y_ticks: canvas::Ticks = [-1.0, -0.5, 0.0, 0.5, 1.0]
        .into_iter()
        .map(|v| (v, canvas::tick_label(v, 0.5)))
        .collect();
    canvas::axes(
        svg,
        area,
        (&x, &x_ticks, "node"),
        (&y, &y_ticks, "slowest mode (largest magnitude 1)"),
    );
    svg.line(
        (area.left, y.at(0.0)),
        (area.right, y.at(0.0)),
        &Stroke::solid(GUIDE, 1.0),
    );
    let point = |i: isize, v: f64| (x.at(i as f64), y.at(v));
    let edge = Stroke::solid(MUTED, 1.5);
    svg.group("edges", &[]);
    if pinned {
        svg.group("edge", &[("data-a", "ref".into()), ("data-b", "0".into())]);
        svg.line(
            point(-1, 0.0),
            point(0, shape.first().copied().unwrap_or(0.0)),
            &edge.dashed("3 3"),
        );
        svg.end();
    }
    for (i, pair) in shape.windows(2).enumerate() {
        if let [a, b] = pair {
            svg.group(
                "edge",
                &[("data-a", i.to_string()), ("data-b", (i + 1).to_string())],
            );
            svg.line(point(i as isize, *a), point(i as isize + 1, *b), &edge);
            svg.end();
        }
    }
    svg.end();
    let r = (220.0 / (n as f64).sqrt()).clamp(3.0, 8.0);
    if pinned {
        svg.group("reference", &[]);
        let c = point(-1, 0.0);
        svg.rect(
            (c.0 - r, c.1 - r),
            (2.0 * r, 2.0 * r),
            Some((INK, 1.0)),
            None,
        );
        svg.end();
    }
    svg.group("nodes", &[]);
    for (i, v) in shape.iter().enumerate() {
        node_group(svg, "node", i, *v, &[]);
        svg.circle(
            point(i as isize, *v),
            r,
            Some(mode_colour(*v)),
            Some(&Stroke::solid(INK, 1.0)),
        );
        svg.end();
    }
    svg.end();
}

fn graph(
    svg: &mut Svg,
    area: Area,
    positions: &[(f64, f64)],
    edges: &[(usize, usize)],
    shape: &[f64],
) {
    let n = positions.len();
    let (mut x0, mut x1, mut y0, mut y1) = (f64::MAX, f64::MIN, f64::MAX, f64::MIN);
    for (x, y) in positions {
        x0 = x0.min(*x);
        x1 = x1.max(*x);
        y0 = y0.min(*y);
        y1 = y1.max(*y);
    }
    let r = (220.0 / (n as f64).sqrt()).clamp(3.0, 11.0);
    let (aw, ah) = (
        area.right - area.left - 4.0 * r,
        area.bottom - area.top - 4.0 * r,
    );
    let span = (x1 - x0).max(y1 - y0).max(1e-12);
    let scale = (aw / (x1 - x0).max(span * 1e-3)).min(ah / (y1 - y0).max(span * 1e-3));
    let (cx, cy) = (
        (area.left + area.right) / 2.0,
        (area.top + area.bottom) / 2.0,
    );
    let at = |i: usize| {
        positions.get(i).map_or((cx, cy), |(x, y)| {
            (
                cx + (x - (x0 + x1) / 2.0) * scale,
                cy + (y - (y0 + y1) / 2.0) * scale,
            )
        })
    };
    svg.group("edges", &[]);
    let stroke = Stroke::solid(MUTED, if n > 200 { 0.6 } else { 1.3 }).faded(0.8);
    for (a, b) in edges {
        svg.group(
            "edge",
            &[("data-a", a.to_string()), ("data-b", b.to_string())],
        );
        svg.line(at(*a), at(*b), &stroke);
        svg.end();
    }
    svg.end();
    svg.group("nodes", &[]);
    for (i, v) in shape.iter().enumerate() {
        node_group(svg, "node", i, *v, &[]);
        let c = at(i);
        svg.circle(c, r, Some(mode_colour(*v)), Some(&Stroke::solid(INK, 0.8)));
        if n <= 64 {
            if r >= 9.0 {
                svg.text(
                    (c.0, c.1 + 4.0),
                    &i.to_string(),
                    10.0,
                    Anchor::Middle,
                    text_on(*v),
                    false,
                );
            } else {
                svg.text(
                    (c.0 + r + 2.0, c.1 - r),
                    &i.to_string(),
                    10.0,
                    Anchor::Start,
                    INK,
                    false,
                );
            }
        }
        svg.end();
    }
    svg.end();
}

fn colour_bar(svg: &mut Svg, (x, y): (f64, f64), height: f64) {
    let stops: String = (0..=10)
        .map(|k| {
            let v = 1.0 - 0.2 * f64::from(k);
            format!(
                r#"<stop offset="{}" stop-color="{}"/>"#,
                f64::from(k) / 10.0,
                mode_colour(v).hex()
            )
        })
        .collect();
    svg.raw(&format!(
        r#"<defs><linearGradient id="mode-map" x1="0" y1="0" x2="0" y2="1">{stops}</linearGradient></defs>"#
    ));
    svg.group("colour-bar", &[]);
    svg.raw(&format!(
        r#"<rect x="{x}" y="{y}" width="18" height="{height}" fill="url(#mode-map)" stroke="{}" stroke-width="0.8"/>"#,
        INK.hex()
    ));
    for (v, label) in [(1.0, "+1"), (0.0, "0"), (-1.0, "−1")] {
        let py = y + (1.0 - v) / 2.0 * height;
        svg.line((x + 18.0, py), (x + 24.0, py), &Stroke::solid(INK, 1.0));
        svg.text(
            (x + 28.0, py + 4.0),
            label,
            12.0,
            Anchor::Start,
            MUTED,
            false,
        );
    }
    svg.text(
        (x + 9.0, y - 12.0),
        "mode value",
        12.0,
        Anchor::Middle,
        INK,
        false,
    );
    svg.text(
        (x + 9.0, y + height + 20.0),
        "(sign arbitrary)",
        11.0,
        Anchor::Middle,
        MUTED,
        false,
    );
    svg.end();
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn repeated_eigenvalues_are_counted() {
        // A 3 × 3 grid: path P3 eigenvalues {0, 1, 3}, sums over pairs; λ = 1 twice.
        let eig = [0.0, 1.0, 1.0, 2.0, 3.0, 3.0, 4.0, 4.0, 6.0];
        assert_eq!(multiplicity(&eig, 1.0), 2);
        assert_eq!(multiplicity(&eig, 2.0), 1);
        assert_eq!(multiplicity(&[0.0, 1.0 + 1e-12, 1.0], 1.0), 2);
    }

    #[test]
    fn circle_starts_at_the_top() {
        let c = circle(4);
        assert!((c[0].0).abs() < 1e-12 && (c[0].1 + 1.0).abs() < 1e-12);
        assert!((c[1].0 - 1.0).abs() < 1e-12);
        assert_eq!(star(5)[0], (0.0, 0.0));
    }
}
