//! CSV reader for hybrid regressor logs.

use super::Log;
use crate::error::InputError;
use crate::limits;
use std::path::Path;

/// Parses a log from its text. `p` is the parameter dimension the problem
/// declares; `path` is used in messages only.
///
/// # Errors
/// As [`parse_log_within`] with no bound on `|ψ|²`.
pub fn parse_log(path: &Path, text: &str, p: usize) -> Result<Log, InputError> {
    parse_log_within(path, text, p, f64::INFINITY)
}

/// One data line of a log: its 1-based line number and its fields.
struct Row<'a> {
    line: usize,
    fields: Vec<&'a str>,
}

/// The data lines of a CSV text: blank lines and lines starting with `#`
/// skipped, fields split at commas and trimmed (a field in double quotes
/// loses them). Every row keeps its own line number.
fn rows(text: &str) -> impl Iterator<Item = Row<'_>> {
    text.split('\n').enumerate().filter_map(|(k, raw)| {
        let line = raw.strip_suffix('\r').unwrap_or(raw).trim();
        if line.is_empty() || line.starts_with('#') {
            return None;
        }
        let fields = line
            .split(',')
            .map(|f| {
                let f = f.trim();
                f.strip_prefix('"')
                    .and_then(|g| g.strip_suffix('"'))
                    .map_or(f, str::trim)
            })
            .collect();
        Some(Row {
            line: k + 1,
            fields,
        })
    })
}

/// Like [`parse_log`], rejecting a row whose `|ψ|²` exceeds `max_square`
/// (the load passes `MAX_STIFFNESS / flow_gain`, see [`crate::limits`]).
///
/// # Errors
/// An [`InputError`] naming the line for: a header other than
/// `t,j,psi1..psiP[,y]`, a wrong column count, a value that is not a finite
/// number or lies outside the accepted ranges ([`crate::limits`]), a jump
/// counter that is not a whole number or does not step by 0 or 1, time
/// going backwards within a flow, a jump whose two rows disagree on `t`,
/// or fewer than two rows.
///
/// # Complexity
/// O(rows · p).
// Long function: A line-by-line reader whose every branch names the file, the line and
// what was expected; splitting it would scatter those messages.
pub fn parse_log_within(
    path: &Path,
    text: &str,
    p: usize,
    max_square: f64,
) -> Result<Log, InputError> {
    let mut records = rows(text.strip_prefix('\u{feff}').unwrap_or(text));
    let Some(header) = records.next() else {
        return Err(InputError::whole(
            path,
            "the log is empty; expected a header line `t,j,psi1,...`",
        ));
    };
    let header_line = header.line;
    let expected: Vec<String> = ["t", "j"]
        .iter()
        .map(|s| s.to_string())
        .chain((1..=p).map(|k| format!("psi{k}")))
        .collect();
    let names = &header.fields;
    let has_y = names.len() == expected.len() + 1 && names.last() == Some(&"y");
    let header_ok = names.len() >= expected.len()
        && names[..expected.len()]
            .iter()
            .zip(&expected)
            .all(|(a, b)| a == b)
        && (names.len() == expected.len() || has_y);
    if !header_ok {
        let found_psi = names.iter().filter(|n| n.starts_with("psi")).count();
        let hint = if found_psi != p {
            format!(
                " (the problem declares parameters = {p}, the header has {found_psi} psi columns)"
            )
        } else {
            String::new()
        };
        return Err(InputError::at(
            path,
            header_line,
            format!(
                "expected the header `{}` optionally followed by `,y`, found `{}`{hint}",
                expected.join(","),
                names.join(",")
            ),
        ));
    }
    let columns = names.len();

    let mut log = Log {
        path: path.to_path_buf(),
        p,
        t: Vec::new(),
        j: Vec::new(),
        psi: Vec::new(),
        y: has_y.then(Vec::new),
    };
    let mut prev_line = header_line;
    for Row { line, fields: rec } in records {
        if rec.len() != columns {
            return Err(InputError::at(
                path,
                line,
                format!(
                    "expected {columns} columns like the header, found {}",
                    rec.len()
                ),
            ));
        }
        let t = number(path, line, "t", rec[0], limits::MAX_TIME, " s")?;
        let j = jump_counter(path, line, rec[1])?;
        let mut square = 0.0;
        for k in 0..p {
            let column = format!("psi{}", k + 1);
            let v = number(path, line, &column, rec[2 + k], limits::MAX_SAMPLE, "")?;
            square += v * v;
            log.psi.push(v);
        }
        if square > max_square {
            return Err(InputError::at(
                path,
                line,
                format!(
                    "|psi|² = {square:.4e} makes flow_gain·|psi|² exceed {:e} 1/s (a time \
                     constant below 0.1 ms, which the certificate cannot step through in \
                     bounded work); expected a smaller regressor (normalise it) or a \
                     smaller flow_gain (docs/formats.md, \"Accepted ranges\")",
                    limits::MAX_STIFFNESS
                ),
            ));
        }
        if let Some(y) = log.y.as_mut() {
            y.push(number(path, line, "y", rec[2 + p], limits::MAX_OUTPUT, "")?);
        }
        if let (Some(&pt), Some(&pj)) = (log.t.last(), log.j.last()) {
            if j == pj {
                if t < pt {
                    return Err(InputError::at(
                        path,
                        line,
                        format!(
                            "time goes backwards: t = {t} after t = {pt} (line {prev_line}); expected t non-decreasing within a flow"
                        ),
                    ));
                }
            } else if pj.checked_add(1) == Some(j) {
                if t != pt {
                    return Err(InputError::at(
                        path,
                        line,
                        format!(
                            "inconsistent jump: j steps from {pj} to {j} but t = {t} differs from t = {pt} on line {prev_line}; a jump's two rows must share t"
                        ),
                    ));
                }
            } else {
                return Err(InputError::at(
                    path,
                    line,
                    format!("j goes from {pj} to {j}; expected it to stay or to increase by 1"),
                ));
            }
        }
        log.t.push(t);
        log.j.push(j);
        prev_line = line;
    }
    if log.t.len() < 2 {
        return Err(InputError::whole(path, "expected at least two data rows"));
    }
    Ok(log)
}

