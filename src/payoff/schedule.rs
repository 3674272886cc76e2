//! The payoff schedule: payoffs by name, each made of a piecewise-constant `rate` by time since
//! entry, a one-off `at_entry` amount and a one-off `at_exit` amount (any of the three may be
//! absent), built from rows that a CSV reader has already split into fields. Every check of the
//! payoff file happens here, once; later code trusts a [`Schedule`].

use crate::error::{Error, Result};
use crate::format::shown;
use crate::units::{Duration, TimeUnit};

/// The payoff file's column names, in the contract's order.
pub const COLUMNS: [&str; 5] = ["payoff", "kind", "from", "amount", "per"];

/// The kinds a payoff row may have, as written in the file.
pub const KINDS: [&str; 3] = ["rate", "at_entry", "at_exit"];

/// One row of a payoff file as the CSV reader hands it over: the raw text of each field and the
/// row's 1-based line number in the file.
#[derive(Debug, Clone, PartialEq, Eq, Default)]
pub struct PayoffRow {
    /// Line of the row in the file (1-based, the header being line 1 or later).
    pub line: u64,
    /// Payoff name.
    pub payoff: String,
    /// `rate`, `at_entry` or `at_exit`.
    pub kind: String,
    /// Duration since entry where a rate piece starts; empty for one-offs.
    pub from: String,
    /// Amount per `per` (rate) or once (one-offs).
    pub amount: String,
    /// Duration the rate amount is per; empty for one-offs.
    pub per: String,
}

/// 1-based positions of the five columns in the file's header, for error messages.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct PayoffColumns {
    /// Column of `payoff`.
    pub payoff: usize,
    /// Column of `kind`.
    pub kind: usize,
    /// Column of `from`.
    pub from: usize,
    /// Column of `amount`.
    pub amount: usize,
    /// Column of `per`.
    pub per: usize,
}

impl Default for PayoffColumns {
    /// The contract's order: `payoff,kind,from,amount,per`.
    fn default() -> Self {
        PayoffColumns {
            payoff: 1,
            kind: 2,
            from: 3,
            amount: 4,
            per: 5,
        }
    }
}

/// A length of time since entry that may be zero (a rate piece's start).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Offset {
    /// Amount in `unit` (≥ 0).
    pub value: f64,
    /// Unit of `value`.
    pub unit: TimeUnit,
}

impl Offset {
    /// The start of the chain.
    pub const ZERO: Offset = Offset {
        value: 0.0,
        unit: TimeUnit::Days,
    };

    /// The offset in another unit (exact unit conversion).
    pub fn in_unit(&self, unit: TimeUnit) -> f64 {
        self.unit.convert(self.value, unit)
    }
}

impl std::fmt::Display for Offset {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        if self.value == 0.0 {
            f.write_str("0")
        } else {
            write!(f, "{} {}", self.value, self.unit.name_for(self.value))
        }
    }
}

/// One piece of a rate payoff: `amount` per `per`, from `from` since entry until the next piece.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct RatePiece {
    /// Time since entry where the piece starts (the first piece starts at 0).
    pub from: Offset,
    /// Amount accrued per `per` while in the chain.
    pub amount: f64,
    /// The duration `amount` is per.
    pub per: Duration,
}

impl RatePiece {
    /// The rate per one `unit` of time: `amount` / `per` in `unit`.
    pub fn rate_in(&self, unit: TimeUnit) -> f64 {
        self.amount / self.per.in_unit(unit)
    }
}

/// One named payoff: a rate by time since entry, an amount once on entry and an amount once on
/// exit, each optional (a payoff file gives at least one of them). One name may combine all
/// three, as the contract's cost of 500 a month, 1,500 on entry and 3,000 on exit does; its
/// figures are then the sums of the parts.
#[derive(Debug, Clone, PartialEq)]
pub struct Payoff {
    /// Name (letters, digits, `_`); its tunnel-table column is `payoff_NAME`.
    pub name: String,
    /// Rate pieces, accruing continuously while in the chain: increasing `from`, the first at 0.
    /// Empty when the payoff has no rate.
    pub rate: Vec<RatePiece>,
    /// Counted once, on entering tunnel 1.
    pub at_entry: Option<f64>,
    /// Counted once, on leaving the chain by exit.
    pub at_exit: Option<f64>,
}

