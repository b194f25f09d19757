//! Small parsers of option texts shared by the run library and the command line.

/// Parses `sep`-separated finite numbers; `what` names the option in messages.
pub fn numbers(what: &str, text: &str, sep: char) -> Result<Vec<f64>, String> {
    text.split(sep)
        .map(|s| {
            let s = s.trim();
            s.parse::<f64>()
                .map_err(|_| format!("{what}: '{s}' is not a number"))
                .and_then(|v| {
                    if v.is_finite() {
                        Ok(v)
                    } else {
                        Err(format!("{what}: '{s}' is not finite"))
                    }
                })
        })
        .collect()
}
