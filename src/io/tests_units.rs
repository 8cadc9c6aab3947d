//! Units stated in text headers (`units`): every spelling gives the field
//! the pipeline's stated units give; contradictions and unusable units are
//! errors naming file, line, column and both units; a run's first frame
//! settles the units the pipeline leaves open.

use super::tests::spec;
use super::units::{self, length_unit, split_name, strip, velocity_unit};
use super::*;

const ROWS: &str = "0,0,1,2\n0.5,0,3,4\n0,0.5,5,6\n0.5,0.5,7,8\n";

fn frame(dir: &Path, name: &str, text: &str) -> FrameSource {
    let p = dir.join(name);
    std::fs::write(&p, text).unwrap();
    FrameSource::File(p)
}

fn mm_spec(format: Format) -> InputSpec {
    let mut s = spec(format);
    s.length_unit = Some("mm".into());
    s.velocity_unit = Some("mm/s".into());
    s.length_scale = 1e-3;
    s.velocity_scale = 1e-3;
    s
}

fn strings(v: &[&str]) -> Vec<String> {
    v.iter().map(|s| s.to_string()).collect()
}

#[test]
fn names_and_units_split_in_every_spelling() {
    assert_eq!(split_name("x [mm]"), ("x", Some("mm")));
    assert_eq!(split_name("u(m/s)"), ("u", Some("m/s")));
    assert_eq!(split_name(" v [ m s^-1 ] "), ("v", Some("m s^-1")));
    assert_eq!(split_name("flag"), ("flag", None));
    assert_eq!(split_name("[mm]"), ("[mm]", None));
    // whitespace text splits "x [mm]" and "u (m s-1)" into several cells
    let mut names = strings(&["x", "[mm]", "y", "[mm]", "u", "(m", "s-1)", "flag"]);
    let u = strip(&mut names, &[]);
    assert_eq!(names, ["x", "y", "u", "flag"]);
    assert_eq!(
        u,
        [
            Some("mm".into()),
            Some("mm".into()),
            Some("m s-1".into()),
            None
        ]
    );
    // a name mapped in full stays whole; its unit is still read
    let mut names = strings(&["x [mm]", "y [mm]", "u", "v"]);
    let u = strip(&mut names, &["x [mm]", "y", "u", "v"]);
    assert_eq!(names, ["x [mm]", "y", "u", "v"]);
    assert_eq!(u[0].as_deref(), Some("mm"));
    for (w, c) in [
        ("m/s", "m/s"),
        ("m s-1", "m/s"),
        ("m s^-1", "m/s"),
        ("m·s⁻¹", "m/s"),
        ("mm/s", "mm/s"),
        ("mm s-1", "mm/s"),
        ("pixels", "px"),
    ] {
        assert_eq!(velocity_unit(w), Some(c), "{w}");
    }
    assert_eq!(velocity_unit("knots"), None);
    assert_eq!(velocity_unit("ms"), None);
    assert_eq!(length_unit("mm"), Some("mm"));
    assert_eq!(length_unit("pix"), Some("px"));
    assert_eq!(length_unit("cm"), None);
}

