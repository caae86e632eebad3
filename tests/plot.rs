//! Pictures: the SVGs parse and rasterise to something, the drawn curve is
//! the fitted curve (checked through the axis mapping), plot file names are
//! safe, and the HTML report renders in a real browser and loads nothing.

mod common;

use common::{fixture_text, kimech};
use kimech::analysis::km::{KmResult, Options, Series, Units, analyse};
use kimech::fit::{FitSettings, Weighting};
use kimech::plot::Frame;

/// The treated Puromycin series (Treloar 1974, in Bates & Watts 1988; fixtures/README.md).
fn puromycin_treated() -> KmResult {
    let text = fixture_text("puromycin.csv");
    let (mut s, mut v) = (Vec::new(), Vec::new());
    for line in text.lines().skip(1).filter(|l| l.starts_with("treated,")) {
        let cells: Vec<&str> = line.split(',').collect();
        s.push(cells[1].parse::<f64>().unwrap());
        v.push(cells[2].parse::<f64>().unwrap());
    }
    let series = Series {
        label: Some("treated".into()),
        origin: kimech::report::Origin::new("fixture", []),
        substrate: s,
        rate: v,
        sd: None,
    };
    let units = Units { substrate: Some("ppm".into()), rate: Some("counts/min²".into()) };
    let options =
        Options { weighting: Weighting::None, confidence: 0.95, enzyme: None, settings: FitSettings::default() };
    analyse(&series, &units, &options).unwrap()
}

/// Puromycin (fixtures/README.md) as a km input; its ppm are labelled uM, as in tests/km.rs,
/// because km needs a concentration unit and the unit only labels the axes here.
fn puromycin_input(dir: &std::path::Path) -> std::path::PathBuf {
    let path = dir.join("p.csv");
    let text = fixture_text("puromycin.csv").replacen("state,conc,rate", "series,substrate (uM),rate (uM/min)", 1);
    std::fs::write(&path, text).unwrap();
    path
}

/// The `points` of every `<polyline>` drawn with this stroke colour and width.
fn polylines(svg: &str, stroke: &str, width: &str) -> Vec<Vec<(f64, f64)>> {
    let mut lines = Vec::new();
    for element in svg.split("<polyline").skip(1) {
        let tag = &element[..element.find("/>").unwrap()];
        let attr = |name: &str| {
            let start = tag.find(&format!(" {name}=\"")).map(|i| i + name.len() + 3)?;
            Some(&tag[start..start + tag[start..].find('"')?])
        };
        if attr("stroke") == Some(stroke) && attr("stroke-width") == Some(width) {
            let pts = attr("points")
                .unwrap()
                .split_whitespace()
                .map(|p| {
                    let (x, y) = p.split_once(',').unwrap();
                    (x.parse().unwrap(), y.parse().unwrap())
                })
                .collect();
            lines.push(pts);
        }
    }
    lines
}

/// The longest line of the given colour inside a panel's plotting area.
fn curve_in(svg: &str, frame: &Frame, stroke: &str) -> Vec<(f64, f64)> {
    let (x0, x1) = (frame.px.0 as f64 - 1.0, frame.px.1 as f64 + 1.0);
    let (y0, y1) = (frame.py.1 as f64 - 1.0, frame.py.0 as f64 + 1.0);
    polylines(svg, stroke, "2")
        .into_iter()
        .filter(|l| l.iter().all(|p| p.0 >= x0 && p.0 <= x1 && p.1 >= y0 && p.1 <= y1))
        .max_by_key(|l| l.len())
        .expect("a fitted curve in the panel")
}

/// The curve's pixel y at pixel x, by linear interpolation between vertices.
fn y_at(curve: &[(f64, f64)], u: f64) -> f64 {
    let k = curve.windows(2).position(|w| (w[0].0 - u) * (w[1].0 - u) <= 0.0).expect("x within the curve");
    let (a, b) = (curve[k], curve[k + 1]);
    if (b.0 - a.0).abs() < 1e-9 { a.1 } else { a.1 + (u - a.0) / (b.0 - a.0) * (b.1 - a.1) }
}

/// Rasterises an SVG with resvg and returns the share of pixels that are not white.
fn inked_fraction(svg: &str) -> f64 {
    let tree = resvg::usvg::Tree::from_str(svg, &resvg::usvg::Options::default()).expect("SVG parses");
    let size = tree.size().to_int_size();
    let mut pixmap = resvg::tiny_skia::Pixmap::new(size.width(), size.height()).unwrap();
    resvg::render(&tree, resvg::tiny_skia::Transform::default(), &mut pixmap.as_mut());
    let inked = pixmap.pixels().iter().filter(|p| p.alpha() > 0 && (p.red() < 240 || p.blue() < 240)).count();
    inked as f64 / (size.width() * size.height()) as f64
}

