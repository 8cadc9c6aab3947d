//! A plain column table for outputs that are not node tables (frames.csv,
//! campaign.csv, convergence traces); `io` writes it.

/// The values of one column.
#[derive(Debug, Clone, PartialEq)]
pub enum Values {
    F64(Vec<f64>),
    I64(Vec<i64>),
    Str(Vec<String>),
}

impl Values {
    pub fn len(&self) -> usize {
        match self {
            Values::F64(v) => v.len(),
            Values::I64(v) => v.len(),
            Values::Str(v) => v.len(),
        }
    }
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }
}

/// Named columns of equal length.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Table {
    pub columns: Vec<(String, Values)>,
}

impl Table {
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
    pub fn n_rows(&self) -> usize {
        self.columns.first().map_or(0, |(_, v)| v.len())
    }
    pub fn get(&self, name: &str) -> Option<&Values> {
        self.columns.iter().find(|(n, _)| n == name).map(|(_, v)| v)
    }
}