impl Payoff {
    /// Rate per one `unit` of time at time since entry `t` (in `unit`); 0 without a rate. A piece
    /// applies from its `from` on (right-continuous); a time within 1e-9 relative of a `from`
    /// counts as that time, so a cycle boundary that should fall on a change (12 monthly
    /// cycles and "1 year") is not moved to the earlier piece by rounding.
    pub fn rate_at(&self, t: f64, unit: TimeUnit) -> f64 {
        self.rate
            .iter()
            .rev()
            .find(|p| {
                let from = p.from.in_unit(unit);
                from <= t + 1e-9 * from.max(t.abs())
            })
            .map_or(0.0, |p| p.rate_in(unit))
    }

    /// Starts of the rate pieces after the first, in `unit`: where the rate changes.
    pub fn changes_in(&self, unit: TimeUnit) -> Vec<f64> {
        self.rate
            .iter()
            .skip(1)
            .map(|p| p.from.in_unit(unit))
            .collect()
    }

    /// Rate pieces as (start, rate per `unit`) in `unit`; empty without a rate.
    pub fn rates_in(&self, unit: TimeUnit) -> Vec<(f64, f64)> {
        self.rate
            .iter()
            .map(|p| (p.from.in_unit(unit), p.rate_in(unit)))
            .collect()
    }

    /// The kinds this payoff has, as written in the file (`rate`, `at_entry`, `at_exit`).
    pub fn kinds(&self) -> Vec<&'static str> {
        let mut kinds = Vec::new();
        if !self.rate.is_empty() {
            kinds.push("rate");
        }
        if self.at_entry.is_some() {
            kinds.push("at_entry");
        }
        if self.at_exit.is_some() {
            kinds.push("at_exit");
        }
        kinds
    }

    /// Name of the payoff's tunnel-table column.
    pub fn column(&self) -> String {
        format!("payoff_{}", self.name)
    }
}

/// The payoffs of one payoff file, in order of first appearance.
#[derive(Debug, Clone, PartialEq)]
pub struct Schedule {
    /// The payoffs; names are distinct.
    pub payoffs: Vec<Payoff>,
}

impl Schedule {
    /// Every time (in `unit`) where some rate payoff changes, sorted, without repeats.
    pub fn changes_in(&self, unit: TimeUnit) -> Vec<f64> {
        let mut all: Vec<f64> = self
            .payoffs
            .iter()
            .flat_map(|p| p.changes_in(unit))
            .collect();
        all.sort_by(f64::total_cmp);
        all.dedup();
        all
    }

