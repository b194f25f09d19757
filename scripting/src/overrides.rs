//! Parameter overrides (`name=value`), shared by every command that runs a model.

use thiserror::Error;

/// A bad override.
#[derive(Debug, Error, Clone, PartialEq)]
pub enum OverrideError {
    /// Not of the form `name=value`.
    #[error("--set `{text}`: expected name=value")]
    Malformed {
        /// The text given.
        text: String,
    },
    /// The value is not a finite number.
    #[error("--set {name}: `{value}` is not a finite number")]
    NotANumber {
        /// Parameter.
        name: String,
        /// Text of the value.
        value: String,
    },
    /// The name is not a parameter of the model.
    #[error("--set {name}: the model has no parameter `{name}` (parameters: {known})")]
    UnknownName {
        /// Name given.
        name: String,
        /// The model's parameters, comma-separated.
        known: String,
    },
    /// The same parameter set twice.
    #[error("--set {name} given more than once")]
    Repeated {
        /// Parameter.
        name: String,
    },
}

/// Validated `name=value` overrides, in the order given.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Overrides {
    items: Vec<(String, f64)>,
}

impl Overrides {
    /// No overrides.
    pub fn new() -> Self {
        Self::default()
    }

    /// Parses each `name=value` text.
    pub fn parse<S: AsRef<str>>(texts: &[S]) -> Result<Self, OverrideError> {
        let mut out = Self::new();
        for t in texts {
            let (name, value) = parse_set(t.as_ref())?;
            out.insert(name, value)?;
        }
        Ok(out)
    }

    /// Adds one override.
    pub fn insert(&mut self, name: String, value: f64) -> Result<(), OverrideError> {
        if self.items.iter().any(|(n, _)| *n == name) {
            return Err(OverrideError::Repeated { name });
        }
        self.items.push((name, value));
        Ok(())
    }

    /// The override of `name`, if any.
    pub fn get(&self, name: &str) -> Option<f64> {
        self.items.iter().find(|(n, _)| n == name).map(|(_, v)| *v)
    }

    /// All overrides.
    pub fn iter(&self) -> impl Iterator<Item = (&str, f64)> {
        self.items.iter().map(|(n, v)| (n.as_str(), *v))
    }

    /// Checks that every override names one of `params`.
    pub fn check_known<'a>(
        &self,
        params: impl Iterator<Item = &'a str> + Clone,
    ) -> Result<(), OverrideError> {
        for (name, _) in &self.items {
            if !params.clone().any(|p| p == name) {
                return Err(OverrideError::UnknownName {
                    name: name.clone(),
                    known: params.clone().collect::<Vec<_>>().join(", "),
                });
            }
        }
        Ok(())
    }
}

/// Parses one `name=value`.
pub fn parse_set(text: &str) -> Result<(String, f64), OverrideError> {
    let Some((name, value)) = text.split_once('=') else {
        return Err(OverrideError::Malformed {
            text: text.to_string(),
        });
    };
    let (name, value) = (name.trim(), value.trim());
    if name.is_empty() || !name.chars().all(|c| c.is_alphanumeric() || c == '_') {
        return Err(OverrideError::Malformed {
            text: text.to_string(),
        });
    }
    match value.parse::<f64>() {
        Ok(v) if v.is_finite() => Ok((name.to_string(), v)),
        _ => Err(OverrideError::NotANumber {
            name: name.to_string(),
            value: value.to_string(),
        }),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn parses_and_rejects() {
        assert_eq!(parse_set("chi=2.5").unwrap(), ("chi".into(), 2.5));
        assert_eq!(parse_set(" k = 1e-3 ").unwrap(), ("k".into(), 1e-3));
        assert!(matches!(
            parse_set("chi"),
            Err(OverrideError::Malformed { .. })
        ));
        assert!(matches!(
            parse_set("=3"),
            Err(OverrideError::Malformed { .. })
        ));
        assert!(matches!(
            parse_set("chi=abc"),
            Err(OverrideError::NotANumber { .. })
        ));
        assert!(matches!(
            parse_set("chi=inf"),
            Err(OverrideError::NotANumber { .. })
        ));
        let o = Overrides::parse(&["a=1", "b=2"]).unwrap();
        assert_eq!(o.get("b"), Some(2.0));
        assert!(matches!(
            Overrides::parse(&["a=1", "a=2"]),
            Err(OverrideError::Repeated { .. })
        ));
        let e = o.check_known(["a", "c"].into_iter()).unwrap_err();
        assert!(matches!(e, OverrideError::UnknownName { ref name, .. } if name == "b"));
    }
}
