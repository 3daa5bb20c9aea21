//! Draws one of each kind of icefold figure from invented data, to look at.
//!
//! Usage: `cargo run --example plot_gallery [OUT_DIR]` (default `/tmp/plot-check`). Writes
//! `hysteresis`, `timeseries`, `heatmap`, `regimes` and `crowded`, each as `.svg` and `.png`. The data
//! are invented shapes, not model output: an S-shaped branch diagram with two folds, an
//! ensemble under a forcing ramp, a latitude-time temperature field, and a regime map.

use std::path::PathBuf;

use icefold::plot::{
    figure_svg, heatmap_svg, save_svg_and_png, Band, Figure, HeatMap, Marker, Panel, PlotError, Series,
    Stroke,
};

fn hysteresis() -> Result<String, PlotError> {
    // Invented S curve: S0 = 1330 + 25 (s^3 - 3 s), T = 255 + 20 s; folds at s = -1, 1.
    let branch = |lo: f64, hi: f64| -> (Vec<f64>, Vec<f64>) {
        (0..=80)
            .map(|k| {
                let s = lo + (hi - lo) * f64::from(k) / 80.0;
                (1330.0 + 25.0 * (s * s * s - 3.0 * s), 255.0 + 20.0 * s)
            })
            .unzip()
    };
    let (xc, yc) = branch(-2.3, -1.0);
    let (xu, yu) = branch(-1.0, 1.0);
    let (xw, yw) = branch(1.0, 2.3);
    // A quasi-static sweep: rising along the cold branch, falling along the warm one.
    let up: (Vec<f64>, Vec<f64>) = (0..12)
        .map(|k| {
            let s = -2.2 + 1.15 * f64::from(k) / 11.0;
            (1330.0 + 25.0 * (s * s * s - 3.0 * s), 255.0 + 20.0 * s)
        })
        .unzip();
    let down: (Vec<f64>, Vec<f64>) = (0..12)
        .map(|k| {
            let s = 2.2 - 1.15 * f64::from(k) / 11.0;
            (1330.0 + 25.0 * (s * s * s - 3.0 * s), 255.0 + 20.0 * s)
        })
        .unzip();
    let mut p = Panel::new("Solar constant S0 (W m⁻²)", "Global mean temperature (K)");
    p.series = vec![
        Series::new(xw, yw, Stroke::Solid, 0).labelled("stable"),
        Series::new(xc, yc, Stroke::Solid, 0),
        Series::new(xu, yu, Stroke::Dashed, 2).labelled("unstable"),
        Series::new(up.0, up.1, Stroke::ArrowsUp, 1).labelled("sweep, S0 rising"),
        Series::new(down.0, down.1, Stroke::ArrowsDown, 3).labelled("sweep, S0 falling"),
    ];
    p.markers = vec![
        Marker {
            x: 1380.0,
            y: 235.0,
            text: "S0 = 1380.0".into(),
        },
        Marker {
            x: 1280.0,
            y: 275.0,
            text: "S0 = 1280.0".into(),
        },
    ];
    figure_svg(&Figure {
        title: "Equilibria against the solar constant".into(),
        panels: vec![p],
        width_px: 1200,
        height_px: 800,
    })
}

fn timeseries() -> Result<String, PlotError> {
    let t: Vec<f64> = (0..=300).map(|k| f64::from(k) * 0.5).collect();
    let ramp = |t: f64| (t - 20.0).clamp(0.0, 80.0) / 80.0;
    let wiggle = |t: f64, k: f64| 0.3 * (0.7 * t + k).sin() + 0.15 * (2.3 * t + 2.0 * k).sin();
    let median: Vec<f64> = t
        .iter()
        .map(|&t| 287.0 + 3.5 * ramp(t) + wiggle(t, 0.0))
        .collect();
    let lower: Vec<f64> = t
        .iter()
        .zip(&median)
        .map(|(&t, m)| m - 0.4 - 1.2 * ramp(t))
        .collect();
    let upper: Vec<f64> = t
        .iter()
        .zip(&median)
        .map(|(&t, m)| m + 0.4 + 1.6 * ramp(t))
        .collect();
    let control: Vec<f64> = t.iter().map(|&t| 287.0 + wiggle(t, 1.0)).collect();
    let mut p1 = Panel::new("Time (year)", "Global mean temperature (K)");
    p1.title = Some("Ensemble of 64 members, CO₂ ramp from year 20 to 100".into());
    p1.bands.push(Band {
        label: Some("5-95 % range".into()),
        x: t.clone(),
        lower,
        upper,
        colour: 1,
    });
    p1.series
        .push(Series::new(t.clone(), median, Stroke::Solid, 0).labelled("median"));
    p1.series
        .push(Series::new(t.clone(), control, Stroke::Dashed, 2).labelled("control run"));
    // Ice edge retreats; a gap where output is missing (NaN) between years 60 and 70.
    let edge: Vec<f64> = t
        .iter()
        .map(|&t| {
            if (60.0..70.0).contains(&t) {
                f64::NAN
            } else {
                72.0 + 9.0 * ramp(t) + 0.6 * wiggle(t, 2.0)
            }
        })
        .collect();
    let mut p2 = Panel::new("Time (year)", "Ice edge latitude (°N)");
    p2.series.push(Series::new(t, edge, Stroke::Solid, 0));
    figure_svg(&Figure {
        title: "Response to a CO₂ ramp".into(),
        panels: vec![p1, p2],
        width_px: 1200,
        height_px: 900,
    })
}

