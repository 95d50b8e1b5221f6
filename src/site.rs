//! The site file: facility, units and their methods, accounts and programs.
//!
//! Parsing is strict: an unknown key, a missing required key or a bad value
//! is refused with the key and its line. Decimal values may be written as
//! TOML strings ("0.0006") or integers; a TOML float is accepted only when
//! its shortest decimal form has at most 15 significant digits, which makes
//! it exactly the decimal that was typed.

use crate::emissions::fuel::{Fuel, FuelUom};
use crate::emissions::method::{Diluent, Method, Quantity};
use chrono::{FixedOffset, NaiveDate};
use rust_decimal::Decimal;
use serde::Deserialize;
use std::fmt;
use std::str::FromStr;
use toml::{Spanned, Value};

/// A refusal of the site file, with the 1-based line it points at.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct SiteError {
    pub line: usize,
    pub message: String,
}

impl fmt::Display for SiteError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{}: {}", self.line, self.message)
    }
}

#[derive(Clone, Copy, Debug, PartialEq, Eq, Default)]
pub enum Rounding {
    #[default]
    Exact,
    /// Hourly rounding of 40 CFR 75 App. F.
    Part75,
}

impl Rounding {
    pub fn as_str(self) -> &'static str {
        match self {
            Rounding::Exact => "exact",
            Rounding::Part75 => "part75",
        }
    }
}

#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum UnitKind {
    Boiler,
    CombustionTurbine,
    Other,
}

impl UnitKind {
    pub fn as_str(self) -> &'static str {
        match self {
            UnitKind::Boiler => "boiler",
            UnitKind::CombustionTurbine => "combustion-turbine",
            UnitKind::Other => "other",
        }
    }
}

#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum AccountKind {
    Compliance,
    General,
    External,
}

impl AccountKind {
    pub fn as_str(self) -> &'static str {
        match self {
            AccountKind::Compliance => "compliance",
            AccountKind::General => "general",
            AccountKind::External => "external",
        }
    }
}

#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Pollutant {
    So2,
    Nox,
}

#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Season {
    Annual,
    /// May 1 to September 30 (40 CFR 72.2, ozone season).
    Ozone,
}

#[derive(Clone, Debug, PartialEq)]
pub struct Site {
    pub facility: Facility,
    pub units: Vec<Unit>,
    pub accounts: Vec<Account>,
    pub programs: Vec<Program>,
}

#[derive(Clone, Debug, PartialEq)]
pub struct Facility {
    pub id: String,
    pub name: String,
    pub utc_offset: FixedOffset,
    pub rounding: Rounding,
}

#[derive(Clone, Debug, PartialEq)]
pub struct Unit {
    pub id: String,
    pub kind: UnitKind,
    pub fuel: Fuel,
    pub max_load_mw: Option<Decimal>,
    /// Maximum potential values and gap bounds for missing monitor data.
    pub limits: CemsLimits,
    /// A sample whose ultimate analysis gives site-specific F-factors
    /// (40 CFR 75 App. F §3.3.6, Eq. F-7a/F-7b); App. F Table 1 otherwise.
    pub f_factors_sample: Option<String>,
    pub methods: Vec<MethodEntry>,
    pub line: usize,
}

/// A CEMS unit's values for missing-data substitution, from its site file.
/// Each is needed only where a rule uses it, and the refusal says so.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct CemsLimits {
    /// Maximum potential SO2 concentration, ppm (40 CFR 75 App. A §2.1.1.1).
    pub max_so2_ppm: Option<Decimal>,
    /// Maximum potential flow, scfh wet (40 CFR 75 App. A §2.1.4.1).
    pub max_flow_scfh: Option<Decimal>,
    /// Maximum NOx emission rate, lb/MMBtu (40 CFR 75 App. A §2.1.2.1).
    pub max_nox_lb_per_mmbtu: Option<Decimal>,
    /// Bounds used for a missing moisture or diluent hour (see DEVELOPERS.md).
    pub min_h2o_pct: Option<Decimal>,
    pub max_h2o_pct: Option<Decimal>,
    pub min_o2_pct: Option<Decimal>,
    pub max_co2_pct: Option<Decimal>,
}

