//! Reading digitised Kaplan–Meier points (`time,survival`) and published risk tables
//! (`time,at_risk`), and cleaning the points by the rule in `docs/rebuild.md`: every cleaning
//! is counted so the command can report it, and anything beyond digitising noise is an error
//! that names the row.

use super::{Point, RiskRow};
use crate::csv_read::{CsvReader, Settings};
use crate::error::{Error, Result};

/// Digitising tolerance on the proportion scale: values up to this far above 1 or below 0, and
/// rises up to this size, are treated as noise and cleaned; larger ones are errors. Two
/// percentage points is about the width of a plotted line on a typical published figure
/// (common practice, not a published figure).
pub const TOLERANCE: f64 = 0.02;

/// Sideways digitising tolerance, as a share of the last digitised time: clicks closer than this
/// in time cannot be ordered by time (a drop's top corner can land just after its bottom one),
/// so their survival values are put top first before rises are judged. A careful click lands within 2–3 pixels sideways, and a published figure's time axis
/// is 500–1000 pixels wide, so the top corner of a drop can land up to about 0.5% of the axis
/// after the bottom one (common practice, not a published figure).
pub const TIME_TOLERANCE_SHARE: f64 = 0.005;

/// A file's survival values are read as percentages when any value exceeds this.
pub const PERCENT_THRESHOLD: f64 = 1.5;

/// What cleaning did to one arm's digitised points, for the report.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Cleaning {
    /// Rows read for this arm.
    pub rows: usize,
    /// Whether the file's values were read as percentages (any value above 1.5).
    pub percentage: bool,
    /// Largest raw survival value in the file, in the file's own scale.
    pub largest_value: f64,
    /// Whether the rows were out of time order (they are sorted).
    pub reordered: bool,
    /// Points whose survival value was moved to a neighbouring click less than the sideways
    /// tolerance away, to put the top of a drop before its bottom.
    pub jitter_moved: usize,
    /// The sideways tolerance used, in the figure's time unit.
    pub time_tolerance: f64,
    /// Values above 1 (100%) set to 1.
    pub above_one: usize,
    /// Values below 0 set to 0.
    pub below_zero: usize,
    /// Points at time 0 set to survival 1.
    pub time_zero_set: usize,
    /// Whether a point (0, 1) was added because no point was at time 0.
    pub start_added: bool,
    /// Points moved by the non-increasing least-squares fit (pool adjacent violators).
    pub monotone_changed: usize,
    /// Largest move made by that fit (proportion scale).
    pub monotone_largest: f64,
}

/// One arm's digitised curve after cleaning: sorted by time, starting at (0, 1), non-increasing.
#[derive(Debug, Clone)]
pub struct DigitisedCurve {
    /// Arm label; `None` without an arm column.
    pub arm: Option<String>,
    /// Cleaned points, survival as a proportion.
    pub points: Vec<Point>,
    /// What cleaning did.
    pub cleaning: Cleaning,
    /// Line of the last row of this arm (for messages about the curve as a whole).
    pub last_line: u64,
}

/// One arm's published numbers at risk, sorted by time, starting at time 0, never increasing.
#[derive(Debug, Clone)]
pub struct RiskTable {
    /// Arm label; `None` without an arm column.
    pub arm: Option<String>,
    /// Rows with their file lines.
    pub rows: Vec<RiskRow>,
    /// 1-based column of `time` in the file, for messages.
    pub time_column: usize,
}

/// A numeric table read from CSV: named columns, optional arm column, rows with line numbers.
struct Table {
    /// (0-based index, name) of each requested column.
    columns: Vec<(usize, String)>,
    rows: Vec<Row>,
}

struct Row {
    line: u64,
    values: Vec<f64>,
    arm: Option<String>,
}

/// Reads the named numeric columns (and the arm column) of a CSV file's bytes through the
/// shared reading discipline.
fn read_table(file: &str, bytes: &[u8], names: &[&str], arm_col: Option<&str>) -> Result<Table> {
    let mut reader = CsvReader::new(file, bytes, Settings::default())?;
    let mut columns = Vec::new();
    for name in names {
        columns.push((reader.column(name)?, name.to_string()));
    }
    let arm = match arm_col {
        Some(name) => Some(reader.column(name)?),
        None => None,
    };
    let mut rows = Vec::new();
    while let Some(row) = reader.next_row()? {
        let mut values = Vec::with_capacity(columns.len());
        for (idx, _) in &columns {
            values.push(row.number(*idx)?);
        }
        let arm_value = match arm {
            Some(idx) => {
                let v = row.text(idx)?;
                if v.is_empty() {
                    return Err(row.error(idx, "arm is empty"));
                }
                Some(v.to_string())
            }
            None => None,
        };
        rows.push(Row {
            line: row.line(),
            values,
            arm: arm_value,
        });
    }
    if rows.is_empty() {
        return Err(reader.no_rows());
    }
    Ok(Table { columns, rows })
}