#[test]
fn km_curve_passes_through_the_fitted_rates() {
    let r = puromycin_treated();
    let svg = kimech::plot::km::series_figure(&r).unwrap();
    let frame = svg.frames[0];
    let curve = curve_in(&svg.text, &frame, "#0072B2");
    assert!(curve.len() > 100, "a sampled curve, not a few segments");
    // Every vertex, mapped back through the axes, lies on Vmax·S/(Km + S) from the fit result
    // (allowing half a pixel of rounding in each direction, times the local slope).
    for &(u, v) in &curve {
        let (s, _) = frame.value_at(u, v);
        let expected = frame.pixel_of(s, r.rate_at(s)).1;
        let (_, v_right) = frame.pixel_of(frame.value_at(u + 1.0, v).0, r.rate_at(frame.value_at(u + 1.0, v).0));
        let slope = (v_right - expected).abs();
        assert!((v - expected).abs() <= 0.75 + 0.5 * slope, "vertex ({u}, {v}): S = {s}, expected y {expected}");
    }
    // Handbook relation (Michaelis & Menten 1913): at S = Km the rate is Vmax/2; and at
    // S = 4·Km it is 0.8·Vmax. Read the drawn curve there.
    let (vmax, km) = (r.params.vmax.value, r.params.km.value);
    for (s, v) in [(km, vmax / 2.0), (4.0 * km, 0.8 * vmax), (0.5, vmax * 0.5 / (km + 0.5))] {
        let (u, expected) = frame.pixel_of(s, v);
        let drawn = y_at(&curve, u);
        assert!((drawn - expected).abs() <= 1.5, "S = {s}: drawn y {drawn}, expected {expected}");
    }
}

#[test]
fn double_reciprocal_line_is_the_one_implied_by_the_fit() {
    let r = puromycin_treated();
    let svg = kimech::plot::km::series_figure(&r).unwrap();
    let frame = svg.frames[2];
    let line = curve_in(&svg.text, &frame, "#0072B2");
    let dr = &r.double_reciprocal;
    // It meets 1/v = 0 at 1/S = −1/Km and 1/S = 0 at 1/v = 1/Vmax (Lineweaver & Burk 1934).
    for (x, y) in [(dr.x_intercept, 0.0), (0.0, 1.0 / r.params.vmax.value), (100.0, dr.slope * 100.0 + dr.y_intercept)]
    {
        let (u, expected) = frame.pixel_of(x, y);
        if u < line[0].0 || u > line[line.len() - 1].0 {
            continue;
        }
        let drawn = y_at(&line, u);
        assert!((drawn - expected).abs() <= 1.5, "1/S = {x}: drawn y {drawn}, expected {expected}");
    }
    // The x-intercept is on screen: the view shows where the line meets the axis.
    assert!(frame.x.contains(dr.x_intercept));
}

#[test]
fn confidence_band_brackets_the_curve_and_narrows_where_the_data_are() {
    let r = puromycin_treated();
    // The band is the delta-method interval: symmetric about the curve, zero width at S = 0.
    let (lo0, hi0) = r.rate_band(0.0).unwrap();
    assert!(lo0.abs() < 1e-12 && hi0.abs() < 1e-12);
    let (lo, hi) = r.rate_band(0.2).unwrap();
    let v = r.rate_at(0.2);
    assert!(lo < v && v < hi);
    assert!(((hi - v) - (v - lo)).abs() < 1e-9 * v);
}

#[test]
fn every_km_panel_rasterises_to_a_visible_picture() {
    let r = puromycin_treated();
    let svg = kimech::plot::km::series_figure(&r).unwrap();
    let inked = inked_fraction(&svg.text);
    assert!(inked > 0.01, "only {:.3}% of pixels drawn", inked * 100.0);
    assert_eq!(svg.frames.len(), 3);
    for f in &svg.frames {
        assert!(f.px.1 - f.px.0 > 200 && f.py.0 - f.py.1 > 150, "plotting area too small: {f:?}");
    }
}

