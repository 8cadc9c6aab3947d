use super::*;
use crate::field::MASKED;

fn grid() -> Grid {
    // 11 x 9 nodes at 1 mm, origin (0, 0)
    Grid {
        nx: 11,
        ny: 9,
        x0: 0.0,
        y0: 0.0,
        dx: 1e-3,
        dy: 1e-3,
    }
}

fn raw(text: &str) -> RawMask {
    toml::from_str(text).unwrap()
}

/// The campaign mask `r` in mm, y up.
fn campaign_mask(r: &RawMask) -> MaskSpec {
    MaskSpec::resolve(
        Some(r),
        None,
        1e-3,
        Orientation::default(),
        Path::new("."),
        "t",
    )
    .unwrap()
}

fn masked(m: &NodeMask) -> Vec<(usize, usize)> {
    m.indexed_iter()
        .filter(|(_, &b)| b)
        .map(|((j, i), _)| (i, j))
        .collect()
}

#[test]
fn a_square_polygon_in_mm_masks_the_nodes_inside() {
    // square 2.5..4.5 mm in x, 1.5..3.5 mm in y: nodes x 3,4 and y 2,3
    let r = raw("polygons = [[[2.5, 1.5], [4.5, 1.5], [4.5, 3.5], [2.5, 3.5]]]");
    let s = campaign_mask(&r);
    let m = s.nodes(&grid(), 0.05).unwrap();
    assert_eq!(masked(&m), vec![(3, 2), (4, 2), (3, 3), (4, 3)]);
}

#[test]
fn a_circle_masks_nodes_within_its_radius_and_y_down_mirrors_it() {
    let r = raw("circles = [[5.0, 4.0, 1.0]]");
    let s = campaign_mask(&r);
    let m = s.nodes(&grid(), 0.05).unwrap();
    // the centre and its 4 neighbours at exactly 1 mm
    assert_eq!(masked(&m), vec![(5, 3), (4, 4), (5, 4), (6, 4), (5, 5)]);
    // written in image axes, the centre (5, -4) mm is the node y = 4 mm
    let r = raw("circles = [[5.0, -4.0, 0.5]]");
    let down = Orientation {
        y_down: true,
        v_down: true,
        stated: true,
    };
    let s = MaskSpec::resolve(Some(&r), None, 1e-3, down, Path::new("."), "t").unwrap();
    assert_eq!(masked(&s.nodes(&grid(), 0.05).unwrap()), vec![(5, 4)]);
}

#[test]
fn a_non_convex_polygon_follows_the_even_odd_rule() {
    // an L shape: the notch (x > 2, y > 2) is outside
    let p = [
        (0.0, 0.0),
        (4.0, 0.0),
        (4.0, 2.0),
        (2.0, 2.0),
        (2.0, 4.0),
        (0.0, 4.0),
    ];
    assert!(inside(&p, 1.0, 1.0));
    assert!(inside(&p, 3.0, 1.0));
    assert!(inside(&p, 1.0, 3.0));
    assert!(!inside(&p, 3.0, 3.0));
    assert!(!inside(&p, 5.0, 1.0));
    // level with a vertex (y = 2) the crossing is counted once
    assert!(inside(&p, 1.0, 2.0));
}

#[test]
fn run_masks_add_to_the_campaign_unless_inherit_is_false() {
    let c = raw("circles = [[1.0, 1.0, 0.1]]");
    let r = raw("circles = [[8.0, 6.0, 0.1]]");
    let o = Orientation::default();
    let both = MaskSpec::resolve(Some(&c), Some(&r), 1e-3, o, Path::new("."), "t").unwrap();
    assert_eq!(
        masked(&both.nodes(&grid(), 0.05).unwrap()),
        vec![(1, 1), (8, 6)]
    );
    let own = raw("circles = [[8.0, 6.0, 0.1]]\ninherit = false");
    let only = MaskSpec::resolve(Some(&c), Some(&own), 1e-3, o, Path::new("."), "t").unwrap();
    assert_eq!(masked(&only.nodes(&grid(), 0.05).unwrap()), vec![(8, 6)]);
    let e = MaskSpec::resolve(Some(&own), None, 1e-3, o, Path::new("."), "t").unwrap_err();
    assert!(e.message.contains("inherit"), "{e}");
}

#[test]
fn bad_polygons_and_circles_are_usage_errors() {
    let o = Orientation::default();
    let e = MaskSpec::resolve(
        Some(&raw("polygons = [[[0.0, 0.0], [1.0, 1.0]]]")),
        None,
        1e-3,
        o,
        Path::new("."),
        "run 'a'",
    )
    .unwrap_err();
    assert_eq!(e.exit_code(), 2);
    assert!(
        e.message.contains("polygon 1") && e.message.contains("run 'a'"),
        "{e}"
    );
    let e = MaskSpec::resolve(
        Some(&raw("circles = [[0.0, 0.0, -1.0]]")),
        None,
        1e-3,
        o,
        Path::new("."),
        "t",
    )
    .unwrap_err();
    assert!(e.message.contains("positive radius"), "{e}");
}

