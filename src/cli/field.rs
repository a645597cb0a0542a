//! `magproof field --lat --lon [--alt-m] [--date] [--json]`: the IGRF-14 geomagnetic
//! reference field at a site (north/east/down, horizontal, total, declination,
//! inclination), e.g. to know the ambient magnitude of a tumble test.

use clap::Args as ClapArgs;
use serde::Serialize;
use time::Date;

use super::common::Outcome;
use super::numeric::{number, Domain};
use magproof::physics::igrf::{decimal_year, igrf_field, GeoField, MAX_ALTITUDE_M, MIN_ALTITUDE_M};

/// Flags of `magproof field`.
#[derive(Debug, ClapArgs)]
pub struct Args {
    /// Geodetic latitude, deg (-90..90, north positive).
    #[arg(long, allow_hyphen_values = true,
          value_parser = |s: &str| number(s, Domain::closed(-90.0, 90.0, "deg")))]
    lat: f64,
    /// Longitude, deg (-360..360, east positive).
    #[arg(long, allow_hyphen_values = true,
          value_parser = |s: &str| number(s, Domain::closed(-360.0, 360.0, "deg")))]
    lon: f64,
    /// Altitude above the WGS-84 ellipsoid, m (-1000..1e8).
    #[arg(long = "alt-m", default_value_t = 0.0, allow_hyphen_values = true,
          value_parser = |s: &str| number(s, Domain::closed(MIN_ALTITUDE_M, MAX_ALTITUDE_M, "m")))]
    alt_m: f64,
    /// Date, YYYY-MM-DD (2015-01-01..2030-01-01), evaluated at 00:00 UTC. Default: today (UTC).
    #[arg(long)]
    date: Option<String>,
    /// Print one JSON object on stdout.
    #[arg(long)]
    json: bool,
}

/// The `field` result: the documented keys of [`GeoField`] (docs/geomagnetic.md) plus the request echoed back.
#[derive(Serialize)]
struct FieldResult {
    #[serde(flatten)]
    field: GeoField,
    lat_deg: f64,
    lon_deg: f64,
    alt_m: f64,
    date: String,
    decimal_year: f64,
}

fn parse_date(s: &str) -> Result<Date, magproof::Error> {
    let fmt = time::macros::format_description!("[year]-[month]-[day]");
    Date::parse(s.trim(), &fmt).map_err(|e| {
        magproof::Error::Usage(format!("--date {s:?}: expected a date as YYYY-MM-DD ({e})"))
    })
}

/// Run `field`.
pub fn run(args: Args) -> anyhow::Result<Outcome> {
    let date = match &args.date {
        Some(s) => parse_date(s)?,
        None => time::OffsetDateTime::now_utc().date(),
    };
    let field = igrf_field(args.lat, args.lon, args.alt_m, date).map_err(magproof::Error::from)?;
    let result = FieldResult {
        field,
        lat_deg: args.lat,
        lon_deg: args.lon,
        alt_m: args.alt_m,
        date: date.to_string(),
        decimal_year: decimal_year(date),
    };
    if args.json {
        outln!("{}", serde_json::to_string_pretty(&result)?)?;
        return Ok(Outcome::Passed);
    }
    let f = &result.field;
    outln!(
        "{} at lat {:.4} deg, lon {:.4} deg, alt {:.1} m, {} ({:.3})",
        f.model,
        result.lat_deg,
        result.lon_deg,
        result.alt_m,
        result.date,
        result.decimal_year
    )?;
    outln!("  north        {:>10.1} nT", f.north_nt)?;
    outln!("  east         {:>10.1} nT", f.east_nt)?;
    outln!("  down         {:>10.1} nT", f.down_nt)?;
    outln!("  horizontal   {:>10.1} nT", f.horizontal_nt)?;
    outln!("  total        {:>10.1} nT", f.total_nt)?;
    outln!(
        "  declination  {:>10.2} deg (east of north)",
        f.declination_deg
    )?;
    outln!(
        "  inclination  {:>10.2} deg (down positive)",
        f.inclination_deg
    )?;
    Ok(Outcome::Passed)
}