#[test]
fn plot_files_stay_inside_the_directory_whatever_the_ids() {
    let dir = tempfile::tempdir().unwrap();
    let ids = ["../escape", "a/b", "..", "spaced id", "αβγ", "/abs", "KX-101"];
    let mut csv = String::from("series,substrate (uM),rate (uM/min)\n");
    for id in ids {
        for (s, v) in [(2.0, 0.9), (5.0, 1.7), (10.0, 2.5), (20.0, 3.2), (50.0, 3.8), (100.0, 4.1)] {
            csv.push_str(&format!("\"{id}\",{s},{v}\n"));
        }
    }
    std::fs::write(dir.path().join("in.csv"), csv).unwrap();
    std::fs::create_dir(dir.path().join("run")).unwrap();
    kimech(&dir.path().join("run"))
        .args(["km", "../in.csv", "--plot", "plots", "--report", "report.html"])
        .assert()
        .success();
    let plots = dir.path().join("run/plots");
    let mut names: Vec<String> =
        std::fs::read_dir(&plots).unwrap().map(|e| e.unwrap().file_name().into_string().unwrap()).collect();
    names.sort();
    assert_eq!(names.len(), ids.len(), "one file per series: {names:?}");
    for n in &names {
        assert!(n.ends_with(".svg") && !n.starts_with('.') && n.is_ascii() && !n.contains(".."), "{n}");
        assert!(inked_fraction(&std::fs::read_to_string(plots.join(n)).unwrap()) > 0.01, "{n} is blank");
    }
    assert!(names.contains(&"km-KX-101.svg".to_string()));
    // Nothing appeared beside the input or above it.
    let mut top: Vec<String> =
        std::fs::read_dir(dir.path()).unwrap().map(|e| e.unwrap().file_name().into_string().unwrap()).collect();
    top.sort();
    assert_eq!(top, ["in.csv", "run"]);
    let mut run: Vec<String> = std::fs::read_dir(dir.path().join("run"))
        .unwrap()
        .map(|e| e.unwrap().file_name().into_string().unwrap())
        .collect();
    run.sort();
    assert_eq!(run, ["plots", "report.html"]);
}

/// What a self-contained page must not contain: scripts, fetched resources, URLs.
fn assert_self_contained(html: &str) {
    let lower = html.to_ascii_lowercase();
    for bad in ["<script", "http:", "https:", "src=", "href=", "@import", "url(", "<link", "<iframe", "<object"] {
        assert!(!lower.contains(bad), "the report contains '{bad}'");
    }
}

#[test]
fn km_report_holds_tables_warnings_and_one_figure_per_series() {
    let dir = tempfile::tempdir().unwrap();
    puromycin_input(dir.path());
    kimech(dir.path()).args(["km", "p.csv", "--enzyme", "5 nM", "--report", "r.html"]).assert().success();
    let html = std::fs::read_to_string(dir.path().join("r.html")).unwrap();
    assert_self_contained(&html);
    assert_eq!(html.matches("<svg").count(), 2, "treated and untreated");
    assert!(html.contains("Michaelis–Menten fit — series treated"));
    assert!(html.contains("kcat/Km"));
    assert!(html.contains("<table>\n<thead>") && html.contains("Km") && html.contains("profile"));
    assert!(html.contains(&kimech::page::escape(kimech::cli::CAUTION)));
    assert!(html.contains("for display only"));
}

/// The browser test runs wherever headless Chromium is installed. On a machine
/// with only a Rust toolchain it is skipped with a printed reason, so the README's
/// test command passes there; `.ci/run` installs Chromium and sets
/// `KIMECH_REQUIRE_BROWSER=1`, which turns a missing browser into a failure, so CI
/// can never pass by skipping it.
fn chromium() -> Option<&'static str> {
    let found = std::process::Command::new("chromium").arg("--version").output().is_ok_and(|o| o.status.success());
    let required = std::env::var("KIMECH_REQUIRE_BROWSER").is_ok_and(|v| v == "1");
    assert!(
        found || !required,
        "KIMECH_REQUIRE_BROWSER=1 but headless Chromium is missing: install it with \
         `apt-get update && apt-get install -y chromium` (.ci/run does this)"
    );
    if !found {
        eprintln!(
            "SKIPPED demo_report_renders_in_a_real_browser: headless Chromium is not installed \
             (`apt-get install -y chromium`; set KIMECH_REQUIRE_BROWSER=1 to make this a failure)"
        );
    }
    found.then_some("chromium")
}

/// Runs a command, killing it after `limit`.
fn run_with_limit(cmd: &mut std::process::Command, limit: std::time::Duration) -> std::process::ExitStatus {
    let mut child = cmd.stdout(std::process::Stdio::null()).stderr(std::process::Stdio::null()).spawn().unwrap();
    let start = std::time::Instant::now();
    loop {
        if let Some(status) = child.try_wait().unwrap() {
            return status;
        }
        if start.elapsed() > limit {
            let _ = child.kill();
            panic!("chromium did not finish within {limit:?}");
        }
        std::thread::sleep(std::time::Duration::from_millis(100));
    }
}

