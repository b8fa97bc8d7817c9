//! Graphs shared by the spectrum benches.

use entrain::graph::Graph;

/// Random geometric mesh: points uniform in the unit square, linked within a radius
/// giving a mean degree of about 8; the largest component, relabelled.
pub fn geometric_mesh(n: usize, seed: u64) -> Graph {
    let mut state = seed | 1;
    let mut next = || {
        state ^= state << 13;
        state ^= state >> 7;
        state ^= state << 17;
        (state >> 11) as f64 / (1u64 << 53) as f64
    };
    let points: Vec<(f64, f64)> = (0..n).map(|_| (next(), next())).collect();
    let radius = (8.0 / (std::f64::consts::PI * n as f64)).sqrt();
    let cells = (1.0 / radius).floor().max(1.0) as usize;
    let cell_of = |p: (f64, f64)| {
        (
            ((p.0 * cells as f64) as usize).min(cells - 1),
            ((p.1 * cells as f64) as usize).min(cells - 1),
        )
    };
    let mut grid: Vec<Vec<usize>> = vec![Vec::new(); cells * cells];
    for (i, &p) in points.iter().enumerate() {
        let (cx, cy) = cell_of(p);
        grid[cy * cells + cx].push(i);
    }
    let mut edges = Vec::new();
    for (i, &p) in points.iter().enumerate() {
        let (cx, cy) = cell_of(p);
        for dy in 0..3usize {
            for dx in 0..3usize {
                let (x, y) = ((cx + dx).wrapping_sub(1), (cy + dy).wrapping_sub(1));
                if x >= cells || y >= cells {
                    continue;
                }
                for &j in &grid[y * cells + x] {
                    let q = points[j];
                    if j > i && (p.0 - q.0).powi(2) + (p.1 - q.1).powi(2) <= radius * radius {
                        edges.push((i, j));
                    }
                }
            }
        }
    }
    // Largest component by union-find.
    let mut parent: Vec<usize> = (0..n).collect();
    fn find(parent: &mut [usize], mut i: usize) -> usize {
        while parent[i] != i {
            parent[i] = parent[parent[i]];
            i = parent[i];
        }
        i
    }
    for &(a, b) in &edges {
        let (ra, rb) = (find(&mut parent, a), find(&mut parent, b));
        parent[ra] = rb;
    }
    let mut size = vec![0usize; n];
    for i in 0..n {
        let r = find(&mut parent, i);
        size[r] += 1;
    }
    let big = (0..n).max_by_key(|&i| size[i]).unwrap();
    let mut label = vec![usize::MAX; n];
    let mut count = 0;
    for (i, slot) in label.iter_mut().enumerate() {
        if find(&mut parent, i) == big {
            *slot = count;
            count += 1;
        }
    }
    let kept: Vec<(usize, usize)> = edges
        .iter()
        .filter(|&&(a, _)| label[a] != usize::MAX)
        .map(|&(a, b)| (label[a], label[b]))
        .collect();
    Graph::from_edges(count, &kept).unwrap()
}
