//! The rule that makes a numeric field binary: `OP THRESHOLD` with OP one of `>`, `>=`, `<`,
//! `<=`, `==` (e.g. `"> 0.5"`): an area has the attribute when its value satisfies the rule.

use std::fmt;

/// A comparison operator.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Operator {
    /// Greater than.
    Greater,
    /// Greater than or equal.
    GreaterEqual,
    /// Less than.
    Less,
    /// Less than or equal.
    LessEqual,
    /// Equal.
    Equal,
}

/// A value compared with a threshold.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Rule {
    /// The comparison.
    pub operator: Operator,
    /// The threshold (finite).
    pub threshold: f64,
}

impl Rule {
    /// Parses `"> 0.5"`, `">=3"`, `"== 1"` (spaces optional).
    ///
    /// # Errors
    /// A message saying what was expected.
    pub fn parse(text: &str) -> Result<Rule, String> {
        let text = text.trim();
        let operators = [
            (">=", Operator::GreaterEqual),
            ("<=", Operator::LessEqual),
            ("==", Operator::Equal),
            (">", Operator::Greater),
            ("<", Operator::Less),
        ];
        let expected = "expected an operator (>, >=, <, <=, ==) and a number, e.g. \"> 0.5\"";
        let (operator, rest) = operators
            .iter()
            .find_map(|(symbol, op)| text.strip_prefix(symbol).map(|rest| (*op, rest)))
            .ok_or_else(|| format!("'{text}': {expected}"))?;
        let threshold: f64 = rest
            .trim()
            .parse()
            .map_err(|_| format!("'{text}': {expected}"))?;
        if !threshold.is_finite() {
            return Err(format!("'{text}': the threshold must be a finite number"));
        }
        Ok(Rule {
            operator,
            threshold,
        })
    }

    /// Whether `value` satisfies the rule.
    pub fn holds(&self, value: f64) -> bool {
        let t = self.threshold;
        match self.operator {
            Operator::Greater => value > t,
            Operator::GreaterEqual => value >= t,
            Operator::Less => value < t,
            Operator::LessEqual => value <= t,
            Operator::Equal => value == t,
        }
    }
}

impl fmt::Display for Rule {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let symbol = match self.operator {
            Operator::Greater => ">",
            Operator::GreaterEqual => ">=",
            Operator::Less => "<",
            Operator::LessEqual => "<=",
            Operator::Equal => "==",
        };
        write!(f, "{symbol} {}", self.threshold)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn rules_parse_and_compare() {
        let r = Rule::parse(" > 0.5").expect("valid");
        assert!(r.holds(0.6) && !r.holds(0.5));
        assert!(Rule::parse(">=0.5").expect("valid").holds(0.5));
        assert!(Rule::parse("<= 2").expect("valid").holds(2.0));
        assert!(!Rule::parse("< 2").expect("valid").holds(2.0));
        assert!(Rule::parse("== 1").expect("valid").holds(1.0));
        assert_eq!(
            Rule::parse(">= 0.25").expect("valid").to_string(),
            ">= 0.25"
        );
        for bad in ["0.5", "> x", "=> 1", "> inf", ""] {
            assert!(Rule::parse(bad).is_err(), "{bad}");
        }
    }
}
