//! The schema of every result file: each CSV column and summary key with
//! its unit and meaning, and the axes of every array file.
//!
//! CSV files are written from column lists ([`Column`]): each column holds
//! its name, unit, meaning and how to get its value from the data, so a
//! header and its values cannot drift apart. Summary keys are documented in
//! [`keys`]; `docs/outputs.md` is generated from this module by
//! [`outputs_markdown`].

pub mod keys;
pub mod summary;
pub mod tables;

use super::format_number;

/// One CSV cell.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Cell {
    /// A real number.
    Num(f64),
    /// A whole number (counts, indices, codes).
    Int(i64),
    /// A yes/no flag, written `true` or `false`.
    Bool(bool),
}

impl Cell {
    /// The cell's text: [`format_number`] for numbers, `true`/`false` for
    /// flags.
    pub fn text(&self) -> String {
        match self {
            Cell::Num(v) => format_number(*v),
            Cell::Int(i) => i.to_string(),
            Cell::Bool(b) => b.to_string(),
        }
    }
}

/// What kind of cell a column holds.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum CellKind {
    /// Real numbers.
    Num,
    /// Whole numbers.
    Int,
    /// `true`/`false`.
    Bool,
}

impl CellKind {
    /// A cell of this kind from a stored number (flags are stored as 1/0).
    pub fn cell(self, v: f64) -> Cell {
        match self {
            CellKind::Num => Cell::Num(v),
            CellKind::Int if v.is_finite() => Cell::Int(v as i64),
            CellKind::Int => Cell::Num(v),
            CellKind::Bool => Cell::Bool(v == 1.0),
        }
    }
}

/// A documented field: a CSV column, a summary key or an array.
#[derive(Clone, Debug, PartialEq)]
pub struct FieldDoc {
    /// Column name, key path or array name.
    pub name: String,
    /// Unit (`1` for a plain number, `-` for text and flags).
    pub unit: &'static str,
    /// What the value is.
    pub meaning: String,
}

/// When a column is written: a description for the documentation and the
/// test on the data.
pub type OnlyWhen<S> = (&'static str, fn(&S) -> bool);

/// One CSV column: name, unit, meaning and how to get the value of row
/// `i` from the data `S`.
pub struct Column<S> {
    /// Header.
    pub name: &'static str,
    /// Unit.
    pub unit: &'static str,
    /// What the value is.
    pub meaning: &'static str,
    /// When the column is written (always when `None`): a description and
    /// the test.
    pub only_when: Option<OnlyWhen<S>>,
    /// The value of row `i`.
    pub value: fn(&S, usize) -> Cell,
}

/// A CSV file written from a column list.
pub struct Table<S> {
    /// File name.
    pub file: &'static str,
    /// Commands that write it.
    pub written_by: &'static str,
    /// What a row is.
    pub rows: &'static str,
    /// Number of rows of the data.
    pub len: fn(&S) -> usize,
    /// The columns, in file order.
    pub columns: Vec<Column<S>>,
}

impl<S> Table<S> {
    /// The columns written for `data`.
    fn present<'t>(&'t self, data: &S) -> Vec<&'t Column<S>> {
        self.columns
            .iter()
            .filter(|c| c.only_when.is_none_or(|(_, f)| f(data)))
            .collect()
    }

    /// Header names written for `data`.
    pub fn headers(&self, data: &S) -> Vec<&'static str> {
        self.present(data).iter().map(|c| c.name).collect()
    }

    /// The file's bytes for `data`.
    pub fn csv(&self, data: &S) -> Vec<u8> {
        let cols = self.present(data);
        let headers: Vec<&str> = cols.iter().map(|c| c.name).collect();
        let rows = (0..(self.len)(data)).map(|i| cols.iter().map(|c| (c.value)(data, i)).collect());
        super::cells_csv_bytes(&headers, rows)
    }

    /// The file's documentation.
    pub fn doc(&self) -> FileDoc {
        FileDoc {
            file: self.file.to_string(),
            written_by: self.written_by,
            about: format!("One row per {}.", self.rows),
            fields: self
                .columns
                .iter()
                .map(|c| FieldDoc {
                    name: c.name.to_string(),
                    unit: c.unit,
                    meaning: match c.only_when {
                        Some((when, _)) => format!("{} (only {when})", c.meaning),
                        None => c.meaning.to_string(),
                    },
                })
                .collect(),
        }
    }
}