/// Arms in order of first appearance, each with its rows.
fn split_arms(rows: Vec<Row>) -> Vec<(Option<String>, Vec<Row>)> {
    let mut arms: Vec<(Option<String>, Vec<Row>)> = Vec::new();
    for row in rows {
        match arms.iter_mut().find(|(a, _)| *a == row.arm) {
            Some((_, list)) => list.push(row),
            None => arms.push((row.arm.clone(), vec![row])),
        }
    }
    arms
}

/// " (arm X)" for messages, empty without arms.
fn arm_note(arm: &Option<String>) -> String {
    arm.as_ref()
        .map(|a| format!(" (arm \"{}\")", crate::format::shown(a)))
        .unwrap_or_default()
}

/// Reads and cleans a file of digitised points, one curve per arm.
pub fn read_curves(file: &str, bytes: &[u8], arm_col: Option<&str>) -> Result<Vec<DigitisedCurve>> {
    let table = read_table(file, bytes, &["time", "survival"], arm_col)?;
    let (time_idx, time_name) = table.columns[0].clone();
    let (surv_idx, surv_name) = table.columns[1].clone();
    let largest = table
        .rows
        .iter()
        .map(|r| r.values[1])
        .fold(f64::NEG_INFINITY, f64::max);
    let percentage = largest > PERCENT_THRESHOLD;
    let scale = if percentage { 100.0 } else { 1.0 };
    let unit = |v: f64| {
        if percentage {
            format!("{v}%")
        } else {
            format!("{v}")
        }
    };
    let mut curves = Vec::new();
    for (arm, rows) in split_arms(table.rows) {
        let mut cleaning = Cleaning {
            rows: rows.len(),
            percentage,
            largest_value: largest,
            ..Cleaning::default()
        };
        let last_line = rows.iter().map(|r| r.line).max().unwrap_or(1);
        // (time, survival as a proportion, line, raw value)
        let mut pts: Vec<(f64, f64, u64, f64)> = Vec::with_capacity(rows.len());
        for row in &rows {
            let (time, raw) = (row.values[0], row.values[1]);
            if time < 0.0 {
                return Err(Error::at(
                    file,
                    row.line,
                    time_idx + 1,
                    &time_name,
                    format!("time {time} is negative"),
                ));
            }
            let mut s = raw / scale;
            if !(-TOLERANCE..=1.0 + TOLERANCE).contains(&s) {
                let range = if percentage { "0–100%" } else { "0–1" };
                return Err(Error::at(
                    file,
                    row.line,
                    surv_idx + 1,
                    &surv_name,
                    format!(
                        "survival {} is outside {range} by more than the digitising tolerance of {}{}",
                        unit(raw),
                        unit(TOLERANCE * scale),
                        if percentage { "" } else { " (values read as proportions because none exceeds 1.5)" }
                    ),
                ));
            }
            if s > 1.0 {
                s = 1.0;
                cleaning.above_one += 1;
            } else if s < 0.0 {
                s = 0.0;
                cleaning.below_zero += 1;
            }
            if time == 0.0 {
                if s < 1.0 - TOLERANCE {
                    return Err(Error::at(
                        file,
                        row.line,
                        surv_idx + 1,
                        &surv_name,
                        format!(
                            "survival at time 0 is {}; a Kaplan–Meier curve starts at {}",
                            unit(raw),
                            unit(scale)
                        ),
                    ));
                }
                if s < 1.0 {
                    cleaning.time_zero_set += 1;
                }
                s = 1.0;
            }
            pts.push((time, s, row.line, raw));
        }
        cleaning.reordered = pts
            .windows(2)
            .any(|w| w[1].0 < w[0].0 || (w[1].0 == w[0].0 && w[1].1 > w[0].1));
        // Ties in time keep the top of a drop before its bottom.
        pts.sort_by(|a, b| a.0.total_cmp(&b.0).then(b.1.total_cmp(&a.1)));
        let last_time = pts.last().map_or(0.0, |p| p.0);
        cleaning.time_tolerance = TIME_TOLERANCE_SHARE * last_time;
        cleaning.jitter_moved = top_first_within(&mut pts, cleaning.time_tolerance);
        let mut highest_earlier: Option<(f64, u64, f64)> = None;
        let mut lowest = f64::INFINITY;
        for p in &pts {
            if p.1 > lowest + TOLERANCE {
                let (_, line, raw) = highest_earlier.unwrap_or((lowest, 0, lowest));
                return Err(Error::at(
                    file,
                    p.2,
                    surv_idx + 1,
                    &surv_name,
                    format!(
                        "survival rises to {} at time {} after falling to {} (line {line}){}; rises beyond the digitising tolerance of {} suggest a mistyped value or points from another curve",
                        unit(p.3),
                        p.0,
                        unit(raw),
                        arm_note(&arm),
                        unit(TOLERANCE * scale)
                    ),
                ));
            }
            if p.1 < lowest {
                lowest = p.1;
                highest_earlier = Some((p.1, p.2, p.3));
            }
        }
        let distinct_positive = pts.iter().filter(|p| p.0 > 0.0).count();
        if distinct_positive < 1 || pts.len() < 2 {
            return Err(Error::at(
                file,
                last_line,
                time_idx + 1,
                &time_name,
                format!(
                    "the curve{} has {} point(s) and {} after time 0; at least two points, one of them after time 0, are needed",
                    arm_note(&arm),
                    pts.len(),
                    distinct_positive
                ),
            ));
        }
        let mut points: Vec<Point> = pts
            .iter()
            .map(|p| Point {
                time: p.0,
                survival: p.1,
            })
            .collect();
        if points[0].time > 0.0 {
            points.insert(
                0,
                Point {
                    time: 0.0,
                    survival: 1.0,
                },
            );
            cleaning.start_added = true;
        }
        let fitted = non_increasing_fit(&points.iter().map(|p| p.survival).collect::<Vec<_>>());
        for (p, s) in points.iter_mut().zip(fitted) {
            let change = (p.survival - s).abs();
            if change > 1e-12 {
                cleaning.monotone_changed += 1;
                cleaning.monotone_largest = cleaning.monotone_largest.max(change);
            }
            p.survival = s;
        }
        curves.push(DigitisedCurve {
            arm,
            points,
            cleaning,
            last_line,
        });
    }
    Ok(curves)
}