#[test]
fn demo_report_renders_in_a_real_browser() {
    let Some(browser) = chromium() else { return };
    let dir = tempfile::tempdir().unwrap();
    let out = kimech(dir.path()).arg("demo").assert().success().get_output().stdout.clone();
    let stdout = String::from_utf8(out).unwrap();
    assert!(stdout.contains("Report written to kimech-demo-report.html"), "{stdout}");
    let report = dir.path().join("kimech-demo-report.html");
    let html = std::fs::read_to_string(&report).unwrap();
    assert_self_contained(&html);
    let shot = dir.path().join("shot.png");
    let profile = dir.path().join("profile");
    let status = run_with_limit(
        std::process::Command::new(browser).args([
            "--headless",
            "--no-sandbox",
            "--disable-gpu",
            "--disable-quic",
            "--no-first-run",
            "--disable-background-networking",
            "--disable-component-update",
            "--disable-sync",
            &format!("--user-data-dir={}", profile.display()),
            &format!("--screenshot={}", shot.display()),
            "--window-size=1200,2000",
            &format!("file://{}", report.display()),
        ]),
        std::time::Duration::from_secs(90),
    );
    assert!(status.success(), "chromium exited with {status}");
    let png = std::fs::read(&shot).expect("chromium wrote a screenshot");
    let pixmap = resvg::tiny_skia::Pixmap::decode_png(&png).expect("the screenshot is a PNG");
    assert_eq!((pixmap.width(), pixmap.height()), (1200, 2000));
    // The page background is #fbfaf7; count what differs from it, and the curve's blue.
    let px = pixmap.pixels();
    let differs = px.iter().filter(|p| {
        u32::from(p.red().abs_diff(0xfb)) + u32::from(p.green().abs_diff(0xfa)) + u32::from(p.blue().abs_diff(0xf7))
            > 24
    });
    let share = differs.count() as f64 / px.len() as f64;
    assert!(share > 0.03, "only {:.2}% of the screenshot differs from the background", share * 100.0);
    let blue = px.iter().filter(|p| p.red() < 60 && (90..140).contains(&p.green()) && p.blue() > 150).count();
    assert!(blue > 200, "the fitted curves (Okabe–Ito blue) are not visible: {blue} pixels");
}

/// Writes an SVG for a person to look at when KIMECH_PREVIEW names a directory.
fn preview(name: &str, svg: &str) {
    if let Some(dir) = std::env::var_os("KIMECH_PREVIEW") {
        std::fs::create_dir_all(&dir).unwrap();
        std::fs::write(std::path::Path::new(&dir).join(name), svg).unwrap();
    }
}

/// A competitive rate matrix: Vmax 10, Km 5, Ki 2 (invented numbers for a geometric check).
fn competitive() -> (Vec<kimech::plot::charts::RatePoint>, kimech::plot::charts::RateLaw) {
    use kimech::plot::charts::RatePoint;
    let law = |s: f64, i: f64| 10.0 * s / (5.0 * (1.0 + i / 2.0) + s);
    let mut points = Vec::new();
    for i in [0.0, 2.0, 6.0] {
        for s in [1.0, 2.5, 5.0, 10.0, 25.0] {
            points.push(RatePoint { s, i, v: law(s, i) * (1.0 + 0.01 * ((s * 7.0 + i).sin())) });
        }
    }
    (points, std::rc::Rc::new(law))
}

/// Pixel y of every line of `colour`s at pixel x `u`.
fn lines_at(svg: &str, frame: &Frame, colours: &[&str], u: f64) -> Vec<f64> {
    colours.iter().map(|c| y_at(&curve_in(svg, frame, c), u)).collect()
}

#[test]
fn mechanism_views_cross_where_the_rate_law_says() {
    use kimech::plot::charts::{RateUnits, View, linear_view, rate_family};
    let (points, law) = competitive();
    let units = RateUnits { s: Some("uM".into()), i: Some("uM".into()), v: Some("uM/min".into()) };
    let panels = [
        rate_family("Rates", &points, &law, &units),
        linear_view(View::DoubleReciprocal, "Double reciprocal", &points, &law, &units),
        linear_view(View::Dixon, "Dixon", &points, &law, &units),
    ];
    let svg = kimech::plot::figure(&panels, 3, kimech::plot::PANEL, "mechanism").unwrap();
    preview("mechanism.svg", &svg.text);
    assert!(inked_fraction(&svg.text) > 0.01);
    let colours = ["#0072B2", "#D55E00", "#009E73"];
    // Competitive inhibition (Cornish-Bowden, Fundamentals of Enzyme Kinetics, 2012, ch. 6):
    // double-reciprocal lines share the 1/v intercept 1/Vmax at 1/S = 0 ...
    let f = svg.frames[1];
    let (u, expected) = f.pixel_of(0.0, 1.0 / 10.0);
    for y in lines_at(&svg.text, &f, &colours, u) {
        assert!((y - expected).abs() <= 1.5, "double reciprocal at 1/S = 0: {y} vs {expected}");
    }
    // ... and Dixon lines (one per S) meet at I = −Ki, 1/v = 1/Vmax (Dixon 1953).
    let f = svg.frames[2];
    let (u, expected) = f.pixel_of(-2.0, 1.0 / 10.0);
    for y in lines_at(&svg.text, &f, &colours, u) {
        assert!((y - expected).abs() <= 1.5, "Dixon at I = −Ki: {y} vs {expected}");
    }
}