fn heatmap() -> Result<String, PlotError> {
    // Equal-area latitude bands of a hemisphere: centres at asin((j + 0.5) / n).
    let n = 36;
    let lat: Vec<f64> = (0..n)
        .map(|j| ((f64::from(j) + 0.5) / f64::from(n)).asin().to_degrees())
        .collect();
    let time: Vec<f64> = (0..=150).map(f64::from).collect();
    let ramp = |t: f64| (t - 20.0).clamp(0.0, 80.0) / 80.0;
    let mut z = Vec::with_capacity(time.len() * lat.len());
    for &t in &time {
        for &l in &lat {
            let s = l.to_radians().sin();
            z.push(302.0 - 45.0 * s * s + 6.0 * ramp(t) * (0.5 + s * s));
        }
    }
    // Ice edge: where the field crosses 263 K (invented, close to the drawn freezing line).
    let edge: Vec<f64> = time
        .iter()
        .map(|&t| {
            let k = 6.0 * ramp(t);
            // 302 - 45 s^2 + k (0.5 + s^2) = 263  =>  s^2 = (39 + 0.5 k) / (45 - k)
            let s2: f64 = (39.0 + 0.5 * k) / (45.0 - k);
            if s2 >= 1.0 {
                90.0
            } else {
                s2.sqrt().asin().to_degrees()
            }
        })
        .collect();
    // True band boundaries asin(j / n), so the map reaches the pole.
    let lat_edges: Vec<f64> = (0..=n)
        .map(|j| (f64::from(j) / f64::from(n)).asin().to_degrees())
        .collect();
    heatmap_svg(&HeatMap {
        title: "Surface temperature".into(),
        x: time.clone(),
        y: lat,
        x_edges: None,
        y_edges: Some(lat_edges),
        z,
        x_label: "Time (year)".into(),
        y_label: "Latitude (°N)".into(),
        z_label: "Temperature (K)".into(),
        contour_levels: vec![(273.15, "273.15 K (0 °C)".into())],
        overlay: vec![Series::new(time, edge, Stroke::Dashed, 0).labelled("ice edge")],
        categorical: None,
        z_range: None,
        width_px: 1200,
        height_px: 800,
        ..HeatMap::default()
    })
}

fn regimes() -> Result<String, PlotError> {
    let s0: Vec<f64> = (0..60).map(|i| 1200.0 + 5.0 * f64::from(i)).collect();
    let co2: Vec<f64> = (0..40).map(|j| 100.0 + 25.0 * f64::from(j)).collect();
    let mut z = Vec::new();
    for &s in &s0 {
        for &c in &co2 {
            let warmth = s + 60.0 * (c / 280.0).ln();
            let class = if warmth < 1270.0 {
                0.0
            } else if warmth < 1330.0 {
                1.0
            } else if warmth < 1400.0 {
                2.0
            } else {
                3.0
            };
            z.push(class);
        }
    }
    // Two cells left out (NaN): they show as blank.
    z[30 * 40 + 20] = f64::NAN;
    z[31 * 40 + 20] = f64::NAN;
    heatmap_svg(&HeatMap {
        title: "Which climates exist".into(),
        x: s0,
        y: co2,
        x_edges: None,
        y_edges: None,
        z,
        x_label: "Solar constant S0 (W m⁻²)".into(),
        y_label: "CO₂ (ppm)".into(),
        z_label: "Equilibria".into(),
        contour_levels: vec![],
        overlay: vec![],
        categorical: Some(vec![
            (0.0, "snowball only".into()),
            (1.0, "snowball or ice cap".into()),
            (2.0, "ice cap only".into()),
            (3.0, "ice free".into()),
        ]),
        z_range: None,
        width_px: 1100,
        height_px: 760,
        ..HeatMap::default()
    })
}

fn crowded() -> Result<String, PlotError> {
    // Three small panels; the first is so full that its legend must go beside the plots.
    let x: Vec<f64> = (0..=100).map(|k| f64::from(k) / 10.0).collect();
    let mut p1 = Panel::new("Time (year)", "Albedo (1)");
    p1.title = Some("Legend beside the plots".into());
    for (k, stroke) in [Stroke::Solid, Stroke::Dashed, Stroke::Solid, Stroke::Dashed]
        .into_iter()
        .enumerate()
    {
        let kf = k as f64;
        let y: Vec<f64> = x
            .iter()
            .map(|&t| 0.3 + 0.1 * kf + 0.25 * (t + kf).sin())
            .collect();
        p1.series
            .push(Series::new(x.clone(), y, stroke, k).labelled(format!("member {k}")));
    }
    let mut p2 = Panel::new("Time (year)", "OLR (W m⁻²)");
    p2.series.push(
        Series::new(
            x.clone(),
            x.iter().map(|t| 230.0 + 2.0 * t).collect(),
            Stroke::Markers,
            1,
        )
        .labelled("points"),
    );
    p2.y_range = Some((220.0, 260.0));
    let p3 = Panel::new("Time (year)", "Empty (1)");
    figure_svg(&Figure {
        title: "Small figure with three panels".into(),
        panels: vec![p1, p2, p3],
        width_px: 640,
        height_px: 720,
    })
}

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let out = PathBuf::from(
        std::env::args()
            .nth(1)
            .unwrap_or_else(|| "/tmp/plot-check".into()),
    );
    std::fs::create_dir_all(&out)?;
    type Draw = fn() -> Result<String, PlotError>;
    let figures: [(&str, Draw); 5] = [
        ("hysteresis", hysteresis),
        ("timeseries", timeseries),
        ("heatmap", heatmap),
        ("regimes", regimes),
        ("crowded", crowded),
    ];
    for (name, draw) in figures {
        let svg = draw()?;
        let (s, p) = save_svg_and_png(&out.join(name), &svg)?;
        println!("{} ({} kB), {}", s.display(), svg.len() / 1024, p.display());
    }
    Ok(())
}