/// Documentation of one result file.
#[derive(Clone, Debug, PartialEq)]
pub struct FileDoc {
    /// File name.
    pub file: String,
    /// Commands that write it.
    pub written_by: &'static str,
    /// What the file holds.
    pub about: String,
    /// Its columns, keys or arrays.
    pub fields: Vec<FieldDoc>,
}

fn field_table(out: &mut String, head: &str, fields: &[FieldDoc]) {
    out.push_str(&format!("| {head} | unit | meaning |\n|---|---|---|\n"));
    for f in fields {
        out.push_str(&format!(
            "| `{}` | {} | {} |\n",
            f.name,
            f.unit,
            f.meaning.replace('|', "\\|")
        ));
    }
    out.push('\n');
}

fn section(out: &mut String, title: &str, intro: &str, docs: &[FileDoc], head: &str) {
    out.push_str(&format!("## {title}\n\n{intro}\n\n"));
    for d in docs {
        out.push_str(&format!(
            "### {}\n\nWritten by {}. {}\n\n",
            d.file, d.written_by, d.about
        ));
        field_table(out, head, &d.fields);
    }
}

/// The text of `docs/outputs.md`: every result file with every column,
/// key and array, its unit and meaning.
pub fn outputs_markdown() -> String {
    let mut out = String::from(
        "# Result files\n\n\
         This file is generated from the output schema in `src/output/schema/`; \
         do not edit it by hand. After changing the schema, regenerate it with\n\n\
         ```\nQHEAT_REGEN=1 cargo test --release --test outputs_doc\n```\n\n",
    );
    out.push_str(keys::CONVENTIONS);
    out.push('\n');
    section(
        &mut out,
        "Tables (CSV)",
        "Numbers are written as the shortest decimal that reads back to the same \
         double, whole numbers without a decimal point, never as negative zero, in \
         exponent form only below 1e-4 or from 1e15 on in magnitude; undefined \
         values as `NaN`. Flags are `true` or `false`. A unit `1` is a plain number.",
        &tables::table_docs(),
        "column",
    );
    section(
        &mut out,
        "Arrays (.npy, .npz)",
        "NumPy files, little-endian doubles (complex doubles where stated); \
         axis 0 first.",
        &tables::array_docs(),
        "array",
    );
    section(
        &mut out,
        "summary.json",
        "Every command writes a summary.json into its result folder (the same text \
         is printed with `--json`). Keys are given as paths: `a.b` is key `b` inside \
         object `a`, `a[].b` is key `b` of each element of list `a`. Numbers are \
         JSON numbers (NaN and infinities, which JSON cannot hold, are `null`).",
        &keys::summary_docs(),
        "key",
    );
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn cells_read_like_numbers_people_write() {
        assert_eq!(Cell::Num(0.03).text(), "0.03");
        assert_eq!(Cell::Num(3.0).text(), "3");
        assert_eq!(Cell::Num(-0.0).text(), "0");
        assert_eq!(Cell::Num(-2.5e-7).text(), "-2.5e-7");
        assert_eq!(Cell::Num(1.0e20).text(), "1e20");
        assert_eq!(Cell::Num(123456.75).text(), "123456.75");
        assert_eq!(Cell::Num(f64::NAN).text(), "NaN");
        assert_eq!(Cell::Int(-3).text(), "-3");
        assert_eq!(Cell::Bool(true).text(), "true");
        assert_eq!(CellKind::Bool.cell(0.0).text(), "false");
        for v in [
            0.1,
            1.0 / 3.0,
            -7.25e-5,
            6.02e23,
            1e-300,
            299.99999999999994,
        ] {
            assert_eq!(Cell::Num(v).text().parse::<f64>().unwrap(), v);
        }
    }
}
