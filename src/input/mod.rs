//! Readers: turn files into validated data structures, with file:line:column errors.

pub mod tidy;

pub use tidy::{ColumnNames, read_campaign, write_campaign};

/// Parses one numeric CSV field, naming the column and expecting a finite number.
pub(crate) fn parse_number(field: &str, column: &str) -> Result<f64, String> {
    if field.is_empty() {
        return Err(format!("column '{column}' is empty, expected a number"));
    }
    match field.parse::<f64>() {
        Ok(v) if v.is_finite() => Ok(v),
        Ok(_) => Err(format!(
            "column '{column}' is '{field}', expected a finite number"
        )),
        Err(_) => Err(format!("column '{column}' is '{field}', expected a number")),
    }
}