#[test]
fn dose_curve_passes_through_its_midpoint_at_the_ic50_and_rankings_draw_bounds() {
    use kimech::plot::charts::{DoseCurve, Ranked, dose_panel, evidence_panel, ranking_panel};
    use kimech::plot::xy::Direction;
    // Four-parameter logistic, upper 100, lower 5, IC50 0.3 uM, Hill 1.2 (invented for geometry).
    let f = |x: f64| 5.0 + 95.0 / (1.0 + (x / 0.3f64).powf(1.2));
    let doses = [0.0, 0.01, 0.03, 0.1, 0.3, 1.0, 3.0, 10.0];
    let curve = DoseCurve {
        title: "KX-101".into(),
        subtitle: "IC50 = 0.30 uM (95% CI 0.25 to 0.36)".into(),
        flagged: false,
        points: doses.iter().map(|&x| (x, f(x))).collect(),
        fit: Some(Box::new(f)),
        ic50: Some((0.3, f(0.3), Some(0.25), Some(0.36), None)),
        unit: Some("uM".into()),
        response: "activity (%)".into(),
    };
    let ranks = [
        Ranked { label: "KX-104".into(), value: 8.2, low: Some(8.0), high: Some(8.4), bound: None },
        Ranked { label: "KX-101".into(), value: 6.5, low: Some(6.3), high: Some(6.7), bound: None },
        Ranked { label: "KX-109".into(), value: 5.0, low: None, high: None, bound: Some(Direction::Below) },
    ];
    let models = [("competitive".to_string(), 0.71), ("mixed".to_string(), 0.26), ("noncompetitive".to_string(), 0.03)];
    let panels = [
        dose_panel(curve),
        ranking_panel("pKi by compound", "pKi", &ranks),
        evidence_panel("Model evidence", "Akaike weight", &models, Some(0)),
    ];
    let svg = kimech::plot::figure(&panels, 3, kimech::plot::PANEL, "dose").unwrap();
    preview("dose.svg", &svg.text);
    assert!(inked_fraction(&svg.text) > 0.01);
    // 4PL at x = IC50 is halfway between the asymptotes (DESIGN.md §4): read the drawn curve there,
    // on the log axis.
    let frame = svg.frames[0];
    let fit = curve_in(&svg.text, &frame, "#0072B2");
    let (u, expected) = frame.pixel_of(0.3, 52.5);
    assert!((y_at(&fit, u) - expected).abs() <= 1.5);
    // Log mapping: a decade is the same width wherever it is.
    let w1 = frame.pixel_of(0.1, 0.0).0 - frame.pixel_of(0.01, 0.0).0;
    let w2 = frame.pixel_of(10.0, 0.0).0 - frame.pixel_of(1.0, 0.0).0;
    assert!((w1 - w2).abs() < 1e-6);
    // The bound in the ranking is drawn as an open marker (a circle outlined in vermilion).
    assert!(svg.text.contains("fill=\"none\" stroke=\"#D55E00\""), "the bound's open marker");
}

/// Centres of the filled diamonds (estimate markers) of a colour: (x, y) pixels.
fn diamonds(svg: &str, fill: &str) -> Vec<(f64, f64)> {
    let mut out = Vec::new();
    for element in svg.split("<polygon").skip(1) {
        let tag = &element[..element.find("/>").unwrap()];
        if !tag.contains(&format!("fill=\"{fill}\"")) {
            continue;
        }
        let start = tag.find("points=\"").unwrap() + 8;
        let pts: Vec<(f64, f64)> = tag[start..start + tag[start..].find('"').unwrap()]
            .split_whitespace()
            .map(|p| {
                let (x, y) = p.split_once(',').unwrap();
                (x.parse().unwrap(), y.parse().unwrap())
            })
            .collect();
        if pts.len() == 4 {
            let n = pts.len() as f64;
            out.push((pts.iter().map(|p| p.0).sum::<f64>() / n, pts.iter().map(|p| p.1).sum::<f64>() / n));
        }
    }
    out
}