fn number(
    path: &Path,
    line: usize,
    column: &str,
    field: &str,
    max: f64,
    unit: &str,
) -> Result<f64, InputError> {
    match field.parse::<f64>() {
        Ok(v) if v.is_finite() && v.abs() <= max => Ok(v),
        Ok(v) if v.is_finite() => Err(InputError::at(
            path,
            line,
            format!(
                "column {column}: {field} is outside the accepted range; expected |{column}| ≤ {max:e}{unit} (docs/formats.md, \"Accepted ranges\")"
            ),
        )),
        Ok(_) => Err(InputError::at(
            path,
            line,
            format!("column {column}: expected a finite number, found `{field}`"),
        )),
        Err(_) => Err(InputError::at(
            path,
            line,
            format!("column {column}: expected a number, found `{field}`"),
        )),
    }
}

fn jump_counter(path: &Path, line: usize, field: &str) -> Result<u32, InputError> {
    field.parse::<u32>().map_err(|_| {
        InputError::at(
            path,
            line,
            format!("column j: expected a whole number ≥ 0 (the jump counter), found `{field}`"),
        )
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn parse(text: &str, p: usize) -> Result<Log, InputError> {
        parse_log(Path::new("u.csv"), text, p)
    }

    #[test]
    fn reads_flows_and_jumps() {
        let log = parse(
            "# unit\nt,j,psi1,psi2,y\n0,0,1,0,2\n1,0,0,1,3\n1,1,5,5,0\n2,1,0,0,0\n",
            2,
        )
        .unwrap();
        assert_eq!(log.len(), 4);
        let flows: Vec<_> = log
            .flow_pieces()
            .map(|f| (f.start, f.end, f.psi.to_vec()))
            .collect();
        assert_eq!(
            flows,
            vec![(0.0, 1.0, vec![1.0, 0.0]), (1.0, 2.0, vec![5.0, 5.0])]
        );
        let jumps: Vec<_> = log.jumps().map(|e| (e.time, e.psi.to_vec())).collect();
        assert_eq!(jumps, vec![(1.0, vec![0.0, 1.0])]);
        assert_eq!(log.y.as_ref().unwrap()[1], 3.0);
    }

    #[test]
    fn comment_lines_keep_line_numbers() {
        let e = parse("# a\n# b\nt,j,psi1\n0,0,1\n1,0,x\n", 1).unwrap_err();
        assert_eq!(e.line, Some(5));
    }

    #[test]
    fn rejects_bad_rows() {
        let cases = [
            ("t,j,psi1\n0,0,1\n1,0\n", 3, "columns"),
            ("t,j,psi1\n0,0,NaN\n1,0,1\n", 2, "finite"),
            ("t,j,psi1\n0,0,1\n1,0,inf\n", 3, "finite"),
            ("t,j,psi1\n1,0,1\n0.5,0,1\n", 3, "backwards"),
            ("t,j,psi1\n0,0,1\n1,1,1\n", 3, "share t"),
            ("t,j,psi1\n0,0,1\n1,0,1\n1,2,1\n", 4, "increase by 1"),
            ("t,j,psi1\n0,-1,1\n", 2, "whole number"),
            ("t,j,psi1,psi2\n0,0,1,1\n", 1, "parameters = 1"),
        ];
        for (text, line, needle) in cases {
            let e = parse(text, 1).unwrap_err();
            assert_eq!(e.line, Some(line), "{text}");
            assert!(e.message.contains(needle), "{}", e.message);
        }
    }
}
