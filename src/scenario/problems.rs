//! Input problems: what is wrong, where, and how to fix it.

use std::fmt;

/// Most problems listed in one error; the rest are counted.
pub const MAX_LISTED: usize = 50;

/// Where in a file a problem is.
#[derive(Clone, Debug, PartialEq, Eq)]
pub enum Location {
    /// The whole file.
    File,
    /// A 1-based line of a CSV file (the header is line 1).
    Line(u64),
    /// A GeoJSON feature: 0-based index and its `id` property when readable.
    Feature {
        /// Index in `features`.
        index: usize,
        /// The `id` property, if any.
        id: Option<String>,
    },
    /// A JSON key path such as `agent.shelf_life_hours`.
    Key(String),
}

/// One thing wrong with the input.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Problem {
    /// File name inside the scenario folder, e.g. `supply.csv`.
    pub file: String,
    /// Where in the file.
    pub location: Location,
    /// Column or key, when the problem is about one.
    pub field: Option<String>,
    /// The offending value as written, when there is one.
    pub value: Option<String>,
    /// The rule broken and how to fix it.
    pub message: String,
}

impl fmt::Display for Problem {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{}", self.file)?;
        match &self.location {
            Location::File => {}
            Location::Line(n) => write!(f, ":{n}")?,
            Location::Feature { index, id } => match id {
                Some(id) => write!(f, ": feature {index} (id '{id}')")?,
                None => write!(f, ": feature {index}")?,
            },
            Location::Key(k) => write!(f, ": key '{k}'")?,
        }
        f.write_str(":")?;
        if let Some(field) = &self.field {
            write!(f, " field '{field}':")?;
        }
        if let Some(value) = &self.value {
            write!(f, " value '{value}':")?;
        }
        write!(f, " {}", self.message)
    }
}

/// Something worth a look that does not stop planning.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Warning {
    /// File name inside the scenario folder.
    pub file: String,
    /// Where in the file.
    pub location: Location,
    /// What to look at.
    pub message: String,
}

impl fmt::Display for Warning {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let p = Problem {
            file: self.file.clone(),
            location: self.location.clone(),
            field: None,
            value: None,
            message: self.message.clone(),
        };
        write!(f, "{p}")
    }
}

/// The scenario cannot be planned: every problem found (up to [`MAX_LISTED`]).
#[derive(Clone, Debug, PartialEq, Eq, thiserror::Error)]
pub struct InputError {
    /// Problems, in file order.
    pub problems: Vec<Problem>,
    /// Problems found past [`MAX_LISTED`] and not listed.
    pub omitted: usize,
}

impl InputError {
    /// An error holding one problem.
    pub fn single(problem: Problem) -> Self {
        InputError {
            problems: vec![problem],
            omitted: 0,
        }
    }

    /// Collects problems, keeping the first [`MAX_LISTED`].
    pub fn from_problems(mut problems: Vec<Problem>) -> Self {
        let omitted = problems.len().saturating_sub(MAX_LISTED);
        problems.truncate(MAX_LISTED);
        InputError { problems, omitted }
    }
}

impl fmt::Display for InputError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let n = self.problems.len() + self.omitted;
        writeln!(
            f,
            "the scenario has {n} problem{}:",
            if n == 1 { "" } else { "s" }
        )?;
        for p in &self.problems {
            writeln!(f, "  {p}")?;
        }
        if self.omitted > 0 {
            writeln!(f, "  … and {} more", self.omitted)?;
        }
        Ok(())
    }
}
