//! Outline files: plain text, one `x y` pair per line, loops separated by blank lines.
//!
//! The first loop is the outer outline, later loops are holes. `#` starts a comment; commas
//! may separate the two numbers. A loop may repeat its first point at the end.

use super::shape::{Point, Shape};
use super::GeometryError;
use std::path::Path;

/// Reads an outline file into an outer polygon and hole polygons.
pub fn read_outline(path: &Path) -> Result<(Shape, Vec<Shape>), GeometryError> {
    let text = std::fs::read_to_string(path).map_err(|e| GeometryError::OutlineRead {
        path: path.to_path_buf(),
        reason: e.to_string(),
    })?;
    parse_outline(&text, path)
}

/// Parses outline text; `path` only names the source in messages.
pub fn parse_outline(text: &str, path: &Path) -> Result<(Shape, Vec<Shape>), GeometryError> {
    let syntax = |line: usize, reason: String| GeometryError::OutlineSyntax {
        path: path.to_path_buf(),
        line,
        reason,
    };
    // Editors on some systems start text files with an invisible byte-order mark.
    let text = text.strip_prefix('\u{feff}').unwrap_or(text);
    let mut loops: Vec<(usize, Vec<Point>)> = Vec::new();
    let mut current: Vec<Point> = Vec::new();
    let mut start_line = 0;
    for (i, raw) in text.lines().enumerate() {
        let line_no = i + 1;
        let content = raw.split('#').next().unwrap_or("").trim();
        if content.is_empty() {
            // A blank line ends a loop; a comment-only line does not.
            if raw.trim().is_empty() && !current.is_empty() {
                loops.push((start_line, std::mem::take(&mut current)));
            }
            continue;
        }
        let fields: Vec<&str> = content
            .split(|c: char| c == ',' || c.is_whitespace())
            .filter(|f| !f.is_empty())
            .collect();
        if fields.len() != 2 {
            return Err(syntax(
                line_no,
                format!(
                    "expected two numbers 'x y', found {} fields in '{content}'",
                    fields.len()
                ),
            ));
        }
        let mut xy = [0.0; 2];
        for (d, f) in fields.iter().enumerate() {
            xy[d] = match f.parse::<f64>() {
                Ok(v) if v.is_finite() => v,
                Ok(_) => return Err(syntax(line_no, format!("'{f}' is not a finite number"))),
                Err(_) => return Err(syntax(line_no, format!("'{f}' is not a number"))),
            };
        }
        if current.is_empty() {
            start_line = line_no;
        }
        current.push(xy);
    }
    if !current.is_empty() {
        loops.push((start_line, current));
    }
    if loops.is_empty() {
        return Err(syntax(1, "the file holds no points".into()));
    }
    let mut shapes = Vec::new();
    for (k, (line, mut pts)) in loops.into_iter().enumerate() {
        if pts.len() > 1 && pts.first() == pts.last() {
            pts.pop();
        }
        let shape = Shape::Polygon { points: pts };
        let role = if k == 0 {
            "outer loop".to_string()
        } else {
            format!("hole {k}")
        };
        shape
            .check_numbers(&role)
            .map_err(|reason| syntax(line, format!("loop starting here: {reason}")))?;
        shapes.push(shape);
    }
    let outer = shapes.remove(0);
    Ok((outer, shapes))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn parses_loops_comments_and_commas() {
        let text = "# plate\n0 0\n4,0\n4 4\n0 4\n0 0\n\n1 1\n2 1 # well\n2 2\n";
        let (outer, holes) = parse_outline(text, Path::new("o.txt")).unwrap();
        assert_eq!(
            outer,
            Shape::Polygon {
                points: vec![[0.0, 0.0], [4.0, 0.0], [4.0, 4.0], [0.0, 4.0]]
            }
        );
        assert_eq!(holes.len(), 1);
    }

    #[test]
    fn reports_the_bad_line() {
        let err = parse_outline("0 0\n1 0\n1 x\n", Path::new("o.txt")).unwrap_err();
        assert_eq!(err.to_string(), "o.txt:3: 'x' is not a number");
        let err = parse_outline("0 0\n1 0 2\n", Path::new("o.txt")).unwrap_err();
        assert!(err.to_string().starts_with("o.txt:2: expected two numbers"));
        let err = parse_outline("0 0\n1 0\n\n5 5\n6 6\n7 7\n", Path::new("o.txt")).unwrap_err();
        assert!(
            err.to_string().starts_with("o.txt:1: loop starting here"),
            "{err}"
        );
        let err = parse_outline("# nothing\n", Path::new("o.txt")).unwrap_err();
        assert!(err.to_string().contains("no points"));
    }
}
