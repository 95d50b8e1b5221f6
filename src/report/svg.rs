//! Charts as inline SVG, drawn by our own code for the HTML report.
//!
//! These functions lay figures out on a page; they never derive a figure.
//! Every value they draw arrives from the report model, and every bar
//! carries that value unrounded in `data-value` beside its `data-figure`
//! key, so a test can check the chart against the JSON report. Floats
//! appear only as pixel positions.

use rust_decimal::prelude::ToPrimitive;
use rust_decimal::{Decimal, RoundingStrategy};
use std::fmt::Write;

/// Escape text for HTML and SVG content and for attribute values, which
/// this module and `html` always quote with `"`. An apostrophe stays as it
/// is, so that text such as the caution reads the same in the file.
pub fn esc(s: &str) -> String {
    let mut out = String::with_capacity(s.len());
    for c in s.chars() {
        match c {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' => out.push_str("&quot;"),
            c => out.push(c),
        }
    }
    out
}

/// A decimal rounded half away from zero to `dp` places, with thousands
/// separators: rounding for reading only.
pub fn grouped(v: Decimal, dp: u32) -> String {
    let r = v.round_dp_with_strategy(dp, RoundingStrategy::MidpointAwayFromZero);
    let text = format!("{:.*}", dp as usize, r.abs());
    let (int, frac) = match text.split_once('.') {
        Some((i, f)) => (i.to_string(), Some(f.to_string())),
        None => (text.clone(), None),
    };
    let mut digits = String::new();
    for (i, c) in int.chars().enumerate() {
        if i > 0 && (int.len() - i) % 3 == 0 {
            digits.push(',');
        }
        digits.push(c);
    }
    let sign = if r.is_sign_negative() && !r.is_zero() {
        "−"
    } else {
        ""
    };
    match frac {
        Some(f) => format!("{sign}{digits}.{f}"),
        None => format!("{sign}{digits}"),
    }
}

fn f(v: Decimal) -> f64 {
    v.to_f64().unwrap_or(0.0)
}

/// An axis from zero to a round top above `max`, in round steps (1, 2, 2.5
/// or 5 times a power of ten), with no more than six intervals.
struct Axis {
    top: f64,
    step: f64,
}

impl Axis {
    fn new(max: f64) -> Axis {
        if max.is_nan() || max <= 0.0 {
            return Axis {
                top: 1.0,
                step: 0.2,
            };
        }
        let magnitude = 10f64.powf((max / 6.0).log10().floor());
        let step = [1.0, 2.0, 2.5, 5.0, 10.0]
            .iter()
            .map(|m| m * magnitude)
            .find(|s| s * 6.0 >= max)
            .unwrap_or(10.0 * magnitude);
        Axis {
            top: (max / step).ceil() * step,
            step,
        }
    }

    fn ticks(&self) -> Vec<f64> {
        let n = (self.top / self.step).round() as usize;
        (0..=n).map(|i| i as f64 * self.step).collect()
    }

    /// A tick label with as many decimals as the step needs.
    fn label(&self, v: f64) -> String {
        // The fewest decimals that show the step exactly (at most six).
        let dp = (0..6u32)
            .find(|&dp| {
                let scaled = self.step * 10f64.powi(dp as i32);
                (scaled - scaled.round()).abs() < 1e-6
            })
            .unwrap_or(6);
        Decimal::from_f64_retain(v)
            .map(|d| grouped(d, dp))
            .unwrap_or_default()
    }
}

/// One bar of a chart: the model's value, its figure key and a label for
/// the tooltip.
pub struct Bar {
    pub value: Option<Decimal>,
    pub figure: String,
    pub label: String,
}

/// A named series of bars, one per category.
pub struct Series {
    pub name: String,
    pub color: &'static str,
    pub bars: Vec<Bar>,
}

const FONT: &str = "font-family=\"inherit\"";