#[test]
fn mask_files_list_nodes_or_hold_a_grid() {
    let d = tempfile::tempdir().unwrap();
    let o = Orientation::default();
    std::fs::write(
        d.path().join("nodes.csv"),
        "# masked nodes\nx,y\n2,3\n2.01,4\n",
    )
    .unwrap();
    let s = file_mask(d.path(), "nodes.csv", o).unwrap();
    assert_eq!(
        masked(&s.nodes(&grid(), 0.05).unwrap()),
        vec![(2, 3), (2, 4)]
    );
    // off the grid: the file and line are named
    std::fs::write(d.path().join("off.csv"), "x y\n2.3 3\n").unwrap();
    let s = file_mask(d.path(), "off.csv", o).unwrap();
    let e = s.nodes(&grid(), 0.05).unwrap_err();
    assert!(e.to_string().contains("off.csv:2"), "{e}");
    // a 0/1 grid: first line at the smallest y
    write_column_grid(&d.path().join("grid.txt"));
    let s = file_mask(d.path(), "grid.txt", o).unwrap();
    assert_eq!(
        masked(&s.nodes(&grid(), 0.05).unwrap()),
        vec![(7, 0), (7, 1)]
    );
    // in image axes the first line is the top row
    let down = Orientation {
        y_down: true,
        v_down: true,
        stated: true,
    };
    let s = file_mask(d.path(), "grid.txt", down).unwrap();
    assert_eq!(
        masked(&s.nodes(&grid(), 0.05).unwrap()),
        vec![(7, 7), (7, 8)]
    );
    // a grid of the wrong shape names both shapes
    let small = Grid { nx: 10, ..grid() };
    let e = s.nodes(&small, 0.05).unwrap_err();
    assert!(
        e.message.contains("9 rows x 11 columns") && e.message.contains("10 columns"),
        "{e}"
    );
    // a cell that is not 0 or 1
    std::fs::write(d.path().join("bad.txt"), "0 1\n0 2\n").unwrap();
    let e = file_mask(d.path(), "bad.txt", o).unwrap_err();
    assert!(
        e.to_string().contains("bad.txt:2") && e.message.contains("'2'"),
        "{e}"
    );
}

/// The mask `file = "<name>"` in mm resolved against `dir`.
fn file_mask(dir: &Path, name: &str, o: Orientation) -> Result<MaskSpec> {
    let r = raw(&format!("file = \"{name}\""));
    MaskSpec::resolve(Some(&r), None, 1e-3, o, dir, "t")
}

/// Writes an 11 x 9 0/1 grid file whose only masked cells are column 7 of
/// its first two lines.
fn write_column_grid(path: &Path) {
    let mut g = String::new();
    for j in 0..9 {
        let row: Vec<&str> = (0..11)
            .map(|i| if i == 7 && j < 2 { "1" } else { "0" })
            .collect();
        g.push_str(&row.join(" "));
        g.push('\n');
    }
    std::fs::write(path, &g).unwrap();
}

#[test]
fn applying_a_mask_sets_status_3_and_nan() {
    let mut f = Field::from_fn(grid(), |x, y| (x, y));
    let mut m = NodeMask::from_elem(grid().shape(), false);
    m[[2, 3]] = true;
    apply(&m, &mut f);
    assert_eq!(f.status[[2, 3]], MASKED);
    assert!(f.u[[2, 3]].is_nan() && f.v[[2, 3]].is_nan());
    assert_eq!(f.count(MASKED), 1);
}

#[test]
fn the_outline_of_masked_cells_is_their_border_with_unmasked_cells() {
    let g = Grid {
        nx: 3,
        ny: 3,
        ..grid()
    };
    let mut m = vec![false; 9];
    m[4] = true; // the centre: a square of 4 edges
    let segs = crate::plot::draw::mask_outline(&g, &m, 1e-3);
    assert_eq!(segs.len(), 4);
    let xs: Vec<f64> = segs.iter().flatten().map(|p| p.0).collect();
    assert!(xs
        .iter()
        .all(|&x| (x - 0.5).abs() < 1e-12 || (x - 1.5).abs() < 1e-12));
    m[5] = true; // two cells side by side: 6 edges, the shared one left out
    assert_eq!(crate::plot::draw::mask_outline(&g, &m, 1e-3).len(), 6);
}

/// The figures' mask: the geometry's nodes, plus nodes masked in every
/// frame (no valid, replaced or filled vector in any); a node masked in
/// some frames only, and a node never counted (NaN fractions), are data.
#[test]
fn figure_mask_is_geometry_and_nodes_masked_in_every_frame() {
    use crate::field::NodeTable;
    let g = Grid {
        x0: 0.0,
        y0: 0.0,
        dx: 1.0,
        dy: 1.0,
        nx: 4,
        ny: 1,
    };
    let mut t = NodeTable::new(g);
    // node 0 always valid, 1 masked in every frame, 2 masked in some
    // frames and filled in one, 3 in no counted frame
    t.push("n_valid", vec![4.0, 0.0, 0.0, 0.0]);
    t.push("outlier_frac", vec![0.0, 0.0, 0.0, f64::NAN]);
    t.push("filled_frac", vec![0.0, 0.0, 0.25, f64::NAN]);
    assert_eq!(
        crate::mask::figure_mask(None, &t),
        Some(vec![false, true, false, false])
    );
    let mut geo = NodeMask::from_elem((1, 4), false);
    geo[[0, 3]] = true;
    assert_eq!(
        crate::mask::figure_mask(Some(&geo), &t),
        Some(vec![false, true, false, true])
    );
    t.columns[0].1[1] = 1.0;
    assert_eq!(crate::mask::figure_mask(None, &t), None);
}
