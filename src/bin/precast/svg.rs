//! `precast report --svg DIR`: two plots per codec, drawn with plotters from the plan's
//! figures and `sizing::curve` (the same candidates and rates sizing weighs).

use plotters::prelude::*;
use precast::plan::CodecPlan;
use precast::sizing::Weighed;
use precast::spec::{Lookup, Method};
use std::path::{Path, PathBuf};

/// Smallest value drawn on a logarithmic axis (shares and excess percentages below it sit
/// on the axis).
const FLOOR: f64 = 1e-6;

/// Writes `NAME-shares.svg` and `NAME-sizes.svg` into `dir`; returns their paths.
pub fn plots(plan: &CodecPlan, dir: &Path) -> Result<Vec<PathBuf>, String> {
    let name = &plan.spec.name;
    let shares = dir.join(format!("{name}-shares.svg"));
    let sizes = dir.join(format!("{name}-sizes.svg"));
    draw_shares(plan, &shares).map_err(|e| format!("{}: {e}", shares.display()))?;
    let p = plan.model.probabilities();
    let curve =
        precast::sizing::curve(&plan.spec, &plan.model.counts, &p).map_err(|e| e.to_string())?;
    draw_sizes(plan, &curve, &sizes).map_err(|e| format!("{}: {e}", sizes.display()))?;
    Ok(vec![shares, sizes])
}

type Failure = Box<dyn std::error::Error>;

/// Probability of each symbol in the training data against its share of the table.
fn draw_shares(plan: &CodecPlan, path: &Path) -> Result<(), Failure> {
    let r = &plan.report;
    let total = r.training_symbols.max(1) as f64;
    let l = f64::from(1u32 << r.table_bits);
    let points: Vec<(f64, f64)> = r
        .lines
        .iter()
        .map(|(_, c, q)| {
            (
                (*c as f64 / total).max(FLOOR),
                (f64::from(*q) / l).max(FLOOR),
            )
        })
        .collect();
    let low = points
        .iter()
        .flat_map(|&(a, b)| [a, b])
        .fold(1.0f64, f64::min)
        / 2.0;
    let root = SVGBackend::new(path, (720, 560)).into_drawing_area();
    root.fill(&WHITE)?;
    let mut chart = ChartBuilder::on(&root)
        .caption(
            format!("{}: probability against assigned share", r.name),
            ("sans-serif", 20),
        )
        .margin(16)
        .x_label_area_size(48)
        .y_label_area_size(72)
        .build_cartesian_2d((low..1.0).log_scale(), (low..1.0).log_scale())?;
    chart
        .configure_mesh()
        .x_desc("probability in the training data")
        .y_desc("share of the table (slots / 2^table_bits)")
        .draw()?;
    chart
        .draw_series(LineSeries::new([(low, low), (1.0, 1.0)], BLACK.mix(0.4)))?
        .label("share = probability")
        .legend(|(x, y)| PathElement::new([(x, y), (x + 16, y)], BLACK.mix(0.4)));
    chart
        .draw_series(points.iter().map(|&p| Circle::new(p, 3, BLUE.filled())))?
        .label(format!(
            "symbols ({}; a symbol never seen sits at {FLOOR:e})",
            r.symbols
        ))
        .legend(|(x, y)| Circle::new((x + 8, y), 3, BLUE.filled()));
    chart
        .configure_series_labels()
        .background_style(WHITE.mix(0.9))
        .border_style(BLACK)
        .position(SeriesLabelPosition::UpperLeft)
        .draw()?;
    root.present()?;
    Ok(())
}

fn group_name(method: Method, lookup: Lookup) -> &'static str {
    match (method, lookup) {
        (Method::Tans, _) => "tANS",
        (Method::Rans, Lookup::Table) => "rANS, table lookup",
        (Method::Rans, Lookup::Search) => "rANS, search lookup",
    }
}

