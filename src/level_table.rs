//! A well's liquid volume as a function of its level, from a table of rows (height above the
//! well's bottom, volume held up to that height).
//!
//! Between rows the volume is interpolated linearly, so the well is taken as a stack of prisms:
//! the wetted cross-section dV/dh is constant within each row interval and jumps at the rows.
//! For a measured or CAD-exported table this is the reading that adds nothing to the data; a
//! smooth well (a cone, a pipette tip) is matched to second order in the row spacing Δh (the
//! volume error of a chord is at most Δh²/8·max|V''|; for a frustum V'' = dA/dh). Above the
//! last row the well is full: rillnet does not extrapolate, the time evolution stops there
//! and says so. Below the bottom (h < 0) the well is empty.
//!
//! The table knows nothing of networks or fluids: heights in metres, volumes in cubic metres.

/// Why a table was refused: the zero-based row and what is wrong with it.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[error("row {row}: {problem}")]
pub struct TableError {
    /// Zero-based row index (the first row is 0).
    pub row: usize,
    pub problem: String,
}

/// Volume against height above a well's bottom: at least two rows, the first at height 0
/// with volume 0, heights and volumes strictly increasing.
///
/// ```
/// use rillnet::level_table::LevelTable;
/// // A stepped well: 2 mm² up to 1 mm, then 6 mm² up to 3 mm.
/// let t = LevelTable::new(vec![(0.0, 0.0), (1e-3, 2e-9), (3e-3, 14e-9)]).unwrap();
/// assert!((t.volume(2e-3) - 8e-9).abs() < 1e-24);
/// assert_eq!(t.area(0.5e-3), 2e-6);
/// assert_eq!(t.area(2e-3), 6e-6);
/// ```
#[derive(Clone, Debug, PartialEq)]
pub struct LevelTable {
    heights: Vec<f64>,
    volumes: Vec<f64>,
}

impl LevelTable {
    /// Check and hold the rows `(height above the bottom [m], volume [m³])`.
    pub fn new(rows: Vec<(f64, f64)>) -> Result<Self, TableError> {
        let bad = |row: usize, problem: String| Err(TableError { row, problem });
        if rows.len() < 2 {
            return bad(
                rows.len().saturating_sub(1),
                format!(
                    "a level–volume table needs at least two rows, the first at the well's \
                     bottom [0 mm, 0 uL]; got {}",
                    rows.len()
                ),
            );
        }
        for (i, &(h, v)) in rows.iter().enumerate() {
            if !(h.is_finite() && v.is_finite()) {
                return bad(i, format!("level {h} m and volume {v} m^3 must be finite"));
            }
        }
        if rows[0] != (0.0, 0.0) {
            return bad(
                0,
                format!(
                    "the first row is the well's bottom and must be [0 mm, 0 uL] (levels are \
                     measured from the bottom, volumes are the liquid above it); got \
                     [{} m, {} m^3]",
                    rows[0].0, rows[0].1
                ),
            );
        }
        for i in 1..rows.len() {
            let ((h0, v0), (h1, v1)) = (rows[i - 1], rows[i]);
            if h1 <= h0 {
                return bad(
                    i,
                    format!(
                        "levels must increase from row to row: {h1} m follows {h0} m; sort the \
                         rows by level and remove repeated levels"
                    ),
                );
            }
            if v1 <= v0 {
                return bad(
                    i,
                    format!(
                        "volumes must increase with level: {v1} m^3 at {h1} m follows {v0} m^3 \
                         at {h0} m (a well holds more liquid the fuller it is)"
                    ),
                );
            }
        }
        let (heights, volumes) = rows.into_iter().unzip();
        Ok(LevelTable { heights, volumes })
    }

    /// Height of the last row: the well is full there [m].
    pub fn top(&self) -> f64 {
        self.heights[self.heights.len() - 1]
    }

    /// The row interval holding h (clamped to the first and last interval).
    fn interval(&self, h: f64) -> usize {
        let upper = self.heights.partition_point(|&x| x <= h);
        upper.clamp(1, self.heights.len() - 1) - 1
    }

    /// Wetted cross-section dV/dh at height h above the bottom [m²]: the slope of the row
    /// interval holding h (the first interval below the bottom, the last above the top; at a
    /// row, the interval above it).
    pub fn area(&self, h: f64) -> f64 {
        let i = self.interval(h);
        (self.volumes[i + 1] - self.volumes[i]) / (self.heights[i + 1] - self.heights[i])
    }

    /// Volume held at height h above the bottom [m³], linear between rows and continued with
    /// the end intervals' slopes outside the table (so a Newton iteration that strays just
    /// past an end stays smooth; callers stop at the ends).
    pub fn volume(&self, h: f64) -> f64 {
        let i = self.interval(h);
        self.volumes[i] + self.area(h) * (h - self.heights[i])
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn refuses_bad_rows_with_their_index() {
        let e = LevelTable::new(vec![(0.0, 0.0), (1.0, 1.0), (0.5, 2.0)]).unwrap_err();
        assert_eq!(e.row, 2);
        assert!(e.problem.contains("levels must increase"), "{e}");
        let e = LevelTable::new(vec![(0.0, 0.0), (1.0, 1.0), (2.0, 1.0)]).unwrap_err();
        assert_eq!(e.row, 2);
        assert!(e.problem.contains("volumes must increase"), "{e}");
        let e = LevelTable::new(vec![(0.1, 0.0), (1.0, 1.0)]).unwrap_err();
        assert_eq!(e.row, 0);
        assert!(LevelTable::new(vec![(0.0, 0.0)]).is_err());
        assert!(LevelTable::new(vec![(0.0, 0.0), (f64::NAN, 1.0)]).is_err());
    }

    #[test]
    fn volume_is_continuous_and_area_is_its_slope() {
        let t = LevelTable::new(vec![(0.0, 0.0), (1.0, 2.0), (3.0, 14.0), (4.0, 15.0)]).unwrap();
        for &row in &[1.0, 3.0] {
            let below = t.volume(row - 1e-12);
            let above = t.volume(row + 1e-12);
            assert!((below - above).abs() < 1e-10);
        }
        for k in 0..400 {
            let h = -0.5 + k as f64 * 0.0125;
            let d = 1e-7;
            let slope = (t.volume(h + d) - t.volume(h - d)) / (2.0 * d);
            // Away from rows the centred difference of a linear piece is exact to rounding.
            if [0.0, 1.0, 3.0, 4.0].iter().all(|r| (h - r).abs() > 2e-7) {
                assert!((slope - t.area(h)).abs() < 1e-6, "h {h}");
            }
        }
        assert_eq!(t.top(), 4.0);
        assert_eq!(t.volume(4.0), 15.0);
    }
}