#[test]
fn rank_plots_put_each_compound_at_its_pki_and_draw_bounds_apart() {
    // Hand-worked: Ki 10 nM → pKi 8, 1 uM → 6 (pKi = −log10 Ki in M); "> 10 uM" is the bound pKi < 5.
    let csv = "compound,target,ki (nM),qualifier,method,mechanism\n\
               KX-A,T1,10,,m,competitive\n\
               KX-B,T1,1000,,m,competitive\n\
               KX-C,T1,10000,>,m,competitive\n\
               KX-A,T2/β,50,,m,competitive\n";
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("ki.csv"), csv).unwrap();
    kimech(dir.path()).args(["rank", "ki.csv", "--plot", "plots", "--report", "rank.html"]).assert().success();
    let mut names: Vec<String> = std::fs::read_dir(dir.path().join("plots"))
        .unwrap()
        .map(|e| e.unwrap().file_name().into_string().unwrap())
        .collect();
    names.sort();
    assert_eq!(names, ["rank-T1-Ki.svg", "rank-T2_-Ki.svg"]);
    let html = std::fs::read_to_string(dir.path().join("rank.html")).unwrap();
    assert_self_contained(&html);
    assert_eq!(html.matches("<svg").count(), 2);

    let rows: Vec<kimech::analysis::rank::RankRow> = {
        let table = kimech::io::Table::parse("ki.csv", csv.as_bytes(), b',').unwrap();
        let (entries, _) = kimech::io::rank::read_entries(&table, None).unwrap();
        let options = kimech::analysis::rank::Options { versus: None, confidence: 0.95 };
        kimech::analysis::rank::aggregate(&entries, &options)
    };
    let groups = kimech::plot::rank::groups(&rows);
    let ((target, endpoint), group) = &groups[0];
    let svg = kimech::plot::rank::group_figure(target, endpoint, group).unwrap();
    assert!(inked_fraction(&svg.text) > 0.01);
    let frame = svg.frames[0];
    let mut xs: Vec<f64> = diamonds(&svg.text, "#0072B2").iter().map(|&(u, v)| frame.value_at(u, v).0).collect();
    xs.sort_by(f64::total_cmp);
    // The legend also draws one diamond, left of the plotting area; keep those inside it.
    xs.retain(|x| frame.x.contains(*x));
    assert_eq!(xs.len(), 2, "two estimates: {xs:?}");
    let px = (frame.x.hi - frame.x.lo) / (frame.px.1 - frame.px.0) as f64;
    assert!((xs[0] - 6.0).abs() <= px && (xs[1] - 8.0).abs() <= px, "{xs:?}");
    // The bound is an open circle in the second colour, not a diamond — in the
    // plot and in the legend's key alike.
    assert!(svg.text.contains("fill=\"none\" stroke=\"#D55E00\""));
    assert!(diamonds(&svg.text, "#D55E00").is_empty(), "a diamond drawn for a bound");
}

#[test]
fn mode_curves_are_the_chosen_models_global_fit_at_each_inhibitor_level() {
    use kimech::cli::mode;
    // Simulated competitive matrix (fixtures/README.md, "Simulated data — mode/").
    let path = common::fixture("mode/competitive.csv");
    let table = kimech::io::Table::read(path.to_str().unwrap()).unwrap();
    let args = mode::Args {
        file: path.to_str().unwrap().into(),
        substrate_unit: None,
        inhibitor_unit: None,
        weighting: kimech::cli::km::WeightingArg::None,
        choice: kimech::cli::ModelChoiceArgs::default(),
        output: kimech::cli::OutputArgs { format: kimech::io::Format::Table, output: None },
        pictures: kimech::cli::PictureArgs::default(),
    };
    let outcome = mode::analyse_with_matrices(&table, &args).unwrap();
    let (r, matrix) = &outcome.pairs[0];
    assert_eq!(r.chosen, "competitive");
    let svg = kimech::plot::mode::figure(r, matrix, &outcome.units).unwrap();
    preview("mode.svg", &svg.text);
    assert_eq!(svg.frames.len(), 10, "rates, three views, evidence, five residual panels");
    assert!(inked_fraction(&svg.text) > 0.01);
    let m = r.models.iter().find(|m| m.model == "competitive").unwrap();
    let (vmax, km, ki) = (m.params.vmax.value, m.params.km.value, m.params.ki.as_ref().unwrap().value);
    let mut levels: Vec<f64> = matrix.inhibitor.clone();
    levels.sort_by(f64::total_cmp);
    levels.dedup();
    let frame = svg.frames[0];
    // The k-th inhibitor level is drawn in the k-th palette colour; its curve is
    // v = Vmax·S/(Km(1 + I/Ki) + S) with the competitive fit's constants (DESIGN.md §4).
    for (k, i) in levels.iter().enumerate().take(3) {
        let colour = kimech::plot::style::hex(kimech::plot::style::colour(k));
        let curve = curve_in(&svg.text, &frame, &colour);
        for s in [5.0, 20.0, 60.0] {
            let (u, expected) = frame.pixel_of(s, vmax * s / (km * (1.0 + i / ki) + s));
            assert!((y_at(&curve, u) - expected).abs() <= 1.5, "I = {i}, S = {s}");
        }
    }
    // Competitive: the double-reciprocal lines share 1/v = 1/Vmax at 1/S = 0 (Cornish-Bowden 2012).
    let frame = svg.frames[1];
    let (u, expected) = frame.pixel_of(0.0, 1.0 / vmax);
    for k in 0..3 {
        let colour = kimech::plot::style::hex(kimech::plot::style::colour(k));
        assert!((y_at(&curve_in(&svg.text, &frame, &colour), u) - expected).abs() <= 1.5);
    }
}