/// Excess against table bytes for every feasible table_bits, per method and lookup, with
/// the chosen tables and the flash budget marked.
fn draw_sizes(plan: &CodecPlan, curve: &[Weighed], path: &Path) -> Result<(), Failure> {
    let r = &plan.report;
    // Excess in percent of the entropy; in bits/symbol when the entropy is zero.
    let percent = r.entropy > 0.0;
    let excess = |rate: f64| {
        let e = if percent {
            100.0 * (rate - r.entropy) / r.entropy
        } else {
            rate - r.entropy
        };
        e.max(FLOOR)
    };
    let chosen = (r.exact_rate, r.layout.bytes());
    let xs = curve
        .iter()
        .map(|w| w.candidate.bytes as f64)
        .chain([chosen.1 as f64]);
    let (x_lo, x_hi) = xs.fold((f64::MAX, 1.0f64), |(a, b), x| (a.min(x), b.max(x)));
    let ys = curve
        .iter()
        .map(|w| excess(w.rate))
        .chain([excess(chosen.0)]);
    let (y_lo, y_hi) = ys.fold((f64::MAX, FLOOR), |(a, b), y| (a.min(y), b.max(y)));
    let root = SVGBackend::new(path, (840, 560)).into_drawing_area();
    root.fill(&WHITE)?;
    let mut chart = ChartBuilder::on(&root)
        .caption(
            format!("{}: excess against table bytes", r.name),
            ("sans-serif", 20),
        )
        .margin(16)
        .x_label_area_size(48)
        .y_label_area_size(72)
        .build_cartesian_2d(
            (x_lo.max(1.0) / 1.5..x_hi * 1.5).log_scale(),
            (y_lo / 2.0..y_hi * 2.0).log_scale(),
        )?;
    chart
        .configure_mesh()
        .x_desc("bytes of tables (encode + decode)")
        .y_desc(if percent {
            "excess, % above the entropy"
        } else {
            "excess, bits/symbol (zero entropy)"
        })
        .draw()?;
    let colours = [BLUE, GREEN, MAGENTA];
    let mut groups: Vec<(Method, Lookup)> = Vec::new();
    for w in curve {
        let g = (w.candidate.method, w.candidate.lookup);
        if !groups.contains(&g) {
            groups.push(g);
        }
    }
    for (i, &(method, lookup)) in groups.iter().enumerate() {
        let colour = colours[i % colours.len()];
        let points: Vec<(f64, f64)> = curve
            .iter()
            .filter(|w| (w.candidate.method, w.candidate.lookup) == (method, lookup))
            .map(|w| (w.candidate.bytes as f64, excess(w.rate)))
            .collect();
        chart
            .draw_series(LineSeries::new(points.clone(), colour))?
            .label(format!(
                "{} (table_bits labelled)",
                group_name(method, lookup)
            ))
            .legend(move |(x, y)| PathElement::new([(x, y), (x + 16, y)], colour));
        chart.draw_series(points.iter().map(|&p| Circle::new(p, 3, colour.filled())))?;
        chart.draw_series(
            curve
                .iter()
                .filter(|w| (w.candidate.method, w.candidate.lookup) == (method, lookup))
                .map(|w| {
                    Text::new(
                        w.candidate.table_bits.to_string(),
                        (w.candidate.bytes as f64, excess(w.rate)),
                        ("sans-serif", 11),
                    )
                }),
        )?;
    }
    if let Some(budget) = r.flash_budget {
        let b = budget as f64;
        chart
            .draw_series(LineSeries::new(
                [(b, y_lo / 2.0), (b, y_hi * 2.0)],
                RED.mix(0.5),
            ))?
            .label(format!("flash_budget = {budget}"))
            .legend(|(x, y)| PathElement::new([(x, y), (x + 16, y)], RED.mix(0.5)));
    }
    let point = (chosen.1 as f64, excess(chosen.0));
    chart
        .draw_series([Circle::new(point, 8, RED.stroke_width(2))])?
        .label(format!(
            "chosen: {} {} = {}, {} bytes",
            r.method, "table_bits", r.table_bits, chosen.1
        ))
        .legend(|(x, y)| Circle::new((x + 8, y), 5, RED.stroke_width(2)));
    chart
        .configure_series_labels()
        .background_style(WHITE.mix(0.9))
        .border_style(BLACK)
        .position(SeriesLabelPosition::UpperRight)
        .draw()?;
    root.present()?;
    Ok(())
}