    /// Checks and builds a schedule from the rows of `file` (name for messages), whose header
    /// put the columns at `columns`. Errors are one line naming the file, line and column.
    pub fn from_rows(file: &str, columns: &PayoffColumns, rows: &[PayoffRow]) -> Result<Schedule> {
        if rows.is_empty() {
            return Err(Error::input(
                file,
                "no payoff rows (expected a header payoff,kind,from,amount,per and one row per piece)",
            ));
        }
        let mut built: Vec<Building> = Vec::new();
        for row in rows {
            let at = |column: usize, name: &str, message: String| {
                Error::at(file, row.line, column, name, message)
            };
            let name = row.payoff.trim();
            check_name(name).map_err(|m| at(columns.payoff, "payoff", m))?;
            let kind = row.kind.trim();
            if !KINDS.contains(&kind) {
                let hint = crate::units::nearest(&kind.to_ascii_lowercase(), &KINDS)
                    .map(|k| format!("did you mean \"{k}\"? "))
                    .unwrap_or_default();
                return Err(at(
                    columns.kind,
                    "kind",
                    format!(
                        "unknown payoff kind \"{}\" ({hint}kinds: rate, at_entry, at_exit)",
                        shown(kind)
                    ),
                ));
            }
            let amount = crate::input::parse_number(&row.amount)
                .map_err(|m| at(columns.amount, "amount", format!("amount: {m}")))?;
            let index = match built.iter().position(|b| b.payoff.name == name) {
                Some(i) => i,
                None => {
                    built.push(Building::new(name));
                    built.len() - 1
                }
            };
            let entry = &mut built[index];
            if kind != "rate" {
                for (text, column, label) in [
                    (&row.from, columns.from, "from"),
                    (&row.per, columns.per, "per"),
                ] {
                    if !text.trim().is_empty() {
                        return Err(at(
                            column,
                            label,
                            format!(
                                "\"{}\" given for the {kind} amount of payoff \"{name}\"; a one-off has no `{label}` (leave it empty)",
                                shown(text.trim())
                            ),
                        ));
                    }
                }
                let (slot, line) = if kind == "at_entry" {
                    (&mut entry.payoff.at_entry, &mut entry.entry_line)
                } else {
                    (&mut entry.payoff.at_exit, &mut entry.exit_line)
                };
                if let Some(first) = *line {
                    return Err(at(
                        columns.kind,
                        "kind",
                        format!(
                            "payoff \"{name}\" already has its {kind} amount (line {first}); a payoff has at most one {kind} row (add the amounts, or give this one its own name)"
                        ),
                    ));
                }
                *slot = Some(amount);
                *line = Some(row.line);
                continue;
            }
            // A rate piece.
            let from = parse_from(&row.from).map_err(|m| at(columns.from, "from", m))?;
            if row.per.trim().is_empty() {
                return Err(at(
                    columns.per,
                    "per",
                    format!("the rate of payoff \"{name}\" needs `per`, the duration its amount is per (e.g. \"1 month\", \"1 year\")"),
                ));
            }
            let per: Duration = row
                .per
                .parse()
                .map_err(|m: String| at(columns.per, "per", format!("per: {m}")))?;
            let piece = RatePiece { from, amount, per };
            match (entry.payoff.rate.last(), entry.rate_line) {
                (Some(previous), Some(last_line)) => {
                    let previous = previous.from;
                    let (a, b) = (
                        previous.in_unit(TimeUnit::Days),
                        from.in_unit(TimeUnit::Days),
                    );
                    if (b - a).abs() <= 1e-9 * a.abs().max(b.abs()) {
                        return Err(at(
                            columns.from,
                            "from",
                            format!(
                                "the rate of payoff \"{name}\" already has a piece from {previous} (line {last_line}); each piece needs its own start"
                            ),
                        ));
                    }
                    if b < a {
                        return Err(at(
                            columns.from,
                            "from",
                            format!(
                                "the rate pieces of payoff \"{name}\" must be in increasing `from`: {from} comes after {previous} (line {last_line})"
                            ),
                        ));
                    }
                }
                _ => {
                    if from.value != 0.0 {
                        return Err(at(
                            columns.from,
                            "from",
                            format!(
                                "the first rate piece of payoff \"{name}\" starts at {from}; it must start at 0 (time since entry)"
                            ),
                        ));
                    }
                }
            }
            entry.payoff.rate.push(piece);
            entry.rate_line = Some(row.line);
        }
        Ok(Schedule {
            payoffs: built.into_iter().map(|b| b.payoff).collect(),
        })
    }
}

/// A payoff file read from disk: its schedule, the file's name as given and its SHA-256 (for
/// provenance in every output's metadata).
#[derive(Debug, Clone, PartialEq)]
pub struct PayoffFile {
    /// The checked schedule.
    pub schedule: Schedule,
    /// The file as given by the user.
    pub file: String,
    /// Lower-case hex SHA-256 of its bytes.
    pub sha256: String,
}

/// Reads a payoff file through the shared CSV discipline ([`crate::csv_read`]) and checks it.
pub fn load(path: &std::path::Path) -> Result<PayoffFile> {
    let bytes = crate::csv_read::read_file(path)?;
    parse(&path.display().to_string(), &bytes)
}

/// Checks the bytes of a payoff CSV (header `payoff,kind,from,amount,per`, columns in any
/// order, other columns ignored); errors are one line naming the file, line and column.
pub fn parse(file: &str, bytes: &[u8]) -> Result<PayoffFile> {
    use crate::csv_read::{CsvReader, Settings};
    let sha256 = crate::input::sha256_hex(bytes);
    let mut reader = CsvReader::new(file, bytes, Settings::default())?;
    let index = [
        reader.column(COLUMNS[0])?,
        reader.column(COLUMNS[1])?,
        reader.column(COLUMNS[2])?,
        reader.column(COLUMNS[3])?,
        reader.column(COLUMNS[4])?,
    ];
    let columns = PayoffColumns {
        payoff: index[0] + 1,
        kind: index[1] + 1,
        from: index[2] + 1,
        amount: index[3] + 1,
        per: index[4] + 1,
    };
    let mut rows = Vec::new();
    while let Some(row) = reader.next_row()? {
        let mut fields = Vec::with_capacity(5);
        for i in index {
            fields.push(row.text(i)?.to_string());
        }
        let mut fields = fields.into_iter();
        let mut next = || fields.next().unwrap_or_default();
        rows.push(PayoffRow {
            line: row.line(),
            payoff: next(),
            kind: next(),
            from: next(),
            amount: next(),
            per: next(),
        });
    }
    if rows.is_empty() {
        return Err(reader.no_rows());
    }
    Ok(PayoffFile {
        schedule: Schedule::from_rows(file, &columns, &rows)?,
        file: file.to_string(),
        sha256,
    })
}