/// One `[[units.methods]]` table: a method for a quantity, optionally for
/// one fuel and between effective dates (inclusive).
#[derive(Clone, Debug, PartialEq)]
pub struct MethodEntry {
    pub quantity: Quantity,
    pub method: Method,
    pub fuel: Option<Fuel>,
    pub from: Option<NaiveDate>,
    pub to: Option<NaiveDate>,
    pub line: usize,
}

impl MethodEntry {
    /// Whether the method is in force over the whole of `[start, end]` for `fuel`.
    pub fn covers(&self, fuel: Fuel, start: NaiveDate, end: NaiveDate) -> bool {
        self.fuel.is_none_or(|f| f == fuel)
            && self.from.is_none_or(|from| from <= start)
            && self.to.is_none_or(|to| end <= to)
    }

    fn overlaps_dates(&self, other: &MethodEntry) -> bool {
        let start = self.from.max(other.from);
        let end = match (self.to, other.to) {
            (Some(a), Some(b)) => Some(a.min(b)),
            (a, b) => a.or(b),
        };
        match (start, end) {
            (Some(s), Some(e)) => s <= e,
            _ => true,
        }
    }
}

#[derive(Clone, Debug, PartialEq)]
pub struct Account {
    pub id: String,
    pub kind: AccountKind,
}

#[derive(Clone, Debug, PartialEq)]
pub struct Program {
    pub id: String,
    pub pollutant: Pollutant,
    pub season: Season,
    pub account: String,
    pub surrender_ratio: Decimal,
    pub penalty_per_ton: Decimal,
    pub offset_ratio: Decimal,
    /// Month and day of the next year at whose end holdings count.
    pub true_up: (u32, u32),
}

impl Site {
    pub fn unit(&self, id: &str) -> Option<&Unit> {
        self.units.iter().find(|u| u.id == id)
    }
}

impl Unit {
    /// Whether the unit measures heat input with monitors.
    pub fn heat_input_by_cems(&self) -> bool {
        self.methods
            .iter()
            .any(|m| m.quantity == Quantity::HeatInput && matches!(m.method, Method::Cems { .. }))
    }

    /// Whether a method's quantity comes from hourly data rather than fuel
    /// records: CEMS itself, or a default rate applied to CEMS heat input
    /// (40 CFR 75 App. F Eq. F-23).
    pub fn from_hourly(&self, method: &Method) -> bool {
        match method {
            Method::Cems { .. } => true,
            Method::DefaultRate { .. } => self.heat_input_by_cems(),
            _ => false,
        }
    }

    /// Whether the unit has any method for the quantity.
    pub fn tracks(&self, quantity: Quantity) -> bool {
        self.methods.iter().any(|m| m.quantity == quantity)
    }

    /// The method for a quantity in force for `fuel` over `[start, end]`.
    /// A method naming the fuel wins over one without a fuel filter; the
    /// site parser has refused two of the same kind that overlap.
    pub fn method_for(
        &self,
        quantity: Quantity,
        fuel: Fuel,
        start: NaiveDate,
        end: NaiveDate,
    ) -> Option<&MethodEntry> {
        let mut candidates = self
            .methods
            .iter()
            .filter(|m| m.quantity == quantity && m.covers(fuel, start, end));
        let first = candidates.next()?;
        Some(candidates.fold(first, |best, m| {
            if best.fuel.is_none() && m.fuel.is_some() {
                m
            } else {
                best
            }
        }))
    }
}

// ---- raw TOML shapes: every scalar keeps its span for error lines ----