#[test]
fn mode_writes_one_plot_per_compound_and_a_report() {
    let dir = tempfile::tempdir().unwrap();
    let input = common::fixture("mode/all.csv");
    kimech(dir.path())
        .args(["mode", input.to_str().unwrap(), "--plot", "plots", "--report", "mode.html"])
        .assert()
        .success();
    let mut names: Vec<String> = std::fs::read_dir(dir.path().join("plots"))
        .unwrap()
        .map(|e| e.unwrap().file_name().into_string().unwrap())
        .collect();
    names.sort();
    assert_eq!(names, ["mode-competitive.svg", "mode-mixed.svg", "mode-noncompetitive.svg", "mode-uncompetitive.svg"]);
    let html = std::fs::read_to_string(dir.path().join("mode.html")).unwrap();
    assert_self_contained(&html);
    assert_eq!(html.matches("<svg").count(), 4);
    assert!(html.contains("Dixon") && html.contains("Cornish-Bowden") && html.contains("Akaike weight"));
}

/// `ic50` options for curves in mM with responses in cm, otherwise the defaults.
fn ic50_options_mm() -> kimech::analysis::ic50::Options {
    use kimech::analysis::ic50::{IntervalMethod, Options, Thresholds};
    Options {
        fix_lower: None,
        fix_upper: None,
        enzyme: None,
        unit: kimech::units::ConcUnit::Millimolar,
        response_unit: Some("cm".into()),
        confidence: 0.95,
        intervals: IntervalMethod::Wald,
        thresholds: Thresholds::default(),
        settings: FitSettings::default(),
        percent: false,
        outliers: kimech::analysis::ic50::OutlierMode::Exclude,
    }
}

#[test]
fn ic50_curve_is_the_fitted_logistic_with_the_ic50_marked_at_its_midpoint() {
    use kimech::analysis::ic50::{Carried, Curve, Location, analyse};
    // Ryegrass root length vs ferulic acid (Inderjit, Streibig & Olofsdotter 2002; fixtures/README.md),
    // six rows at zero concentration included.
    let (x, y): (Vec<f64>, Vec<f64>) = fixture_text("ryegrass.csv")
        .lines()
        .skip(1)
        .map(|l| {
            let (a, b) = l.split_once(',').unwrap();
            (a.parse::<f64>().unwrap(), b.parse::<f64>().unwrap())
        })
        .unzip();
    let curve = Curve {
        compound: "ferulic acid".into(),
        location: Location::described("fixture"),
        x,
        y,
        carried: Carried::default(),
        read_flags: vec![],
    };
    let options = ic50_options_mm();
    let r = analyse(&curve, &options).unwrap();
    let svg = kimech::plot::ic50::figure(&r, &curve, "mM", "root length (cm)", None).unwrap();
    preview("ic50.svg", &svg.text);
    assert!(inked_fraction(&svg.text) > 0.01);
    let frame = svg.frames[0];
    assert_eq!(frame.x.scale, kimech::plot::Scale::Log);
    let drawn = curve_in(&svg.text, &frame, "#0072B2");
    let (ic50, h, lower, upper) = (r.ic50.value, r.hill.as_ref().unwrap().value, r.lower.value, r.upper.value);
    // y = lower + (upper − lower)/(1 + (x/IC50)^h) (DESIGN.md §4), read at a few doses through the log axis.
    for x in [0.5, 1.0, ic50, 5.0, 20.0] {
        let (u, expected) = frame.pixel_of(x, lower + (upper - lower) / (1.0 + (x / ic50).powf(h)));
        assert!((y_at(&drawn, u) - expected).abs() <= 1.5, "x = {x}");
    }
    // The IC50 diamond (Okabe–Ito bluish green) sits at (IC50, midpoint).
    let marks = diamonds(&svg.text, "#009E73");
    let (u, v) = frame.pixel_of(ic50, (upper + lower) / 2.0);
    assert!(marks.iter().any(|m| (m.0 - u).abs() <= 1.5 && (m.1 - v).abs() <= 1.5), "{marks:?} vs ({u}, {v})");
}