/// Grouped vertical bars: one group per category, one bar per series, with
/// a value axis, gridlines, category labels and a legend.
pub fn grouped_bars(
    title: &str,
    y_label: &str,
    categories: &[String],
    series: &[Series],
) -> String {
    let (w, h) = (720.0, 300.0);
    let (left, right, top, bottom) = (64.0, 12.0, 16.0, 62.0);
    let plot_w = w - left - right;
    let plot_h = h - top - bottom;
    let max = series
        .iter()
        .flat_map(|s| s.bars.iter().filter_map(|b| b.value))
        .map(f)
        .fold(0.0, f64::max);
    let axis = Axis::new(max);
    let y = |v: f64| top + plot_h - v / axis.top * plot_h;
    let mut s = String::new();
    let _ = write!(
        s,
        "<svg class=\"chart\" viewBox=\"0 0 {w} {h}\" role=\"img\" aria-label=\"{}\" {FONT} font-size=\"11\">",
        esc(title)
    );
    let _ = write!(s, "<title>{}</title>", esc(title));
    for t in axis.ticks() {
        let ty = y(t);
        let _ = write!(
            s,
            "<line class=\"grid\" x1=\"{left}\" x2=\"{}\" y1=\"{ty:.1}\" y2=\"{ty:.1}\"/>\
<text x=\"{}\" y=\"{:.1}\" text-anchor=\"end\" class=\"tick\">{}</text>",
            w - right,
            left - 6.0,
            ty + 4.0,
            axis.label(t)
        );
    }
    let _ = write!(
        s,
        "<text class=\"axis-title\" transform=\"translate(14 {:.1}) rotate(-90)\" text-anchor=\"middle\">{}</text>",
        top + plot_h / 2.0,
        esc(y_label)
    );
    let groups = categories.len().max(1) as f64;
    let group_w = plot_w / groups;
    let n = series.len().max(1) as f64;
    let bar_w = (group_w * 0.8 / n).max(1.0);
    for (g, category) in categories.iter().enumerate() {
        let gx = left + g as f64 * group_w;
        for (i, se) in series.iter().enumerate() {
            let Some(bar) = se.bars.get(g) else { continue };
            let Some(v) = bar.value else { continue };
            let bx = gx + group_w * 0.1 + i as f64 * bar_w;
            let by = y(f(v).max(0.0));
            let _ = write!(
                s,
                "<rect x=\"{bx:.1}\" y=\"{by:.1}\" width=\"{:.1}\" height=\"{:.1}\" fill=\"{}\" data-figure=\"{}\" data-value=\"{}\"><title>{}</title></rect>",
                (bar_w - 1.0).max(0.5),
                (top + plot_h - by).max(0.0),
                se.color,
                esc(&bar.figure),
                v.normalize(),
                esc(&bar.label)
            );
        }
        let _ = write!(
            s,
            "<text x=\"{:.1}\" y=\"{:.1}\" text-anchor=\"middle\" class=\"tick\">{}</text>",
            gx + group_w / 2.0,
            top + plot_h + 16.0,
            esc(category)
        );
    }
    let _ = write!(
        s,
        "<line class=\"axis\" x1=\"{left}\" x2=\"{}\" y1=\"{:.1}\" y2=\"{:.1}\"/>",
        w - right,
        top + plot_h,
        top + plot_h
    );
    legend(
        &mut s,
        left,
        h - 18.0,
        series.iter().map(|se| (se.name.as_str(), se.color, None)),
    );
    s.push_str("</svg>");
    s
}

fn legend<'a>(
    s: &mut String,
    x0: f64,
    y0: f64,
    items: impl Iterator<Item = (&'a str, &'a str, Option<&'a str>)>,
) {
    let mut x = x0;
    for (name, color, fill) in items {
        let fill = fill.unwrap_or(color);
        let _ = write!(
            s,
            "<rect x=\"{x:.1}\" y=\"{:.1}\" width=\"12\" height=\"12\" fill=\"{fill}\" stroke=\"{color}\"/>\
<text x=\"{:.1}\" y=\"{:.1}\" class=\"legend\">{}</text>",
            y0 - 10.0,
            x + 17.0,
            y0,
            esc(name)
        );
        x += 30.0 + 6.5 * name.chars().count() as f64;
    }
}

/// One vintage's holding in a program's account at the true-up day.
pub struct Vintage {
    pub vintage: i32,
    pub held: u64,
    pub deduct: u64,
    pub figure_prefix: String,
}