#[test]
fn header_units_in_every_spelling_give_the_stated_field() {
    let d = tempfile::tempdir().unwrap();
    let want = read_frame(
        &mm_spec(Format::Csv),
        &frame(d.path(), "plain.csv", &format!("x,y,u,v\n{ROWS}")),
    )
    .unwrap();
    // 0.5 mm pitch, u = 3 mm/s at (0.5, 0): the scales were applied
    assert!((want.grid.dx - 0.5e-3).abs() < 1e-15 && (want.u[[0, 1]] - 3e-3).abs() < 1e-15);
    let ws = ROWS.replace(',', " ");
    let cases = [
        (
            "a.csv",
            Format::Csv,
            format!("x [mm],y [mm],u (mm/s),v (mm/s)\n{ROWS}"),
        ),
        (
            "b.csv",
            Format::Csv,
            format!("x[mm],y[mm],u[mm s-1],v[mm s-1]\n{ROWS}"),
        ),
        (
            "c.txt",
            Format::Text,
            format!("# export\nx [mm] y [mm] u (mm s-1) v [mm/s]\n{ws}"),
        ),
        (
            "d.txt",
            Format::Text,
            format!("x y u v\n[mm] [mm] [mm/s] [mm/s]\n{ws}"),
        ),
        (
            "e.csv",
            Format::Csv,
            format!("x,y,u,v\nmm,mm,mm/s,mm/s\n{ROWS}"),
        ),
        (
            "f.tsv",
            Format::Tsv,
            format!(
                "x (mm)\ty (mm)\tu (mm/s)\tv (mm/s)\n{}",
                ROWS.replace(',', "\t")
            ),
        ),
    ];
    for (name, format, text) in cases {
        // the pipeline states no unit: the header's are taken
        let f = read_frame(&spec(format), &frame(d.path(), name, &text)).unwrap();
        assert_eq!(f.grid, want.grid, "{name}");
        assert_eq!(f.u, want.u, "{name}");
        assert_eq!(f.v, want.v, "{name}");
        // the pipeline states the same units: they agree
        let g = read_frame(&mm_spec(format), &frame(d.path(), name, &text)).unwrap();
        assert_eq!(g.u, want.u, "{name}");
    }
    // a column mapped by its full cell keeps working (CONTRACT: columns
    // are the header names)
    let mut s = mm_spec(Format::Csv);
    s.columns.x = "x [mm]".into();
    let f = read_frame(
        &s,
        &frame(d.path(), "g.csv", &format!("x [mm],y,u,v\n{ROWS}")),
    )
    .unwrap();
    assert_eq!(f.grid, want.grid);
}

/// The error of reading `text` as `name` with `s`, as printed.
fn error(s: &InputSpec, dir: &Path, name: &str, text: &str) -> String {
    read_frame(s, &frame(dir, name, text))
        .unwrap_err()
        .to_string()
}

#[test]
fn contradicting_or_unusable_header_units_name_file_line_column_and_units() {
    let d = tempfile::tempdir().unwrap();
    let mut s = spec(Format::Csv);
    s.length_unit = Some("m".into());
    let e = error(&s, d.path(), "f.csv", &format!("x [mm],y [mm],u,v\n{ROWS}"));
    assert!(
        e.ends_with(
            "f.csv:1 (column 'x'): the header states 'x [mm]' but the pipeline says length_unit = 'm'"
        ),
        "{e}"
    );
    // on a units line: its line, after a comment
    let mut s = spec(Format::Csv);
    s.velocity_unit = Some("m/s".into());
    let e = error(
        &s,
        d.path(),
        "l.csv",
        &format!("x,y,u,v\n# units\nmm,mm,mm/s,mm/s\n{ROWS}"),
    );
    assert!(
        e.ends_with(
            "l.csv:3 (column 'u'): the header states 'u [mm/s]' but the pipeline says velocity_unit = 'm/s'"
        ),
        "{e}"
    );
    let e = error(
        &spec(Format::Csv),
        d.path(),
        "g.csv",
        &format!("x,y,u [px],v [px]\n{ROWS}"),
    );
    assert!(
        e.contains("g.csv:1 (column 'u'): the header states 'u [px]' (pixels)")
            && e.contains("give velocity_unit = \"px\" with pixel_size and pulse_separation"),
        "{e}"
    );
    let e = error(
        &spec(Format::Csv),
        d.path(),
        "h.csv",
        &format!("x [mm],y [m],u,v\n{ROWS}"),
    );
    assert!(
        e.contains("h.csv:1 (column 'y'): the header gives 'y' the unit 'm' but 'x [mm]' another"),
        "{e}"
    );
    let e = error(
        &spec(Format::Csv),
        d.path(),
        "i.csv",
        &format!("x,y,u [m/s],v [mm/s]\n{ROWS}"),
    );
    assert!(
        e.contains("i.csv:1 (column 'v'): the header gives 'v' the unit 'mm/s' but 'u [m/s]'"),
        "{e}"
    );
    let e = error(
        &spec(Format::Csv),
        d.path(),
        "k.csv",
        &format!("x [in],y [in],u,v\n{ROWS}"),
    );
    assert!(
        e.contains(
            "k.csv:1 (column 'x'): the header gives 'x' the unit 'in', which is not a length unit"
        ),
        "{e}"
    );
    // pixels stated by both, with the calibration: read in pixels
    let mut s = spec(Format::Csv);
    s.length_unit = Some("px".into());
    s.length_scale = 2e-5;
    let f = read_frame(
        &s,
        &frame(d.path(), "p.csv", &format!("x [px],y [px],u,v\n{ROWS}")),
    )
    .unwrap();
    assert!((f.grid.dx - 1e-5).abs() < 1e-18);
}