/// Puts survival values top first among clicks less than `tolerance` apart in time: such
/// clicks cannot be ordered by time (a drop's top corner can land just after its bottom one),
/// so a higher value moves to the earlier click. No value ever moves more than `tolerance` from
/// where it was clicked, so a mistyped value or a point from another curve still shows as a
/// rise. Points are (time, survival, line, raw value), sorted by time; times stay, the other
/// fields move together. Returns the number of points whose value moved.
fn top_first_within(pts: &mut [(f64, f64, u64, f64)], tolerance: f64) -> usize {
    if tolerance <= 0.0 {
        return 0;
    }
    let times: Vec<f64> = pts.iter().map(|p| p.0).collect();
    // Each value with the time it was clicked at.
    let mut values: Vec<(f64, u64, f64, f64)> = pts.iter().map(|p| (p.1, p.2, p.3, p.0)).collect();
    for i in 1..values.len() {
        let mut j = i;
        // Insertion: the value at j passes the one before it while it is higher and neither
        // ends up more than `tolerance` from its own click.
        while j > 0
            && values[j].0 > values[j - 1].0
            && times[j - 1] >= values[j].3 - tolerance
            && times[j] <= values[j - 1].3 + tolerance
        {
            values.swap(j - 1, j);
            j -= 1;
        }
    }
    let mut moved = 0;
    for (p, v) in pts.iter_mut().zip(values) {
        if p.2 != v.1 {
            moved += 1;
        }
        (p.1, p.2, p.3) = (v.0, v.1, v.2);
    }
    moved
}

/// Least-squares non-increasing fit to a sequence (pool adjacent violators, equal weights):
/// each run of values that rises is replaced by its mean, so noise is averaged rather than
/// pushed to one side as a running minimum would.
pub fn non_increasing_fit(values: &[f64]) -> Vec<f64> {
    // Blocks of (sum, count), each block's mean lower than the one before.
    let mut blocks: Vec<(f64, usize)> = Vec::with_capacity(values.len());
    for &v in values {
        blocks.push((v, 1));
        while blocks.len() >= 2 {
            let (s2, n2) = blocks[blocks.len() - 1];
            let (s1, n1) = blocks[blocks.len() - 2];
            if s2 / n2 as f64 > s1 / n1 as f64 {
                blocks.pop();
                let last = blocks.len() - 1;
                blocks[last] = (s1 + s2, n1 + n2);
            } else {
                break;
            }
        }
    }
    let mut out = Vec::with_capacity(values.len());
    for (s, n) in blocks {
        out.extend(std::iter::repeat_n(s / n as f64, n));
    }
    out
}

