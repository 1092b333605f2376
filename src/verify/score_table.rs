//! CRPS and the tie-free PIT of weighted ensembles given on stdin, for the comparison with an
//! independent scoring library (tests/ref/check_scores.py runs `trackswing score-table` and
//! compares with `properscoring`).
//!
//! Input: one ensemble per line, numbers separated by spaces: the observation, then value and
//! weight pairs (`y x₁ w₁ x₂ w₂ …`). Output: one line per ensemble, `crps F(y⁻) F(y)` at full
//! precision ([`super::scores::crps`], [`super::scores::cdf_at`]).

use super::scores::{cdf_at, crps};
use std::io::{BufRead, Write};

/// Why the table cannot be made.
#[derive(Debug, thiserror::Error)]
pub enum ScoreTableError {
    /// A line is not `y x₁ w₁ …`.
    #[error("score table: line {line}: {what}")]
    Line {
        /// 1-based line.
        line: usize,
        /// What is wrong.
        what: String,
    },
    /// Reading or writing failed.
    #[error("score table: {0}")]
    Io(#[from] std::io::Error),
}

/// Reads ensembles from `input` and writes their scores to `output`.
pub fn score_table(input: impl BufRead, mut output: impl Write) -> Result<(), ScoreTableError> {
    for (k, line) in input.lines().enumerate() {
        let line = line?;
        if line.trim().is_empty() {
            continue;
        }
        let bad = |what: String| ScoreTableError::Line { line: k + 1, what };
        let v: Vec<f64> = line
            .split_whitespace()
            .map(|t| {
                t.parse::<f64>()
                    .map_err(|_| bad(format!("'{t}' is not a number")))
            })
            .collect::<Result<_, _>>()?;
        if v.len() < 3 || v.len().is_multiple_of(2) {
            return Err(bad(
                "expected the observation, then value and weight pairs".into()
            ));
        }
        let pairs: Vec<(f64, f64)> = v[1..].chunks(2).map(|c| (c[0], c[1])).collect();
        let (below, at) = cdf_at(&pairs, v[0]);
        writeln!(
            output,
            "{:e} {:e} {:e}",
            crps(&pairs, v[0]),
            below,
            below + at
        )?;
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_line_in_a_line_out() {
        let mut out = Vec::new();
        score_table("1 0 0.5 2 0.5\n\n3 3 1\n".as_bytes(), &mut out).unwrap();
        assert_eq!(
            String::from_utf8(out).unwrap(),
            "5e-1 5e-1 5e-1\n0e0 0e0 1e0\n"
        );
        let e = score_table("1 0\n".as_bytes(), Vec::new()).unwrap_err();
        assert!(e.to_string().contains("line 1"), "{e}");
    }
}
