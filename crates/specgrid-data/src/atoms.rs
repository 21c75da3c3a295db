//! Row validity: which rows a term, outcome or cluster column can use. A numeric column under a
//! transform is valid where present and where the transform is defined; any other column is valid
//! where present.

use specgrid_study::{Term, Transform};

use crate::error::DataError;
use crate::loaded::LoadedData;

/// One validity requirement on a source column.
#[derive(Debug, Clone, PartialEq)]
pub enum Atom {
    /// A numeric column under a transform.
    Numeric {
        /// Source column.
        column: String,
        /// Transform.
        transform: Transform,
    },
    /// A column that must only be present (categorical or cluster column).
    Present {
        /// Source column.
        column: String,
    },
}

impl Atom {
    /// The source column.
    pub fn column(&self) -> &str {
        match self {
            Atom::Numeric { column, .. } | Atom::Present { column } => column,
        }
    }

    /// Per row: is the atom valid there?
    pub fn valid_rows(&self, data: &LoadedData) -> Result<Vec<bool>, DataError> {
        Ok(match self {
            Atom::Numeric { column, transform } => data
                .numbers(column)?
                .iter()
                .map(|x| x.is_some_and(|x| crate::transform::is_defined(transform, x)))
                .collect(),
            Atom::Present { column } => {
                let c = data.column(column)?;
                (0..data.n_rows).map(|r| c.is_present(r)).collect()
            }
        })
    }
}

/// Adds the atoms of a term (without duplicates).
pub fn term_atoms(term: &Term, out: &mut Vec<Atom>) {
    match term {
        Term::Numeric { column, transform } => push_unique(
            out,
            Atom::Numeric {
                column: column.clone(),
                transform: validity_class(transform),
            },
        ),
        Term::Weights { column, .. } => push_unique(
            out,
            Atom::Numeric {
                column: column.clone(),
                transform: validity_class(&specgrid_study::Transform::Level),
            },
        ),
        Term::Categorical { column, .. } | Term::Absorbed { column } => push_unique(
            out,
            Atom::Present {
                column: column.clone(),
            },
        ),
        Term::Product(a, b) => {
            term_atoms(a, out);
            term_atoms(b, out);
        }
    }
}

/// Adds one atom unless an equal one is already there.
pub fn push_unique(out: &mut Vec<Atom>, atom: Atom) {
    if !out.contains(&atom) {
        out.push(atom);
    }
}

/// Transforms with the same domain share one atom: only log and log1p restrict rows.
pub fn validity_class(transform: &Transform) -> Transform {
    match transform {
        Transform::Log => Transform::Log,
        Transform::Log1p => Transform::Log1p,
        _ => Transform::Level,
    }
}