/// Reads a published risk table, one per arm: times from 0, counts whole and never increasing.
pub fn read_risk_tables(file: &str, bytes: &[u8], arm_col: Option<&str>) -> Result<Vec<RiskTable>> {
    let table = read_table(file, bytes, &["time", "at_risk"], arm_col)?;
    let (time_idx, time_name) = table.columns[0].clone();
    let (risk_idx, risk_name) = table.columns[1].clone();
    let mut tables = Vec::new();
    for (arm, rows) in split_arms(table.rows) {
        let mut out: Vec<RiskRow> = Vec::with_capacity(rows.len());
        for row in &rows {
            let (time, count) = (row.values[0], row.values[1]);
            if time < 0.0 {
                return Err(Error::at(
                    file,
                    row.line,
                    time_idx + 1,
                    &time_name,
                    format!("time {time} is negative"),
                ));
            }
            if count < 0.0 || count.fract() != 0.0 || count > 1e9 {
                return Err(Error::at(
                    file,
                    row.line,
                    risk_idx + 1,
                    &risk_name,
                    format!("number at risk must be a whole number of patients, got {count}"),
                ));
            }
            out.push(RiskRow {
                time,
                at_risk: count as u64,
                line: row.line,
            });
        }
        out.sort_by(|a, b| a.time.total_cmp(&b.time));
        for w in out.windows(2) {
            if w[1].time == w[0].time {
                return Err(Error::at(
                    file,
                    w[1].line.max(w[0].line),
                    time_idx + 1,
                    &time_name,
                    format!(
                        "time {} appears twice{} (lines {} and {})",
                        w[0].time,
                        arm_note(&arm),
                        w[0].line.min(w[1].line),
                        w[0].line.max(w[1].line)
                    ),
                ));
            }
            if w[1].at_risk > w[0].at_risk {
                return Err(Error::at(
                    file,
                    w[1].line,
                    risk_idx + 1,
                    &risk_name,
                    format!(
                        "the number at risk increases from {} at time {} (line {}) to {} at time {}{}; it can only fall",
                        w[0].at_risk, w[0].time, w[0].line, w[1].at_risk, w[1].time, arm_note(&arm)
                    ),
                ));
            }
        }
        let first = &out[0];
        if first.time != 0.0 {
            return Err(Error::at(
                file,
                first.line,
                time_idx + 1,
                &time_name,
                format!(
                    "the risk table{} starts at time {}; it must start at time 0 with the number of patients",
                    arm_note(&arm),
                    first.time
                ),
            ));
        }
        if first.at_risk == 0 {
            return Err(Error::at(
                file,
                first.line,
                risk_idx + 1,
                &risk_name,
                "the number at risk at time 0 is 0; there are no patients to rebuild",
            ));
        }
        tables.push(RiskTable {
            arm,
            rows: out,
            time_column: time_idx + 1,
        });
    }
    Ok(tables)
}