/// A payoff being read, with the lines of its last rate piece and of its one-offs (for messages).
struct Building {
    payoff: Payoff,
    rate_line: Option<u64>,
    entry_line: Option<u64>,
    exit_line: Option<u64>,
}

impl Building {
    fn new(name: &str) -> Building {
        Building {
            payoff: Payoff {
                name: name.to_string(),
                rate: Vec::new(),
                at_entry: None,
                at_exit: None,
            },
            rate_line: None,
            entry_line: None,
            exit_line: None,
        }
    }
}

/// Checks a payoff name: non-empty, ASCII letters, digits and `_` only (it becomes a column name).
fn check_name(name: &str) -> std::result::Result<(), String> {
    if name.is_empty() {
        return Err("payoff name is empty".into());
    }
    if let Some(bad) = name
        .chars()
        .find(|c| !(c.is_ascii_alphanumeric() || *c == '_'))
    {
        return Err(format!(
            "payoff name \"{}\" holds \"{}\"; a name may hold only letters, digits and _",
            shown(name),
            shown(&bad.to_string())
        ));
    }
    Ok(())
}

/// Parses a rate piece's start: `0` (bare or with a unit, e.g. `0 months`) or a duration.
fn parse_from(text: &str) -> std::result::Result<Offset, String> {
    let text = text.trim();
    if text.is_empty() {
        return Err(
            "a rate piece needs `from`, the time since entry where it starts (0 for the first)"
                .into(),
        );
    }
    if text.parse::<f64>() == Ok(0.0) {
        return Ok(Offset::ZERO);
    }
    // "0 months": a zero with a unit.
    if let Some(split) = text.find(|c: char| c.is_ascii_alphabetic()) {
        let (number, unit) = text.split_at(split);
        if number.trim().parse::<f64>() == Ok(0.0) {
            let unit: TimeUnit = unit.parse()?;
            return Ok(Offset { value: 0.0, unit });
        }
    }
    let d: Duration = text.parse().map_err(|m: String| format!("from: {m}"))?;
    Ok(Offset {
        value: d.value,
        unit: d.unit,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn row(line: u64, fields: [&str; 5]) -> PayoffRow {
        PayoffRow {
            line,
            payoff: fields[0].into(),
            kind: fields[1].into(),
            from: fields[2].into(),
            amount: fields[3].into(),
            per: fields[4].into(),
        }
    }

    /// The contract's example (interface.md, "Payoffs by time since entry"): one payoff `cost`
    /// of 500 a month in the first year then 50 a month, 1,500 on entry and 3,000 on exit; one
    /// payoff `utility` of 0.6 a year for the first month then 0.8.
    fn example() -> Vec<PayoffRow> {
        vec![
            row(2, ["cost", "rate", "0", "500", "1 month"]),
            row(3, ["cost", "rate", "1 year", "50", "1 month"]),
            row(4, ["cost", "at_entry", "", "1500", ""]),
            row(5, ["cost", "at_exit", "", "3000", ""]),
            row(6, ["utility", "rate", "0", "0.6", "1 year"]),
            row(7, ["utility", "rate", "1 month", "0.8", "1 year"]),
        ]
    }

    fn refused(rows: &[PayoffRow]) -> String {
        Schedule::from_rows("payoffs.csv", &PayoffColumns::default(), rows)
            .unwrap_err()
            .to_string()
    }

    #[test]
    fn contract_example_builds_two_payoffs_with_rates_per_unit_of_time() {
        let s = Schedule::from_rows("payoffs.csv", &PayoffColumns::default(), &example()).unwrap();
        let names: Vec<&str> = s.payoffs.iter().map(|p| p.name.as_str()).collect();
        assert_eq!(names, ["cost", "utility"]);
        let cost = &s.payoffs[0];
        assert_eq!(cost.kinds(), ["rate", "at_entry", "at_exit"]);
        // 500 a month is 500·12/365.25 a day (a month is a twelfth of 365.25 days: interface.md).
        assert!((cost.rate_at(0.0, TimeUnit::Days) - 500.0 * 12.0 / 365.25).abs() < 1e-12);
        assert_eq!(cost.rate_at(11.999, TimeUnit::Months), 500.0);
        assert_eq!(cost.rate_at(12.0, TimeUnit::Months), 50.0);
        assert_eq!(cost.changes_in(TimeUnit::Years), vec![1.0]);
        assert_eq!((cost.at_entry, cost.at_exit), (Some(1500.0), Some(3000.0)));
        assert_eq!(cost.column(), "payoff_cost");
        let utility = &s.payoffs[1];
        assert_eq!(utility.kinds(), ["rate"]);
        assert_eq!((utility.at_entry, utility.at_exit), (None, None));
        // 0.6 a year is 0.05 a month; from 1 month, 0.8 a year.
        assert!((utility.rate_at(0.5, TimeUnit::Months) - 0.05).abs() < 1e-15);
        assert!((utility.rate_at(1.0, TimeUnit::Months) - 0.8 / 12.0).abs() < 1e-15);
        assert_eq!(s.changes_in(TimeUnit::Months), vec![1.0, 12.0]);
    }

    #[test]
    fn parts_of_one_payoff_may_come_in_any_order() {
        // One-offs before, between and after the rate pieces: the same payoff as the example's.
        let rows = vec![
            row(2, ["cost", "at_exit", "", "3000", ""]),
            row(3, ["utility", "rate", "0", "0.6", "1 year"]),
            row(4, ["cost", "rate", "0", "500", "1 month"]),
            row(5, ["cost", "at_entry", "", "1500", ""]),
            row(6, ["cost", "rate", "1 year", "50", "1 month"]),
            row(7, ["utility", "rate", "1 month", "0.8", "1 year"]),
        ];
        let s = Schedule::from_rows("payoffs.csv", &PayoffColumns::default(), &rows).unwrap();
        let example =
            Schedule::from_rows("payoffs.csv", &PayoffColumns::default(), &example()).unwrap();
        assert_eq!(s, example);
        // One-offs alone make a payoff without a rate.
        let rows = vec![row(2, ["death", "at_exit", "", "-20", ""])];
        let s = Schedule::from_rows("f", &PayoffColumns::default(), &rows).unwrap();
        assert!(s.payoffs[0].rate.is_empty() && s.payoffs[0].rate_at(3.0, TimeUnit::Days) == 0.0);
        assert_eq!(s.payoffs[0].kinds(), ["at_exit"]);
    }

    #[test]
    fn zero_start_may_carry_a_unit_and_columns_may_move() {
        let rows = vec![row(9, ["q", "rate", " 0 months ", "1", "1 year"])];
        assert!(Schedule::from_rows("f", &PayoffColumns::default(), &rows).is_ok());
        let moved = PayoffColumns {
            payoff: 5,
            kind: 4,
            from: 3,
            amount: 2,
            per: 1,
        };
        let rows = vec![row(3, ["q", "rate", "0", "x", "1 year"])];
        let err = Schedule::from_rows("f", &moved, &rows)
            .unwrap_err()
            .to_string();
        assert!(err.starts_with("f line 3 column 2 (\"amount\")"), "{err}");
    }

    #[test]
    fn every_refusal_names_file_line_and_column() {
        let cases: Vec<(Vec<PayoffRow>, &str, &str)> = vec![
            (
                vec![row(2, ["co st", "rate", "0", "1", "1 month"])],
                "line 2 column 1 (\"payoff\")",
                "only letters, digits and _",
            ),
            (
                vec![row(2, ["", "rate", "0", "1", "1 month"])],
                "line 2 column 1",
                "empty",
            ),
            (
                vec![row(4, ["c", "rates", "0", "1", "1 month"])],
                "line 4 column 2 (\"kind\")",
                "did you mean \"rate\"",
            ),
            (
                vec![row(4, ["c", "at-exit", "", "1", ""])],
                "line 4 column 2",
                "did you mean \"at_exit\"",
            ),
            (
                vec![row(2, ["c", "rate", "1 month", "1", "1 month"])],
                "line 2 column 3 (\"from\")",
                "must start at 0",
            ),
            (
                vec![row(2, ["c", "rate", "", "1", "1 month"])],
                "line 2 column 3",
                "needs `from`",
            ),
            (
                vec![row(2, ["c", "rate", "0", "1", "month"])],
                "line 2 column 5 (\"per\")",
                "is not a number",
            ),
            (
                vec![row(2, ["c", "rate", "0", "1", "12"])],
                "line 2 column 5 (\"per\")",
                "no unit",
            ),
            (
                vec![row(2, ["c", "rate", "0", "1", "-1 month"])],
                "line 2 column 5 (\"per\")",
                "positive",
            ),
            (
                vec![
                    row(2, ["c", "rate", "0", "1", "1 month"]),
                    row(3, ["c", "rate", "6", "1", "1 month"]),
                ],
                "line 3 column 3 (\"from\")",
                "no unit",
            ),
            (
                vec![row(2, ["c", "rate", "0", "1", "1 monht"])],
                "line 2 column 5",
                "did you mean \"months\"",
            ),
            (
                vec![row(2, ["c", "rate", "0", "1", ""])],
                "line 2 column 5",
                "needs `per`",
            ),
            (
                vec![row(2, ["c", "rate", "0", "1,5", "1 month"])],
                "line 2 column 4 (\"amount\")",
                "decimal comma",
            ),
            (
                vec![row(2, ["c", "at_entry", "", "", ""])],
                "line 2 column 4",
                "empty",
            ),
            (
                vec![row(2, ["c", "at_entry", "0", "5", ""])],
                "line 2 column 3",
                "leave it empty",
            ),
            (
                vec![row(2, ["c", "at_exit", "", "5", "1 month"])],
                "line 2 column 5",
                "leave it empty",
            ),
            (
                vec![
                    row(2, ["c", "rate", "0", "5", "1 month"]),
                    row(3, ["c", "rate", "6 months", "5", "1 month"]),
                    row(4, ["c", "rate", "2 months", "5", "1 month"]),
                ],
                "line 4 column 3",
                "increasing `from`: 2 months comes after 6 months (line 3)",
            ),
            (
                vec![
                    row(2, ["c", "rate", "0", "5", "1 month"]),
                    row(3, ["c", "rate", "12 months", "5", "1 month"]),
                    row(7, ["c", "rate", "1 year", "5", "1 month"]),
                ],
                "line 7 column 3",
                "already has a piece from 12 months (line 3)",
            ),
            (
                vec![
                    row(2, ["c", "at_entry", "", "5", ""]),
                    row(3, ["c", "rate", "2 months", "5", "1 month"]),
                ],
                "line 3 column 3",
                "first rate piece of payoff \"c\" starts at 2 months",
            ),
            (
                vec![
                    row(2, ["c", "at_entry", "", "5", ""]),
                    row(3, ["c", "rate", "0", "5", "1 month"]),
                    row(5, ["c", "at_entry", "", "5", ""]),
                ],
                "line 5 column 2 (\"kind\")",
                "already has its at_entry amount (line 2)",
            ),
            (
                vec![
                    row(2, ["c", "rate", "0", "5", "1 month"]),
                    row(4, ["c", "at_exit", "", "5", ""]),
                    row(6, ["d", "at_exit", "", "5", ""]),
                    row(9, ["c", "at_exit", "", "7", ""]),
                ],
                "line 9 column 2 (\"kind\")",
                "already has its at_exit amount (line 4)",
            ),
        ];
        for (rows, place, words) in cases {
            let err = refused(&rows);
            assert!(err.starts_with("payoffs.csv "), "{err}");
            assert!(err.contains(place), "{err} (expected {place})");
            assert!(err.contains(words), "{err} (expected {words})");
            assert!(!err.contains('\n'), "{err}");
        }
        let err = refused(&[]);
        assert!(err.starts_with("payoffs.csv: no payoff rows"), "{err}");
    }

    #[test]
    fn hostile_names_are_shown_on_one_short_line() {
        let long = format!("a\n{}", "b".repeat(10_000));
        let err = refused(&[row(2, [&long, "rate", "0", "1", "1 month"])]);
        assert!(!err.contains('\n') && err.len() < 300, "{err}");
    }
}
