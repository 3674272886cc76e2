//! The generic piece every format shares: a [`TunnelTable`] turned into a [`Document`] table
//! in the long or the matrix layout (interface column names), so a format adds only what is
//! its own.

use super::{Cell, Document, Table};
use crate::discretise::{exit_causes, transition_matrix, transition_matrix_by_cause, TunnelTable};

/// Layout of an exported tunnel table.
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum Layout {
    /// One row per tunnel state: `tunnel`, `t_start`, `t_end`, `surv_start`, `surv_end`,
    /// `p_exit`, `p_next`, then any extra columns.
    Long,
    /// Square transition matrix over the tunnel states plus `exit`; rows sum to 1.
    Matrix,
    /// The matrix with one exit state per cause (`exit_disease`, `exit_background`) instead
    /// of a single `exit`, for curves that split exit by cause (background mortality added).
    MatrixByCause,
}

impl Layout {
    /// Name as written on the command line and in headers.
    pub fn name(self) -> &'static str {
        match self {
            Layout::Long => "long",
            Layout::Matrix => "matrix",
            Layout::MatrixByCause => "matrix-by-cause",
        }
    }
}

/// The long layout: interface columns in order, then the extra columns.
pub fn long_table(table: &TunnelTable) -> Table {
    let mut columns: Vec<String> = [
        "tunnel",
        "t_start",
        "t_end",
        "surv_start",
        "surv_end",
        "p_exit",
        "p_next",
    ]
    .iter()
    .map(|s| s.to_string())
    .collect();
    columns.extend(table.extra.iter().map(|(name, _)| name.clone()));
    let rows = table
        .rows
        .iter()
        .enumerate()
        .map(|(i, r)| {
            let mut row = vec![
                Cell::Int(r.tunnel as i64),
                Cell::Number(r.t_start),
                Cell::Number(r.t_end),
                Cell::Number(r.surv_start),
                Cell::Number(r.surv_end),
                Cell::Number(r.p_exit),
                Cell::Number(r.p_next),
            ];
            row.extend(
                table
                    .extra
                    .iter()
                    .map(|(_, values)| values.get(i).map_or(Cell::Missing, |v| Cell::Number(*v))),
            );
            row
        })
        .collect();
    Table {
        name: "tunnels".into(),
        columns,
        rows,
    }
}

/// Column names of the long layout of draws: `draw`, then the tunnel table's long columns.
pub fn draw_columns(table: &TunnelTable) -> Vec<String> {
    let mut columns = vec!["draw".to_string()];
    columns.extend(long_table(table).columns);
    columns
}

/// Rows of one draw in the long layout of draws (`draw` is 1-based).
pub fn draw_rows(draw: usize, table: &TunnelTable) -> Vec<Vec<Cell>> {
    long_table(table)
        .rows
        .into_iter()
        .map(|row| {
            let mut cells = Vec::with_capacity(row.len() + 1);
            cells.push(Cell::Int(draw as i64));
            cells.extend(row);
            cells
        })
        .collect()
}

/// Names of the matrix states: `tunnel_1` … `tunnel_N`, then `exit`.
pub fn state_names(count: usize) -> Vec<String> {
    let mut names: Vec<String> = (1..=count).map(|k| format!("tunnel_{k}")).collect();
    names.push("exit".into());
    names
}

/// Names of the by-cause matrix states: `tunnel_1` … `tunnel_N`, then `exit_<cause>` per cause
/// (just `exit` when exit is not split).
pub fn state_names_by_cause(table: &TunnelTable) -> Vec<String> {
    let causes = exit_causes(table);
    if causes.is_empty() {
        return state_names(table.rows.len());
    }
    let mut names = state_names(table.rows.len());
    names.pop();
    names.extend(causes.iter().map(|(cause, _)| format!("exit_{cause}")));
    names
}

/// The matrix layout: a `from` column naming the state, then one column per destination state.
pub fn matrix_table(table: &TunnelTable) -> Table {
    named_matrix(
        "matrix",
        state_names(table.rows.len()),
        transition_matrix(table),
    )
}

/// The by-cause matrix layout ([`transition_matrix_by_cause`]), laid out as [`matrix_table`].
pub fn matrix_by_cause_table(table: &TunnelTable) -> Table {
    named_matrix(
        "matrix_by_cause",
        state_names_by_cause(table),
        transition_matrix_by_cause(table),
    )
}

/// A `from` column naming each state, then one column per destination state.
fn named_matrix(name: &str, names: Vec<String>, matrix: Vec<Vec<f64>>) -> Table {
    let mut columns = vec!["from".to_string()];
    columns.extend(names.iter().cloned());
    let rows = names
        .iter()
        .zip(&matrix)
        .map(|(state, row)| {
            let mut cells = vec![Cell::Text(state.clone())];
            cells.extend(row.iter().map(|p| Cell::Number(*p)));
            cells
        })
        .collect();
    Table {
        name: name.into(),
        columns,
        rows,
    }
}

/// A document holding `table` in `layout`, with `metadata` as its header block.
pub fn tunnel_document(
    table: &TunnelTable,
    layout: Layout,
    metadata: Vec<(String, String)>,
) -> Document {
    let main = match layout {
        Layout::Long => long_table(table),
        Layout::Matrix => matrix_table(table),
        Layout::MatrixByCause => matrix_by_cause_table(table),
    };
    Document {
        metadata,
        tables: vec![main],
    }
}