/// Checks a risk table against its curve: no table time beyond the last digitised time.
pub fn check_risk_within_curve(
    file: &str,
    table: &RiskTable,
    curve: &DigitisedCurve,
) -> Result<()> {
    let last = curve.points.last().map(|p| p.time).unwrap_or(0.0);
    for row in &table.rows {
        if row.time > last {
            return Err(Error::at(
                file,
                row.line,
                table.time_column,
                "time",
                format!(
                    "risk-table time {} is beyond the last digitised time {last}{}; digitise the curve up to the last table time or drop the row",
                    row.time,
                    arm_note(&table.arm)
                ),
            ));
        }
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn pool_adjacent_violators_gives_the_least_squares_fit() {
        // Hand computation: (0.9, 0.95) pool to 0.925; (0.5, 0.7, 0.6) pool to 0.6.
        let fit = non_increasing_fit(&[1.0, 0.9, 0.95, 0.8, 0.5, 0.7, 0.6]);
        let expected = [1.0, 0.925, 0.925, 0.8, 0.6, 0.6, 0.6];
        for (a, b) in fit.iter().zip(expected) {
            assert!((a - b).abs() < 1e-12, "{fit:?}");
        }
    }

    #[test]
    fn percentages_are_detected_and_cleanings_counted() {
        let text = "time,survival\n5,90.4\n0,100.5\n10,90.9\n20,50\n30,-0.5\n";
        let curves = read_curves("c.csv", text.as_bytes(), None).unwrap();
        let c = &curves[0].cleaning;
        assert!(c.percentage);
        assert!(c.reordered);
        assert_eq!((c.above_one, c.below_zero), (1, 1));
        assert_eq!(c.monotone_changed, 2);
        let s: Vec<f64> = curves[0].points.iter().map(|p| p.survival).collect();
        // 0.904 and 0.909 pool to their mean 0.9065.
        assert!((s[1] - 0.9065).abs() < 1e-12 && (s[2] - 0.9065).abs() < 1e-12);
        assert_eq!(s[4], 0.0);
    }

    #[test]
    fn large_rises_and_out_of_range_values_name_the_row() {
        let err = read_curves("c.csv", b"time,survival\n0,1\n1,0.5\n2,0.6\n", None)
            .unwrap_err()
            .to_string();
        assert!(err.starts_with("c.csv line 4 column 2"), "{err}");
        let err = read_curves("c.csv", b"time,survival\n0,1\n1,1.05\n", None)
            .unwrap_err()
            .to_string();
        assert!(err.starts_with("c.csv line 3 column 2"), "{err}");
        let err = read_risk_tables("r.csv", b"time,at_risk\n0,10\n5,8\n9,9\n", None)
            .unwrap_err()
            .to_string();
        assert!(err.starts_with("r.csv line 4 column 2"), "{err}");
    }

    #[test]
    fn a_top_corner_clicked_just_after_its_bottom_is_the_same_drop() {
        // Drop from 0.9 to 0.87 at time 10 on an axis to 20 (tolerance 0.5% of 20 = 0.1): the
        // bottom corner clicked at 9.97, the top at 10.03. Sorted by time that is a rise of
        // 0.03, beyond the 0.02 tolerance; as one drop, the values are put top first.
        let text = b"time,survival\n0,1\n5,0.9\n10.03,0.9\n9.97,0.87\n20,0.87\n";
        let curve = &read_curves("c.csv", text, None).unwrap()[0];
        let pts: Vec<(f64, f64)> = curve.points.iter().map(|p| (p.time, p.survival)).collect();
        assert_eq!(
            pts,
            [
                (0.0, 1.0),
                (5.0, 0.9),
                (9.97, 0.9),
                (10.03, 0.87),
                (20.0, 0.87)
            ]
        );
        assert_eq!(curve.cleaning.jitter_moved, 2);
        assert_eq!(curve.cleaning.monotone_changed, 0);
        // 0.11 apart is beyond the tolerance: still a rise, and refused.
        let text = b"time,survival\n0,1\n5,0.9\n10.08,0.9\n9.97,0.87\n20,0.87\n";
        let err = read_curves("c.csv", text, None).unwrap_err().to_string();
        assert!(err.starts_with("c.csv line 4 column 2"), "{err}");
        // A mistyped low value cannot hide by moving: it moves at most the tolerance, and the
        // next point shows the rise.
        let text = b"time,survival\n0,1\n5,0.9\n9.97,0.5\n10.03,0.88\n12,0.87\n20,0.87\n";
        let err = read_curves("c.csv", text, None).unwrap_err().to_string();
        assert!(err.starts_with("c.csv line 6 column 2"), "{err}");
    }

    #[test]
    fn lines_are_physical_and_rows_are_checked_against_the_header() {
        let err = |text: &[u8]| read_curves("c.csv", text, None).unwrap_err().to_string();
        // CR-only line ends were counted as one line ("line 1" for the third line).
        assert!(err(b"time,survival\r0,1\r2,x\r").starts_with("c.csv line 3 column 2"));
        assert!(err(b"time,survival\n0,abc\n2,0.9\n").starts_with("c.csv line 2 column 2"));
        // A decimal comma in a comma file was read as survival 0.
        assert!(err(b"time,survival\n0,1\n2,0,9\n").contains("\"0,9\" (write 0.9)"));
        let err = read_risk_tables("r.csv", b"time,at_risk\n0,50\n5,44,0\n", None)
            .unwrap_err()
            .to_string();
        assert!(err.starts_with("r.csv line 3 column 1"), "{err}");
        let err = read_risk_tables("r.csv", b"time,at_risk\n0,50\n5\n", None)
            .unwrap_err()
            .to_string();
        assert!(err.starts_with("r.csv line 3 column 2"), "{err}");
    }

    proptest::proptest! {
        #[test]
        fn arbitrary_files_never_panic(
            rows in proptest::collection::vec(("[-0-9.e]{0,6}", "[-0-9.%]{0,6}", "[ab]?"), 0..30)
        ) {
            let mut text = String::from("time,survival,at_risk,arm\n");
            for (a, b, c) in &rows {
                text.push_str(&format!("{a},{b},{b},{c}\n"));
            }
            let _ = read_curves("c.csv", text.as_bytes(), Some("arm"));
            let _ = read_risk_tables("r.csv", text.as_bytes(), None);
        }
    }
}
