//! The generated table: one Vec per column, a generic column view for the data layer, and a
//! deterministic CSV writer.

use std::io::{self, BufWriter, Write};

/// A text column stored as level names plus one code per row (codes index `levels`).
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Coded {
    /// Distinct values, in a fixed, documented order.
    pub levels: Vec<String>,
    /// One index into `levels` per row.
    pub codes: Vec<u32>,
}

impl Coded {
    /// The text value of row `row`.
    pub fn get(&self, row: usize) -> &str {
        &self.levels[self.codes[row] as usize]
    }

    /// The text values of all rows, in row order.
    pub fn iter(&self) -> impl Iterator<Item = &str> + '_ {
        self.codes.iter().map(|&c| self.levels[c as usize].as_str())
    }
}

/// The demo data, one entry per plot and season, rows ordered by plot then season.
/// Float columns already hold the rounded values the CSV shows, so CSV, Parquet and
/// in-memory copies agree exactly.
#[derive(Debug, Clone, PartialEq)]
pub struct OrchardTable {
    /// Plot identifier, 1-based; repeats across seasons.
    pub plot_id: Vec<i64>,
    /// Season label ("2024", "2025", ...).
    pub season: Coded,
    /// Invented district name.
    pub district: Coded,
    /// Invented village code, e.g. "ashvale-07".
    pub village: Coded,
    /// Yield in tonnes per hectare, 2 decimals; the outcome.
    pub yield_t_ha: Vec<f64>,
    /// Field-adviser visits in the season; the focus regressor.
    pub visits: Vec<i64>,
    /// Plot area in hectares, 2 decimals.
    pub area_ha: Vec<f64>,
    /// Mean tree age in years, 1 decimal.
    pub tree_age: Vec<f64>,
    /// Soil pH, 2 decimals; `None` where not measured (about 2%).
    pub soil_ph: Vec<Option<f64>>,
    /// Terrain slope in per cent, 1 decimal.
    pub slope_pct: Vec<f64>,
    /// Grower's years of experience.
    pub experience_yrs: Vec<i64>,
    /// 1 if the plot is irrigated, else 0.
    pub irrigated: Vec<i64>,
    /// 1 if the plot is certified organic, else 0.
    pub organic: Vec<i64>,
    /// Invented fruit variety name.
    pub variety: Coded,
}

/// Column names in CSV order; fixed, everyone uses them.
pub const COLUMN_NAMES: [&str; 14] = [
    "plot_id",
    "season",
    "district",
    "village",
    "yield_t_ha",
    "visits",
    "area_ha",
    "tree_age",
    "soil_ph",
    "slope_pct",
    "experience_yrs",
    "irrigated",
    "organic",
    "variety",
];

/// Borrowed values of one column, by storage type.
#[derive(Debug, Clone, Copy)]
pub enum ColumnValues<'a> {
    /// Floating-point values, none missing.
    Float(&'a [f64]),
    /// Floating-point values, `None` = missing.
    FloatOpt(&'a [Option<f64>]),
    /// Integer values, none missing.
    Int(&'a [i64]),
    /// Text values as levels and per-row codes (see [`Coded::iter`]).
    Text(&'a Coded),
}

/// One named column of an [`OrchardTable`].
#[derive(Debug, Clone, Copy)]
pub struct Column<'a> {
    /// Column name, one of [`COLUMN_NAMES`].
    pub name: &'static str,
    /// The values.
    pub values: ColumnValues<'a>,
}

/// Decimal places written for each float column (other columns are integers or text).
const YIELD_DECIMALS: usize = 2;
const AREA_DECIMALS: usize = 2;
const TREE_AGE_DECIMALS: usize = 1;
const SOIL_PH_DECIMALS: usize = 2;
const SLOPE_DECIMALS: usize = 1;

/// Rounds to the precision the CSV shows, so stored values and written text agree.
pub(crate) fn round_to(x: f64, decimals: usize) -> f64 {
    let scale = 10f64.powi(decimals as i32);
    (x * scale).round() / scale
}

/// Decimal places of each rounded float column, used by the generator.
pub(crate) mod precision {
    pub(crate) const YIELD: usize = super::YIELD_DECIMALS;
    pub(crate) const AREA: usize = super::AREA_DECIMALS;
    pub(crate) const TREE_AGE: usize = super::TREE_AGE_DECIMALS;
    pub(crate) const SOIL_PH: usize = super::SOIL_PH_DECIMALS;
    pub(crate) const SLOPE: usize = super::SLOPE_DECIMALS;
}

impl OrchardTable {
    /// Number of rows.
    pub fn len(&self) -> usize {
        self.plot_id.len()
    }

    /// True if the table has no rows.
    pub fn is_empty(&self) -> bool {
        self.plot_id.is_empty()
    }

    /// All columns, in [`COLUMN_NAMES`] order, for turning the table into a data frame.
    pub fn columns(&self) -> Vec<Column<'_>> {
        use ColumnValues::{Float, FloatOpt, Int, Text};
        let values = [
            Int(&self.plot_id),
            Text(&self.season),
            Text(&self.district),
            Text(&self.village),
            Float(&self.yield_t_ha),
            Int(&self.visits),
            Float(&self.area_ha),
            Float(&self.tree_age),
            FloatOpt(&self.soil_ph),
            Float(&self.slope_pct),
            Int(&self.experience_yrs),
            Int(&self.irrigated),
            Int(&self.organic),
            Text(&self.variety),
        ];
        COLUMN_NAMES
            .iter()
            .zip(values)
            .map(|(&name, values)| Column { name, values })
            .collect()
    }

    /// Writes the table as CSV: a header row, `\n` line ends, fixed decimals (yield, area and
    /// soil pH 2; tree age and slope 1), and an empty cell for missing soil pH.
    ///
    /// Written by hand rather than with a CSV crate because every cell is a number or a plain
    /// lower-case word (letters, digits, '-') with no commas, quotes or line breaks, so no
    /// quoting or escaping is ever needed. Rust's float formatting with a fixed precision is
    /// exact and platform-independent, so equal tables give equal bytes.
    pub fn write_csv(&self, w: impl Write) -> io::Result<()> {
        let mut w = BufWriter::new(w);
        writeln!(w, "{}", COLUMN_NAMES.join(","))?;
        for i in 0..self.len() {
            write!(
                w,
                "{},{},{},{},{:.yd$},{},{:.ad$},{:.td$},",
                self.plot_id[i],
                self.season.get(i),
                self.district.get(i),
                self.village.get(i),
                self.yield_t_ha[i],
                self.visits[i],
                self.area_ha[i],
                self.tree_age[i],
                yd = YIELD_DECIMALS,
                ad = AREA_DECIMALS,
                td = TREE_AGE_DECIMALS,
            )?;
            if let Some(ph) = self.soil_ph[i] {
                write!(w, "{ph:.SOIL_PH_DECIMALS$}")?;
            }
            writeln!(
                w,
                ",{:.sd$},{},{},{},{}",
                self.slope_pct[i],
                self.experience_yrs[i],
                self.irrigated[i],
                self.organic[i],
                self.variety.get(i),
                sd = SLOPE_DECIMALS,
            )?;
        }
        w.flush()
    }
}
