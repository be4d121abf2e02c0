//! `seepd plot`: a quick look at one quantity of one instrument or derived object over a period,
//! as a standalone SVG (or PNG, rasterised at twice its size) — the report's chart, in the site's display units, with the rule levels
//! on that quantity drawn and the side beyond each shaded — without writing a whole report.

use chrono::{DateTime, Utc};
use chrono_tz::Tz;

use anyhow::Context as _;

use crate::command::{write_or_emit, ConfigDb, Period, Run};
use crate::config::Config;
use crate::present::labels::quantity_name;
use crate::present::units::unit_label;
use crate::present::{measure_of, FS_DISPLAY_CAP};
use crate::report::chart::{self, Chart, Series};
use crate::store::Store;

/// `seepd plot`'s arguments.
#[derive(clap::Args, Debug)]
pub struct Args {
    #[command(flatten)]
    on: ConfigDb,
    /// Instrument or derived-object id.
    #[arg(long)]
    id: String,
    /// Quantity (default: an instrument's total head or water level).
    #[arg(long)]
    quantity: Option<String>,
    #[command(flatten)]
    period: Period,
    /// Output file, SVG or PNG by its extension (default: SVG to standard output).
    #[arg(long, value_name = "FILE")]
    out: Option<std::path::PathBuf>,
}

impl Run for Args {
    fn run(self, _now: DateTime<Utc>) -> anyhow::Result<()> {
        let cfg = self.on.load()?;
        let store = self.on.open(&cfg)?;
        let Period { from, to } = self.period;
        let svg = render(&cfg, &store, &self.id, self.quantity.as_deref(), from, to)?;
        match self.out.as_deref() {
            Some(p) if p.extension().is_some_and(|e| e.eq_ignore_ascii_case("png")) => {
                std::fs::write(p, png(&svg)?).with_context(|| format!("writing {}", p.display()))
            }
            out => write_or_emit(out, &svg),
        }
    }
}

/// The quantity plotted when none is asked for: an instrument's total head (water level), else
/// its engineering value; an object's first derived quantity stored.
fn default_quantity(cfg: &Config, id: &str) -> &'static str {
    match cfg.instruments.get(id) {
        Some(i) if i.kind.name() == "barometer" => "engineering_value",
        Some(_) => "total_head",
        None => "",
    }
}

/// The SVG of `quantity` (default: see `default_quantity`) of `id` in `[from, to)`.
///
/// # Errors
/// An unknown id, no quantity for an object, no values in the period, database errors.
pub fn render(
    cfg: &Config,
    store: &Store,
    id: &str,
    quantity: Option<&str>,
    from: DateTime<Utc>,
    to: DateTime<Utc>,
) -> anyhow::Result<String> {
    anyhow::ensure!(to > from, "the period is empty: --to must be after --from");
    let site = cfg.site_of_object(id).ok_or_else(|| {
        anyhow::anyhow!("there is no instrument or derived object {id:?} in the configuration")
    })?;
    let quantity = match quantity {
        Some(q) => q,
        None => match default_quantity(cfg, id) {
            "" => anyhow::bail!(
                "{id:?} is a derived object: name the quantity with --quantity (e.g. \
                 factor_of_safety, exit_gradient, vertical_gradient)"
            ),
            q => q,
        },
    };
    let (from_ms, to_ms) = (from.timestamp_millis(), to.timestamp_millis());
    let (points, unit_si) = store.series(id, quantity, from_ms, to_ms)?;
    anyhow::ensure!(
        !points.is_empty(),
        "no stored values of {quantity} for {id} from {from} to {to}"
    );
    let units = site.display_units;
    let m = measure_of(quantity, &unit_si);
    let kind = cfg.instruments.get(id).map(|i| i.kind.name());
    let name = quantity_name(quantity, kind);
    let tz: Tz = site.time_zone.parse().unwrap_or(chrono_tz::UTC);
    let fs = quantity.contains("factor_of_safety");
    Ok(chart::render(&Chart {
        title: format!("{id} — {name}"),
        y_label: crate::present::labels::axis_label(&name, unit_label(m, units, &unit_si)),
        series: vec![Series {
            label: name.clone(),
            points: crate::report::to_display(points, m, units),
        }],
        stage: None,
        levels: crate::report::level_lines(cfg, &[id.to_string()], (quantity, &unit_si), units),
        stage_axis: String::new(),
        cap: fs.then_some(FS_DISPLAY_CAP),
        zero_line: quantity.contains("gradient"),
        from_ms,
        to_ms,
        tz,
    }))
}

/// Pixels per SVG unit of a plot written as PNG (sharp on high-density screens and in print).
pub const PNG_SCALE: f32 = 2.0;

/// A plot's SVG as PNG, `PNG_SCALE` times its size, on white.
///
/// # Errors
/// The build has no PNG output (cargo feature `pdf`), or rasterising fails.
pub fn png(svg: &str) -> anyhow::Result<Vec<u8>> {
    #[cfg(feature = "pdf")]
    return crate::report::raster::png(svg, PNG_SCALE);
    #[cfg(not(feature = "pdf"))]
    {
        let _ = svg;
        anyhow::bail!(
            "this seepd was built without PNG output (feature \"pdf\"); write an .svg file"
        )
    }
}