type Field = Option<Spanned<Value>>;

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawSite {
    facility: Option<Spanned<RawFacility>>,
    #[serde(default)]
    units: Vec<Spanned<RawUnit>>,
    #[serde(default)]
    accounts: Vec<Spanned<RawAccount>>,
    #[serde(default)]
    programs: Vec<Spanned<RawProgram>>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawFacility {
    id: Field,
    name: Field,
    utc_offset: Field,
    rounding: Field,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawUnit {
    id: Field,
    kind: Field,
    fuel: Field,
    max_load_mw: Field,
    max_so2_ppm: Field,
    max_flow_scfh: Field,
    max_nox_lb_per_mmbtu: Field,
    min_h2o_pct: Field,
    max_h2o_pct: Field,
    min_o2_pct: Field,
    max_co2_pct: Field,
    f_factors_sample: Field,
    #[serde(default)]
    methods: Vec<Spanned<RawMethod>>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawMethod {
    quantity: Field,
    method: Field,
    fuel: Field,
    factor: Field,
    per: Field,
    times_sulfur: Field,
    rate_lb_per_mmbtu: Field,
    diluent: Field,
    from: Field,
    to: Field,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawAccount {
    id: Field,
    kind: Field,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawProgram {
    id: Field,
    pollutant: Field,
    season: Field,
    account: Field,
    surrender_ratio: Field,
    penalty_per_ton: Field,
    offset_ratio: Field,
    true_up: Field,
}

/// Maps byte offsets of a site file to 1-based line numbers: the offset of
/// every line break, searched by halves (a site of a thousand units asks
/// for thousands of lines, so scanning from the start each time was quadratic).
pub(crate) struct Lines {
    breaks: Vec<usize>,
}

impl Lines {
    /// From the file's bytes, so that a file which is not UTF-8 can name
    /// the line of its first bad byte.
    pub(crate) fn new(source: &[u8]) -> Lines {
        Lines {
            breaks: memchr::memchr_iter(b'\n', source).collect(),
        }
    }

    /// The 1-based line holding `offset` (offsets past the end count every break).
    pub(crate) fn at(&self, offset: usize) -> usize {
        self.breaks.partition_point(|&b| b < offset) + 1
    }
}

/// Reads one table's keys, collecting errors rather than stopping at the first.
struct Reader<'a> {
    lines: &'a Lines,
    table: String,
    table_line: usize,
    errors: &'a mut Vec<SiteError>,
}

impl Reader<'_> {
    fn err(&mut self, line: usize, message: String) {
        self.errors.push(SiteError { line, message });
    }

    fn line_of(&self, v: &Spanned<Value>) -> usize {
        self.lines.at(v.span().start)
    }

    fn required<'v>(&mut self, key: &str, v: &'v Field) -> Option<&'v Spanned<Value>> {
        if v.is_none() {
            let (line, table) = (self.table_line, self.table.clone());
            self.err(line, format!("{table}: key `{key}` is required"));
        }
        v.as_ref()
    }

    fn parse<T>(
        &mut self,
        key: &str,
        v: &Field,
        what: &str,
        f: impl Fn(&Value) -> Result<T, String>,
    ) -> Option<T> {
        let v = v.as_ref()?;
        match f(v.get_ref()) {
            Ok(t) => Some(t),
            Err(why) => {
                let line = self.line_of(v);
                let table = self.table.clone();
                self.err(
                    line,
                    format!(
                        "{table}: key `{key}`: {why}, found {} (expected {what})",
                        shown(v.get_ref())
                    ),
                );
                None
            }
        }
    }

    fn text(&mut self, key: &str, v: &Field) -> Option<String> {
        self.parse(key, v, "a non-empty string", |v| match v {
            Value::String(s)
                if !s.trim().is_empty() && s.trim() == s && !s.chars().any(char::is_control) =>
            {
                Ok(s.clone())
            }
            Value::String(_) => Err("empty, padded or with control characters".into()),
            _ => Err("not a string".into()),
        })
    }

    fn word<T: FromStr<Err = String>>(&mut self, key: &str, v: &Field, what: &str) -> Option<T> {
        self.parse(key, v, what, |v| match v {
            Value::String(s) => T::from_str(s),
            _ => Err("not a string".into()),
        })
    }

    fn decimal(&mut self, key: &str, v: &Field, positive: bool) -> Option<Decimal> {
        let what = if positive {
            "a positive decimal"
        } else {
            "a decimal of zero or more"
        };
        self.parse(key, v, what, |v| {
            let d = value_decimal(v)?;
            if d.is_sign_negative() && !d.is_zero() || positive && d.is_zero() {
                Err("out of range".into())
            } else {
                Ok(d)
            }
        })
    }

    fn boolean(&mut self, key: &str, v: &Field) -> Option<bool> {
        self.parse(key, v, "true or false", |v| {
            v.as_bool().ok_or_else(|| "not a boolean".into())
        })
    }

    fn date(&mut self, key: &str, v: &Field) -> Option<NaiveDate> {
        self.parse(key, v, "a date YYYY-MM-DD", |v| {
            let s = match v {
                Value::String(s) => s.clone(),
                Value::Datetime(d) if d.time.is_none() && d.offset.is_none() => d.to_string(),
                _ => return Err("not a date".into()),
            };
            NaiveDate::parse_from_str(&s, "%Y-%m-%d").map_err(|_| "not a calendar date".into())
        })
    }
}

fn shown(v: &Value) -> String {
    match v {
        Value::String(s) => format!("{s:?}"),
        other => other.to_string(),
    }
}

/// A decimal from a TOML string, integer or float (see the module doc).
fn value_decimal(v: &Value) -> Result<Decimal, String> {
    match v {
        Value::String(s) => crate::decimal::parse_decimal(s, true).map_err(|e| e.to_string()),
        Value::Integer(i) => Ok(Decimal::from(*i)),
        Value::Float(f) if f.is_finite() => {
            let text = f.to_string();
            let digits = text
                .chars()
                .filter(char::is_ascii_digit)
                .collect::<String>();
            if digits.trim_start_matches('0').len() > 15 {
                Err("a float with more than 15 significant digits is not exact; write it as a string".into())
            } else {
                Decimal::from_str_exact(&text).map_err(|e| e.to_string())
            }
        }
        Value::Float(_) => Err("not a finite number".into()),
        _ => Err("not a number".into()),
    }
}

fn parse_offset(s: &str) -> Result<FixedOffset, String> {
    let bad = || "expected an offset such as -06:00".to_string();
    let (sign, rest) = match s.as_bytes().first() {
        Some(b'+') => (1, &s[1..]),
        Some(b'-') => (-1, &s[1..]),
        _ => return Err(bad()),
    };
    let (h, m) = rest.split_once(':').ok_or_else(bad)?;
    if h.len() != 2 || m.len() != 2 {
        return Err(bad());
    }
    let h: i32 = h.parse().map_err(|_| bad())?;
    let m: i32 = m.parse().map_err(|_| bad())?;
    if h > 14 || m > 59 {
        return Err(bad());
    }
    FixedOffset::east_opt(sign * (h * 3600 + m * 60)).ok_or_else(bad)
}

fn parse_true_up(s: &str) -> Result<(u32, u32), String> {
    let bad = || "expected a day of the year MM-DD".to_string();
    let (m, d) = s.split_once('-').ok_or_else(bad)?;
    if m.len() != 2 || d.len() != 2 {
        return Err(bad());
    }
    let (m, d): (u32, u32) = (m.parse().map_err(|_| bad())?, d.parse().map_err(|_| bad())?);
    // 2024 is a leap year, so 02-29 is accepted and later clamped to the year's last February day.
    NaiveDate::from_ymd_opt(2024, m, d).ok_or_else(bad)?;
    Ok((m, d))
}

/// Parse and validate a site file. All problems are returned together.
pub fn parse(source: &str) -> Result<Site, Vec<SiteError>> {
    let lines = Lines::new(source.as_bytes());
    let raw: RawSite = toml::from_str(source).map_err(|e| {
        let line = e.span().map(|s| lines.at(s.start)).unwrap_or(1);
        vec![SiteError {
            line,
            message: e.message().trim().to_string(),
        }]
    })?;
    let mut errors = Vec::new();
    let site = build(&raw, &lines, &mut errors);
    match site {
        Some(site) if errors.is_empty() => Ok(site),
        _ => {
            errors.sort_by_key(|e| e.line);
            Err(errors)
        }
    }
}

fn build(raw: &RawSite, lines: &Lines, errors: &mut Vec<SiteError>) -> Option<Site> {
    let facility = match &raw.facility {
        None => {
            errors.push(SiteError {
                line: 1,
                message: "table [facility] is required".into(),
            });
            None
        }
        Some(f) => build_facility(f, lines, errors),
    };
    let units: Vec<Option<Unit>> = raw
        .units
        .iter()
        .map(|u| build_unit(u, lines, errors))
        .collect();
    let accounts: Vec<Option<Account>> = raw
        .accounts
        .iter()
        .map(|a| build_account(a, lines, errors))
        .collect();
    let programs: Vec<Option<Program>> = raw
        .programs
        .iter()
        .map(|p| build_program(p, lines, errors))
        .collect();
    let site = Site {
        facility: facility?,
        units: units.into_iter().collect::<Option<_>>()?,
        accounts: accounts.into_iter().collect::<Option<_>>()?,
        programs: programs.into_iter().collect::<Option<_>>()?,
    };
    cross_check(&site, raw, lines, errors);
    Some(site)
}

fn build_facility(
    f: &Spanned<RawFacility>,
    lines: &Lines,
    errors: &mut Vec<SiteError>,
) -> Option<Facility> {
    let mut r = Reader {
        lines,
        table: "[facility]".into(),
        table_line: lines.at(f.span().start),
        errors,
    };
    let raw = f.get_ref();
    let id = r.required("id", &raw.id).and(r.text("id", &raw.id));
    let name = r.required("name", &raw.name).and(r.text("name", &raw.name));
    let offset = r.required("utc_offset", &raw.utc_offset).and(r.parse(
        "utc_offset",
        &raw.utc_offset,
        "an offset such as -06:00",
        |v| {
            v.as_str()
                .ok_or_else(|| "not a string".to_string())
                .and_then(parse_offset)
        },
    ));
    let rounding = match &raw.rounding {
        None => Some(Rounding::Exact),
        some => r.parse("rounding", some, "exact or part75", |v| match v.as_str() {
            Some("exact") => Ok(Rounding::Exact),
            Some("part75") => Ok(Rounding::Part75),
            _ => Err("unknown rounding".into()),
        }),
    };
    Some(Facility {
        id: id?,
        name: name?,
        utc_offset: offset?,
        rounding: rounding?,
    })
}

fn build_unit(u: &Spanned<RawUnit>, lines: &Lines, errors: &mut Vec<SiteError>) -> Option<Unit> {
    let table_line = lines.at(u.span().start);
    let raw = u.get_ref();
    let mut r = Reader {
        lines,
        table: "[[units]]".into(),
        table_line,
        errors,
    };
    let id = r.required("id", &raw.id).and(r.text("id", &raw.id));
    if let Some(id) = &id {
        r.table = format!("unit {id}");
    }
    let kind = r.required("kind", &raw.kind).and(r.parse(
        "kind",
        &raw.kind,
        "boiler, combustion-turbine or other",
        |v| match v.as_str() {
            Some("boiler") => Ok(UnitKind::Boiler),
            Some("combustion-turbine") => Ok(UnitKind::CombustionTurbine),
            Some("other") => Ok(UnitKind::Other),
            _ => Err("unknown unit kind".into()),
        },
    ));
    let fuel = r
        .required("fuel", &raw.fuel)
        .and(r.word::<Fuel>("fuel", &raw.fuel, "a fuel"));
    let max_load_mw = r.decimal("max_load_mw", &raw.max_load_mw, true);
    let mut optional = |key: &str, v: &Field, positive: bool| -> Option<Option<Decimal>> {
        match v {
            None => Some(None),
            some => r.decimal(key, some, positive).map(Some),
        }
    };
    let limits = (|| {
        Some(CemsLimits {
            max_so2_ppm: optional("max_so2_ppm", &raw.max_so2_ppm, true)?,
            max_flow_scfh: optional("max_flow_scfh", &raw.max_flow_scfh, true)?,
            max_nox_lb_per_mmbtu: optional(
                "max_nox_lb_per_mmbtu",
                &raw.max_nox_lb_per_mmbtu,
                true,
            )?,
            min_h2o_pct: optional("min_h2o_pct", &raw.min_h2o_pct, false)?,
            max_h2o_pct: optional("max_h2o_pct", &raw.max_h2o_pct, false)?,
            min_o2_pct: optional("min_o2_pct", &raw.min_o2_pct, false)?,
            max_co2_pct: optional("max_co2_pct", &raw.max_co2_pct, true)?,
        })
    })();
    let f_factors_sample = match &raw.f_factors_sample {
        None => Some(None),
        some => r.text("f_factors_sample", some).map(Some),
    };
    let table = r.table.clone();
    let methods: Vec<Option<MethodEntry>> = raw
        .methods
        .iter()
        .map(|m| build_method(m, &table, lines, errors))
        .collect();
    let methods: Vec<MethodEntry> = methods.into_iter().collect::<Option<_>>()?;
    check_method_overlaps(&table, &methods, errors);
    Some(Unit {
        id: id?,
        kind: kind?,
        fuel: fuel?,
        max_load_mw: if raw.max_load_mw.is_some() {
            Some(max_load_mw?)
        } else {
            None
        },
        limits: limits?,
        f_factors_sample: f_factors_sample?,
        methods,
        line: table_line,
    })
}

fn build_method(
    m: &Spanned<RawMethod>,
    unit: &str,
    lines: &Lines,
    errors: &mut Vec<SiteError>,
) -> Option<MethodEntry> {
    let line = lines.at(m.span().start);
    let raw = m.get_ref();
    let mut r = Reader {
        lines,
        table: format!("{unit} method"),
        table_line: line,
        errors,
    };
    let quantity = r
        .required("quantity", &raw.quantity)
        .and(r.word::<Quantity>("quantity", &raw.quantity, "a quantity"))?;
    let name = r
        .required("method", &raw.method)
        .and(r.text("method", &raw.method))?;
    let allowed = Method::allowed_for(quantity);
    if !allowed.contains(&name.as_str()) {
        let at = r.line_of(raw.method.as_ref().expect("required above"));
        r.err(
            at,
            format!(
                "{unit} method: key `method`: {name:?} does not compute {quantity} (expected one of {})",
                allowed.join(", ")
            ),
        );
        return None;
    }
    // Keys that belong to other methods are refused rather than ignored.
    let keys: [(&str, &Field, &[&str]); 5] = [
        ("factor", &raw.factor, &["emission-factor"]),
        ("per", &raw.per, &["emission-factor"]),
        ("times_sulfur", &raw.times_sulfur, &["emission-factor"]),
        (
            "rate_lb_per_mmbtu",
            &raw.rate_lb_per_mmbtu,
            &["default-rate"],
        ),
        ("diluent", &raw.diluent, &["cems"]),
    ];
    for (key, value, methods) in keys {
        if let Some(v) = value {
            if !methods.contains(&name.as_str()) {
                let at = r.line_of(v);
                r.err(
                    at,
                    format!("{unit} method: key `{key}` does not apply to method {name}"),
                );
            }
        }
    }
    let method = match name.as_str() {
        "fuel" => Some(Method::Fuel),
        "fuel-sulfur" => Some(Method::FuelSulfur),
        "fuel-carbon" => Some(Method::FuelCarbon),
        "fc-factor" => Some(Method::FcFactor),
        "cems" => {
            let diluent = match &raw.diluent {
                None => Some(Diluent::O2),
                some => r.word::<Diluent>("diluent", some, "o2 or co2"),
            };
            diluent.map(|diluent| Method::Cems { diluent })
        }
        "emission-factor" => {
            let factor =
                r.required("factor", &raw.factor)
                    .and(r.decimal("factor", &raw.factor, false));
            let per =
                r.required("per", &raw.per)
                    .and(r.word::<FuelUom>("per", &raw.per, "a fuel unit"));
            let times_sulfur = match &raw.times_sulfur {
                None => Some(false),
                some => r.boolean("times_sulfur", some),
            };
            match (factor, per, times_sulfur) {
                (Some(factor_lb), Some(per), Some(times_sulfur)) => Some(Method::EmissionFactor {
                    factor_lb,
                    per,
                    times_sulfur,
                }),
                _ => None,
            }
        }
        "default-rate" => r
            .required("rate_lb_per_mmbtu", &raw.rate_lb_per_mmbtu)
            .and(r.decimal("rate_lb_per_mmbtu", &raw.rate_lb_per_mmbtu, false))
            .map(|rate_lb_per_mmbtu| Method::DefaultRate { rate_lb_per_mmbtu }),
        _ => unreachable!("checked against Method::allowed_for"),
    };
    let fuel = match &raw.fuel {
        None => Some(None),
        some => r.word::<Fuel>("fuel", some, "a fuel").map(Some),
    };
    let from = r.date("from", &raw.from);
    let to = r.date("to", &raw.to);
    if let (Some(f), Some(t)) = (from, to) {
        if t < f {
            let at = r.line_of(raw.to.as_ref().expect("parsed above"));
            r.err(
                at,
                format!("{unit} method: key `to`: {t} is before `from` {f}"),
            );
            return None;
        }
    }
    if (raw.from.is_some() && from.is_none()) || (raw.to.is_some() && to.is_none()) {
        return None;
    }
    Some(MethodEntry {
        quantity,
        method: method?,
        fuel: fuel?,
        from,
        to,
        line,
    })
}

/// Two methods for the same quantity and the same fuel filter must not be in
/// force on the same day, or a record would have two answers.
fn check_method_overlaps(unit: &str, methods: &[MethodEntry], errors: &mut Vec<SiteError>) {
    for (i, a) in methods.iter().enumerate() {
        for b in &methods[i + 1..] {
            if a.quantity == b.quantity && a.fuel == b.fuel && a.overlaps_dates(b) {
                errors.push(SiteError {
                    line: b.line,
                    message: format!(
                        "{unit} method: a second {} method{} in force on the same days as the one at line {}",
                        a.quantity,
                        a.fuel.map(|f| format!(" for {f}")).unwrap_or_default(),
                        a.line
                    ),
                });
            }
        }
    }
}

fn build_account(
    a: &Spanned<RawAccount>,
    lines: &Lines,
    errors: &mut Vec<SiteError>,
) -> Option<Account> {
    let raw = a.get_ref();
    let mut r = Reader {
        lines,
        table: "[[accounts]]".into(),
        table_line: lines.at(a.span().start),
        errors,
    };
    let id = r.required("id", &raw.id).and(r.text("id", &raw.id));
    let kind = r.required("kind", &raw.kind).and(r.parse(
        "kind",
        &raw.kind,
        "compliance, general or external",
        |v| match v.as_str() {
            Some("compliance") => Ok(AccountKind::Compliance),
            Some("general") => Ok(AccountKind::General),
            Some("external") => Ok(AccountKind::External),
            _ => Err("unknown account kind".into()),
        },
    ));
    Some(Account {
        id: id?,
        kind: kind?,
    })
}

fn build_program(
    p: &Spanned<RawProgram>,
    lines: &Lines,
    errors: &mut Vec<SiteError>,
) -> Option<Program> {
    let raw = p.get_ref();
    let mut r = Reader {
        lines,
        table: "[[programs]]".into(),
        table_line: lines.at(p.span().start),
        errors,
    };
    let id = r.required("id", &raw.id).and(r.text("id", &raw.id));
    if let Some(id) = &id {
        r.table = format!("program {id}");
    }
    let pollutant = r.required("pollutant", &raw.pollutant).and(r.parse(
        "pollutant",
        &raw.pollutant,
        "so2 or nox",
        |v| match v.as_str() {
            Some("so2") => Ok(Pollutant::So2),
            Some("nox") => Ok(Pollutant::Nox),
            _ => Err("unknown pollutant".into()),
        },
    ));
    let season = r.required("season", &raw.season).and(r.parse(
        "season",
        &raw.season,
        "annual or ozone",
        |v| match v.as_str() {
            Some("annual") => Ok(Season::Annual),
            Some("ozone") => Ok(Season::Ozone),
            _ => Err("unknown season".into()),
        },
    ));
    let account = r
        .required("account", &raw.account)
        .and(r.text("account", &raw.account));
    let surrender_ratio = match &raw.surrender_ratio {
        None => Some(Decimal::ONE),
        some => r.decimal("surrender_ratio", some, true),
    };
    let penalty = r
        .required("penalty_per_ton", &raw.penalty_per_ton)
        .and(r.decimal("penalty_per_ton", &raw.penalty_per_ton, false));
    let offset_ratio = match &raw.offset_ratio {
        None => Some(Decimal::ONE),
        some => r.decimal("offset_ratio", some, false),
    };
    let true_up = r.required("true_up", &raw.true_up).and(r.parse(
        "true_up",
        &raw.true_up,
        "a day of the year MM-DD",
        |v| {
            v.as_str()
                .ok_or_else(|| "not a string".to_string())
                .and_then(parse_true_up)
        },
    ));
    Some(Program {
        id: id?,
        pollutant: pollutant?,
        season: season?,
        account: account?,
        surrender_ratio: surrender_ratio?,
        penalty_per_ton: penalty?,
        offset_ratio: offset_ratio?,
        true_up: true_up?,
    })
}

/// Checks across tables: unique ids, programs naming a known account.
fn cross_check(site: &Site, raw: &RawSite, lines: &Lines, errors: &mut Vec<SiteError>) {
    let line_of = |s: &Spanned<RawUnit>| lines.at(s.span().start);
    for (i, u) in site.units.iter().enumerate() {
        if let Some(first) = site.units[..i].iter().find(|o| o.id == u.id) {
            errors.push(SiteError {
                line: line_of(&raw.units[i]),
                message: format!(
                    "unit {}: id already used by the unit at line {}",
                    u.id, first.line
                ),
            });
        }
    }
    for (i, a) in site.accounts.iter().enumerate() {
        if site.accounts[..i].iter().any(|o| o.id == a.id) {
            errors.push(SiteError {
                line: lines.at(raw.accounts[i].span().start),
                message: format!("account {}: id used twice", a.id),
            });
        }
    }
    for (i, p) in site.programs.iter().enumerate() {
        let line = lines.at(raw.programs[i].span().start);
        if site.programs[..i].iter().any(|o| o.id == p.id) {
            errors.push(SiteError {
                line,
                message: format!("program {}: id used twice", p.id),
            });
        }
        if !site.accounts.iter().any(|a| a.id == p.account) {
            errors.push(SiteError {
                line,
                message: format!(
                    "program {}: key `account`: no account {:?} in this site file",
                    p.id, p.account
                ),
            });
        }
    }
}
