//! The document of `beadline path`: the ball's path in time order and the strays.

use super::{SCHEMA_VERSION, csv_rows};
use crate::core::numbers::cells;
use crate::core::words::{count, name};
use crate::track::{PathPoint, PathResult, Stray};
use serde::{Deserialize, Serialize};

/// `beadline path --format json`: the best path first, then any other (a second ball).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PathDoc {
    /// Schema version.
    pub schema_version: u32,
    /// The photo.
    pub file: String,
    /// The ball's path in time order; n = 0 is the first image found.
    pub path: Vec<PathPoint>,
    /// Flash indexes with no image.
    pub missing: Vec<usize>,
    /// Further paths (another ball), each with its points and missing flashes.
    pub other_paths: Vec<crate::track::BallPath>,
    /// Spots on no path, with the reason.
    pub strays: Vec<Stray>,
}

impl PathDoc {
    /// Build the document from the ordering result.
    pub fn new(file: &str, result: &PathResult) -> PathDoc {
        let mut paths = result.paths.iter();
        let first = paths.next();
        PathDoc {
            schema_version: SCHEMA_VERSION,
            file: file.to_string(),
            path: first.map(|p| p.points.clone()).unwrap_or_default(),
            missing: first.map(|p| p.missing.clone()).unwrap_or_default(),
            other_paths: paths.cloned().collect(),
            strays: result.strays.clone(),
        }
    }

    /// Text for a person.
    pub fn text(&self) -> String {
        let mut s = format!(
            "{}: path of {}, {}, {}, {}\n",
            self.file,
            count(self.path.len(), "image", "images"),
            missing_words(&self.missing),
            count(self.other_paths.len(), "other path", "other paths"),
            count(self.strays.len(), "stray", "strays")
        );
        // Centres to the digits their sigma warrants (crate::core::numbers::cells).
        s += "    n       x_px       y_px    r_px  sigma_px\n";
        for p in &self.path {
            let (x, sigma) = cells(p.x_px, p.sigma_px, 3);
            let (y, _) = cells(p.y_px, p.sigma_px, 3);
            s += &format!("{:5} {x:>10} {y:>10} {:7.3} {sigma:>9}\n", p.n, p.r_px);
        }
        for st in &self.strays {
            s += &format!(
                "stray {:9.3} {:9.3}  {}\n",
                st.x_px,
                st.y_px,
                name(&st.reason)
            );
        }
        s
    }

    /// CSV of the path.
    pub fn csv(&self) -> std::io::Result<String> {
        csv_rows(&self.path)
    }
}

/// The missing flashes in words, as `measure` counts them: "0 flashes missing", or
/// "2 flashes missing (n 4, 7)".
pub fn missing_words(missing: &[usize]) -> String {
    let counted = count(missing.len(), "flash missing", "flashes missing");
    if missing.is_empty() {
        return counted;
    }
    let list: Vec<String> = missing.iter().map(|n| n.to_string()).collect();
    format!("{counted} (n {})", list.join(", "))
}
