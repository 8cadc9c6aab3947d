//! A plain column table for outputs that are not node tables (frames.csv,
//! campaign.csv, convergence traces); `io` writes it.

/// The values of one column.
#[derive(Debug, Clone, PartialEq)]
pub enum Values {
    /// Real numbers; NaN is written as an empty cell in CSV.
    F64(Vec<f64>),
    /// Integers (counts, indices, 0/1 flags).
    I64(Vec<i64>),
    /// Text (run ids, frame names, scheme names).
    Str(Vec<String>),
}

impl Values {
    /// Number of values (rows) in the column.
    pub fn len(&self) -> usize {
        match self {
            Values::F64(v) => v.len(),
            Values::I64(v) => v.len(),
            Values::Str(v) => v.len(),
        }
    }
    /// True when the column has no rows.
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }
}

/// Named columns of equal length.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Table {
    /// (name, values) in output order; the names are the CSV header.
    pub columns: Vec<(String, Values)>,
}

impl Table {
    /// A table without columns.
    pub fn new() -> Self {
        Table::default()
    }
    /// Appends a column; panics if its length differs from the others
    /// (a programming error).
    pub fn push(&mut self, name: impl Into<String>, values: Values) {
        let name = name.into();
        if let Some((_, first)) = self.columns.first() {
            assert_eq!(first.len(), values.len(), "column '{name}' length");
        }
        self.columns.push((name, values));
    }
    /// Number of rows (0 for a table without columns).
    pub fn n_rows(&self) -> usize {
        self.columns.first().map_or(0, |(_, v)| v.len())
    }
    /// The column called `name`; `None` when there is none.
    pub fn get(&self, name: &str) -> Option<&Values> {
        self.columns.iter().find(|(n, _)| n == name).map(|(_, v)| v)
    }
}