/// Holdings against the obligation: a bar of the eligible allowances held
/// at the true-up day, stacked oldest vintage first, each split into the
/// part deducted and the part carried forward; a bar of the allowances
/// required; and any shortfall, hatched, where the holdings end short.
pub fn holdings_chart(
    id: &str,
    title: &str,
    required: u64,
    shortfall: u64,
    figure_prefix: &str,
    vintages: &[Vintage],
    palette: &[&'static str],
) -> String {
    let (w, h) = (720.0, 170.0);
    let (left, right, top) = (150.0, 30.0, 14.0);
    let plot_w = w - left - right;
    let held_total: u64 = vintages.iter().map(|v| v.held).sum();
    let max = held_total.max(required).max(held_total + shortfall) as f64;
    let axis = Axis::new(max);
    let x = |v: f64| left + v / axis.top * plot_w;
    let bar_h = 30.0;
    let (held_y, req_y) = (top + 8.0, top + 8.0 + bar_h + 16.0);
    let axis_y = req_y + bar_h + 10.0;
    let mut s = String::new();
    let _ = write!(
        s,
        "<svg class=\"chart\" viewBox=\"0 0 {w} {h}\" role=\"img\" aria-label=\"{}\" {FONT} font-size=\"11\">\
<defs><pattern id=\"{id}-hatch\" width=\"6\" height=\"6\" patternUnits=\"userSpaceOnUse\" patternTransform=\"rotate(45)\">\
<rect width=\"6\" height=\"6\" fill=\"#f6dcd6\"/><line x1=\"0\" y1=\"0\" x2=\"0\" y2=\"6\" stroke=\"#a33b2b\" stroke-width=\"2.5\"/></pattern></defs>\
<title>{}</title>",
        esc(title),
        esc(title)
    );
    let hatch = format!("url(#{id}-hatch)");
    for t in axis.ticks() {
        let tx = x(t);
        let _ = write!(
            s,
            "<line class=\"grid\" x1=\"{tx:.1}\" x2=\"{tx:.1}\" y1=\"{top}\" y2=\"{axis_y:.1}\"/>\
<text x=\"{tx:.1}\" y=\"{:.1}\" text-anchor=\"middle\" class=\"tick\">{}</text>",
            axis_y + 14.0,
            axis.label(t)
        );
    }
    let _ = write!(
        s,
        "<text x=\"{:.1}\" y=\"{:.1}\" text-anchor=\"end\" class=\"row-label\">Held at true-up</text>\
<text x=\"{:.1}\" y=\"{:.1}\" text-anchor=\"end\" class=\"row-label\">Required</text>",
        left - 8.0,
        held_y + bar_h / 2.0 + 4.0,
        left - 8.0,
        req_y + bar_h / 2.0 + 4.0
    );
    // Each vintage spans its holding, pale; the part deducted is drawn solid
    // over its start.
    let mut at = 0u64;
    for (i, v) in vintages.iter().enumerate() {
        let color = palette[i % palette.len()];
        let (x0, x1) = (x(at as f64), x((at + v.held) as f64));
        let _ = write!(
            s,
            "<rect x=\"{x0:.1}\" y=\"{held_y:.1}\" width=\"{:.1}\" height=\"{bar_h}\" fill=\"{color}\" fill-opacity=\"0.35\" stroke=\"{color}\" data-figure=\"{}.held\" data-value=\"{}\"><title>Vintage {}: {} held</title></rect>",
            (x1 - x0).max(0.5),
            esc(&v.figure_prefix),
            v.held,
            v.vintage,
            grouped(Decimal::from(v.held), 0)
        );
        if v.deduct > 0 {
            let xd = x((at + v.deduct) as f64);
            let _ = write!(
                s,
                "<rect x=\"{x0:.1}\" y=\"{held_y:.1}\" width=\"{:.1}\" height=\"{bar_h}\" fill=\"{color}\" data-figure=\"{}.deduct\" data-value=\"{}\"><title>Vintage {}: {} deducted</title></rect>",
                (xd - x0).max(0.5),
                esc(&v.figure_prefix),
                v.deduct,
                v.vintage,
                grouped(Decimal::from(v.deduct), 0)
            );
        }
        // Label the vintage inside its stretch of the bar where it fits.
        if x1 - x0 > 44.0 {
            let _ = write!(
                s,
                "<text x=\"{:.1}\" y=\"{:.1}\" text-anchor=\"middle\" class=\"in-bar\">{}</text>",
                (x0 + x1) / 2.0,
                held_y + bar_h / 2.0 + 4.0,
                v.vintage
            );
        }
        at += v.held;
    }
    if shortfall > 0 {
        let (x0, x1) = (x(at as f64), x((at + shortfall) as f64));
        let _ = write!(
            s,
            "<rect x=\"{x0:.1}\" y=\"{held_y:.1}\" width=\"{:.1}\" height=\"{bar_h}\" fill=\"{hatch}\" stroke=\"#a33b2b\" data-figure=\"{}.shortfall\" data-value=\"{shortfall}\"><title>Shortfall: {}</title></rect>",
            (x1 - x0).max(1.0),
            esc(figure_prefix),
            grouped(Decimal::from(shortfall), 0)
        );
    }
    let _ = write!(
        s,
        "<rect x=\"{left}\" y=\"{req_y:.1}\" width=\"{:.1}\" height=\"{bar_h}\" fill=\"#39424e\" data-figure=\"{}.allowances_required\" data-value=\"{required}\"><title>Required: {}</title></rect>\
<line x1=\"{:.1}\" x2=\"{:.1}\" y1=\"{:.1}\" y2=\"{:.1}\" stroke=\"#39424e\" stroke-dasharray=\"4 3\"/>",
        (x(required as f64) - left).max(0.5),
        esc(figure_prefix),
        grouped(Decimal::from(required), 0),
        x(required as f64),
        x(required as f64),
        held_y - 4.0,
        req_y + bar_h
    );
    let _ = write!(
        s,
        "<line class=\"axis\" x1=\"{left}\" x2=\"{left}\" y1=\"{top}\" y2=\"{axis_y:.1}\"/>"
    );
    let mut items: Vec<(String, &str, Option<&str>)> = vintages
        .iter()
        .enumerate()
        .map(|(i, v)| {
            (
                format!("Vintage {}", v.vintage),
                palette[i % palette.len()],
                None,
            )
        })
        .collect();
    items.push(("Pale: held, not deducted".to_string(), "#c9ced6", None));
    if shortfall > 0 {
        items.push(("Shortfall".to_string(), "#a33b2b", Some(hatch.as_str())));
    }
    legend(
        &mut s,
        left,
        h - 8.0,
        items.iter().map(|(n, c, fill)| (n.as_str(), *c, *fill)),
    );
    s.push_str("</svg>");
    s
}

/// A daily series: the SO2 rate as a line, days with substituted hours
/// shaded behind it, and the count of substituted hours per day as a strip
/// of bars beneath. `month_starts` gives (day index, label) for the axis.
pub fn daily_profile(
    title: &str,
    figure_prefix: &str,
    rates: &[Option<Decimal>],
    substituted: &[u32],
    month_starts: &[(usize, String)],
) -> String {
    let (w, h) = (720.0, 344.0);
    let (left, right, top) = (64.0, 12.0, 14.0);
    let plot_w = w - left - right;
    let plot_h = 190.0;
    let strip_top = top + plot_h + 44.0;
    let strip_h = 46.0;
    let days = rates.len().max(substituted.len()).max(1) as f64;
    let day_w = plot_w / days;
    let dx = |d: usize| left + d as f64 * day_w;
    let max = rates.iter().flatten().map(|r| f(*r)).fold(0.0, f64::max);
    let axis = Axis::new(max);
    let y = |v: f64| top + plot_h - v / axis.top * plot_h;
    // A day has 24 hours of local standard time: the strip's full height.
    const HOURS_PER_DAY: f64 = 24.0;
    let mut s = String::new();
    let _ = write!(
        s,
        "<svg class=\"chart\" viewBox=\"0 0 {w} {h}\" role=\"img\" aria-label=\"{}\" {FONT} font-size=\"11\"><title>{}</title>",
        esc(title),
        esc(title)
    );
    // Shade the days with a substituted value behind the line.
    for (d, &count) in substituted.iter().enumerate() {
        if count > 0 {
            let _ = write!(
                s,
                "<rect class=\"sub-day\" x=\"{:.2}\" y=\"{top}\" width=\"{:.2}\" height=\"{plot_h}\"/>",
                dx(d),
                day_w.max(1.0)
            );
        }
    }
    for t in axis.ticks() {
        let ty = y(t);
        let _ = write!(
            s,
            "<line class=\"grid\" x1=\"{left}\" x2=\"{}\" y1=\"{ty:.1}\" y2=\"{ty:.1}\"/>\
<text x=\"{}\" y=\"{:.1}\" text-anchor=\"end\" class=\"tick\">{}</text>",
            w - right,
            left - 6.0,
            ty + 4.0,
            axis.label(t)
        );
    }
    let _ = write!(
        s,
        "<text class=\"axis-title\" transform=\"translate(14 {:.1}) rotate(-90)\" text-anchor=\"middle\">SO2 lb/MMBtu</text>",
        top + plot_h / 2.0
    );
    // The line breaks over days without a rate.
    let mut path = String::new();
    let mut pen_down = false;
    for (d, r) in rates.iter().enumerate() {
        match r {
            Some(r) => {
                let _ = write!(
                    path,
                    "{}{:.2} {:.2}",
                    if pen_down { " L" } else { " M" },
                    dx(d) + day_w / 2.0,
                    y(f(*r))
                );
                pen_down = true;
            }
            None => pen_down = false,
        }
    }
    let _ = write!(
        s,
        "<path class=\"rate-line\" d=\"{}\" fill=\"none\" stroke=\"#1f4e6b\" stroke-width=\"1.4\"/>",
        path.trim()
    );
    let _ = write!(
        s,
        "<line class=\"axis\" x1=\"{left}\" x2=\"{}\" y1=\"{:.1}\" y2=\"{:.1}\"/>",
        w - right,
        top + plot_h,
        top + plot_h
    );
    for (d, label) in month_starts {
        let mx = dx(*d);
        let _ = write!(
            s,
            "<line class=\"grid\" x1=\"{mx:.1}\" x2=\"{mx:.1}\" y1=\"{:.1}\" y2=\"{:.1}\"/>\
<text x=\"{:.1}\" y=\"{:.1}\" class=\"tick\">{}</text>",
            top + plot_h,
            top + plot_h + 5.0,
            mx + 2.0,
            top + plot_h + 16.0,
            esc(label)
        );
    }
    // The strip of substituted hours per day.
    let sy = |v: f64| strip_top + strip_h - v.min(HOURS_PER_DAY) / HOURS_PER_DAY * strip_h;
    let _ = write!(
        s,
        "<text x=\"{left}\" y=\"{:.1}\" class=\"legend\">Hours with a substituted value, per day (full height: 24 h)</text>",
        strip_top - 6.0
    );
    for (d, &count) in substituted.iter().enumerate() {
        if count > 0 {
            let _ = write!(
                s,
                "<rect class=\"sub-bar\" x=\"{:.2}\" y=\"{:.1}\" width=\"{:.2}\" height=\"{:.1}\" data-figure=\"{}.substituted_hours.{d}\" data-value=\"{count}\"><title>Day {}: {count} h substituted</title></rect>",
                dx(d),
                sy(f64::from(count)),
                day_w.max(1.2),
                strip_top + strip_h - sy(f64::from(count)),
                esc(figure_prefix),
                d + 1
            );
        }
    }
    let _ = write!(
        s,
        "<line class=\"axis\" x1=\"{left}\" x2=\"{}\" y1=\"{:.1}\" y2=\"{:.1}\"/>",
        w - right,
        strip_top + strip_h,
        strip_top + strip_h
    );
    legend(
        &mut s,
        left,
        h - 8.0,
        [
            ("Daily SO2 rate", "#1f4e6b", None),
            ("Day with substituted hours", "#e9b9ae", None),
        ]
        .into_iter(),
    );
    s.push_str("</svg>");
    s
}

#[cfg(test)]
mod tests {
    use super::*;
    use rust_decimal_macros::dec;

    #[test]
    fn grouped_rounds_half_away_from_zero_with_separators() {
        assert_eq!(grouped(dec!(23475.75), 1), "23,475.8");
        assert_eq!(grouped(dec!(1234567), 0), "1,234,567");
        assert_eq!(grouped(dec!(999.5), 0), "1,000");
        assert_eq!(grouped(dec!(0.0004), 3), "0.000");
        assert_eq!(grouped(dec!(-1234.5), 0), "−1,235");
        assert_eq!(grouped(dec!(12), 2), "12.00");
    }

    #[test]
    fn escape_covers_markup_and_quotes() {
        assert_eq!(
            esc("<b a=\"x\">&'</b>"),
            "&lt;b a=&quot;x&quot;&gt;&amp;'&lt;/b&gt;"
        );
    }

    #[test]
    fn axis_top_covers_the_maximum_in_round_steps() {
        for (max, top, step) in [
            (2578.4, 3000.0, 500.0),
            (0.0, 1.0, 0.2),
            (24.0, 25.0, 5.0),
            (39700.0, 40000.0, 10000.0),
            (0.61, 0.8, 0.2),
        ] {
            let a = Axis::new(max);
            assert!((a.top - top).abs() < 1e-9, "{max}: top {}", a.top);
            assert!((a.step - step).abs() < 1e-9, "{max}: step {}", a.step);
            assert!(a.ticks().len() <= 7);
        }
    }

    #[test]
    fn axis_labels_show_the_decimals_the_step_needs() {
        assert_eq!(Axis::new(0.61).label(0.6000000000000001), "0.6");
        assert_eq!(Axis::new(1.4).label(0.25), "0.25");
        assert_eq!(Axis::new(39700.0).label(20000.0), "20,000");
    }
}
