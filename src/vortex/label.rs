//! Connected-region labelling of a signed node mask.
//!
//! Owns: `regions`, which groups the nonzero nodes of a mask (values -1, 0,
//! +1, row-major over an `nx` x `ny` grid) into connected regions of one
//! sign. Does not own: what the mask means (`vortex::find_cores`).
//!
//! Method: flood fill with an explicit stack (common practice), each node
//! visited once, O(nodes). Two nodes are neighbours when they differ by one
//! step in i or j (4-connectivity, the default) or also diagonally
//! (8-connectivity). 4-connectivity is the conservative choice: two cores
//! whose thresholded regions touch only at a corner stay two cores.
//! Nodes of opposite sign never join, whatever the connectivity.
//!
//! Order: regions are numbered in the order of their first node in
//! row-major scan; each region's nodes are sorted. Edges: the grid's edge
//! is a boundary (no wrap). Empty mask: no regions.

/// Which neighbours join a region.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
pub enum Connectivity {
    /// Left, right, up, down.
    Four,
    /// Also the four diagonals.
    Eight,
}

impl Connectivity {
    pub(crate) fn describe(&self) -> &'static str {
        match self {
            Connectivity::Four => "4-connectivity",
            Connectivity::Eight => "8-connectivity",
        }
    }

    fn steps(&self) -> &'static [(i64, i64)] {
        const FOUR: [(i64, i64); 4] = [(0, -1), (0, 1), (-1, 0), (1, 0)];
        const EIGHT: [(i64, i64); 8] = [
            (0, -1),
            (0, 1),
            (-1, 0),
            (1, 0),
            (-1, -1),
            (-1, 1),
            (1, -1),
            (1, 1),
        ];
        match self {
            Connectivity::Four => &FOUR,
            Connectivity::Eight => &EIGHT,
        }
    }
}

/// One connected region.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct Region {
    /// +1 or -1.
    pub sign: i8,
    /// Row-major node indices, sorted.
    pub nodes: Vec<usize>,
}

/// The connected regions of the nonzero nodes of `mask` (`ny` rows of `nx`).
/// Panics if `mask.len() != nx * ny` (a programming error).
pub(crate) fn regions(mask: &[i8], nx: usize, ny: usize, conn: Connectivity) -> Vec<Region> {
    assert_eq!(
        mask.len(),
        nx * ny,
        "mask of {} nodes for {nx} x {ny}",
        mask.len()
    );
    let mut seen = vec![false; mask.len()];
    let mut out = Vec::new();
    let mut stack = Vec::new();
    for start in 0..mask.len() {
        let sign = mask[start];
        if sign == 0 || seen[start] {
            continue;
        }
        seen[start] = true;
        stack.push(start);
        let mut nodes = Vec::new();
        while let Some(k) = stack.pop() {
            nodes.push(k);
            let (j, i) = ((k / nx) as i64, (k % nx) as i64);
            for &(dj, di) in conn.steps() {
                let (jj, ii) = (j + dj, i + di);
                if jj < 0 || ii < 0 || jj >= ny as i64 || ii >= nx as i64 {
                    continue;
                }
                let n = jj as usize * nx + ii as usize;
                if !seen[n] && mask[n] == sign {
                    seen[n] = true;
                    stack.push(n);
                }
            }
        }
        nodes.sort_unstable();
        out.push(Region { sign, nodes });
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Parses rows of `+`, `-`, `.` (top row first in the text, but row 0
    /// of the grid: the picture is the array as stored).
    fn grid(rows: &[&str]) -> (Vec<i8>, usize, usize) {
        let nx = rows[0].len();
        let m = rows
            .iter()
            .flat_map(|r| {
                r.chars().map(|c| match c {
                    '+' => 1,
                    '-' => -1,
                    _ => 0,
                })
            })
            .collect();
        (m, nx, rows.len())
    }

    #[test]
    fn hand_worked_grid_four_and_eight_connectivity() {
        // Worked by hand. Row-major indices of a 6 x 5 grid:
        //  row 0:  0  1  2  3  4  5
        //  row 1:  6  7  8  9 10 11
        //  row 2: 12 13 14 15 16 17
        //  row 3: 18 19 20 21 22 23
        //  row 4: 24 25 26 27 28 29
        let (m, nx, ny) = grid(&[
            "++..-.", //
            "+..+-.", //
            "..+...", //
            "-..+++", //
            "--..+-",
        ]);
        let four = regions(&m, nx, ny, Connectivity::Four);
        let got: Vec<(i8, Vec<usize>)> = four.iter().map(|r| (r.sign, r.nodes.clone())).collect();
        // 4-connectivity: {0,1,6}+, {4,10}-, {9}+, {14}+, {18,24,25}-,
        // {21,22,23,28}+, {29}- (29 touches 23 and 28, but of opposite sign).
        assert_eq!(
            got,
            vec![
                (1, vec![0, 1, 6]),
                (-1, vec![4, 10]),
                (1, vec![9]),
                (1, vec![14]),
                (-1, vec![18, 24, 25]),
                (1, vec![21, 22, 23, 28]),
                (-1, vec![29]),
            ]
        );
        // 8-connectivity: 9 and 14 join diagonally; 14 and 21 too, so
        // {9, 14, 21, 22, 23, 28} is one region; the rest as before.
        let eight = regions(&m, nx, ny, Connectivity::Eight);
        let got: Vec<(i8, Vec<usize>)> = eight.iter().map(|r| (r.sign, r.nodes.clone())).collect();
        assert_eq!(
            got,
            vec![
                (1, vec![0, 1, 6]),
                (-1, vec![4, 10]),
                (1, vec![9, 14, 21, 22, 23, 28]),
                (-1, vec![18, 24, 25]),
                (-1, vec![29]),
            ]
        );
    }

    #[test]
    fn empty_full_and_edge_regions() {
        assert!(regions(&[0; 12], 4, 3, Connectivity::Four).is_empty());
        let full = regions(&[-1; 12], 4, 3, Connectivity::Four);
        assert_eq!(full.len(), 1);
        assert_eq!(full[0].nodes, (0..12).collect::<Vec<_>>());
        // No wrap: the last node of row 0 and the first of row 1 are not
        // neighbours.
        let (m, nx, ny) = grid(&["...+", "+..."]);
        assert_eq!(regions(&m, nx, ny, Connectivity::Eight).len(), 2);
    }
}