#[test]
fn the_first_frame_settles_the_units_the_pipeline_leaves_open() {
    let d = tempfile::tempdir().unwrap();
    let dir = d.path();
    frame(dir, "f1.csv", &format!("x (mm),y (mm),u,v\n{ROWS}"));
    frame(dir, "f2.csv", &format!("x,y,u,v\n{ROWS}"));
    let text = format!(
        "[campaign]\nname = \"u\"\n[mask]\ncircles = [[0.0, 0.0, 0.1]]\n\
         [[run]]\nid = \"a\"\nframes = \"{}/f*.csv\"\n",
        dir.display()
    );
    let plan = crate::plan::Plan::from_str(&text, &dir.join("p.toml")).unwrap();
    let s = &plan.runs[0].input;
    // lengths from the header, velocities assumed
    assert_eq!((s.length_scale, s.velocity_scale), (1e-3, 1.0));
    let said = units::describe(s);
    assert_eq!(
        said,
        "x, y in mm (from the header of f1.csv, line 1: 'x [mm]'); \
         u, v in m/s (assumed: neither the pipeline nor the header states it)"
    );
    // the mask circle, in the input's length unit, follows: 0.1 mm
    let g = read_grid(s, &FrameSource::File(dir.join("f1.csv"))).unwrap();
    let m = plan.runs[0].mask.nodes(&g, s.grid_tolerance).unwrap();
    assert_eq!(m.iter().filter(|&&b| b).count(), 1, "only the node at 0, 0");
    // a frame without units is read in the settled ones
    let f2 = read_frame(s, &FrameSource::File(dir.join("f2.csv"))).unwrap();
    assert!((f2.grid.dx - 0.5e-3).abs() < 1e-15);
    // a later frame in other units, or stating the assumed velocity unit
    // otherwise, is an error naming it and the first
    let e = error(s, dir, "f3.csv", &format!("x [m],y [m],u,v\n{ROWS}"));
    assert!(
        e.contains(
            "f3.csv:1 (column 'x'): the header states 'x [m]' but the run's first frame f1.csv \
             states 'x [mm]' (line 1)"
        ),
        "{e}"
    );
    let e = error(s, dir, "f4.csv", &format!("x,y,u [mm/s],v [mm/s]\n{ROWS}"));
    assert!(
        e.contains(
            "f4.csv:1 (column 'u'): the header states 'u [mm/s]' but the run's first frame \
             f1.csv states no velocity_unit (so the run assumes m/s)"
        ),
        "{e}"
    );
    assert!(read_frame(s, &frame(dir, "f5.csv", &format!("x,y,u [m/s],v\n{ROWS}"))).is_ok());
    // a pipeline that states its units is not overridden by the header
    let stated = text.replace("[[run]]", "[input]\nlength_unit = \"mm\"\n[[run]]");
    let plan = crate::plan::Plan::from_str(&stated, &dir.join("p.toml")).unwrap();
    let s = &plan.runs[0].input;
    assert!(units::describe(s).starts_with("x, y in mm (stated by the pipeline)"));
    assert_eq!(s.units_from_header.as_ref().unwrap().length, None);
}