#[test]
fn ic50_batch_writes_every_curve_a_grid_with_flagged_first_and_a_report() {
    let dir = tempfile::tempdir().unwrap();
    let mut csv = String::from("compound,concentration (mM),response (cm)\n");
    let text = fixture_text("ryegrass.csv");
    let rows: Vec<&str> = text.lines().skip(1).collect();
    // The ryegrass curve, and its rows up to 7.5 mM only: five distinct concentrations,
    // flagged too-few-points (fewer than 6; common practice).
    for r in &rows {
        csv.push_str(&format!("ferulic/acid,{r}\n"));
    }
    for r in rows.iter().filter(|r| r.split_once(',').unwrap().0.parse::<f64>().unwrap() <= 7.5) {
        csv.push_str(&format!("short,{r}\n"));
    }
    std::fs::write(dir.path().join("d.csv"), csv).unwrap();
    // Hill ≈ 3 here; --hill-steep 4 leaves the full curve unflagged.
    kimech(dir.path())
        .args(["ic50", "d.csv", "--hill-steep", "4", "--plot", "p", "--report", "r.html"])
        .assert()
        .success();
    let mut names: Vec<String> = std::fs::read_dir(dir.path().join("p"))
        .unwrap()
        .map(|e| e.unwrap().file_name().into_string().unwrap())
        .collect();
    names.sort();
    assert_eq!(names, ["ic50-ferulic_acid.svg", "ic50-overview.svg", "ic50-short.svg"]);
    let grid = std::fs::read_to_string(dir.path().join("p/ic50-overview.svg")).unwrap();
    assert!(inked_fraction(&grid) > 0.01);
    let (short, ferulic) = (grid.find(">\nshort\n").unwrap(), grid.find(">\nferulic/acid\n").unwrap());
    assert!(short < ferulic, "the flagged curve comes first in the grid");
    let html = std::fs::read_to_string(dir.path().join("r.html")).unwrap();
    assert_self_contained(&html);
    assert!(html.contains("too-few-points"));
}

#[test]
fn a_bounded_ic50_is_drawn_with_its_fitted_curve() {
    use kimech::analysis::ic50::{Carried, Curve, Location, analyse};
    use kimech::fit::Model;
    use kimech::models::logistic::{Dose, Logistic};
    // An incomplete curve from the four-parameter logistic itself (DESIGN §4):
    // IC50 = 5 mM, h = 1, upper 100, lower 0, doses 0.01–1 mM, ±0.5 alternating.
    let x: Vec<f64> = (0..8).map(|k| 0.01 * 10f64.powf(k as f64 * 2.0 / 7.0)).collect();
    let y: Vec<f64> =
        x.iter().enumerate().map(|(k, x)| 100.0 / (1.0 + x / 5.0) + if k % 2 == 0 { 0.5 } else { -0.5 }).collect();
    let curve = Curve {
        compound: "short".into(),
        location: Location::described("fixture"),
        x,
        y,
        carried: Carried::default(),
        read_flags: vec![],
    };
    let options = ic50_options_mm();
    let r = analyse(&curve, &options).unwrap();
    assert!(r.qualifier.is_bound() && r.converged, "{:?} {}", r.qualifier, r.converged);
    let svg = kimech::plot::ic50::figure(&r, &curve, "mM", "root length (cm)", None).unwrap();
    let frame = svg.frames[0];
    let drawn = curve_in(&svg.text, &frame, "#0072B2");
    assert!(!drawn.is_empty(), "the fitted curve is drawn");
    for x in [0.02, 0.1, 0.5] {
        let (u, expected) = frame.pixel_of(x, Logistic.value(&r.fitted, &Dose::new(x)));
        assert!((y_at(&drawn, u) - expected).abs() <= 1.5, "x = {x}");
    }
}
